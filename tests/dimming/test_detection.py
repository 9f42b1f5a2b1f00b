"""Detection probability and minimum detectable event by injection and recovery (synthcorona.dimming.detection).

Outside references used below:
* scipy.stats.norm and scipy.optimize.brentq for the Gaussian-limit power Phi(S/N - threshold) of a
  one-sided test and the depth where it reaches a target;
* binomial standard error sqrt(p (1 - p) / n) of a Monte Carlo fraction.
No timing asserts: speed is in benchmarks/bench_statistics.py.
"""
import math
import tracemalloc

import astropy.units as u
import numpy as np
import pytest
from dimming_setups import CTS, WIN, binom_se, flare_dimming_curves, step_curve
from scipy import optimize, stats

from synthcorona.dimming.detection import detection_probability, minimum_detectable
from synthcorona.dimming.statistics import step_snr
from synthcorona.errors import InputError


def test_detection_probability_without_event_is_false_alarm_with_scan():
    """Injecting no event with the onset scanned (default): P(detect) is the false-alarm probability within
    binomial error. The calibration and the injection use n = 20000 each, so both carry a binomial error and the
    difference has standard deviation sqrt(2) SE: tolerance 3 sqrt(2) SE. The quoted error includes the
    calibration part, which here (event statistic = null statistic) is the binomial SE of alpha itself."""
    rate = step_curve(depth=0.0)
    ds = detection_probability(rate, rate, 1 * u.s, false_alarm=0.05, n_realisations=20000, seed=4, windows=WIN)
    assert ds.attrs["onset"] == "scan" and ds.attrs["threshold_method"] == "calibrated" and ds.attrs["n_trials"] > 10
    assert abs(float(ds.probability) - 0.05) < 3 * math.sqrt(2) * binom_se(0.05, 20000)
    assert float(ds.probability_error_binomial) == pytest.approx(binom_se(float(ds.probability), 20000))
    assert float(ds.probability_error_calibration) == pytest.approx(binom_se(0.05, 20000), rel=0.15)
    assert float(ds.probability_error) == pytest.approx(math.hypot(float(ds.probability_error_binomial),
                                                                   float(ds.probability_error_calibration)))
    assert float(ds.probability_lower) < float(ds.probability) < float(ds.probability_upper)


def test_exact_threshold_without_event_is_at_most_false_alarm():
    """Known onset, Poisson noise only: the exact conditional binomial test (no calibration). Its size is
    window_test_size (<= alpha by construction; checked against enumeration in test_statistics.py); the measured
    rate over 20000 event-free realisations agrees with it within 3 binomial SE."""
    rate = step_curve(depth=0.0)
    ds = detection_probability(rate, rate, 1 * u.s, false_alarm=0.05, n_realisations=20000, seed=4, windows=WIN,
                               onset="known")
    assert ds.attrs["threshold_method"] == "exact" and float(ds.probability_error_calibration) == 0.0
    assert float(ds.threshold) == pytest.approx(stats.norm.isf(0.05), rel=1e-12)
    size = float(ds.false_alarm_achieved)
    assert size <= 0.05
    assert abs(float(ds.probability) - size) < 3 * binom_se(size, 20000)


def test_detection_probability_matches_gaussian_expectation():
    """Step dimming under pure Poisson noise with the onset known: P(detect) = Phi(S/N - z_alpha), the
    normal-approximation (photon-noise S/N, Li & Ma 1983 eq. 5 with expected counts, step_snr) power of a
    one-sided test at the exact threshold z_alpha = Phi^-1(1 - alpha) (scipy.stats.norm), within 0.02
    (5000 counts per window; binomial error 0.0035 at n = 20000)."""
    ds = detection_probability(step_curve(depth=0.03), step_curve(), 1 * u.s, false_alarm=0.01,
                               n_realisations=20000, seed=5, windows=WIN, onset="known")
    snr = float(step_snr(10 * CTS, 9.7 * CTS, 500 * u.s, 500 * u.s))
    assert float(ds.snr_expected) == pytest.approx(snr, rel=1e-12)
    assert float(ds.threshold) == pytest.approx(stats.norm.isf(0.01), rel=1e-12)
    expected = stats.norm.cdf(snr - stats.norm.isf(0.01))
    assert float(ds.probability) == pytest.approx(expected, abs=0.02)


