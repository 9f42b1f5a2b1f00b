"""Detection thresholds calibrated on event-free simulations (synthcorona.dimming.thresholds).

Reference: the binomial standard error sqrt(alpha (1 - alpha) / n) of a Monte Carlo fraction, and
scipy.stats.norm for the Gaussian quantile z_{1-alpha}.
"""
import math

import astropy.units as u
import numpy as np
import pytest
from dimming_setups import CTS, binom_se, step_curve
from scipy import stats

from synthcorona.dimming.noise import CountSampler
from synthcorona.dimming.statistics import window_test
from synthcorona.dimming.thresholds import (
    allowed_exceedances,
    calibrate_threshold,
    calibration_error,
    threshold_from_null,
)
from synthcorona.errors import InputError


def test_false_alarm_rate_at_calibrated_threshold():
    """Calibrate on one seed, measure on an independent seed with n = 20000: |rate - alpha| < 3 SE
    (binomial SE sqrt(alpha (1 - alpha) / n)). The calibration uses 200,000 realisations so its own
    scatter (SE/sqrt(10)) adds only ~5 % to the spread of the measured rate."""
    alpha = 0.01
    rate = step_curve(depth=0.0)
    labels = np.r_[np.zeros(500, int), np.ones(500, int)]
    sampler = CountSampler(rate, 1 * u.s, groups=labels)

    def sigma(chunk):
        return window_test(chunk[:, 0], 500 * u.s, chunk[:, 1], 500 * u.s).sigma

    thr = calibrate_threshold(sigma, sampler, alpha, 200_000, seed=1)
    assert thr.false_alarm_achieved <= alpha
    assert thr.false_alarm_achieved == pytest.approx(alpha, abs=3 * binom_se(alpha, 200_000))
    n = 20000
    values = np.concatenate([sigma(c) for c in sampler(n, seed=2)])
    measured = np.mean(values > thr.threshold)
    assert abs(measured - alpha) < 3 * binom_se(alpha, n)
    # The nominal exact-test threshold is close to the Gaussian z_{1-alpha} at 5000 counts per window.
    assert thr.threshold == pytest.approx(stats.norm.isf(alpha), abs=0.1)


def test_statistic_function_must_return_one_value_per_realisation():
    with pytest.raises(InputError, match="statistic_fn returned 1 values"):
        calibrate_threshold(lambda c: [0.0], CountSampler(np.ones(5) * CTS, 1 * u.s), 0.1, 200, seed=0)


@pytest.mark.parametrize("alpha, n, k", [(0.01, 1000, 9), (0.01, 10_000, 99), (0.05, 200, 9), (0.01, 1098, 9),
                                         (0.01, 1099, 10)])
def test_rank_rule(alpha, n, k):
    """Largest k with (k + 1)/(n + 1) <= alpha (Dwass 1957, Ann. Math. Stat. 28, 181), hand values: e.g.
    10/1001 <= 0.01 < 11/1001; 11/1100 = 0.01 exactly for n = 1099 (allowed), 11/1099 > 0.01 for n = 1098."""
    assert allowed_exceedances(alpha, n) == k
    assert (k + 1) / (n + 1) <= alpha < (k + 2) / (n + 1)


def test_rank_rule_false_alarm_per_observation():
    """Uniform null values: an independent value exceeds the threshold with probability (k + 1)/(n + 1) <= alpha,
    averaged over calibrations (order statistics of uniforms, E[1 - U_(n-k)] = (k + 1)/(n + 1)); checked over
    4000 calibrations of n = 1000 (standard error of the mean ~ 3e-5)."""
    rng = np.random.default_rng(0)
    exceed = [1.0 - threshold_from_null(rng.random(1000), 0.01).threshold for _ in range(4000)]
    assert np.mean(exceed) == pytest.approx(10 / 1001, abs=1e-4)


def test_calibration_error_matches_resampling():
    """The exact bootstrap of the threshold (no resampling) against direct resampling of the calibration set
    (3000 resamples; the resampled standard deviation itself scatters by ~1/sqrt(6000) ~ 1.3 %): within 5 %."""
    rng = np.random.default_rng(1)
    null = np.sort(rng.normal(size=1000))
    events = rng.normal(2.4, 1.0, size=1000)
    exact = calibration_error(null, events, 0.01)
    resampled = [np.mean(events > threshold_from_null(rng.choice(null, 1000), 0.01).threshold) for _ in range(3000)]
    assert exact == pytest.approx(np.std(resampled), rel=0.05)
    # the Gaussian-shift estimate of synthcorona.dimming.sizes: sqrt(alpha (1 - alpha) / n) f1 / f0
    # (f1 = phi(thr - 2.4), f0 = phi(thr) at thr ~ z_0.01)
    z = stats.norm.isf(0.01)
    assert exact == pytest.approx(math.sqrt(0.0099 / 1000) * stats.norm.pdf(z - 2.4) / stats.norm.pdf(z), rel=0.35)
