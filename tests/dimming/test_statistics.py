"""Test statistics: window test and Poisson likelihood ratio (synthcorona.dimming.statistics).

Outside references used below:
* scipy.stats (binomtest, binom, poisson, norm, chi2) and scipy.special as the reference library for
  distributions;
* binomial standard error sqrt(p (1 - p) / n) of a Monte Carlo fraction;
* Poisson variance Var N = mu, hence the Gaussian-limit step S/N (Li & Ma 1983, ApJ 272, 317, eq. 5);
* Chernoff (1954, Ann. Math. Stat. 25, 573): likelihood ratio with the parameter on the
  boundary is 1/2 chi2_0 + 1/2 chi2_1 under the null.
"""
import math

import astropy.units as u
import numpy as np
import pytest
from dimming_setups import CTS, binom_se, flare_dimming_curves
from scipy import optimize, special, stats

from synthcorona.dimming.statistics import (
    WINDOW_NORMAL_LIMIT,
    cash_statistic,
    likelihood_ratio,
    poisson_loglike,
    step_snr,
    window_root,
    window_sigma,
    window_test,
    window_test_size,
)
from synthcorona.errors import InputError


# ----------------------------------------------------------------------------- window test vs scipy
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


def test_window_test_huge_counts_matches_gaussian_z():
    # Sun at 1 AU: ~1e10 counts per window. Li & Ma (1983, ApJ 272, 317) eq. 5 with alpha = t_on/t_off = 1:
    # S = (N_on - N_off) / sqrt(N_on + N_off) (from memory). Dimming => sigma = -S.
    n1 = np.array([10 ** 10, 10 ** 10, 10 ** 10])
    n2 = n1 - np.array([0, 300_000, 700_000])
    res = window_test(n1, 1 * u.h, n2, 1 * u.h)
    z = (n1 - n2) / np.sqrt(n1 + n2)
    assert np.all(np.isfinite(res.sigma))
    np.testing.assert_allclose(res.sigma, z, atol=1e-3)
    assert res.sigma[1] == pytest.approx(2.1213, abs=1e-3)
    # unequal windows (t_post = 2 t_pre): Li & Ma eq. 5 with alpha = 2 under the null variance
    # alpha (N_on + N_off) (their eq. 9 simple form; from memory)
    a = 2.0
    n_off = 10 ** 10
    n_on = int(a * n_off - 4e5)
    s = (n_on - a * n_off) / math.sqrt(a * (n_on + n_off))
    r2 = window_test(n_off, 1 * u.h, n_on, 2 * u.h)
    assert float(r2.sigma) == pytest.approx(-s, abs=1e-3)


def test_window_normal_branch_agrees_with_exact_binomial_just_above_limit():
    # Just above the switch-over, the normal approximation vs the exact binomial CDF (scipy.stats.binom).
    n_tot = int(1.2 * WINDOW_NORMAL_LIMIT)
    k = n_tot // 2 - 8000
    sig = float(window_test(n_tot - k, 1 * u.s, k, 1 * u.s).sigma)
    exact = -special.ndtri_exp(stats.binom.logcdf(k, n_tot, 0.5))
    assert sig == pytest.approx(exact, abs=1e-3)
    assert sig == pytest.approx(4.6188, abs=2e-3)  # 2*8000/sqrt(1.2e7)


@pytest.mark.parametrize("n1,n2", [(100, 500), (40, 60), (3, 30)])
def test_window_sigma_keeps_precision_when_the_post_window_is_brighter(n1, n2):
    # sigma = Phi^-1(1 - p), p = P(X <= N2); for p near 1 it is Phi^-1(P(X > N2)) (scipy.stats.binom.sf),
    # which must stay finite where p itself rounds to 1 (e.g. a flare in the post-event window).
    ref = stats.norm.ppf(stats.binom.sf(n2, n1 + n2, 0.5))   # scipy.stats, general reference
    sig, _ = window_sigma(np.array([n1]), np.array([n2]), 0.5)
    assert np.isfinite(sig[0]) and sig[0] == pytest.approx(ref, rel=1e-9)


