r"""Test statistics of a dimming: the exact window test and the Poisson likelihood ratio.

The physics (quiescent rate, dimming depth and profile, flare) is given here as arrays of
expected count rates; everything below is about counting statistics. The detection thresholds
of these statistics are calibrated in :mod:`synthcorona.dimming.thresholds`, and the detection
probability and minimum detectable mass are computed in :mod:`synthcorona.dimming.detection`.

Window comparison
-----------------
:func:`window_test`: counts :math:`N_1` over exposure :math:`t_1` before the event and
:math:`N_2` over :math:`t_2` after. Under :math:`H_0` (equal rates) :math:`N_2` conditional on
:math:`N = N_1 + N_2` is binomial, :math:`N_2 \mid N \sim \mathrm{Bin}(N, t_2/(t_1 + t_2))`,
whatever the common rate: the exact conditional test for comparing two Poisson rates
(Przyborowski & Wilenski 1940, Biometrika 31, 313). The one-sided p-value of a *lower*
post-event rate is :math:`P(X \le N_2)` (``scipy.special.bdtr``), and its Gaussian-equivalent
significance is :math:`\sigma = \Phi^{-1}(1 - p)` (computed from :math:`\ln p` with
``scipy.special.ndtri_exp``, so it stays finite down to p ~ 1e-308; below that it is
``inf``). For :math:`N > 10^7` (e.g. the Sun at 1 AU, ~1e10 counts per window, where
``bdtr`` overflows its integer arguments and returns NaN) the binomial CDF is replaced by the
normal approximation with continuity correction, evaluated in log space
(:data:`WINDOW_NORMAL_LIMIT`, :func:`window_sigma`). In the Gaussian limit the expected
significance of a step is :func:`step_snr`, :math:`(r_1 - r_2)/\sqrt{r_1/t_1 + r_2/t_2}` -- the
"simple" on/off significance of Li & Ma (1983, ApJ 272, 317, their eq. 5) with expected instead
of observed counts.

Likelihood ratio
----------------
:func:`likelihood_ratio`: templates of expected counts per bin, a baseline :math:`B`
(quiescent + flare) and a dimming template :math:`D` (expected count *decrement* per unit
depth). Null model :math:`\mu = a B`; alternative :math:`\mu = a B - \delta D` with
:math:`\delta \ge 0`. Both are fitted by maximum Poisson likelihood, i.e. by minimising the
C-statistic of Cash (1979, ApJ 228, 939), :math:`C = 2 \sum_i (\mu_i - n_i \ln \mu_i)`; the test
statistic is :math:`TS = C_{null} - C_{alt} \ge 0`. The null fit is closed-form
(:math:`a = \sum n / \sum B`). The alternative is a two-parameter convex problem solved for
all realisations at once: a Fisher-scoring start from the null fit, then Newton steps with
the observed Hessian, kept inside :math:`\mu > 0` by a fraction-to-boundary rule (positivity
reduces to two linear constraints on :math:`(a, \delta)` at the extreme values of
:math:`D/B`). Because :math:`C` is convex in :math:`(a, \delta)`, the constrained optimum
is the unconstrained one when :math:`\hat\delta \ge 0` and the null fit otherwise
(then TS = 0). Under :math:`H_0` the boundary puts TS asymptotically at
:math:`\tfrac12\chi^2_0 + \tfrac12\chi^2_1` (Chernoff 1954, Ann. Math. Stat. 25, 573; Self &
Liang 1987, JASA 82, 605).
"""
from __future__ import annotations

import math
from typing import NamedTuple

import astropy.units as u
import numpy as np
from scipy import special, stats

from ..errors import InputError
from ..validation import check_finite, check_range
from .likelihood_fit import LikelihoodRatio, fit_likelihood_ratio
from .noise import check_count, rate_values, time_values

__all__ = [
    "WindowTest", "WINDOW_NORMAL_LIMIT",
    "count_values", "window_sigma", "window_root", "window_test_size", "window_test", "step_snr",
    "poisson_loglike", "cash_statistic",
    "likelihood_templates", "likelihood_ratio",
]


class WindowTest(NamedTuple):
    """Result of :func:`window_test`: one-sided p-value and Gaussian-equivalent significance."""

    p_value: np.ndarray
    sigma: np.ndarray


