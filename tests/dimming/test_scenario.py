"""Tests of DimmingScenario (synthcorona.dimming.scenario): depth, time profile, light curves, detection."""
import math
import warnings

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from dimming_setups import (
    BANDS,
    STAR_DEM,
    SUN_DEM,
    default_star_scenario,
    star_flare_scenario,
    star_scenario,
    sun_scenario,
)

from synthcorona.dem import GaussianDEM, MultiComponentDEM
from synthcorona.dimming import CME, Corona, DimmingLightCurveModel, DimmingScenario, Observation, Star
from synthcorona.errors import InputError
from synthcorona.instruments.designs import load_generic


@pytest.fixture
def sun():
    """Sun-as-a-star at 1 AU with a 1e15 g CME and a flare."""
    return sun_scenario()


@pytest.fixture
def star():
    """The invented K dwarf at 2 pc with a 1e18 g CME, no flare."""
    return default_star_scenario()


@pytest.fixture
def star_flare():
    """The K dwarf with a 1e18 g CME and a 1e33 erg flare."""
    return star_flare_scenario()


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
    mu_h = sun.prepared.source.mu_h
    assert mmax.value == pytest.approx(em_win * mu_h * 1.008 * const.u.cgs.value / 1e9, rel=1e-9)


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


def test_depth_mass_numbers_in_docs():
    """Numbers of the table in docs/dimming.md: Sun-as-a-star at 1 AU, quiet-Sun-like DEM, n_e = 1e9 cm-3,
    1.5 MK source, no flare. Mason et al. (2016, ApJ 830, 20) report M ~ depth^(1/2) empirically (from memory);
    the model is linear, depth ~ M."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e9 * u.cm ** -3),
                            CME(1e14 * u.g, source_temperature=1.5e6 * u.K), None, BANDS,
                            Observation(12 * u.h, 60 * u.s, 2 * u.h))
    d = s.depth(mass=[1e14, 1e15, 1e16] * u.g)
    depth = d.depth.values                                   # (mass, band)
    np.testing.assert_allclose(depth[:, 0], [4.806e-4, 4.806e-3, 4.806e-2], rtol=1e-3)
    np.testing.assert_allclose(depth[:, 1], [1.312e-3, 1.312e-2, 1.312e-1], rtol=1e-3)
    np.testing.assert_allclose(depth[1:] / depth[:-1], 10.0, rtol=1e-12)   # slope 1 in log-log
    np.testing.assert_allclose(d.removed_emission_measure.values, [4.417e46, 4.417e47, 4.417e48], rtol=1e-3)


def test_source_density_outside_the_table_is_said_not_silent():
    # The table holds log n_e 8-12 (docs/table_format.md); a 1e7 cm-3 source keeps its own density in
    # Delta EM = n_e M / (mu_H m_H) but its emissivities come from the 1e8 plane, with a warning.
    with pytest.warns(UserWarning, match=r"source density 1e\+07 cm-3 is outside the emissivity table"):
        s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e7 * u.cm ** -3),
                            CME(1e14 * u.g, source_temperature=1.5e6 * u.K), None, ["sc-fe9"],
                            Observation(12 * u.h, 60 * u.s, 2 * u.h))
    src = s.prepared.source
    assert src.density == 1e7 and src.emissivity_density == pytest.approx(1e8)


def test_density_from_loop_scaling_law():
    # no density given: Rosner, Tucker & Vaiana (1978) at the 1.5 MK source temperature and 1e10 cm loops,
    # 2.970e8 cm-3 (hand value, see tests/dimming/test_mass_removal.py::test_rtv_density); the depth scales with
    # n_e (Delta EM = n_e M / (mu_H m_H))
    s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM), CME(1e15 * u.g), None, "sc-fe9",
                        Observation(6 * u.h, 60 * u.s, 1 * u.h))
    assert s.prepared.source.density == pytest.approx(2.970e8, rel=2e-3)
    assert "Rosner" in s.depth().attrs["source_density_from"]


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
    kernel, src = sx.prepared.kernels.kernel, sx.prepared.source
    np.testing.assert_allclose(dx - d0, -(kernel @ src.expansion_change) / (kernel @ src.quiescent_weights),
                               rtol=1e-9)
    lc = sx.light_curve()
    np.testing.assert_allclose(DimmingLightCurveModel(sx)(lc.time.values), lc.expected.values, rtol=1e-9)
    assert sx.max_mass.value == pytest.approx(0.7 * s.max_mass.value, rel=1e-9)


# ----------------------------------------------------------------------------- time profile
def test_default_recovery_time_matches_observed_dimmings(sun):
    # Solar EUV dimmings last hours to about a day: ~3-12 h (Reinard & Biesecker 2008, ApJ 674, 576; Mason et al.
    # 2016, ApJ 830, 20 -- from memory). Default: refilling at 0.05 c_s along 1e10 cm loops at 1.5 MK (hand
    # value 9828 s, tests/dimming/test_profile.py).
    tau_h = sun.recovery_time / 3600
    assert 1.0 < tau_h < 24.0
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


# ----------------------------------------------------------------------------- detection
def test_detection_probability_increases_with_mass():
    ps = []
    for m in (1e17, 4e17, 1.5e18):
        s = star_scenario(mass=m * u.g)
        ps.append(s.detection_probability(2000, seed=5, band="sc-fe12").probability.values[0])
    assert ps[0] <= ps[1] <= ps[2]
    assert ps[2] > ps[0] + 0.2


def test_minimum_detectable_mass(star):
    res = star.minimum_detectable_mass(0.5, bracket=(1e16 * u.g, 1e19 * u.g), band="sc-fe12",
                                       n_realisations=2000, seed=1)
    m = float(res.mass)
    assert 1e16 < m < 1e19
    # P(detect) at the returned mass, with independent random numbers, is 0.5 within Monte Carlo error
    s = star_scenario(mass=m * u.g)
    p = float(s.detection_probability(4000, seed=99, band="sc-fe12").probability.values[0])
    assert abs(p - 0.5) < 4 * math.sqrt(0.25 / 2000) + 4 * math.sqrt(0.25 / 4000)


def test_detection_windows_and_band_index(sun):
    # pre-event window [0, t0) = [0, 2 h); post-event window from t0 + onset (7200 + 200 s) for one recovery time
    (a, b), (c, d) = sun.detection_windows()
    assert (a.to_value(u.s), b.to_value(u.s)) == (0.0, 7200.0)
    assert c.to_value(u.s) == pytest.approx(7400.0, rel=1e-12)
    assert d.to_value(u.s) == pytest.approx(7400.0 + sun.recovery_time, rel=1e-12)
    assert sun.band_index("sc-fe12") == 1 and sun.band_index(None) is None
    with pytest.raises(InputError, match=r"band='nope' is not one of \['sc-fe9', 'sc-fe12'\]"):
        sun.band_index("nope")


# ----------------------------------------------------------------------------- bad inputs
@pytest.mark.parametrize("make,error,match", [
    (lambda: CME(-1 * u.g), InputError, "mass"),
    (lambda: CME(1e15 * u.g, escape_fraction=1.5), InputError, "escape_fraction"),
    (lambda: Corona(SUN_DEM, density=1e20 * u.cm ** -3), InputError, r"density.*\[1e\+06, 1e\+13\]"),
    (lambda: Observation(30 * u.s, 60 * u.s, 10 * u.s), InputError, "exposure.*shorter than a bin"),
    (lambda: CME(1e15), u.UnitsError, None),
])
def test_bad_inputs_are_named(make, error, match):
    with pytest.raises(error, match=match):
        make()


def test_confined_eruption_has_no_dimming():
    s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e9 * u.cm ** -3),
                        CME(1e15 * u.g, escape_fraction=0.0), None, "sc-fe9",
                        Observation(6 * u.h, 60 * u.s, 1 * u.h))
    assert float(s.depth().depth.values[0]) == 0.0
    with pytest.raises(InputError, match="confined"):
        s.minimum_detectable_mass()


def test_scenario_refuses_impossible_masses(star):
    with pytest.raises(InputError, match="largest removable mass"):
        star_scenario(mass=2 * star.max_mass)
