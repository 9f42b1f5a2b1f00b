"""Tests of the coronal-average flare loop model (synthcorona.dimming.flare).

Outside sources:
* Klimchuk, Patsourakos & Cargill 2008, ApJ 682, 1351 (KPC08) and Cargill, Bradshaw & Klimchuk
  2012, ApJ 752, 161 (CBK12): the equations and constants (c2 = 0.9, c3 = 0.6, c1 = 2 / 0.6,
  kappa0 = 1e-6 cgs), from which the expected initial cooling rates below are derived by hand.
* Cargill 1994, ApJ 422, 381: tau_c = 3 n k L^2 / (kappa0 T^5/2), tau_r = 3 k T / (n Lambda).
* Rosner, Tucker & Vaiana 1978, ApJ 220, 643: T_max = 1400 (p L)^(1/3) for static loops.
* Jakimiec et al. 1992, A&A 253, 269 and Serio et al. 1991, A&A 241, 197 (from memory), Bradshaw &
  Cargill 2010, ApJ 717, 163 and CBK12: T ~ n^alpha with alpha ~ 2 in the radiative, draining decay.
* Jakimiec et al. 1992 (from memory; common knowledge of flare evolution): T peaks before n and EM.
"""
import math

import astropy.units as u
import numpy as np
import pytest
from dimming_setups import flare_model, flare_model_run

from synthcorona.dimming.flare import C1_EQUILIBRIUM, C1_RADIATIVE, C2, C3, LoopFlareModel
from synthcorona.dimming.flare_cooling import KAPPA0
from synthcorona.errors import InputError

K_B = 1.380649e-16  # erg/K (CODATA 2018, exact)
HEAT = u.erg / u.cm ** 3 / u.s


@pytest.fixture
def flare_run():
    """A 3e9 cm, 1 MK active-region loop hit by 1e29 erg over 200 s (triangular), run for 4500 s."""
    return flare_model_run()


# ------------------------------------------------------------------ free cooling (Cargill 1994)
def _early_log_slope(model, tau):
    """d ln T / dt at t = 0 from a quadratic fit to ln T over the first 5 % of ``tau``."""
    ds = model.run(0.05 * tau * u.s, times=np.linspace(0.0, 0.05 * tau, 51) * u.s)
    return np.polyfit(ds["time"].values, np.log(ds["temperature"].values), 2)[1]


def test_conduction_dominated_cooling_matches_cargill_time():
    """Hot tenuous loop, no heating: T e-folds on (35/6) c3 c2^{5/2} tau_c.

    From the equations with Q = 0 and radiation negligible: d ln p/dt ~ 0 and
    d ln n/dt = c2 (2/7) kappa0 (T/c2)^{7/2} / (5 c3 k T L^2 n) = (6/35) c2^{-5/2} / c3 / tau_c,
    so d ln T/dt = -(6/35) c2^{-5/2} / (c3 tau_c): the 7/2 power of the conductive flux over the
    3 n k T thermal energy gives tau_c's T^{-5/2} (Cargill 1994).
    """
    t0, n0, length = 2e7, 1e9, 5e9
    m = LoopFlareModel(length * u.cm, 1e16 * u.cm ** 2, initial_temperature=t0 * u.K,
                       initial_density=n0 * u.cm ** -3, background_heating=0 * HEAT, radiative_loss="analytic")
    times = m.cooling_times(t0 * u.K, n0 * u.cm ** -3)
    tau_c = times.conductive.to_value(u.s)
    assert tau_c == pytest.approx(3 * n0 * K_B * length ** 2 / (KAPPA0 * t0 ** 2.5), rel=1e-9)
    assert times.radiative.to_value(u.s) > 1e4 * tau_c  # radiation negligible
    # full analytic initial slope, by hand from the equations (c1 = c1_eq since n << n_eq)
    lam = 1.96e-27 * t0 ** 0.5  # KPC08 eq. 3, T > 10^7.63 K
    f0 = -(2 / 7) * KAPPA0 * (t0 / C2) ** 3.5 / length
    p0 = 2 * n0 * K_B * t0
    dlnp = -(2 / 3) * (1 + C1_EQUILIBRIUM) * n0 ** 2 * lam / p0
    dlnn = -C2 / (5 * C3 * K_B * t0 * length) * (f0 + C1_EQUILIBRIUM * n0 ** 2 * lam * length) / n0
    slope = _early_log_slope(m, tau_c)
    assert slope == pytest.approx(dlnp - dlnn, rel=0.01)
    e_fold = -1.0 / slope
    assert e_fold / tau_c == pytest.approx((35 / 6) * C3 * C2 ** 2.5, rel=0.05)  # 2.689


