"""Detection thresholds calibrated on event-free simulations (synthcorona.dimming.thresholds).

Reference: the binomial standard error sqrt(alpha (1 - alpha) / n) of a Monte Carlo fraction, and
scipy.stats.norm for the Gaussian quantile z_{1-alpha}.
"""
import astropy.units as u
import numpy as np
import pytest
from dimming_setups import CTS, binom_se, step_curve
from scipy import stats

from synthcorona.dimming.noise import CountSampler
from synthcorona.dimming.statistics import window_test
from synthcorona.dimming.thresholds import calibrate_threshold
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