@pytest.mark.parametrize("statistic", ["window", "likelihood"])
def test_detection_probability_independent_of_chunk_size(statistic):
    base, dim, truth = flare_dimming_curves(depth=0.05)
    kw = dict(statistic=statistic, seed=12, n_realisations=3000, false_alarm=0.01)
    if statistic == "window":
        kw["windows"] = ((0 * u.s, 190 * u.s), (250 * u.s, 400 * u.s))
    ds1 = detection_probability(truth * CTS, base * CTS, 1 * u.s, chunk_size=100, **kw)
    ds2 = detection_probability(truth * CTS, base * CTS, 1 * u.s, **kw)
    for name in ("probability", "threshold", "false_alarm_achieved"):
        assert float(ds1[name]) == float(ds2[name])


def test_probability_monotone_in_depth_with_common_random_numbers():
    """Known onset: the inversion sampler's counts are monotone in the mean, so with one seed P(detect) never
    decreases with depth (with a scan a deeper dimming can also lower trials whose baseline it overlaps)."""
    depths = np.linspace(0.0, 0.08, 9)
    with_ = np.stack([step_curve(depth=d).value for d in depths]) * CTS
    ds = detection_probability(with_, step_curve(), 1 * u.s, n_realisations=5000, seed=1, case=depths, windows=WIN,
                               onset="known")
    p = ds.probability.values
    assert ds.probability.dims == ("case",)
    np.testing.assert_array_equal(ds.case.values, depths)
    assert np.all(np.diff(p) >= 0)
    # P(0) is the false-alarm rate; at depth 0.08 the Gaussian-limit power is Phi(4.08 - 2.33) = 0.96
    assert p[0] <= 0.01 + 3 * binom_se(0.01, 5000) and p[-1] > 0.9


def test_dimming_inside_a_flare_is_still_detectable():
    # A 30 % dimming under a flare that triples the post-event rate: the flare-only null gives a finite
    # threshold and the dimming is found nearly always (S/N of the step ~ 0.3*100*600/sqrt(3*100*600) >> 5,
    # Gaussian limit of the window test; common practice, no source).
    rate = np.full(240, 100.0)
    flare = rate.copy()
    flare[120:180] *= 3.0
    with_cme = flare.copy()
    with_cme[120:180] -= 30.0
    ds = detection_probability(with_cme * u.ct / u.s, flare * u.ct / u.s, 10 * u.s, false_alarm=0.01,
                               n_realisations=2000, statistic="window",
                               windows=((0 * u.s, 1200 * u.s), (1200 * u.s, 1800 * u.s)), seed=3)
    assert np.isfinite(float(ds["threshold"]))
    assert float(ds["probability"]) > 0.99


# ----------------------------------------------------------------------------- minimum detectable
def _step_pair(depth):
    return step_curve(depth=depth), step_curve()


def test_minimum_detectable_matches_gaussian_limit():
    """Known onset: the depth at P(detect) = 0.5 solves step_snr(depth) = z_{1-alpha} in the Gaussian limit
    (5000 counts per window); agreement within 2 %. The exact threshold has no calibration error."""
    ds = minimum_detectable(_step_pair, 1 * u.s, bracket=(1e-3, 0.5), target_probability=0.5, false_alarm=0.01,
                            windows=WIN, seed=3, onset="known")
    z = stats.norm.isf(0.01)
    analytic = optimize.brentq(lambda d: float(step_snr(10 * CTS, 10 * (1 - d) * CTS, 500 * u.s, 500 * u.s)) - z,
                               1e-4, 0.5)
    assert float(ds.parameter) == pytest.approx(analytic, rel=0.02)
    assert float(ds.probability) == pytest.approx(0.5, abs=3 * binom_se(0.5, 10000))
    assert 0 < float(ds.parameter_error) < 0.02 * analytic
    assert float(ds.parameter_error_calibration) == 0.0
    assert float(ds.parameter_error) == pytest.approx(float(ds.parameter_error_binomial))