def test_radiation_dominated_cooling_matches_cargill_time():
    """Cool dense loop, no heating: d ln T/dt = -[1 + c1 (1 - 3 c2 / (5 c3))] / tau_r.

    With conduction negligible: d ln p/dt = -(1 + c1)/tau_r and d ln n/dt = -(3 c1 c2 / 5 c3)/tau_r
    (tau_r = 3 k T / n Lambda, Cargill 1994); c1 -> c1_rad = 0.6 as n >> n_eq (CBK12).
    """
    t0, n0, length = 1e6, 1e11, 1e9
    m = LoopFlareModel(length * u.cm, 1e16 * u.cm ** 2, initial_temperature=t0 * u.K,
                       initial_density=n0 * u.cm ** -3, background_heating=0 * HEAT, radiative_loss="analytic")
    times = m.cooling_times(t0 * u.K, n0 * u.cm ** -3)
    tau_r = times.radiative.to_value(u.s)
    lam = 1.90e-22  # KPC08 eq. 3 at 1 MK
    assert tau_r == pytest.approx(3 * K_B * t0 / (n0 * lam), rel=1e-9)
    assert times.conductive.to_value(u.s) > 1e3 * tau_r
    # CBK12 c1 by hand
    n_eq2 = (2 / 7) * KAPPA0 * (t0 / C2) ** 3.5 / (C1_EQUILIBRIUM * length ** 2 * lam)
    x = n0 ** 2 / n_eq2
    c1 = (2 * C1_EQUILIBRIUM + C1_RADIATIVE * (x - 1)) / (1 + x)
    assert float(m.c1(t0 * u.K, n0 * u.cm ** -3)) == pytest.approx(c1, rel=1e-9)
    assert c1 == pytest.approx(0.6, abs=0.01)
    expected = -(1 + c1 * (1 - 3 * C2 / (5 * C3))) / tau_r
    slope = _early_log_slope(m, tau_r)
    assert slope == pytest.approx(expected, rel=0.05)
    assert -1.0 / slope / tau_r == pytest.approx(1 / 1.06, rel=0.05)
    # in this limit the model's own T ~ n^alpha exponent is (1 + 0.1 c1) / (0.9 c1) = 1.96 (CBK12's design)
    d = m.derivatives(t0 * u.K, n0 * u.cm ** -3)
    alpha = (d["temperature"].value / t0) / (d["density"].value / n0)
    assert alpha == pytest.approx((1 + 0.1 * c1) / (0.9 * c1), rel=0.01)


# ------------------------------------------------------------------ flare evolution
def test_decay_follows_t_proportional_n_squared(flare_run):
    """Radiative, draining decay: d ln T / d ln n in [1.5, 2.5] (alpha ~ 2: Jakimiec et al. 1992,
    Serio et al. 1991 from memory; Bradshaw & Cargill 2010; CBK12)."""
    ds = flare_run
    t = ds["time"].values
    temp, dens, em = ds["temperature"].values, ds["density"].values, ds["emission_measure"].values
    ratio = ds["conductive_loss_rate"].values / ds["coronal_radiative_loss_rate"].values
    late = (t > t[np.argmax(em)]) & (ratio < 0.3) & (temp > 1.5e6)
    assert late.sum() > 50
    alpha = np.polyfit(np.log(dens[late]), np.log(temp[late]), 1)[0]
    assert 1.5 < alpha < 2.5
    assert alpha == pytest.approx(2.0, abs=0.25)  # ~2.04 for this loop