def _size_by_enumeration(mu1, mu2, alpha):
    """P(p-value <= alpha) by summing over every (N1, N2), p-values from scipy.stats.binomtest (the detection rule:
    reject when the p-value is <= alpha)."""
    q0 = mu2 / (mu1 + mu2)
    total = 0.0
    for n1 in range(int(mu1 + 12 * math.sqrt(mu1) + 20)):
        for n2 in range(int(mu2 + 12 * math.sqrt(mu2) + 20)):
            if n1 + n2 and stats.binomtest(n2, n1 + n2, q0, alternative="less").pvalue <= alpha:
                total += stats.poisson.pmf(n1, mu1) * stats.poisson.pmf(n2, mu2)
    return total


@pytest.mark.parametrize("mu1, mu2, alpha", [(20.0, 10.0, 0.05), (2.5, 2.5, 1 / 32), (6.0, 9.0, 0.01)])
def test_exact_window_test_size_by_enumeration(mu1, mu2, alpha):
    """The exact test's false-alarm probability equals the enumeration with scipy's binomtest p-values and the rule
    p <= alpha; it never exceeds alpha. alpha = 1/32 is attained exactly (N = 5, N2 = 0, q0 = 1/2: p = 2^-5), so
    the rule's '<=' matters there."""
    size = window_test_size(mu1, mu2, alpha)
    assert size == pytest.approx(_size_by_enumeration(mu1, mu2, alpha), rel=1e-9, abs=1e-15)
    assert size <= alpha
    assert window_sigma(5, 0, 0.5)[1] == pytest.approx(math.log(1 / 32), rel=1e-12)   # the attained p-value


def test_window_root_approximates_the_exact_significance():
    """The scan's fast significance (signed likelihood root, continuity-corrected) is within 0.1 sigma of the exact
    one at tens of counts and more, in the range that matters for thresholds (|sigma| < 5)."""
    rng = np.random.default_rng(3)
    n1 = rng.poisson(300, 2000)
    n2 = rng.poisson(80, 2000)
    exact = window_sigma(n1, n2, 0.25)[0]
    keep = np.abs(exact) < 5
    assert np.max(np.abs(window_root(n1, n2, 0.25)[keep] - exact[keep])) < 0.1
    assert window_root(0, 0, 0.3) == 0.0


def test_step_snr_formula():
    # (r1 - r2) / sqrt(r1/t1 + r2/t2): 5 / sqrt(50/200 + 45/200)
    assert float(step_snr(50 * CTS, 45 * CTS, 200 * u.s, 200 * u.s)) == pytest.approx(5 / math.sqrt(0.475), rel=1e-12)


# ----------------------------------------------------------------------------- likelihoods
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


def test_likelihood_fit_matches_direct_minimisation():
    """Vectorised Newton fit = scipy.optimize (Nelder-Mead) on the Cash statistic, row by row."""
    base, dim, truth = flare_dimming_curves(depth=0.1)
    counts = np.random.default_rng(5).poisson(truth, size=(5, base.size))
    res = likelihood_ratio(counts, base, dim)
    assert res.converged.all()
    for i in range(5):
        def c_alt(p, row=counts[i]):
            mu = p[0] * base - p[1] * dim
            return cash_statistic(row, mu) if np.all(mu > 0) else 1e300

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


# ----------------------------------------------------------------------------- bad inputs
_BASE, _DIM, _ = flare_dimming_curves()


@pytest.mark.parametrize("call,match", [
    (lambda: window_test([1, 2, 3], 1 * u.s, [1, 2], 1 * u.s),
     r"shapes do not broadcast together: n_pre \(3,\), n_post \(2,\)"),
    (lambda: window_test(1.5, 1 * u.s, 2, 1 * u.s), "whole numbers"),
    (lambda: window_test(1, 1 * u.s, 2, 0 * u.s), "t_post"),
    (lambda: likelihood_ratio(np.ones(_BASE.size), _BASE, 0.5 * _BASE), "proportional"),
    (lambda: likelihood_ratio(np.ones((3, 10)), _BASE, _DIM), r"counts has shape \(3, 10\)"),
    (lambda: likelihood_ratio(np.ones(3), [1.0, 0.0, 1.0], [0.0, 1.0, 0.5]), "baseline must be > 0"),
    (lambda: step_snr(0 * CTS, 0 * CTS, 1 * u.s, 1 * u.s), "rate_pre and rate_post are both zero"),
])
def test_bad_inputs(call, match):
    with pytest.raises(InputError, match=match):
        call()