# ----------------------------------------------------------------------------- argument helpers
def count_values(name: str, value, integer: bool = False) -> np.ndarray:
    """Counts as a float array (>= 0, finite; integer-valued if ``integer``); Quantity must be counts."""
    if isinstance(value, u.Quantity):
        if value.unit not in (u.ct, u.dimensionless_unscaled):
            raise u.UnitsError(f"{name} has units '{value.unit}'; give counts (plain numbers or ct)")
        value = value.value
    arr = np.asarray(value, dtype=float)
    check_range(name, arr, lo=0.0, unit_label="counts")
    if integer and np.any(arr != np.round(arr)):
        bad = arr[arr != np.round(arr)]
        raise InputError(f"{name} must hold whole numbers of counts; found {bad.ravel()[:4]}")
    return arr


def _broadcast(**arrays):
    try:
        return np.broadcast_arrays(*arrays.values())
    except ValueError:
        shapes = ", ".join(f"{k} {np.shape(v)}" for k, v in arrays.items())
        raise InputError(f"shapes do not broadcast together: {shapes}") from None


# ----------------------------------------------------------------------------- window test
#: Above this total count N1 + N2 the window test uses the normal approximation to the binomial
#: (``special.bdtr`` returns NaN once N exceeds the C int range, ~2.1e9).
WINDOW_NORMAL_LIMIT = 1e7


_LN2 = math.log(2.0)


def window_sigma(n_pre, n_post, q):
    """Significance (sigma) and ln p of the exact conditional test of :func:`window_test`, without argument checks.

    ``n_pre``, ``n_post``: whole counts (arrays broadcasting with ``q``); ``q = t_post/(t_pre+t_post)``.
    Returns ``(sigma, logp)``, the Gaussian-equivalent significance and the natural log of the
    one-sided p-value. Used directly on simulated counts by :mod:`synthcorona.dimming.detection`.

    For N = N1 + N2 > :data:`WINDOW_NORMAL_LIMIT` the binomial CDF is replaced by the normal
    approximation with continuity correction, P(X <= k) ~ Phi((k + 1/2 - N q) / sqrt(N q (1 - q)))
    (de Moivre-Laplace; e.g. Feller 1968, An Introduction to Probability Theory and Its
    Applications, vol. 1, 3rd ed., Wiley, ch. VII), evaluated in log space (``log_ndtr``) so that
    it neither overflows nor underflows. Its error in sigma is of order the skewness term
    abs(1 - 2q) z^2 / (6 sqrt(N q (1 - q))), < 1e-3 sigma for z < 10 and 0.01 <= q <= 0.99 at N > 1e7.
    Where p > 1/2 sigma comes from the upper tail 1 - p (``bdtrc``); where a tail is below the
    smallest double, from the signed likelihood root (see the code), so sigma stays finite and
    monotone in N2 for N > 0.
    """
    n_pre = np.asarray(n_pre).astype(np.int64, copy=False)
    n_post = np.asarray(n_post).astype(np.int64, copy=False)
    q = np.asarray(q, dtype=float)
    n_pre, n_post, q = np.broadcast_arrays(n_pre, n_post, q)
    n_tot = n_pre + n_post
    big = n_tot > WINDOW_NORMAL_LIMIT
    with np.errstate(divide="ignore", invalid="ignore"):
        small_n = np.where(big, 0, n_tot)
        small_k = np.where(big, 0, n_post)
        logp = np.log(special.bdtr(small_k, small_n, q))
        if np.any(big):
            nb = n_tot.astype(float)
            z = (n_post + 0.5 - nb * q) / np.sqrt(nb * q * (1.0 - q))
            logp = np.where(big, special.log_ndtr(z), logp)
        logp = np.minimum(logp, 0.0)
        sigma = -special.ndtri_exp(logp)
        # Where p > 1/2 (post-event window brighter than expected, e.g. a flare) sigma is taken from the
        # upper tail P(X > N2) = 1 - p, which keeps its precision where p rounds to 1 (sigma would be -inf).
        upper = logp > -_LN2
        if np.any(upper):
            tail = special.bdtrc(small_k, small_n, q)
            sigma = np.where(upper, special.ndtri(np.where(upper, tail, 0.5)), sigma)
        # Tails below the smallest double (|sigma| > ~37): the signed root of the binomial deviance,
        # r = sign(N q - N2) sqrt(2 [N2 ln(N2/Nq) + N1 ln(N1/N(1-q))]) (signed likelihood root;
        # Barndorff-Nielsen & Cox 1994, Inference and Asymptotics, ch. 6), monotone in N2, so that
        # thresholds calibrated deep in a tail (a flare filling the window) stay ordered.
        lost = ~np.isfinite(sigma) & (n_tot > 0)
        if np.any(lost):
            nf = n_tot.astype(float)
            dev = special.xlogy(n_post, n_post / (nf * q)) + special.xlogy(n_pre, n_pre / (nf * (1.0 - q)))
            r = np.sign(nf * q - n_post) * np.sqrt(2.0 * np.maximum(dev, 0.0))
            sigma = np.where(lost, r, sigma)
            if np.any(big):
                sigma = np.where(big & upper, -z, sigma)     # normal limit: Phi^-1(1 - Phi(z)) = -z
    return sigma, logp


