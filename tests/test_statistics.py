"""Detection statistics and noise models (synthcorona.dimming.statistics / .noise).

Outside references used below:
* scipy.stats (binomtest, poisson, norm, chi2) as the reference library for distributions;
* binomial standard error sqrt(p (1 - p) / n) of a Monte Carlo fraction;
* Poisson variance Var N = mu, hence the Gaussian-limit step S/N (Li & Ma 1983, ApJ 272, 317, eq. 5);
* Chernoff (1954, Ann. Math. Stat. 25, 573): likelihood ratio with the parameter on the
  boundary is 1/2 chi2_0 + 1/2 chi2_1 under the null;
* the damped random walk covariance sigma^2 exp(-|dt|/tau) (Kelly, Bechtold & Siemiginowska
  2009, ApJ 698, 895).
No timing asserts: speed is in benchmarks/bench_statistics.py.
"""
import math
import tracemalloc

import astropy.units as u
import numpy as np
import pytest
from scipy import optimize, stats

from synthcorona.dimming import noise
from synthcorona.dimming.noise import (
    CountSampler,
    chunk_size_for,
    damped_random_walk,
    iter_realisations,
    poisson_counts,
)
from synthcorona.dimming.statistics import (
    calibrate_threshold,
    cash_statistic,
    detection_probability,
    likelihood_ratio,
    minimum_detectable,
    poisson_loglike,
    step_snr,
    window_test,
)
from synthcorona.errors import InputError

CTS = u.ct / u.s


def binom_se(p, n):
    """Binomial standard error of a Monte Carlo fraction."""
    return math.sqrt(p * (1 - p) / n)


def step_curve(n_bins=1000, rate=10.0, depth=0.0, onset=500):
    t = np.arange(n_bins) + 0.5
    return np.where(t >= onset, rate * (1 - depth), rate) * CTS


def flare_dimming_curves(n_bins=400, q=20.0, depth=0.1):
    """Quiescent + decaying flare, and an exponentially recovering dimming after bin 200 (1 s bins)."""
    t = np.arange(n_bins) + 0.5
    flare = 60.0 * np.exp(-(t - 200) / 30.0) * (t >= 200)
    profile = np.where(t >= 200, np.exp(-(t - 200) / 150.0), 0.0)
    base = q + flare
    dim = q * profile
    return base, dim, base - depth * dim


# ----------------------------------------------------------------------------- exact tests vs scipy
@pytest.mark.parametrize("n1,t1,n2,t2", [(100, 10, 70, 10), (5, 1, 0, 2), (30, 3, 12, 1), (1000, 100, 900, 100),
                                         (7, 2.5, 9, 4.0)])
def test_window_test_matches_scipy_binomtest(n1, t1, n2, t2):
    res = window_test(n1, t1 * u.s, n2, t2 * u.s)
    ref = stats.binomtest(n2, n1 + n2, t2 / (t1 + t2), alternative="less").pvalue
    assert res.p_value == pytest.approx(ref, rel=1e-10)
    assert res.sigma == pytest.approx(stats.norm.isf(ref), rel=1e-9)


def test_window_test_vectorised_and_edge_cases():
    n1 = np.array([100, 0, 50, 20000])
    n2 = np.array([70, 0, 50, 18000])
    res = window_test(n1, 10 * u.s, n2, 10 * u.s)
    ref = [stats.binomtest(int(b), int(a + b), 0.5, alternative="less").pvalue if a + b else 1.0
           for a, b in zip(n1, n2)]
    np.testing.assert_allclose(res.p_value, ref, rtol=1e-9)
    assert res.p_value[1] == 1.0  # no counts: no evidence
    # Far tail (~21 sigma, p ~ 1e-98): the p-value matches scipy.stats.binom.cdf and sigma is finite,
    # close to the Gaussian-limit (N2 - N/2) / sqrt(N/4) = 21.08 (5 %: the exact tail is not Gaussian there).
    deep = window_test(20000, 10 * u.s, 16000, 10 * u.s)
    assert deep.p_value == pytest.approx(stats.binom.cdf(16000, 36000, 0.5), rel=1e-8)
    assert deep.sigma == pytest.approx(2000 / math.sqrt(9000), rel=0.05)