def test_flare_rises_and_decays(flare_run):
    """EM rises then decays; T peaks before n (Jakimiec et al. 1992, from memory)."""
    ds = flare_run
    t = ds["time"].values
    temp, dens, em = ds["temperature"].values, ds["density"].values, ds["emission_measure"].values
    i_t, i_n, i_em = np.argmax(temp), np.argmax(dens), np.argmax(em)
    assert 0 < i_em < t.size - 1
    assert em[i_em] > 10 * em[0]  # n rises from 5e8 to ~4e10 cm-3 by evaporation
    assert em[-1] < 0.5 * em[i_em]
    assert t[i_t] < t[i_n]
    assert i_n == i_em  # EM = n^2 V with constant V
    # heating ends at 200 s; the temperature peaks during the heating, the density afterwards
    assert 100 < t[i_t] < 200 and t[i_n] > 200
    assert 1.2e7 < temp[i_t] < 3e7
    # evaporation then draining: enthalpy flux upward early, downward late
    assert ds["base_velocity"].values[np.argmin(np.abs(t - 150))] > 0
    assert ds["base_velocity"].values[-1] < 0
    assert ds["emission_measure"].attrs["units"] == "1 / cm3"


@pytest.mark.parametrize("p,length", [(1.0, 5e9), (10.0, 3e9), (0.3, 1e10), (100.0, 2e9)])
def test_static_equilibrium_is_close_to_rtv(p, length):
    """Apex temperature of the no-flare equilibrium within 25 % of Rosner, Tucker & Vaiana (1978)
    T_max = 1400 (p L)^(1/3) for the KPC08 losses (11-20 % above)."""
    m = LoopFlareModel(length * u.cm, 1e17 * u.cm ** 2, initial_pressure=p * u.dyn / u.cm ** 2,
                       radiative_loss="analytic")
    t_apex = m.initial_state["temperature"].to_value(u.K) / C2
    assert t_apex == pytest.approx(1400 * (p * length) ** (1 / 3), rel=0.25)
    assert m.initial_state["pressure"].to_value(u.dyn / u.cm ** 2) == pytest.approx(p, rel=1e-9)


def test_static_equilibrium_is_steady():
    """No flare: the initial equilibrium (embedded-table losses) does not drift, and is found again from its
    density or its pressure; its background heating is (1 + c1_eq)/c1_eq (2/7) kappa0 (T/c2)^3.5 / L^2."""
    m = LoopFlareModel(5e9 * u.cm, 1e17 * u.cm ** 2, initial_temperature=2e6 * u.K)  # embedded table
    n0 = m.initial_state["density"].to_value(u.cm ** -3)
    ds = m.run(2000 * u.s, n_output=101)
    assert np.allclose(ds["temperature"].values, 2e6, rtol=1e-6)
    assert np.allclose(ds["density"].values, n0, rtol=1e-6)
    # the same equilibrium is found from its density or its pressure
    m2 = LoopFlareModel(5e9 * u.cm, 1e17 * u.cm ** 2, initial_density=n0 * u.cm ** -3)
    assert m2.initial_state["temperature"].to_value(u.K) == pytest.approx(2e6, rel=1e-3)
    m3 = LoopFlareModel(5e9 * u.cm, 1e17 * u.cm ** 2, initial_pressure=m.initial_state["pressure"])
    assert m3.initial_state["temperature"].to_value(u.K) == pytest.approx(2e6, rel=1e-3)
    assert m.background_heating.to_value(HEAT) == pytest.approx(
        (1 + C1_EQUILIBRIUM) / C1_EQUILIBRIUM * (2 / 7) * KAPPA0 * (2e6 / C2) ** 3.5 / 5e9 ** 2, rel=1e-6)