def window_root(n_pre, n_post, q):
    r"""Fast approximate significance of the window test: the signed likelihood root with continuity correction.

    .. math:: r = \mathrm{sign}(Nq - x)\sqrt{2\left[x \ln\frac{x}{Nq} + (N - x)\ln\frac{N - x}{N(1 - q)}\right]},
              \qquad x = N_2 + \tfrac12,

    the signed root of the binomial deviance (signed likelihood root; Barndorff-Nielsen & Cox 1994,
    Inference and Asymptotics, ch. 6) at the continuity-corrected count, close to
    :func:`window_sigma` (within ~0.1 sigma above a few tens of counts) at a few per cent of its cost.
    The onset scan (:mod:`synthcorona.dimming.scan`) uses it to find the most significant trial of
    each realisation and then evaluates :func:`window_sigma` there. ``N = 0`` gives 0. No argument checks.
    """
    n_pre = np.asarray(n_pre, dtype=float)
    n_post = np.asarray(n_post, dtype=float)
    q = np.asarray(q, dtype=float)
    nt = n_pre + n_post
    x = np.minimum(n_post + 0.5, nt)
    rest = nt - x
    with np.errstate(divide="ignore", invalid="ignore"):
        dev = special.xlogy(x, x / (nt * q)) + special.xlogy(rest, rest / (nt * (1.0 - q)))
        r = np.sign(nt * q - x) * np.sqrt(2.0 * np.maximum(dev, 0.0))
    return np.where(nt > 0, r, 0.0)


def window_test_size(mu_pre, mu_post, alpha) -> float:
    r"""Exact false-alarm probability of the conditional window test at level ``alpha`` without an event.

    Counts :math:`N_1 \sim \mathrm{Poisson}(\mu_1)` and :math:`N_2 \sim \mathrm{Poisson}(\mu_2)`;
    given :math:`N = N_1 + N_2` the post-event count is :math:`\mathrm{Bin}(N, q_0)` with
    :math:`q_0 = \mu_2/(\mu_1 + \mu_2)` (Przyborowski & Wilenski 1940, Biometrika 31, 313). The test
    rejects when the p-value :math:`P(X \le N_2 \mid N)` is <= ``alpha``, i.e. when
    :math:`N_2 \le k_\alpha(N)`, the largest k with :math:`P(X \le k) \le \alpha`. Its size is

    .. math:: \sum_N \mathrm{Poisson}(N; \mu_1 + \mu_2)\, P\left(X \le k_\alpha(N) \mid N\right) \le \alpha,

    summed over N within 12 standard deviations of the mean (the rest has probability < 1e-30); below
    ``alpha`` by the discreteness of the binomial. Above :data:`WINDOW_NORMAL_LIMIT` total counts
    (where the test itself uses the normal approximation) ``alpha`` is returned.
    """
    mu1, mu2 = float(mu_pre), float(mu_post)
    mu = mu1 + mu2
    if mu <= 0:
        return 0.0
    if mu > WINDOW_NORMAL_LIMIT:
        return float(alpha)
    q0 = mu2 / mu
    half = 12.0 * math.sqrt(mu) + 12.0
    n = np.arange(max(int(mu - half), 0), int(mu + half) + 2)
    k = stats.binom.ppf(alpha, n, q0)                # smallest k with P(X <= k) >= alpha
    cdf = special.bdtr(np.maximum(k, 0).astype(np.int64), n, q0)
    k = np.where(cdf <= alpha, k, k - 1)             # largest k with P(X <= k) <= alpha
    size = np.where(k >= 0, special.bdtr(np.maximum(k, 0).astype(np.int64), n, q0), 0.0)
    return float(np.sum(stats.poisson.pmf(n, mu) * size))