def test_poisson_loglike_matches_scipy_and_cash():
    rng = np.random.default_rng(0)
    m = rng.uniform(0.1, 30, size=(3, 50))
    n = rng.poisson(m)
    full = poisson_loglike(n, m, full=True)
    np.testing.assert_allclose(full, stats.poisson.logpmf(n, m).sum(axis=-1), rtol=1e-12)
    reduced = poisson_loglike(n, m)
    np.testing.assert_allclose(reduced, np.sum(n * np.log(m) - m, axis=-1), rtol=1e-12)
    np.testing.assert_allclose(cash_statistic(n, m), 2 * np.sum(m - n * np.log(m), axis=-1), rtol=1e-12)
    # zero model with zero counts contributes nothing; with counts it is impossible
    assert poisson_loglike([0, 3], [0.0, 3.0]) == pytest.approx(3 * np.log(3) - 3)
    assert poisson_loglike([1, 3], [0.0, 3.0]) == -np.inf


def test_poisson_inversion_table_is_exact():
    """The table sampler returns exactly scipy.stats.poisson.ppf of the same uniforms."""
    lam = np.array([0.0, 0.01, 0.7, 3.0, 20.0, 150.0, 1e4, 2e6])
    uni = np.random.default_rng(3).random((20000, lam.size))
    got = noise._PoissonTable(lam).sample(uni)
    np.testing.assert_array_equal(got, stats.poisson.ppf(uni, lam).astype(np.int64))


# ----------------------------------------------------------------------------- Monte Carlo vs analytic
def test_step_snr_formula():
    # (r1 - r2) / sqrt(r1/t1 + r2/t2): 5 / sqrt(50/200 + 45/200)
    assert float(step_snr(50 * CTS, 45 * CTS, 200 * u.s, 200 * u.s)) == pytest.approx(5 / math.sqrt(0.475), rel=1e-12)


def test_monte_carlo_step_snr_matches_analytic():
    """Per-bin Poisson simulation of a step (1e4 counts pre, 9e3 post): mean/std of the rate
    difference equals step_snr (Poisson variance Var N = mu) to 3 %."""
    rate = np.r_[np.full(200, 50.0), np.full(200, 45.0)] * CTS
    counts = poisson_counts(rate, 1 * u.s, 20000, seed=11)
    diff = counts[:, :200].sum(axis=1) / 200.0 - counts[:, 200:].sum(axis=1) / 200.0
    mc = diff.mean() / diff.std(ddof=1)
    expected = float(step_snr(50 * CTS, 45 * CTS, 200 * u.s, 200 * u.s))
    assert mc == pytest.approx(expected, rel=0.03)
    # and the per-bin counts have Poisson mean and variance
    assert counts[:, :200].mean() == pytest.approx(50.0, rel=2e-3)
    assert counts[:, :200].var() == pytest.approx(50.0, rel=2e-2)


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


def test_detection_probability_without_event_is_false_alarm():
    """Injecting no event: P(detect) is the false-alarm probability within binomial error. Here the
    calibration and the injection use n = 20000 each, so both carry a binomial error and the
    difference has standard deviation sqrt(2) SE: tolerance 3 sqrt(2) SE."""
    rate = step_curve(depth=0.0)
    ds = detection_probability(rate, rate, 1 * u.s, false_alarm=0.05, n_realisations=20000, seed=4,
                               windows=((0 * u.s, 500 * u.s), (500 * u.s, 1000 * u.s)))
    assert abs(float(ds.probability) - 0.05) < 3 * math.sqrt(2) * binom_se(0.05, 20000)
    assert float(ds.probability_error) == pytest.approx(binom_se(float(ds.probability), 20000))
    assert float(ds.probability_lower) < float(ds.probability) < float(ds.probability_upper)


