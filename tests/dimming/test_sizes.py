"""Realisations a false-alarm threshold needs (synthcorona.dimming.sizes): at least 10 expected false alarms."""
import pytest

from synthcorona.dimming.sizes import MIN_EXCEEDANCES, minimum_realisations, realisations_for_precision
from synthcorona.dimming.thresholds import calibrate_threshold
from synthcorona.errors import InputError


@pytest.mark.parametrize("false_alarm, n", [(0.01, 1000), (0.05, 200), (0.1, 100), (0.003, 3334), (0.07, 143),
                                            (0.3, 34), (1e-4, 100_000)])
def test_minimum_realisations(false_alarm, n):
    # hand values: the smallest n with false_alarm * n >= 10 (e.g. 10 / 0.003 = 3333.3 -> 3334)
    assert MIN_EXCEEDANCES == 10
    assert minimum_realisations(false_alarm) == n
    assert n * false_alarm >= MIN_EXCEEDANCES > (n - 1) * false_alarm


@pytest.mark.parametrize("false_alarm", [0.01, 0.05, 0.003, 0.07, 0.3])
def test_agrees_with_the_threshold_calibration(false_alarm):
    import numpy as np

    def statistic(chunk):
        return chunk.sum(axis=1).astype(float)

    def null_sampler(n, seed, chunk_size):
        return [np.random.default_rng(seed).poisson(5.0, size=(n, 3))]

    n = minimum_realisations(false_alarm)
    calibrate_threshold(statistic, null_sampler, false_alarm, n, seed=1)          # accepted
    with pytest.raises(InputError, match="needs >= 10"):
        calibrate_threshold(statistic, null_sampler, false_alarm, n - 1, seed=1)


@pytest.mark.parametrize("false_alarm", [0.0, 1.0, -0.1, float("nan")])
def test_false_alarm_outside_zero_one_is_refused(false_alarm):
    with pytest.raises(InputError, match="false_alarm"):
        minimum_realisations(false_alarm)


@pytest.mark.parametrize("precision, false_alarm, exact, n", [(0.02, 0.01, False, 6171), (0.02, 0.01, True, 1000),
                                                            (0.02, 0.05, False, 2402), (0.05, 0.05, True, 200),
                                                            (0.01, 0.01, False, 24682)])
def test_realisations_for_precision(precision, false_alarm, exact, n):
    """Hand values of n = ceil((1/4 + alpha (1 - alpha) exp(z_alpha^2)) / precision^2), z_alpha = Phi^-1(1 - alpha)
    (2.3263 for 0.01: 0.0099 x 224.05 = 2.2181; 1.6449 for 0.05: 0.0475 x 14.97 = 0.7111), calibration term
    dropped for an exact threshold, at least 10 / alpha: e.g. (0.25 + 2.2181) / 0.0004 = 6170.3 -> 6171."""
    assert realisations_for_precision(precision, false_alarm, exact) == n


@pytest.mark.parametrize("precision", [0.0, 0.3, float("nan")])
def test_precision_outside_range_is_refused(precision):
    with pytest.raises(InputError, match="precision"):
        realisations_for_precision(precision, 0.01)