def window_test(n_pre, t_pre, n_post, t_post) -> WindowTest:
    r"""Exact conditional test that the post-event count rate is lower than the pre-event one.

    Under equal rates, :math:`N_2 \mid N_1 + N_2 \sim \mathrm{Bin}(N_1 + N_2,\ t_2/(t_1 + t_2))`
    (Przyborowski & Wilenski 1940, Biometrika 31, 313); the p-value is
    :math:`P(X \le N_2)` -- the same as ``scipy.stats.binomtest(N2, N1 + N2, t2/(t1 + t2),
    alternative="less")`` -- and ``sigma`` its one-sided Gaussian equivalent
    :math:`\Phi^{-1}(1 - p)` (finite for any counts with N1 + N2 > 0; beyond ``|sigma|`` ~ 37 the signed likelihood root). Vectorised: all arguments broadcast.

    Parameters
    ----------
    n_pre, n_post : array_like of whole numbers
        Counts in the pre- and post-event windows.
    t_pre, t_post : Quantity [time]
        Window exposures (> 0).
    """
    n1 = count_values("n_pre", n_pre, integer=True)
    n2 = count_values("n_post", n_post, integer=True)
    t1 = time_values("t_pre", t_pre)
    t2 = time_values("t_post", t_post)
    n1, n2, t1, t2 = _broadcast(n_pre=n1, n_post=n2, t_pre=t1, t_post=t2)
    sigma, logp = window_sigma(n1, n2, t2 / (t1 + t2))
    return WindowTest(np.exp(logp), sigma)


def step_snr(rate_pre, rate_post, t_pre, t_post) -> np.ndarray:
    r"""Expected signal-to-noise of a step dimming in pure Poisson noise (Gaussian limit).

    .. math:: S/N = \frac{r_1 - r_2}{\sqrt{r_1/t_1 + r_2/t_2}}

    the difference of the two window rates over its Poisson standard deviation: the
    "simple" on/off significance of Li & Ma (1983, ApJ 272, 317, eq. 5) written with
    expected rates. Positive for a dimming. Arguments broadcast.

    Parameters
    ----------
    rate_pre, rate_post : Quantity [ct/s]
        Expected count rates (>= 0, not both zero) before and after.
    t_pre, t_post : Quantity [time]
        Window exposures (> 0).
    """
    r1 = rate_values("rate_pre", rate_pre)
    r2 = rate_values("rate_post", rate_post)
    t1 = time_values("t_pre", t_pre)
    t2 = time_values("t_post", t_post)
    r1, r2, t1, t2 = _broadcast(rate_pre=r1, rate_post=r2, t_pre=t1, t_post=t2)
    var = r1 / t1 + r2 / t2
    if np.any(var == 0):
        raise InputError("rate_pre and rate_post are both zero: the S/N is undefined")
    return (r1 - r2) / np.sqrt(var)


# ----------------------------------------------------------------------------- likelihoods
def poisson_loglike(counts, model_counts, full: bool = False, axis=-1) -> np.ndarray:
    r"""Poisson log-likelihood of ``counts`` given expected ``model_counts``, summed over ``axis``.

    ``full=False`` (default): :math:`\ln L = \sum (n \ln m - m)`, the part that depends on
    the model; ``-2 ln L`` is the C-statistic of Cash (1979, ApJ 228, 939),
    :math:`C = 2\sum(m - n \ln m)` (see :func:`cash_statistic`). ``full=True`` adds the
    data-only term :math:`-\sum \ln n!` (``scipy.special.gammaln(n + 1)``), giving the
    exact :math:`\ln \prod_i \mathrm{Poisson}(n_i; m_i)`. Bins with ``m = 0`` contribute
    0 if ``n = 0`` and ``-inf`` otherwise.
    """
    n = count_values("counts", counts)
    m = count_values("model_counts", model_counts)
    n, m = _broadcast(counts=n, model_counts=m)
    with np.errstate(divide="ignore"):
        ll = special.xlogy(n, m) - m
    if full:
        ll = ll - special.gammaln(n + 1.0)
    return np.sum(ll, axis=axis)