def test_detection_probability_matches_gaussian_expectation():
    """Window statistic on a 3 % step (5000 counts per window): P(detect) = Phi(S/N - threshold),
    the Gaussian-limit power of a one-sided test (S/N from step_snr)."""
    ds = detection_probability(step_curve(depth=0.03), step_curve(), 1 * u.s, false_alarm=0.01,
                               n_realisations=20000, seed=5,
                               windows=((0 * u.s, 500 * u.s), (500 * u.s, 1000 * u.s)))
    snr = float(step_snr(10 * CTS, 9.7 * CTS, 500 * u.s, 500 * u.s))
    assert float(ds.snr_expected) == pytest.approx(snr, rel=1e-12)
    expected = stats.norm.cdf(snr - float(ds.threshold))
    # binomial error plus the (Gaussian-limit) approximation of the exact test: 0.02 absolute
    assert float(ds.probability) == pytest.approx(expected, abs=0.02)


# ----------------------------------------------------------------------------- likelihood ratio
def test_likelihood_fit_matches_direct_minimisation():
    """Vectorised Newton fit = scipy.optimize (Nelder-Mead) on the Cash statistic, row by row."""
    base, dim, truth = flare_dimming_curves(depth=0.1)
    counts = np.random.default_rng(5).poisson(truth, size=(5, base.size))
    res = likelihood_ratio(counts, base, dim)
    assert res.converged.all()
    for i in range(5):
        def c_alt(p):
            mu = p[0] * base - p[1] * dim
            return cash_statistic(counts[i], mu) if np.all(mu > 0) else 1e300

        best = optimize.minimize(c_alt, [1.0, 0.05], method="Nelder-Mead",
                                 options=dict(xatol=1e-10, fatol=1e-12, maxiter=5000))
        d_ref = max(best.x[1], 0.0)
        c_null = cash_statistic(counts[i], counts[i].sum() / base.sum() * base)
        ts_ref = max(c_null - best.fun, 0.0) if best.x[1] > 0 else 0.0
        assert res.ts[i] == pytest.approx(ts_ref, abs=1e-6)
        assert res.delta[i] == pytest.approx(d_ref, abs=1e-6)


def test_likelihood_recovers_injected_depth():
    """Mean fitted depth within 3 standard errors of the truth; the Fisher error matches the scatter."""
    base, dim, truth = flare_dimming_curves(depth=0.1)
    n = 5000
    counts = np.random.default_rng(6).poisson(truth, size=(n, base.size))
    res = likelihood_ratio(counts, base, dim)
    d = res.delta_unconstrained
    se = d.std(ddof=1) / math.sqrt(n)
    assert abs(d.mean() - 0.1) < 3 * se
    assert np.mean(res.scale) == pytest.approx(1.0, abs=3 * res.scale.std() / math.sqrt(n))
    # observed-information error vs the Monte Carlo scatter (relative SE of a std: 1/sqrt(2n) = 1 %)
    assert np.mean(res.delta_error) == pytest.approx(d.std(ddof=1), rel=0.04)


def test_likelihood_ratio_null_follows_chernoff_mixture():
    """Under the null, TS ~ 1/2 chi2_0 + 1/2 chi2_1 (Chernoff 1954): P(TS > 2.7055) = 0.05 and
    P(TS = 0) = 0.5, each within 3 binomial standard errors (n = 20000; ~1100 counts per bin-group,
    so the asymptotic mixture applies)."""
    base, dim, _ = flare_dimming_curves()
    n = 20000
    counts = np.random.default_rng(7).poisson(base, size=(n, base.size))
    res = likelihood_ratio(counts, base, dim)
    crit = stats.chi2.isf(0.10, 1)  # 2.7055: P(chi2_1 > crit) = 0.1, mixture 0.05
    assert abs(np.mean(res.ts > crit) - 0.05) < 3 * binom_se(0.05, n)
    assert abs(np.mean(res.ts == 0) - 0.5) < 3 * binom_se(0.5, n)
    assert res.converged.all()


