"""Tests of the fast light-curve model for fitting (synthcorona.dimming.lightcurve_model).

References: the model must reproduce DimmingScenario.light_curve (the full computation it is a fast copy of;
a self-consistency check, 1e-9); the likelihood is the Poisson log-likelihood and the Cash (1979, ApJ 228, 939)
statistic C = -2 ln L up to a data-only constant; the injected mass is recovered at the likelihood peak
(injection-recovery, no outside value).
"""
import astropy.units as u
import numpy as np
import pytest
from dimming_setups import default_star_scenario, star_flare_scenario, star_scenario
from scipy.optimize import minimize_scalar

from synthcorona.dimming import DimmingLightCurveModel
from synthcorona.dimming.statistics import poisson_loglike
from synthcorona.errors import InputError


@pytest.fixture
def star():
    """The invented K dwarf at 2 pc with a 1e18 g CME, no flare."""
    return default_star_scenario()


@pytest.fixture
def star_flare():
    """The K dwarf with a 1e18 g CME and a 1e33 erg flare."""
    return star_flare_scenario()


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
    star = star_scenario(mass=3e18 * u.g)               # ~4 % deep in sc-fe12: a ~20 sigma dimming
    model = DimmingLightCurveModel(star)
    lc = star.light_curve(n_realisations=1, seed=11)
    counts = lc.counts.values[0]
    t = lc.time.values
    m_true = star.cme.mass.value
    masses = m_true * np.array([0.5, 0.7, 1.0, 1.4, 2.0])
    ll = np.array([model.loglike(counts, t, mass=m) for m in masses])
    assert masses[np.argmax(ll)] == m_true
    # maximum-likelihood mass: a ~20 sigma dimming gives ~5 % statistical error; allow 4 sigma (20 %)
    fit = minimize_scalar(lambda x: model.cash(counts, t, mass=x * m_true), bounds=(0.3, 3.0), method="bounded")
    assert abs(fit.x - 1) < 0.2
    # the log-likelihood equals statistics.poisson_loglike of the same expected counts
    mu = model.expected_counts(t)
    assert model.loglike(counts, t) == pytest.approx(float(poisson_loglike(counts, mu).sum()), rel=1e-12)
    assert model.cash(counts, t) == pytest.approx(-2 * model.loglike(counts, t), rel=1e-15)


def test_model_refuses_impossible_masses(star):
    model = DimmingLightCurveModel(star)
    t = np.arange(100) * 60.0 + 30.0
    with pytest.raises(InputError, match="mass"):
        model(t, mass=2 * star.max_mass)
    with pytest.raises(InputError, match="contiguous"):
        model(np.array([30.0, 90.0, 300.0]))