def cash_statistic(counts, model_counts, axis=-1) -> np.ndarray:
    r"""Cash (1979, ApJ 228, 939) C-statistic :math:`C = 2\sum(m - n \ln m)` over ``axis``.

    Equal to ``-2 * poisson_loglike(counts, model_counts)``; differences of C between
    nested models are likelihood-ratio statistics.
    """
    return -2.0 * poisson_loglike(counts, model_counts, axis=axis)


def likelihood_templates(baseline, dimming, fit_scale: bool):
    """Checked templates ``(B, D)`` of :func:`likelihood_ratio` as float arrays (n_bins,).

    ``baseline`` B: expected counts of the null model per bin (> 0 everywhere); ``dimming`` D:
    expected count decrement per unit depth (finite, not zero everywhere and, with
    ``fit_scale``, not proportional to B, where depth and normalisation would be degenerate).
    """
    B = count_values("baseline", baseline)
    D = dimming.value if isinstance(dimming, u.Quantity) else dimming
    D = np.asarray(D, dtype=float)
    check_finite("dimming", D)
    if B.ndim != 1 or D.shape != B.shape:
        raise InputError(f"baseline and dimming must be 1-D templates of equal length; got shapes {B.shape} "
                         f"and {D.shape}")
    if np.any(B <= 0):
        i = int(np.flatnonzero(B <= 0)[0])
        raise InputError(f"baseline must be > 0 in every bin (expected counts of the null model); bin {i} is {B[i]:g}")
    if not np.any(D != 0):
        raise InputError("dimming template is zero everywhere: there is no dimming to fit")
    if fit_scale:
        r = D / B
        SB, SD, Q = B.sum(), D.sum(), np.sum(D * r)
        if SB * Q - SD**2 <= 1e-12 * SB * Q:
            raise InputError("dimming template is proportional to baseline: with fit_scale=True depth and "
                             "normalisation are degenerate; use fit_scale=False or a template with a time profile")
    return B, D


def likelihood_ratio(counts, baseline, dimming, *, fit_scale: bool = True, max_iter: int = 50,
                     tol: float = 1e-8) -> LikelihoodRatio:
    r"""Likelihood-ratio test of "baseline minus dimming" against "baseline only", per realisation.

    Null :math:`\mu = a B`, alternative :math:`\mu = a B - \delta D` with :math:`\delta \ge 0`,
    both fitted by maximum Poisson likelihood (Cash 1979, ApJ 228, 939, C-statistic);
    ``ts = C_null - C_alt``. With ``fit_scale=False`` the normalisation is fixed at
    ``a = 1``. Vectorised over realisations: closed-form 2x2 Newton steps for all rows at
    once, iterating only rows not yet converged. A row stops when the self-concordance bound
    on the remaining C gap after its last full Newton step, :math:`2(\lambda/(1-\lambda))^4`
    with :math:`\lambda^2 = g^T H^{-1} g` (Boyd & Vandenberghe 2004, Convex Optimization,
    sec. 9.6.4), is below ``tol``, so ``ts`` is accurate to ``tol`` (integer counts). Under the null, ``ts`` is asymptotically
    :math:`\tfrac12\chi^2_0 + \tfrac12\chi^2_1` (Chernoff 1954, Ann. Math. Stat. 25, 573).

    Parameters
    ----------
    counts : array (n_bins,) or (n_realisations, n_bins)
        Observed counts (>= 0).
    baseline : array (n_bins,)
        Expected counts of the null model per bin, B > 0 (quiescent + flare + background).
    dimming : array (n_bins,)
        Expected count decrement per unit depth, D (e.g. quiescent counts x time profile).
    fit_scale : bool
        Fit the baseline normalisation ``a`` (default) or fix it at 1.
    """
    B, D = likelihood_templates(baseline, dimming, fit_scale)
    n = count_values("counts", counts)
    if n.shape[-1:] != B.shape or n.ndim not in (1, 2):
        raise InputError(f"counts has shape {n.shape}; expected ({B.size},) or (n_realisations, {B.size}) "
                         f"to match the templates")
    max_iter = check_count("max_iter", max_iter)
    check_range("tol", tol, lo=0.0, inclusive=False)
    res = fit_likelihood_ratio(np.atleast_2d(n), B, D, fit_scale, max_iter, float(tol))
    if n.ndim == 1:
        return LikelihoodRatio(*(x[0] for x in res))
    return res