def test_likelihood_fixed_scale():
    base, dim, truth = flare_dimming_curves(depth=0.2)
    counts = np.random.default_rng(8).poisson(truth, size=(2000, base.size))
    res = likelihood_ratio(counts, base, dim, fit_scale=False)
    assert np.all(res.scale == 1.0)
    d = res.delta_unconstrained
    assert abs(d.mean() - 0.2) < 3 * d.std(ddof=1) / math.sqrt(d.size)
    single = likelihood_ratio(counts[0], base, dim, fit_scale=False)
    assert single.ts == pytest.approx(res.ts[0])


# ----------------------------------------------------------------------------- red noise
def test_damped_random_walk_covariance_uniform_grid():
    """Stationary variance sigma^2 and autocorrelation exp(-dt/tau) (Kelly et al. 2009)."""
    n = 20000
    t = np.arange(0, 100, 5.0)
    x = damped_random_walk(t * u.s, 0.2, 30 * u.s, n, seed=1)
    assert x.shape == (n, t.size)
    var = x.var(axis=0)
    np.testing.assert_allclose(var, 0.04, rtol=0.05)  # SE of a variance sqrt(2/n) = 1 %
    for lag in (1, 4, 10):
        rho = np.mean(x[:, :-lag] * x[:, lag:]) / 0.04
        assert rho == pytest.approx(math.exp(-5.0 * lag / 30.0), abs=0.02)


def test_damped_random_walk_covariance_irregular_grid():
    """Irregular sampling (segmented cumsum path), including steps >> tau and spans > 200 tau."""
    t = np.array([0.0, 1.0, 4.0, 4.5, 20.0, 400.0, 401.0, 2000.0])
    x = damped_random_walk(t * u.s, 0.3, 2 * u.s, 40000, seed=2)
    cov = np.cov(x, rowvar=False)
    ref = 0.09 * np.exp(-np.abs(t[:, None] - t[None, :]) / 2.0)
    np.testing.assert_allclose(cov, ref, atol=0.09 * 0.03)  # SE ~ sigma^2 sqrt(2/n) = 0.7 % of sigma^2


def test_red_noise_sampler_matches_public_drw_and_raises_variance():
    rate = np.full(300, 20.0) * CTS
    rn = (0.1, 40 * u.s)
    counts = poisson_counts(rate, 1 * u.s, 4000, seed=3, red_noise=rn)
    sums = counts.sum(axis=1)
    delta = damped_random_walk((np.arange(300) + 0.5) * u.s, 0.1, 40 * u.s, 4000, seed=3)
    # same seed => the sampler used exactly these fluctuations: mean rate per realisation tracks them
    lam_sum = (20.0 * np.maximum(1 + delta, 0)).sum(axis=1)
    assert np.corrcoef(sums, lam_sum)[0, 1] > 0.95
    # Var(sum) = E[lam_sum] + Var(lam_sum) (Poisson given the red noise; law of total variance)
    assert sums.var() == pytest.approx(lam_sum.mean() + lam_sum.var(), rel=0.1)


