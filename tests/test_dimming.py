"""Tests of the CME mass-loss dimming model: depth, profile, scenario, fitting model, statistics."""
import math
import warnings

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest

from synthcorona.abundances import mean_mass_per_hydrogen
from synthcorona.dem import GaussianDEM, MultiComponentDEM
from synthcorona.dimming import (
    CME,
    Corona,
    DimmingLightCurveModel,
    DimmingScenario,
    Flare,
    Observation,
    Star,
    mass_to_emission_measure,
    recovery_time,
    refill_time,
    rtv_density,
)
from synthcorona.dimming.profile import binned_profile, dimming_profile, profile_integral
from synthcorona.dimming.statistics import poisson_loglike
from synthcorona.errors import InputError
from synthcorona.instruments.designs import load_generic

# Full-disk quiet-Sun DEM approximated by one Gaussian in log T: peak near log T = 6.15, width 0.2 dex,
# total EM 5e49 cm-3 (from memory: quiet-Sun DEMs peak at log T 6.1-6.2 and the full-disk EM is of
# order 1e49-1e50 cm-3, e.g. the CHIANTI quiet-Sun DEM shape; not read from any file).
SUN_DEM = GaussianDEM(6.15, 0.2, 5e49 * u.cm ** -3)


@pytest.fixture(scope="module")
def sun():
    """Sun-as-a-star at 1 AU, 1e15 g CME from 1.5 MK plasma at n_e = 1e9 cm-3, with a flare."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e9 * u.cm ** -3),
                               CME(1e15 * u.g, source_temperature=1.5e6 * u.K),
                               Flare(1e31 * u.erg), ["sc-fe9", "sc-fe12"],
                               Observation(12 * u.h, 60 * u.s, 2 * u.h))


# An invented active K dwarf at 2 pc (hotter and ~1000x more emission measure than the Sun), observed with
# the generic EUV imagers: ~20-50 ct/s, enough counts for high-S/N fits and Monte Carlo tests.
STAR_DEM = MultiComponentDEM([GaussianDEM(6.3, 0.15, 3e52 * u.cm ** -3), GaussianDEM(6.9, 0.15, 1e52 * u.cm ** -3)])


def _star(flare=None, mass=1e18 * u.g, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(Star(2 * u.pc, nh=1e17 * u.cm ** -2), Corona(STAR_DEM, density=1e9 * u.cm ** -3),
                               CME(mass, source_temperature=2e6 * u.K), flare, ["sc-fe9", "sc-fe12"],
                               Observation(10 * u.h, 60 * u.s, 2 * u.h, **kw))


@pytest.fixture(scope="module")
def star():
    return _star()


@pytest.fixture(scope="module")
def star_flare():
    return _star(Flare(1e33 * u.erg, loop_half_length=5e9 * u.cm, loop_cross_section=1e19 * u.cm ** 2))


# ----------------------------------------------------------------------------- mass -> EM
def test_mu_h_photospheric():
    # Asplund, Amarsi & Grevesse 2021 (A&A 653, A141): hydrogen mass fraction X = 0.7438, so mu_H = 1/X = 1.344;
    # "about 1.4" is the common-practice value with older, He-richer compilations (common practice, no source).
    assert mean_mass_per_hydrogen("photospheric") == pytest.approx(1.344, abs=0.01)
    assert 1.3 < mean_mass_per_hydrogen("photospheric") < 1.45


def test_mass_to_emission_measure_hand_value():
    # Delta EM = n_e M / (mu_H m_H) = 1e9 * 1e15 / (1.3445 * 1.6737e-24) = 4.444e47 cm-3 (hand calculation
    # from the formula; m_H = 1.008 u, mu_H from the test above).
    em = mass_to_emission_measure(1e15 * u.g, 1e9 * u.cm ** -3, "photospheric")
    assert em.unit == u.cm ** -3
    assert em.value == pytest.approx(4.444e47, rel=2e-3)
    assert mass_to_emission_measure(1e15 * u.g, 1e9 * u.cm ** -3, "photospheric", escape_fraction=0).value == 0


def test_rtv_density():
    # Rosner, Tucker & Vaiana 1978 (ApJ 220, 643): T = 1400 (pL)^(1/3). For T = 1.5 MK, L = 1e10 cm:
    # p = (1.5e6/1400)^3 / 1e10 = 0.1230 dyn cm-2, n = p / (2 k T) = 2.970e8 cm-3 (hand calculation).
    n = rtv_density(1.5e6 * u.K, 1e10 * u.cm)
    assert n.value == pytest.approx(2.970e8, rel=2e-3)
    p = 2 * n.value * const.k_B.cgs.value * 1.5e6
    assert 1400 * (p * 1e10) ** (1 / 3) == pytest.approx(1.5e6, rel=1e-12)


# ----------------------------------------------------------------------------- depth
def test_sun_as_a_star_depth(sun):
    # Sun-as-a-star EUV dimmings in Fe IX-XII lines are ~1-5 % (Mason et al. 2014, ApJ 789, 61; Mason et al.
    # 2016, ApJ 830, 20; from memory); we require the broad range 0.1-10 % for a 1e15 g CME.
    d = sun.depth()
    for band in ("sc-fe9", "sc-fe12"):
        assert 1e-3 < float(d.depth.sel(band=band)) < 0.1
        assert 0 < float(d.depth_energy_flux.sel(band=band)) < 0.1
    assert d.attrs["source_density_cm-3"] == 1e9


def test_depth_limits(sun):
    m = np.array([0.0, 1e10, 2e10]) * u.g
    d = sun.depth(mass=m).depth.values                  # (mass, band)
    assert np.all(d[0] == 0)                            # delta -> 0 as M -> 0
    np.testing.assert_allclose(d[2] / d[1], 2.0, rtol=1e-6)  # linear at small M (exact linearity of the model)
    mmax = sun.max_mass
    dmax = sun.depth(mass=mmax).depth.values
    assert np.all(dmax <= 1.0 + 1e-12) and np.all(dmax > 0)
    with pytest.raises(InputError, match="largest removable mass"):
        sun.depth(mass=1.01 * mmax)
    # the largest removable mass: all EM within +-0.15 dex of log T = 6.176 at 1e9 cm-3 (window default);
    # hand check: mass = EM_window mu_H m_H / n_e
    x = sun.logT
    w = SUN_DEM.em_weights(x).value
    em_win = w[np.abs(x - np.log10(1.5e6)) <= 0.15 + 1e-9].sum()
    assert mmax.value == pytest.approx(em_win * sun.mu_h * 1.008 * const.u.cgs.value / 1e9, rel=1e-9)


def test_hot_band_does_not_dim():
    # Plasma at 1-2 MK emits nothing at 6-10 keV (exp(-E/kT) with kT ~ 0.13 keV; common knowledge), so a band
    # seeing only > 10 MK plasma does not dim when the CME removes 1.5 MK plasma.
    sxt = load_generic("sc-softx").with_bands(hot=[6.0, 10.0] * u.keV)
    dem = MultiComponentDEM([SUN_DEM, GaussianDEM(7.2, 0.1, 1e48 * u.cm ** -3)])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = DimmingScenario(Star(1 * u.AU), Corona(dem, density=1e9 * u.cm ** -3), CME(1e15 * u.g), None,
                            {"cool": "sc-fe9", "hot": (sxt, "hot")}, Observation(6 * u.h, 60 * u.s, 1 * u.h))
    d = s.depth().depth
    assert float(d.sel(band="hot")) < 1e-3 * float(d.sel(band="cool"))
    assert float(d.sel(band="cool")) > 1e-3


def test_band_without_counts_is_named():
    sxt = load_generic("sc-softx").with_bands(hot=[6.0, 10.0] * u.keV)
    with pytest.raises(InputError, match="no counts"):
        DimmingScenario(Star(1 * u.AU), Corona(GaussianDEM(6.0, 0.05, 1e49 * u.cm ** -3), density=1e9 * u.cm ** -3),
                        CME(1e14 * u.g, source_temperature=1e6 * u.K), None, {"hot": (sxt, "hot")},
                        Observation(6 * u.h, 60 * u.s, 1 * u.h))


# ----------------------------------------------------------------------------- profile
def test_profile_shape_and_integral():
    t0, a, tau = 100.0, 50.0, 1000.0
    t = np.array([0.0, 99.0, 125.0, 150.0, 1150.0])
    np.testing.assert_allclose(dimming_profile(t, t0, a, tau), [0, 0, 0.5, 1.0, math.exp(-1)], rtol=1e-12)
    # integral to infinity = a/2 + tau (closed form)
    assert profile_integral(1e9, t0, a, tau) == pytest.approx(a / 2 + tau, rel=1e-12)
    edges = np.linspace(0, 1e5, 2001)
    p = binned_profile(edges, t0, a, tau)
    assert np.sum(p * np.diff(edges)) == pytest.approx(a / 2 + tau, rel=1e-9)


def test_default_recovery_time_matches_observed_dimmings(sun):
    # Solar EUV dimmings last hours to about a day: ~3-12 h (Reinard & Biesecker 2008, ApJ 674, 576; Mason et al.
    # 2016, ApJ 830, 20 -- from memory). Default (refilling at 0.05 c_s along 1e10 cm loops at 1.5 MK):
    tau_h = sun.recovery_time / 3600
    assert 1.0 < tau_h < 24.0
    # hand value: c_s = sqrt(5/3 * 2 k 1.5e6 / m_p) = 2.035e7 cm/s; tau = 1e10 / (0.05 c_s) = 9828 s
    assert refill_time(1e10 * u.cm, 1.5e6 * u.K).value == pytest.approx(9828, rel=2e-3)
    tc = recovery_time("cooling", loop_half_length=1e10 * u.cm, temperature=1.5e6 * u.K, density=1e9 * u.cm ** -3)
    assert 1e2 < tc.to_value(u.s) < 1e6
    assert recovery_time(2 * u.h).to_value(u.s) == 7200
    # onset = source size / speed = 1e10 cm / 5e7 cm/s = 200 s
    assert sun.onset == pytest.approx(200.0, rel=1e-12)


# ----------------------------------------------------------------------------- light curves, flare
def test_light_curve_components(sun):
    lc = sun.light_curve(n_realisations=2, seed=3)
    assert lc.expected.dims == ("band", "time") and lc.sizes["time"] == 720
    np.testing.assert_allclose(lc.expected.values,
                               lc.quiescent.values + lc.flare_excess.values - lc.dimming_decrement.values, rtol=1e-14)
    assert np.all(lc.dimming_decrement.values[:, :120] == 0)     # nothing before the onset at 2 h
    assert lc.counts.shape == (2, 2, 720)
    assert "flare_termination" in lc.attrs
    if "stopped" in lc.attrs["flare_termination"]:
        assert "zero" in lc.attrs["flare_termination"]
        assert np.all(lc.flare_excess.values[:, -10:] == 0)


def test_flare_fills_in_cool_band_dimming(star, star_flare):
    # A flare's hot loops cool through 1-2 MK and partly fill in the cool-band dimming during the gradual phase
    # (common knowledge; e.g. Harra et al. 2016, Sol. Phys. 291, 1761, from memory).
    sel = slice(122, 150)                      # 2 min - 30 min after the onset at bin 120
    lc0 = star.light_curve()
    lc1 = star_flare.light_curve()
    dip0 = (lc0.quiescent - lc0.expected).sel(band="sc-fe9").values[sel].mean()
    dip1 = (lc1.quiescent - lc1.expected).sel(band="sc-fe9").values[sel].mean()
    assert dip0 > 0
    assert dip1 < dip0


# ----------------------------------------------------------------------------- fitting model
def test_model_matches_scenario(star_flare):
    model = DimmingLightCurveModel(star_flare)
    lc = star_flare.light_curve()
    r = model(lc.time.values * u.s)
    assert r.shape == (2, lc.sizes["time"])
    np.testing.assert_allclose(r, lc.expected.values, rtol=1e-9)
    lc2 = star_flare.light_curve(mass=1e16 * u.g)
    np.testing.assert_allclose(model(lc2.time.values, mass=1e16 * u.g), lc2.expected.values, rtol=1e-9)
    np.testing.assert_allclose(model(lc.time.values, flare_scale=0.0),
                               (lc.quiescent - lc.dimming_decrement).values, rtol=1e-9)


def test_cash_likelihood_peaks_at_true_mass():
    star = _star(mass=3e18 * u.g)                      # ~4 % deep in sc-fe12: a ~20 sigma dimming
    model = DimmingLightCurveModel(star)
    lc = star.light_curve(n_realisations=1, seed=11)
    counts = lc.counts.values[0]
    t = lc.time.values
    m_true = star.cme.mass.value
    masses = m_true * np.array([0.5, 0.7, 1.0, 1.4, 2.0])
    ll = np.array([model.loglike(counts, t, mass=m) for m in masses])
    assert masses[np.argmax(ll)] == m_true
    # maximum-likelihood mass: a ~20 sigma dimming gives ~5 % statistical error; allow 4 sigma (20 %)
    from scipy.optimize import minimize_scalar

    fit = minimize_scalar(lambda x: model.cash(counts, t, mass=x * m_true), bounds=(0.3, 3.0), method="bounded")
    assert abs(fit.x - 1) < 0.2
    # the log-likelihood equals statistics.poisson_loglike of the same expected counts
    mu = model.expected_counts(t)
    assert model.loglike(counts, t) == pytest.approx(float(poisson_loglike(counts, mu).sum()), rel=1e-12)
    assert model.cash(counts, t) == pytest.approx(-2 * model.loglike(counts, t), rel=1e-15)


# ----------------------------------------------------------------------------- detection
def test_detection_probability_increases_with_mass():
    ps = []
    for m in (1e17, 4e17, 1.5e18):
        s = _star(mass=m * u.g)
        ps.append(s.detection_probability(2000, seed=5, band="sc-fe12").probability.values[0])
    assert ps[0] <= ps[1] <= ps[2]
    assert ps[2] > ps[0] + 0.2


def test_minimum_detectable_mass(star):
    res = star.minimum_detectable_mass(0.5, bracket=(1e16 * u.g, 1e19 * u.g), band="sc-fe12",
                                       n_realisations=2000, seed=1)
    m = float(res.mass)
    assert 1e16 < m < 1e19
    # P(detect) at the returned mass, with independent random numbers, is 0.5 within Monte Carlo error
    s = _star(mass=m * u.g)
    p = float(s.detection_probability(4000, seed=99, band="sc-fe12").probability.values[0])
    assert abs(p - 0.5) < 4 * math.sqrt(0.25 / 2000) + 4 * math.sqrt(0.25 / 4000)


# ----------------------------------------------------------------------------- bad inputs
def test_bad_inputs_are_named():
    with pytest.raises(InputError, match="mass"):
        CME(-1 * u.g)
    with pytest.raises(InputError, match="escape_fraction"):
        CME(1e15 * u.g, escape_fraction=1.5)
    with pytest.raises(InputError, match=r"density.*\[1e\+06, 1e\+13\]"):
        Corona(SUN_DEM, density=1e20 * u.cm ** -3)
    with pytest.raises(InputError, match="exposure.*shorter than a bin"):
        Observation(30 * u.s, 60 * u.s, 10 * u.s)
    with pytest.raises(InputError, match="escape_fraction"):
        mass_to_emission_measure(1e15 * u.g, 1e9 * u.cm ** -3, escape_fraction=-0.1)
    with pytest.raises(u.UnitsError):
        CME(1e15)


def test_confined_eruption_has_no_dimming():
    s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e9 * u.cm ** -3),
                        CME(1e15 * u.g, escape_fraction=0.0), None, "sc-fe9",
                        Observation(6 * u.h, 60 * u.s, 1 * u.h))
    assert float(s.depth().depth.values[0]) == 0.0
    with pytest.raises(InputError, match="confined"):
        s.minimum_detectable_mass()


def test_density_from_loop_scaling_law():
    # no density given: Rosner, Tucker & Vaiana (1978) at the 1.5 MK source temperature and 1e10 cm loops,
    # 2.970e8 cm-3 (hand value, see test_rtv_density); the depth scales with n_e (Delta EM = n_e M / (mu_H m_H))
    s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM), CME(1e15 * u.g), None, "sc-fe9",
                        Observation(6 * u.h, 60 * u.s, 1 * u.h))
    assert s.density == pytest.approx(2.970e8, rel=2e-3)
    assert "Rosner" in s.depth().attrs["source_density_from"]


def test_model_and_scenario_refuse_impossible_masses(star):
    model = DimmingLightCurveModel(star)
    t = np.arange(100) * 60.0 + 30.0
    with pytest.raises(InputError, match="mass"):
        model(t, mass=2 * star.max_mass)
    with pytest.raises(InputError, match="contiguous"):
        model(np.array([30.0, 90.0, 300.0]))
    with pytest.raises(InputError, match="largest removable mass"):
        _star(mass=2 * star.max_mass)


def test_expansion_dimming_em_change():
    # Adiabatic expansion by volume factor s (Aschwanden 2009, Ann. Geophys. 27, 3275, from memory): EM ~ N^2/V
    # falls by 1/s, T V^(gamma-1) = const cools by (2/3) log10 s dex (textbook adiabatic law, gamma = 5/3).
    from synthcorona.dimming import expansion_emission_measure_change

    x = np.round(np.linspace(4.5, 8.5, 81), 10)
    q = SUN_DEM.em_weights(x).value
    src = 1.5e6 * u.K
    win = np.abs(x - np.log10(1.5e6)) <= 0.15 + 1e-9
    em_win = q[win].sum()
    assert np.all(expansion_emission_measure_change(x, q, src, 1.0) == 0)
    s, phi = 2.0, 0.5
    d = expansion_emission_measure_change(x, q, src, s, fraction=phi)
    assert d.sum() == pytest.approx(-phi * em_win * (1 - 1 / s), rel=1e-12)
    added = d + np.where(win, phi * q, 0.0)                    # what was put back, at cooler nodes
    mean_before = np.sum(x[win] * q[win]) / em_win
    mean_after = np.sum(x * added) / added.sum()
    assert mean_after - mean_before == pytest.approx(-(2.0 / 3.0) * math.log10(s), abs=1e-9)
    with pytest.raises(InputError, match="volume_factor"):
        expansion_emission_measure_change(x, q, src, 0.5)


def test_expansion_in_scenario_and_model():
    # soft X-rays (0.2-1 keV) from 1-2 MK plasma rise steeply with T (common knowledge), so expansion (less EM,
    # cooler) must deepen the dimming there; an EUV band may instead brighten when the plasma cools into its peak.
    bands = ["sc-fe12", ("sc-softx", "soft")]
    kw = dict(source_temperature=2e6 * u.K)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = DimmingScenario(Star(2 * u.pc, nh=1e17 * u.cm ** -2), Corona(STAR_DEM, density=1e9 * u.cm ** -3),
                            CME(1e17 * u.g, **kw), None, bands, Observation(10 * u.h, 60 * u.s, 2 * u.h))
        sx = DimmingScenario(s.star, s.corona, CME(1e17 * u.g, expansion_factor=1.5, expanding_fraction=0.3, **kw),
                             None, bands, s.observation)
    d0, dx = s.depth().depth.values, sx.depth().depth.values
    assert dx[1] > d0[1] + 0.01
    # the expansion term is exactly -(K . Delta EM_exp) / (K . EM) per band, added to the mass-loss depth
    np.testing.assert_allclose(dx - d0, -(sx.kernel @ sx.expansion_change) / (sx.kernel @ sx.quiescent_weights),
                               rtol=1e-9)
    lc = sx.light_curve()
    np.testing.assert_allclose(DimmingLightCurveModel(sx)(lc.time.values), lc.expected.values, rtol=1e-9)
    assert sx.max_mass.value == pytest.approx(0.7 * s.max_mass.value, rel=1e-9)