def test_explicit_table_gives_the_same_model(table):
    """The table Λ of ``table=`` (the embedded table, given explicitly) equals the default one; a bad table is
    refused by name, and the table is not needed for the analytic Λ."""
    kw = dict(initial_temperature=2e6 * u.K)
    a = LoopFlareModel(5e9 * u.cm, 1e17 * u.cm ** 2, **kw)
    b = LoopFlareModel(5e9 * u.cm, 1e17 * u.cm ** 2, table=table, **kw)
    assert b.initial_state["density"].value == a.initial_state["density"].value
    assert b.background_heating.value == a.background_heating.value
    with pytest.raises(InputError, match="table=42 is neither an EmissivityTable nor the path"):
        LoopFlareModel(5e9 * u.cm, 1e17 * u.cm ** 2, table=42, **kw)
    c = LoopFlareModel(5e9 * u.cm, 1e17 * u.cm ** 2, radiative_loss="analytic", table=42, **kw)
    assert "Klimchuk" in c.loss.label


def test_gravity_and_saturation_options():
    # CBK12 gravity factor exp(4 sin(pi/5) L / (pi lambda)), lambda = 2 k T / (m_p g_sun)
    length, t0 = 5e9, 1e6
    m = LoopFlareModel(length * u.cm, 1e17 * u.cm ** 2, initial_temperature=t0 * u.K, gravity=True)
    lam_h = 2 * K_B * t0 / (1.67262192e-24 * 2.7398e4)
    factor = math.exp(4 * math.sin(math.pi / 5) * length / (math.pi * lam_h))
    assert factor == pytest.approx(1.86, abs=0.01)
    n0 = m.initial_state["density"]
    assert float(m.c1(t0 * u.K, n0)) == pytest.approx(2.0 * factor, rel=1e-3)
    # saturation only slows conduction of hot tenuous plasma
    kw = dict(initial_temperature=3e7 * u.K, initial_density=1e9 * u.cm ** -3, background_heating=0 * HEAT,
              radiative_loss="analytic")
    d_cl = LoopFlareModel(1e9 * u.cm, 1e16 * u.cm ** 2, **kw).derivatives(3e7 * u.K, 1e9 * u.cm ** -3)
    d_sat = LoopFlareModel(1e9 * u.cm, 1e16 * u.cm ** 2, saturation=True, **kw).derivatives(
        3e7 * u.K, 1e9 * u.cm ** -3)
    assert 0 > d_sat["temperature"].value > d_cl["temperature"].value


# ------------------------------------------------------------------ bad input
@pytest.mark.parametrize("kwargs,name", [
    (dict(flare_energy=-1e29 * u.erg), "flare_energy"),
    (dict(half_length=0 * u.cm), "half_length"),
    (dict(loop_cross_section=-1 * u.cm ** 2), "loop_cross_section"),
    (dict(duration=0 * u.s), "duration"),
    (dict(duration=-5 * u.s), "duration"),
    (dict(peak_time=-1 * u.s), "peak_time"),
    (dict(initial_temperature=1e9 * u.K), "initial_temperature"),
    (dict(initial_temperature=1e4 * u.K), "initial_temperature"),
    (dict(profile="boxcar"), "profile"),
    (dict(peak_time=None), "peak_time"),
    (dict(initial_density=1e9 * u.cm ** -3), "background_heating"),
    (dict(radiative_loss="steep"), "radiative_loss"),
])
def test_bad_inputs_name_the_argument(kwargs, name):
    args = dict(half_length=3e9 * u.cm, loop_cross_section=1e17 * u.cm ** 2, initial_temperature=1e6 * u.K,
                flare_energy=1e29 * u.erg, peak_time=100 * u.s, duration=200 * u.s)
    args.update(kwargs)
    with pytest.raises(InputError, match=name):
        LoopFlareModel(**args)


def test_bad_inputs_other():
    with pytest.raises(u.UnitsError, match="half_length"):
        LoopFlareModel(3e9, 1e17 * u.cm ** 2, initial_temperature=1e6 * u.K)
    with pytest.raises(InputError, match="initial_density"):  # no equilibrium inside the Lambda range
        LoopFlareModel(3e9 * u.cm, 1e17 * u.cm ** 2, initial_density=1e-3 * u.cm ** -3)
    m = flare_model()
    with pytest.raises(InputError, match="t_end"):
        m.run(0 * u.s)
    with pytest.raises(InputError, match="temperature"):
        m.cooling_times(1e10 * u.K, 1e9 * u.cm ** -3)