# ----------------------------------------------------------------------------- seeds and chunks
def test_same_seed_same_numbers_for_any_chunk_size():
    rate = step_curve(n_bins=700, depth=0.1)
    a = np.concatenate(list(iter_realisations(rate, 1 * u.s, 3000, seed=9, chunk_size=64)))
    b = np.concatenate(list(iter_realisations(rate, 1 * u.s, 3000, seed=9, chunk_size=5000)))
    c = poisson_counts(rate, 1 * u.s, 3000, seed=9)
    np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(a, c)
    d = poisson_counts(rate, 1 * u.s, 1000, seed=9)  # a shorter run is a prefix
    np.testing.assert_array_equal(d, a[:1000])
    e = poisson_counts(rate, 1 * u.s, 1000, seed=10)
    assert not np.array_equal(d, e)
    # red-noise path
    f = np.concatenate(list(iter_realisations(rate, 1 * u.s, 700, seed=9, chunk_size=16, red_noise=(0.1, 50 * u.s))))
    g = np.concatenate(list(iter_realisations(rate, 1 * u.s, 700, seed=9, chunk_size=700, red_noise=(0.1, 50 * u.s))))
    np.testing.assert_array_equal(f, g)
    # a numpy Generator in the same state gives the same numbers
    h1 = poisson_counts(rate, 1 * u.s, 50, seed=np.random.default_rng(4))
    h2 = poisson_counts(rate, 1 * u.s, 50, seed=np.random.default_rng(4))
    np.testing.assert_array_equal(h1, h2)


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
    depths = np.linspace(0.0, 0.08, 9)
    with_ = np.stack([step_curve(depth=d).value for d in depths]) * CTS
    ds = detection_probability(with_, step_curve(), 1 * u.s, n_realisations=5000, seed=1, case=depths,
                               windows=((0 * u.s, 500 * u.s), (500 * u.s, 1000 * u.s)))
    p = ds.probability.values
    assert ds.probability.dims == ("case",)
    np.testing.assert_array_equal(ds.case.values, depths)
    assert np.all(np.diff(p) >= 0)
    # P(0) is the false-alarm rate; at depth 0.08 the Gaussian-limit power is Phi(4.08 - 2.33) = 0.96
    assert p[0] <= 0.01 + 3 * binom_se(0.01, 5000) and p[-1] > 0.9


# ----------------------------------------------------------------------------- minimum detectable
def test_minimum_detectable_matches_gaussian_limit():
    """Depth at P(detect) = 0.5 solves step_snr(depth) = z_{1-alpha} in the Gaussian limit
    (5000 counts per window); agreement within 2 %."""
    def p2e(depth):
        return step_curve(depth=depth), step_curve()

    ds = minimum_detectable(p2e, 1 * u.s, bracket=(1e-3, 0.5), target_probability=0.5, false_alarm=0.01,
                            windows=((0 * u.s, 500 * u.s), (500 * u.s, 1000 * u.s)), seed=3)
    z = stats.norm.isf(0.01)
    analytic = optimize.brentq(lambda d: float(step_snr(10 * CTS, 10 * (1 - d) * CTS, 500 * u.s, 500 * u.s)) - z,
                               1e-4, 0.5)
    assert float(ds.parameter) == pytest.approx(analytic, rel=0.02)
    assert float(ds.probability) == pytest.approx(0.5, abs=3 * binom_se(0.5, 10000))
    assert 0 < float(ds.parameter_error) < 0.02 * analytic


def test_minimum_detectable_bracket_error_reports_probabilities():
    def p2e(depth):
        return step_curve(depth=depth), step_curve()

    with pytest.raises(InputError, match=r"does not straddle target_probability=0.9.*at the lower end.*upper"):
        minimum_detectable(p2e, 1 * u.s, bracket=(1e-3, 2e-3), target_probability=0.9, n_realisations=2000,
                           windows=((0 * u.s, 500 * u.s), (500 * u.s, 1000 * u.s)))


# ----------------------------------------------------------------------------- memory discipline
def test_chunks_respect_memory_bound():
    n_bins = 1000
    budget = 64 * 2**20
    cs = chunk_size_for(n_bins, budget)
    assert cs * n_bins * 8 * noise.WORK_ARRAYS <= budget
    assert cs % noise.block_rows(n_bins) == 0
    shapes = [c.shape for c in iter_realisations(step_curve(), 1 * u.s, 3 * cs + 17, seed=0, memory_budget=budget)]
    assert all(s[0] <= cs and s[1] == n_bins for s in shapes)
    assert sum(s[0] for s in shapes) == 3 * cs + 17
    # The documented 1e6 x 1000 bound: default-budget chunk arrays plus 8 bytes per kept statistic < 2 GB.
    cs_default = chunk_size_for(n_bins)
    assert cs_default * n_bins * 8 * noise.WORK_ARRAYS + 8 * 10**6 < 2 * 10**9


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