def test_minimum_detectable_bracket_error_reports_probabilities():
    with pytest.raises(InputError, match=r"does not straddle target_probability=0.9.*at the lower end.*upper"):
        minimum_detectable(_step_pair, 1 * u.s, bracket=(1e-3, 2e-3), target_probability=0.9, n_realisations=2000,
                           windows=WIN)


# ----------------------------------------------------------------------------- memory discipline
def test_traced_peak_memory_within_budget():
    """tracemalloc (numpy reports its buffers to it) peak of a chunked likelihood run stays within the budget."""
    base, dim, truth = flare_dimming_curves(n_bins=1000, depth=0.05)
    kw = dict(statistic="likelihood", seed=1, memory_budget=64 * 2**20)
    detection_probability(truth * CTS, base * CTS, 1 * u.s, n_realisations=1000, **kw)  # warm caches/lazy imports
    tracemalloc.start()
    try:
        detection_probability(truth * CTS, base * CTS, 1 * u.s, n_realisations=30000, **kw)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 64 * 2**20


# ----------------------------------------------------------------------------- bad inputs
@pytest.mark.parametrize("kwargs,match", [
    (dict(false_alarm=0.0), r"false_alarm=\[0\.\] is outside the valid range \(0, 1\)"),
    (dict(false_alarm=1.0), r"false_alarm=\[1\.\] is outside the valid range \(0, 1\)"),
    (dict(false_alarm=1.5), r"false_alarm"),
    (dict(false_alarm=1e-4, n_realisations=1000), r"n_realisations >= 100000"),
    (dict(bin_width=0 * u.s), r"bin_width=\[0\.\] s is outside the valid range \(0, inf\) s"),
    (dict(bin_width=-1 * u.s), r"bin_width"),
    (dict(windows=((0 * u.s, 0.3 * u.s), (500 * u.s, 1000 * u.s))), r"shorter than a bin"),
    (dict(windows=((0 * u.s, 600 * u.s), (500 * u.s, 1000 * u.s))), r"windows overlap"),
    (dict(windows=((0 * u.s, 500 * u.s), (500 * u.s, 2000 * u.s))), r"outside the light curve \[0 s, 1000 s\]"),
    (dict(windows=None), r"needs windows"),
    (dict(statistic="chi2"), r"statistic='chi2' must be one of"),
    (dict(onset="maybe"), r"onset='maybe' must be one of \('scan', 'known'\)"),
    (dict(recovery_factors=[0.0, 1.0]), r"recovery_factors=.*valid range \[0.05, 20\]"),
    (dict(windows=((500 * u.s, 600 * u.s), (100 * u.s, 200 * u.s))), r"post window must start at or after"),
    (dict(n_realisations=0), r"n_realisations=0 is outside the valid range \[1, inf\)"),
    (dict(seed=-3), r"seed=-3"),
    (dict(expected_with_event=-step_curve()), r"expected_with_event=.* outside the valid range \[0, inf\]"),
    (dict(expected_without_event=step_curve(n_bins=999)), r"expected_without_event has 999 bins .* 1000"),
    (dict(bin_width=np.ones(7) * u.s), r"bin_width has shape \(7,\)"),
])
def test_detection_probability_bad_inputs(kwargs, match):
    args = dict(expected_with_event=step_curve(depth=0.05), expected_without_event=step_curve(), bin_width=1 * u.s,
                windows=WIN, n_realisations=2000)
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        detection_probability(**args)


def test_likelihood_needs_a_dimming():
    with pytest.raises(InputError, match="no dimming"):
        detection_probability(step_curve(), step_curve(), 1 * u.s, statistic="likelihood", n_realisations=2000)