def test_poisson_counts_refuses_huge_results():
    with pytest.raises(InputError, match="iter_realisations"):
        poisson_counts(step_curve(), 1 * u.s, 10**6)


# ----------------------------------------------------------------------------- bad inputs
WIN = ((0 * u.s, 500 * u.s), (500 * u.s, 1000 * u.s))


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


def test_bad_inputs_elsewhere():
    with pytest.raises(u.UnitsError, match="rate"):
        poisson_counts(np.ones(10), 1 * u.s, 10)
    with pytest.raises(InputError, match=r"rate=.*outside the valid range \[0, inf\]"):
        poisson_counts(-np.ones(10) * CTS, 1 * u.s, 10)
    with pytest.raises(InputError, match="bin_width"):
        poisson_counts(np.ones(10) * CTS, 0 * u.s, 10)
    with pytest.raises(InputError, match=r"shapes do not broadcast together: n_pre \(3,\), n_post \(2,\)"):
        window_test([1, 2, 3], 1 * u.s, [1, 2], 1 * u.s)
    with pytest.raises(InputError, match="whole numbers"):
        window_test(1.5, 1 * u.s, 2, 1 * u.s)
    with pytest.raises(InputError, match="t_post"):
        window_test(1, 1 * u.s, 2, 0 * u.s)
    base, dim, _ = flare_dimming_curves()
    with pytest.raises(InputError, match="proportional"):
        likelihood_ratio(np.ones(base.size), base, 0.5 * base)
    with pytest.raises(InputError, match=r"counts has shape \(3, 10\)"):
        likelihood_ratio(np.ones((3, 10)), base, dim)
    with pytest.raises(InputError, match="baseline must be > 0"):
        likelihood_ratio(np.ones(3), [1.0, 0.0, 1.0], [0.0, 1.0, 0.5])
    with pytest.raises(InputError, match="rate_pre and rate_post are both zero"):
        step_snr(0 * CTS, 0 * CTS, 1 * u.s, 1 * u.s)
    with pytest.raises(InputError, match=r"amplitude"):
        damped_random_walk(np.arange(5) * u.s, -0.1, 1 * u.s, 3)
    with pytest.raises(InputError, match="strictly increasing"):
        damped_random_walk(np.array([0.0, 2.0, 1.0]) * u.s, 0.1, 1 * u.s, 3)
    with pytest.raises(InputError, match="statistic_fn returned 1 values"):
        calibrate_threshold(lambda c: [0.0], CountSampler(np.ones(5) * CTS, 1 * u.s), 0.1, 200, seed=0)
    with pytest.raises(InputError, match="no dimming"):
        detection_probability(step_curve(), step_curve(), 1 * u.s, statistic="likelihood", n_realisations=2000)


def test_window_sigma_keeps_precision_when_the_post_window_is_brighter():
    # sigma = Phi^-1(1 - p), p = P(X <= N2); for p near 1 it is Phi^-1(P(X > N2)) (scipy.stats.binom.sf),
    # which must stay finite where p itself rounds to 1 (e.g. a flare in the post-event window).
    from synthcorona.dimming.statistics import _window_sigma

    for n1, n2 in [(100, 500), (40, 60), (3, 30)]:
        ref = stats.norm.ppf(stats.binom.sf(n2, n1 + n2, 0.5))   # scipy.stats, general reference
        sig, _ = _window_sigma(np.array([n1]), np.array([n2]), 0.5)
        assert np.isfinite(sig[0]) and sig[0] == pytest.approx(ref, rel=1e-9)


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
