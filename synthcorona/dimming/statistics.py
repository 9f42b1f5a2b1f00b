r"""Statistics of dimming detection: tests, thresholds and detection probabilities.

The physics (quiescent rate, dimming depth and profile, flare) is given here as arrays of
expected count rates; everything below is about counting statistics.

Tests
-----
*Window comparison* (:func:`window_test`). Counts :math:`N_1` over exposure :math:`t_1`
before the event and :math:`N_2` over :math:`t_2` after. Under :math:`H_0` (equal rates)
:math:`N_2` conditional on :math:`N = N_1 + N_2` is binomial,
:math:`N_2 \mid N \sim \mathrm{Bin}(N, t_2/(t_1 + t_2))`, whatever the common rate: the
exact conditional test for comparing two Poisson rates (Przyborowski & Wilenski 1940,
Biometrika 31, 313). The one-sided p-value of a *lower* post-event rate is
:math:`P(X \le N_2)` (``scipy.special.bdtr``), and its Gaussian-equivalent significance
is :math:`\sigma = \Phi^{-1}(1 - p)` (computed from :math:`\ln p` with
``scipy.special.ndtri_exp``, so it stays finite down to p ~ 1e-308; below that it is
``inf``). For :math:`N > 10^7` (e.g. the Sun at 1 AU, ~1e10 counts per window, where
``bdtr`` overflows its integer arguments and returns NaN) the binomial CDF is replaced by the
normal approximation with continuity correction, evaluated in log space
(:data:`WINDOW_NORMAL_LIMIT`, :func:`_window_sigma`). In the Gaussian limit the expected significance of a step is :func:`step_snr`,
:math:`(r_1 - r_2)/\sqrt{r_1/t_1 + r_2/t_2}` -- the "simple" on/off significance of
Li & Ma (1983, ApJ 272, 317, their eq. 5) with expected instead of observed counts.

*Likelihood ratio* (:func:`likelihood_ratio`). Templates of expected counts per bin: a
baseline :math:`B` (quiescent + flare) and a dimming template :math:`D` (expected count
*decrement* per unit depth). Null model :math:`\mu = a B`; alternative
:math:`\mu = a B - \delta D` with :math:`\delta \ge 0`. Both are fitted by maximum Poisson
likelihood, i.e. by minimising the C-statistic of Cash (1979, ApJ 228, 939),
:math:`C = 2 \sum_i (\mu_i - n_i \ln \mu_i)`; the test statistic is
:math:`TS = C_{null} - C_{alt} \ge 0`. The null fit is closed-form
(:math:`a = \sum n / \sum B`). The alternative is a two-parameter convex problem solved for
all realisations at once: a Fisher-scoring start from the null fit, then Newton steps with
the observed Hessian, kept inside :math:`\mu > 0` by a fraction-to-boundary rule (positivity
reduces to two linear constraints on :math:`(a, \delta)` at the extreme values of
:math:`D/B`). Because :math:`C` is convex in :math:`(a, \delta)`, the constrained optimum
is the unconstrained one when :math:`\hat\delta \ge 0` and the null fit otherwise
(then TS = 0). Under :math:`H_0` the boundary puts TS asymptotically at
:math:`\tfrac12\chi^2_0 + \tfrac12\chi^2_1` (Chernoff 1954, Ann. Math. Stat. 25, 573; Self &
Liang 1987, JASA 82, 605).

Thresholds and detection probability
------------------------------------
Neither test's nominal distribution is trusted: flares, trends and red noise break the
equal-rate null of the window test and the asymptotics of the likelihood ratio. The
detection threshold is calibrated empirically (:func:`calibrate_threshold`): simulate the
light curve *without* the event, and take the statistic value exceeded by a fraction
``false_alarm`` of the simulations (an order statistic; its uncertainty from the binomial
spread of the rank, the distribution-free quantile interval, e.g. Conover 1999, Practical
Nonparametric Statistics, section 3.2). :func:`detection_probability` then measures the
fraction of simulations *with* the event above the threshold (injection--recovery), with
its binomial standard error and the Wilson (1927, JASA 22, 209) score interval.

Exact data reduction: a window statistic depends only on the window sums, which are drawn
directly as Poisson variables (see :mod:`synthcorona.dimming.noise`); the likelihood ratio
depends on the counts only through the sums over bins sharing the same ratio
:math:`D_i/B_i` (since :math:`\ln(aB_i - \delta D_i) = \ln B_i + \ln(a - \delta D_i/B_i)`),
so such bins (e.g. all pre-event bins, where :math:`D = 0`) are merged before simulating.
Both reductions leave the statistic's distribution unchanged.

:func:`minimum_detectable` finds the event parameter (e.g. CME mass) at which the detection
probability reaches a target, with :func:`scipy.optimize.brentq` on the log of the
parameter. Every evaluation uses the same seed (common random numbers) and the Poisson
inversion sampler, whose counts are monotone in the expected counts, so the estimated
detection probability is a monotone step function of the dimming depth.
"""
from __future__ import annotations

import hashlib
import math
from typing import Callable, Iterable, NamedTuple

import astropy.units as u
import numpy as np
import xarray as xr
from scipy import optimize, special

from ..errors import BracketError, InputError
from ..validation import check_finite, check_range
from .noise import (
    MEMORY_BUDGET,
    CountSampler,
    RedNoise,
    as_seed_sequence,
    bin_widths,
    check_count,
    child_sequence,
    rate_values,
    time_values,
)

__all__ = [
    "MIN_EXCEEDANCES", "WindowTest", "LikelihoodRatio", "Threshold",
    "window_test", "step_snr", "poisson_loglike", "cash_statistic", "likelihood_ratio",
    "calibrate_threshold", "detection_probability", "minimum_detectable",
]

#: Calibration needs at least this many expected null exceedances (false_alarm * n_realisations).
MIN_EXCEEDANCES = 10
_WILSON_Z = 1.0  # 1-sigma (68.27 %) Wilson score interval
STATISTICS = ("window", "likelihood")


class WindowTest(NamedTuple):
    """Result of :func:`window_test`: one-sided p-value and Gaussian-equivalent significance."""

    p_value: np.ndarray
    sigma: np.ndarray


class LikelihoodRatio(NamedTuple):
    """Result of :func:`likelihood_ratio`, one value per realisation.

    ``ts`` = C_null - C_alt (>= 0); ``delta`` the constrained (>= 0) maximum-likelihood
    depth; ``delta_unconstrained`` the unconstrained one (unbiased for averaging);
    ``delta_error`` its standard error from the observed information; ``scale`` the
    fitted baseline normalisation a; ``converged`` whether the Newton decrement fell
    below ``tol``.
    """

    ts: np.ndarray
    delta: np.ndarray
    delta_unconstrained: np.ndarray
    delta_error: np.ndarray
    scale: np.ndarray
    converged: np.ndarray


class Threshold(NamedTuple):
    """Result of :func:`calibrate_threshold`.

    ``threshold``: detect when statistic > threshold. ``threshold_error``: half the spread of
    the order statistics at rank +-sqrt(n alpha (1 - alpha)) (binomial rank error).
    ``false_alarm``: requested; ``false_alarm_achieved``: fraction of the calibration
    simulations above the threshold (<= requested; lower when the statistic has ties);
    ``false_alarm_error``: binomial standard error sqrt(alpha (1 - alpha) / n).
    """

    threshold: float
    threshold_error: float
    false_alarm: float
    false_alarm_achieved: float
    false_alarm_error: float
    n_realisations: int


# ----------------------------------------------------------------------------- argument helpers
def _counts(name: str, value, integer: bool = False) -> np.ndarray:
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


def _check_false_alarm(false_alarm, n: int) -> float:
    check_range("false_alarm", false_alarm, lo=0.0, hi=1.0, inclusive=False)
    alpha = float(false_alarm)
    if alpha * n < MIN_EXCEEDANCES:
        need = int(math.ceil(MIN_EXCEEDANCES / alpha))
        raise InputError(
            f"false_alarm={alpha:g} with n_realisations={n} expects {alpha * n:.3g} null exceedances; "
            f"the threshold needs >= {MIN_EXCEEDANCES}: use n_realisations >= {need}")
    return alpha


# ----------------------------------------------------------------------------- window test
#: Above this total count N1 + N2 the window test uses the normal approximation to the binomial
#: (``special.bdtr`` returns NaN once N exceeds the C int range, ~2.1e9).
WINDOW_NORMAL_LIMIT = 1e7


_LN2 = math.log(2.0)


def _window_sigma(n_pre, n_post, q):
    """Significance (sigma) of the exact conditional test, no checks. ``q = t_post/(t_pre+t_post)``.

    For N = N1 + N2 > :data:`WINDOW_NORMAL_LIMIT` the binomial CDF is replaced by the normal
    approximation with continuity correction, P(X <= k) ~ Phi((k + 1/2 - N q) / sqrt(N q (1 - q)))
    (de Moivre-Laplace; e.g. Feller 1968, An Introduction to Probability Theory and Its
    Applications, vol. 1, 3rd ed., Wiley, ch. VII), evaluated in log space (``log_ndtr``) so that
    it neither overflows nor underflows. Its error in sigma is of order the skewness term
    |1 - 2q| z^2 / (6 sqrt(N q (1 - q))), < 1e-3 sigma for z < 10 and 0.01 <= q <= 0.99 at N > 1e7.
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
    n1 = _counts("n_pre", n_pre, integer=True)
    n2 = _counts("n_post", n_post, integer=True)
    t1 = time_values("t_pre", t_pre)
    t2 = time_values("t_post", t_post)
    n1, n2, t1, t2 = _broadcast(n_pre=n1, n_post=n2, t_pre=t1, t_post=t2)
    sigma, logp = _window_sigma(n1, n2, t2 / (t1 + t2))
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
    n = _counts("counts", counts)
    m = _counts("model_counts", model_counts)
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


def _templates(baseline, dimming, fit_scale: bool):
    B = _counts("baseline", baseline)
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
    B, D = _templates(baseline, dimming, fit_scale)
    n = _counts("counts", counts)
    if n.shape[-1:] != B.shape or n.ndim not in (1, 2):
        raise InputError(f"counts has shape {n.shape}; expected ({B.size},) or (n_realisations, {B.size}) "
                         f"to match the templates")
    max_iter = check_count("max_iter", max_iter)
    check_range("tol", tol, lo=0.0, inclusive=False)
    res = _lr_fit(np.atleast_2d(n), B, D, fit_scale, max_iter, float(tol))
    if n.ndim == 1:
        return LikelihoodRatio(*(x[0] for x in res))
    return res


#: Realisations fitted together by _lr_fit: the (rows, bins) work arrays of a block stay in the CPU
#: cache across Newton iterations (about 2x faster than one pass over 10,000 x 1000 at once).
LR_BLOCK = 128


def _lr_fit(n, B, D, fit_scale, max_iter=50, tol=1e-8) -> LikelihoodRatio:
    """Core of :func:`likelihood_ratio` (no argument checks). ``n`` counts (k, m), any numeric dtype.

    Rows are fitted in blocks of ``LR_BLOCK`` (each row's fit is independent of the others).
    """
    k = n.shape[0]
    if k <= LR_BLOCK:
        return _lr_fit_block(np.asarray(n, dtype=float), B, D, fit_scale, max_iter, tol)
    parts = [_lr_fit_block(np.asarray(n[i:i + LR_BLOCK], dtype=float), B, D, fit_scale, max_iter, tol)
             for i in range(0, k, LR_BLOCK)]
    return LikelihoodRatio(*(np.concatenate(field) for field in zip(*parts)))


def _lr_fit_block(n, B, D, fit_scale, max_iter=50, tol=1e-8) -> LikelihoodRatio:
    """Newton fit of one block of realisations for :func:`_lr_fit`. ``n`` float (k, m).

    With s = a - delta r (r = D/B, so mu = B s), the Cash gradient and observed information
    need only n/s and n/s^2 against [1, r] and [1, r, r^2]: two elementwise passes and two
    small matrix products per Newton iteration.
    """
    k, m = n.shape
    r = D / B
    r_ext = (float(r.max()), float(r.min()))
    SB, SD, Q = float(B.sum()), float(D.sum()), float(np.sum(D * r))
    R2 = np.stack([np.ones(m), r], axis=1)
    R3 = np.stack([np.ones(m), r, r * r], axis=1)
    P = np.ascontiguousarray(np.stack([np.ones(m), -r]))  # s = [a, delta] @ P in one BLAS pass
    N = n.sum(axis=1)
    ok = N > 0 if fit_scale else np.ones(k, dtype=bool)
    a0 = np.where(ok, N / SB, 0.0) if fit_scale else np.ones(k)
    a0_safe = np.where(ok, a0, 1.0)
    # Start: one Fisher-scoring step from the null fit (a0, 0); exact in the Gaussian limit.
    g_d = -SD + (n @ r) / a0_safe
    if fit_scale:
        det0 = SB * Q - SD**2
        da = -a0_safe * SD * g_d / det0
        dd = -a0_safe * SB * g_d / det0
    else:
        da = np.zeros(k)
        dd = -a0_safe * g_d / Q
    a = a0_safe.copy()
    d = np.zeros(k)
    t = _step_fraction(a, d, da, dd, r_ext)
    a += t * da
    d += t * dd
    var_d = np.full(k, np.nan)
    converged = ~ok
    # Self-concordance (Boyd & Vandenberghe 2004, Convex Optimization, sec. 9.6; -n ln s is
    # self-concordant for integer n >= 1): after a full Newton step from decrement lam, the
    # remaining C gap is <= 2 (lam / (1 - lam))^4. Stop when that is below tol.
    lam_stop = 1.0 / (1.0 + 1.0 / (0.5 * tol) ** 0.25)
    act = np.flatnonzero(ok)
    for _ in range(max_iter):
        if act.size == 0:
            break
        nn = n if act.size == k else n[act]
        aa, dd_ = a[act], d[act]
        s_ = np.column_stack([aa, dd_]) @ P
        w = np.divide(nn, s_)
        g1, gr = (w @ R2).T
        w /= s_
        H = w @ R3
        del w
        g_a = SB - g1
        g_d = -SD + gr
        Haa, Had, Hdd = H[:, 0], -H[:, 1], H[:, 2]
        with np.errstate(divide="ignore", invalid="ignore"):
            if fit_scale:
                det = Haa * Hdd - Had * Had
                step_a = -(Hdd * g_a - Had * g_d) / det
                step_d = -(Haa * g_d - Had * g_a) / det
                v_d = Haa / det
            else:
                det = Hdd
                step_a = np.zeros(act.size)
                step_d = -g_d / Hdd
                v_d = 1.0 / Hdd
            bad = ~(det > 0) | ~np.isfinite(step_a) | ~np.isfinite(step_d)
            if np.any(bad):  # observed information singular (e.g. all counts in one bin): Fisher scoring there
                F = (1.0 / s_[bad]) @ np.stack([B, B * r, B * r * r], axis=1)
                Faa, Fad, Fdd = F[:, 0], -F[:, 1], F[:, 2]
                gb_a, gb_d = g_a[bad], g_d[bad]
                if fit_scale:
                    fdet = Faa * Fdd - Fad * Fad
                    step_a[bad] = -(Fdd * gb_a - Fad * gb_d) / fdet
                    step_d[bad] = -(Faa * gb_d - Fad * gb_a) / fdet
                    v_d[bad] = Faa / fdet
                else:
                    step_d[bad] = -gb_d / Fdd
                    v_d[bad] = 1.0 / Fdd
        del s_
        lam2 = -(g_a * step_a + g_d * step_d)
        t = _step_fraction(aa, dd_, step_a, step_d, r_ext)
        a[act] = aa + t * step_a
        d[act] = dd_ + t * step_d
        var_d[act] = v_d
        done = (np.sqrt(np.maximum(lam2, 0.0)) < lam_stop) & (t == 1.0) & ~bad
        converged[act[done]] = True
        act = act[~done]
    # TS = C_null - C_alt = 2 [(a0 - a) SB + delta SD + sum n ln(s) - N ln a0] where delta > 0.
    ts = np.zeros(k)
    pos = np.flatnonzero(ok & (d > 0))
    if pos.size:
        ap, dp = a[pos], d[pos]
        X = np.column_stack([ap, dp]) @ P
        np.log(X, out=X)
        lnl = np.einsum("ij,ij->i", n[pos] if pos.size < k else n, X)
        del X
        ts[pos] = 2.0 * ((a0_safe[pos] - ap) * SB + dp * SD + lnl - N[pos] * np.log(a0_safe[pos]))
        np.maximum(ts, 0.0, out=ts)
    delta = np.maximum(d, 0.0)
    scale = np.where(d > 0, a, a0)
    return LikelihoodRatio(ts, delta, np.where(ok, d, 0.0), np.sqrt(var_d), scale, converged)


def _step_fraction(a, d, da, dd, r_ext):
    """Largest step fraction <= 1 keeping a - d r > 0 at both extreme r (0.95 of the way to the boundary)."""
    t = np.ones_like(a)
    for rx in r_ext:
        c = a - d * rx
        dc = da - dd * rx
        with np.errstate(divide="ignore", invalid="ignore"):
            lim = np.where(dc < 0, -0.95 * c / dc, np.inf)
        np.minimum(t, lim, out=t)
    return t


# ----------------------------------------------------------------------------- thresholds
def _threshold_from_null(stats_null: np.ndarray, alpha: float) -> Threshold:
    s = np.sort(stats_null)
    n = s.size
    k = int(math.floor(alpha * n + 1e-9))  # allowed exceedances
    idx = n - k - 1
    thr = float(s[idx])
    achieved = float(np.count_nonzero(s > thr)) / n
    m = math.sqrt(n * alpha * (1.0 - alpha))
    lo = s[max(int(round(idx - m)), 0)]
    hi = s[min(int(round(idx + m)), n - 1)]
    thr_err = float(hi - lo) / 2.0 if np.isfinite(hi - lo) else math.inf
    return Threshold(thr, thr_err, alpha, achieved, math.sqrt(alpha * (1.0 - alpha) / n), n)


def _collect(statistic_fn, chunks: Iterable[np.ndarray], n: int) -> np.ndarray:
    out = np.empty(n)
    pos = 0
    for chunk in chunks:
        s = np.asarray(statistic_fn(chunk), dtype=float).reshape(-1)
        if s.size != len(chunk):
            raise InputError(f"statistic_fn returned {s.size} values for a chunk of {len(chunk)} realisations; "
                             "it must return one value per realisation (row)")
        if np.any(np.isnan(s)):
            raise InputError("statistic_fn returned NaN for some realisations")
        if pos + s.size > n:
            raise InputError(f"null_sampler yielded more than n_realisations={n} realisations")
        out[pos:pos + s.size] = s
        pos += s.size
    if pos != n:
        raise InputError(f"null_sampler yielded {pos} realisations, expected n_realisations={n}")
    return out


def calibrate_threshold(statistic_fn: Callable[[np.ndarray], np.ndarray], null_sampler, false_alarm,
                        n_realisations, seed=None, *, chunk_size=None) -> Threshold:
    """Threshold on a statistic with a given false-alarm probability, from event-free simulations.

    The threshold is the order statistic exceeded by ``floor(false_alarm * n)`` of the ``n``
    null simulations (empirical ``1 - false_alarm`` quantile; detect when statistic >
    threshold, so ties never raise the false-alarm rate above the request). Its standard
    error comes from the binomial spread of the rank, sqrt(n alpha (1 - alpha)) (the
    distribution-free quantile interval, Conover 1999, Practical Nonparametric Statistics,
    sec. 3.2); the false-alarm fraction's own standard error is sqrt(alpha (1 - alpha) / n).

    Parameters
    ----------
    statistic_fn : callable
        ``statistic_fn(chunk) -> (rows,)``: larger = more dimming-like; ``chunk`` is a
        (rows, columns) array of simulated counts.
    null_sampler : callable
        ``null_sampler(n_realisations, seed, chunk_size)`` -> iterable of count chunks of the
        event-free light curve, e.g. a :class:`~synthcorona.dimming.noise.CountSampler`;
        ``seed`` arrives as a :class:`numpy.random.SeedSequence`.
    false_alarm : float in (0, 1)
        Requested false-alarm probability; ``false_alarm * n_realisations`` must be >= 10.
    n_realisations : int
    seed : None, int, SeedSequence or numpy Generator
    chunk_size : int, optional
        Passed to ``null_sampler`` (``None``: its default, within the memory budget).
    """
    n = check_count("n_realisations", n_realisations)
    alpha = _check_false_alarm(false_alarm, n)
    if not callable(statistic_fn):
        raise InputError(f"statistic_fn={statistic_fn!r} must be callable")
    if not callable(null_sampler):
        raise InputError(f"null_sampler={null_sampler!r} must be callable (n_realisations, seed, chunk_size)")
    values = _collect(statistic_fn, null_sampler(n, as_seed_sequence(seed), chunk_size), n)
    return _threshold_from_null(values, alpha)


# ----------------------------------------------------------------------------- detection probability
class _Setup:
    """Validated settings shared by every case / parameter value of one detection calculation."""

    def __init__(self, n_bins, bin_width, false_alarm, n_realisations, statistic, windows, seed, background,
                 red_noise, start_time, fit_scale, chunk_size, memory_budget):
        self.n = check_count("n_realisations", n_realisations)
        self.alpha = _check_false_alarm(false_alarm, self.n)
        if statistic not in STATISTICS:
            raise InputError(f"statistic={statistic!r} must be one of {STATISTICS}")
        self.statistic = statistic
        self.widths = bin_widths(bin_width, n_bins)
        self.t0 = float(time_values("start_time", start_time, positive=False))
        edges = self.t0 + np.concatenate([[0.0], np.cumsum(self.widths)])
        self.centres = 0.5 * (edges[1:] + edges[:-1])
        self.edges = edges
        self.bg = None
        if background is not None:
            bgr = rate_values("background", background)
            if bgr.ndim not in (0, 1) or (bgr.ndim == 1 and bgr.shape != (n_bins,)):
                raise InputError(f"background has shape {bgr.shape}; give a scalar or one rate per bin, ({n_bins},)")
            self.bg = np.broadcast_to(bgr, (n_bins,)) * self.widths
        self.red_noise = RedNoise.coerce(red_noise)
        self.fit_scale = bool(fit_scale)
        self.chunk_size = None if chunk_size is None else check_count("chunk_size", chunk_size)
        self.memory_budget = check_count("memory_budget", memory_budget, lo=2**16)
        self.seq = as_seed_sequence(seed)
        self.null_seq = child_sequence(self.seq, 0)
        self.event_seq = child_sequence(self.seq, 1)
        self.windows = None
        if statistic == "window":
            self._set_windows(windows)
        elif windows is not None:
            raise InputError("windows applies only to statistic='window'; the likelihood statistic fits every bin")
        self.cache: dict = {}

    def _set_windows(self, windows):
        if windows is None:
            raise InputError("statistic='window' needs windows=((pre_start, pre_stop), (post_start, post_stop)) "
                             "as times (Quantity) on the light curve's clock")
        try:
            w = u.Quantity([u.Quantity(x, copy=False).to(u.s) for pair in windows for x in pair])
        except (TypeError, ValueError, u.UnitsError):
            raise InputError(f"windows={windows!r} must be ((pre_start, pre_stop), (post_start, post_stop)) with "
                             "time Quantities") from None
        if w.shape != (4,):
            raise InputError(f"windows must hold two (start, stop) pairs, got {w.size} values")
        w = w.value.reshape(2, 2)
        lo, hi = self.edges[0], self.edges[-1]
        labels = np.full(self.widths.size, -1, dtype=np.int64)
        for j, name in enumerate(("pre", "post")):
            start, stop = w[j]
            if not stop > start:
                raise InputError(f"windows[{j}] ({name}) = ({start:g} s, {stop:g} s): stop must be later than start")
            if start < lo - 1e-9 * abs(lo) or stop > hi + 1e-9 * abs(hi):
                raise InputError(f"windows[{j}] ({name}) = ({start:g} s, {stop:g} s) is outside the light curve "
                                 f"[{lo:g} s, {hi:g} s]")
            inside = (self.centres >= start) & (self.centres < stop)
            if not np.any(inside):
                raise InputError(f"windows[{j}] ({name}) = ({start:g} s, {stop:g} s) contains no bin centre: its "
                                 f"exposure ({stop - start:g} s) is shorter than a bin "
                                 f"({self.widths[np.argmin(np.abs(self.centres - start))]:g} s)")
            if np.any(labels[inside] >= 0):
                raise InputError(f"windows overlap: the pre window ({w[0, 0]:g}-{w[0, 1]:g} s) and post window "
                                 f"({w[1, 0]:g}-{w[1, 1]:g} s) share bins")
            labels[inside] = j
        self.windows = w
        self.labels = labels
        self.t_pre = float(self.widths[labels == 0].sum())
        self.t_post = float(self.widths[labels == 1].sum())
        self.q = self.t_post / (self.t_pre + self.t_post)

    # ---------------------------------------------------------------- one case
    def _sampler(self, mu, groups):
        return CountSampler.from_expected_counts(mu, background=self.bg, times=self.centres,
                                                 red_noise=self.red_noise, groups=groups)

    def _chunk(self, sampler):
        if self.chunk_size is not None:
            return sampler._round_chunk(self.chunk_size)
        return sampler.chunk_size(self.memory_budget)

    def statistic_for(self, mu_with, mu_without):
        """(statistic_fn, groups, cache key) for one case."""
        if self.statistic == "window":
            q = self.q

            def fn(chunk):
                return _window_sigma(chunk[:, 0], chunk[:, 1], q)[0]

            return fn, self.labels, ("window", _digest(mu_without))
        base = mu_without if self.bg is None else mu_without + self.bg
        dim = mu_without - mu_with
        try:
            B, D = _templates(base, dim, self.fit_scale)
        except InputError as err:
            raise InputError(f"statistic='likelihood' (baseline = expected_without_event [+ background], dimming "
                             f"= expected_without_event - expected_with_event, in counts per bin): {err}") from None
        ratio = D / B
        _, labels = np.unique(ratio, return_inverse=True)
        labels = labels.reshape(-1).astype(np.int64)
        n_groups = int(labels.max()) + 1
        if n_groups == B.size:
            groups, Bg, Dg = None, B, D
        else:
            groups = labels
            Bg = np.bincount(labels, weights=B, minlength=n_groups)
            Dg = np.bincount(labels, weights=D, minlength=n_groups)
        fit_scale = self.fit_scale

        def fn(chunk):
            return _lr_fit(chunk, Bg, Dg, fit_scale).ts

        # TS is unchanged when D is scaled by c > 0 (delta absorbs c): key on the normalised template.
        return fn, groups, ("likelihood", _digest(mu_without), _digest(D / np.abs(D).max()))

    def run(self, mu_with, mu_without):
        """Threshold (cached per null) and detection count for one case."""
        fn, groups, key = self.statistic_for(mu_with, mu_without)
        thr = self.cache.get(key)
        if thr is None:
            null = self._sampler(mu_without, groups)
            values = _collect(fn, null._iterate(self.n, self.null_seq, self._chunk(null)), self.n)
            thr = _threshold_from_null(values, self.alpha)
            self.cache[key] = thr
        event = self._sampler(mu_with, groups)
        hits = 0
        for chunk in event._iterate(self.n, self.event_seq, self._chunk(event)):
            hits += int(np.count_nonzero(fn(chunk) > thr.threshold))
        return thr, hits, event.method


def _digest(a: np.ndarray) -> str:
    return hashlib.sha1(np.ascontiguousarray(a, dtype=float).tobytes()).hexdigest()


def _wilson(k, n, z=_WILSON_Z):
    p = k / n
    den = 1.0 + z * z / n
    centre = (p + z * z / (2 * n)) / den
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / den
    return centre - half, centre + half


def _rates_2d(name, value, n_bins=None):
    r = rate_values(name, value)
    if r.ndim not in (1, 2) or r.shape[-1] < 1:
        raise InputError(f"{name} must be per-bin rates, shape (n_bins,) or (n_cases, n_bins); got {r.shape}")
    if n_bins is not None and r.shape[-1] != n_bins:
        raise InputError(f"{name} has {r.shape[-1]} bins but expected_with_event has {n_bins}")
    return r


def detection_probability(expected_with_event, expected_without_event, bin_width, false_alarm=0.01,
                          n_realisations=10_000, statistic="window", windows=None, seed=None, *,
                          background=None, red_noise=None, start_time=0 * u.s, fit_scale=True, case=None,
                          chunk_size=None, memory_budget=MEMORY_BUDGET) -> xr.Dataset:
    """Probability of detecting a dimming, by injection and recovery in simulated light curves.

    ``n_realisations`` Poisson realisations of the light curve *without* the event calibrate
    the detection threshold at ``false_alarm`` (:func:`calibrate_threshold`); as many of the
    light curve *with* the event (independent random numbers) give the fraction detected.
    Vectorised over realisations and processed in chunks within ``memory_budget``. Same
    seed => same numbers for any ``chunk_size``; cases share the random numbers (common
    random numbers), so with the default inversion sampler the probability is monotone in
    the dimming depth across cases.

    Parameters
    ----------
    expected_with_event, expected_without_event : Quantity [ct/s]
        Expected source count rate per bin, shape (n_bins,) or (n_cases, n_bins) (e.g. a grid
        of CME masses). ``expected_without_event`` may be (n_bins,) and shared by all cases
        (one calibration for the window statistic).
    bin_width : Quantity [time]
        Scalar or per-bin (> 0).
    false_alarm : float in (0, 1)
        False-alarm probability of the detection threshold; ``false_alarm * n_realisations >= 10``.
    n_realisations : int
        Realisations for the calibration and for the injection, each.
    statistic : {"window", "likelihood"}
        "window": significance (sigma) of the exact conditional test between ``windows``
        (:func:`window_test`). "likelihood": TS of :func:`likelihood_ratio` with baseline =
        without-event counts (+ background) and dimming template = without - with (so the
        injected depth is delta = 1).
    windows : ((pre_start, pre_stop), (post_start, post_stop)) of time Quantities
        Required for "window". Times on the light curve's clock (first bin's left edge at
        ``start_time``); a bin belongs to a window when its centre lies in [start, stop).
    seed : None, int, SeedSequence or numpy Generator
    background : Quantity [ct/s], scalar or (n_bins,), optional
        Background rate in every realisation (also in the likelihood baseline).
    red_noise : RedNoise or (amplitude, timescale), optional
        Multiplicative damped-random-walk variability of the source (Kelly et al. 2009).
    start_time : Quantity [time]
        Time of the left edge of the first bin (default 0 s).
    fit_scale : bool
        Likelihood statistic: fit the baseline normalisation (default) or fix it.
    case : array_like, optional
        Coordinate values of the case axis (e.g. the CME masses); Quantity allowed.
    chunk_size, memory_budget : optional
        Realisations per chunk (rounded up to whole blocks) or the memory budget (bytes)
        from which the default chunk size follows.

    Returns
    -------
    xarray.Dataset
        ``probability`` (P(detect)), ``probability_error`` (binomial sqrt(P(1-P)/n)),
        ``probability_lower``/``probability_upper`` (68 % Wilson 1927 score interval, useful
        near 0 and 1), ``threshold`` and ``threshold_error`` (statistic units),
        ``false_alarm_achieved`` and ``false_alarm_error`` of the calibration; for the window
        statistic also ``snr_expected`` (:func:`step_snr` of the with-event windows). Dimension
        ``case`` when several cases are given. Attributes record the settings and seed.
    """
    r_with = _rates_2d("expected_with_event", expected_with_event)
    n_bins = r_with.shape[-1]
    r_without = _rates_2d("expected_without_event", expected_without_event, n_bins)
    multi = r_with.ndim == 2 or r_without.ndim == 2
    rw = np.atleast_2d(r_with)
    ro = np.atleast_2d(r_without)
    if rw.shape[0] != ro.shape[0] and 1 not in (rw.shape[0], ro.shape[0]):
        raise InputError(f"expected_with_event has {rw.shape[0]} cases but expected_without_event has {ro.shape[0]}")
    n_cases = max(rw.shape[0], ro.shape[0])
    setup = _Setup(n_bins, bin_width, false_alarm, n_realisations, statistic, windows, seed, background,
                   red_noise, start_time, fit_scale, chunk_size, memory_budget)
    res = _run_cases(setup, rw * setup.widths, ro * setup.widths, n_cases)
    return _dataset(setup, res, multi, case, n_cases)


def _run_cases(setup: _Setup, mu_with, mu_without, n_cases):
    out = {k: np.empty(n_cases) for k in ("probability", "threshold", "threshold_error", "false_alarm_achieved",
                                          "false_alarm_error", "hits")}
    method = None
    for c in range(n_cases):
        mw = mu_with[c if mu_with.shape[0] > 1 else 0]
        mo = mu_without[c if mu_without.shape[0] > 1 else 0]
        thr, hits, method = setup.run(mw, mo)
        out["hits"][c] = hits
        out["probability"][c] = hits / setup.n
        out["threshold"][c] = thr.threshold
        out["threshold_error"][c] = thr.threshold_error
        out["false_alarm_achieved"][c] = thr.false_alarm_achieved
        out["false_alarm_error"][c] = thr.false_alarm_error
    if setup.statistic == "window":  # analytic Gaussian-limit expectation (step_snr) of the with-event windows
        lab = setup.labels
        tot = mu_with if setup.bg is None else mu_with + setup.bg
        r_pre = tot[:, lab == 0].sum(axis=1) / setup.t_pre
        r_post = tot[:, lab == 1].sum(axis=1) / setup.t_post
        with np.errstate(divide="ignore", invalid="ignore"):
            snr = (r_pre - r_post) / np.sqrt(r_pre / setup.t_pre + r_post / setup.t_post)
        out["snr_expected"] = np.broadcast_to(snr, (n_cases,)).copy()
    out["method"] = method
    return out


def _dataset(setup: _Setup, res, multi, case, n_cases) -> xr.Dataset:
    n = setup.n
    p = res["probability"]
    lo, hi = _wilson(res["hits"], n)
    stat_units = "sigma" if setup.statistic == "window" else "1 (Delta C)"
    dims = ("case",) if multi else ()

    def v(x):
        return x if multi else x[0]

    data = {
        "probability": (dims, v(p), {"units": "1", "long_name": "detection probability P(detect)"}),
        "probability_error": (dims, v(np.sqrt(p * (1 - p) / n)),
                              {"units": "1", "long_name": "binomial standard error sqrt(P(1-P)/n)"}),
        "probability_lower": (dims, v(lo), {"units": "1", "long_name": "Wilson (1927) 68% score interval, lower"}),
        "probability_upper": (dims, v(hi), {"units": "1", "long_name": "Wilson (1927) 68% score interval, upper"}),
        "threshold": (dims, v(res["threshold"]), {"units": stat_units, "long_name": "detection threshold"}),
        "threshold_error": (dims, v(res["threshold_error"]),
                            {"units": stat_units, "long_name": "threshold standard error (binomial rank spread)"}),
        "false_alarm_achieved": (dims, v(res["false_alarm_achieved"]),
                                 {"units": "1", "long_name": "fraction of calibration simulations above threshold"}),
        "false_alarm_error": (dims, v(res["false_alarm_error"]),
                              {"units": "1", "long_name": "binomial standard error of the false-alarm fraction"}),
    }
    if "snr_expected" in res:
        data["snr_expected"] = (dims, v(res["snr_expected"]),
                                {"units": "1", "long_name": "Gaussian-limit S/N of the with-event windows (step_snr)"})
    coords = {}
    if multi and case is not None:
        cv = case
        attrs = {}
        if isinstance(cv, u.Quantity):
            attrs["units"] = cv.unit.to_string()
            cv = cv.value
        cv = np.asarray(cv)
        if cv.shape != (n_cases,):
            raise InputError(f"case has shape {cv.shape}; expected ({n_cases},), one label per case")
        coords["case"] = ("case", cv, attrs)
    attrs = {
        "statistic": setup.statistic,
        "false_alarm": setup.alpha,
        "n_realisations": n,
        "seed_entropy": str(setup.seq.entropy),
        "seed_spawn_key": str(tuple(setup.seq.spawn_key)),
        "sampler": res["method"] or "",
        "n_bins": int(setup.widths.size),
        "red_noise": "none" if setup.red_noise is None else
        f"damped random walk, amplitude {setup.red_noise.amplitude:g}, timescale {setup.red_noise.tau_s:g} s",
        "method": ("injection-recovery; threshold = empirical (1 - false_alarm) quantile of event-free simulations; "
                   + ("exact conditional binomial test of two Poisson rates (Przyborowski & Wilenski 1940, "
                      "Biometrika 31, 313)" if setup.statistic == "window" else
                      "Poisson likelihood ratio, C-statistic (Cash 1979, ApJ 228, 939)")),
    }
    if setup.windows is not None:
        attrs["windows_s"] = setup.windows.ravel().tolist()
        attrs["t_pre_s"] = setup.t_pre
        attrs["t_post_s"] = setup.t_post
    if setup.statistic == "likelihood":
        attrs["fit_scale"] = int(setup.fit_scale)
    return xr.Dataset(data, coords=coords, attrs=attrs)


# ----------------------------------------------------------------------------- minimum detectable
def minimum_detectable(param_to_expected: Callable, bin_width, *, bracket, target_probability=0.5,
                       false_alarm=0.01, n_realisations=10_000, statistic="window", windows=None, seed=0,
                       xtol=1e-3, background=None, red_noise=None, start_time=0 * u.s, fit_scale=True,
                       chunk_size=None, memory_budget=MEMORY_BUDGET) -> xr.Dataset:
    """Event parameter (e.g. CME mass) at which the detection probability reaches a target.

    Solves P(detect)(param) = ``target_probability`` with :func:`scipy.optimize.brentq` on
    ln(param) inside ``bracket``. Every evaluation of :func:`detection_probability` uses the
    same seed (common random numbers) and the inversion sampler (counts monotone in the
    expected counts), so P(param) is a monotone step function of the dimming depth rather
    than a noisy curve (exactly so for the window statistic; with red noise and the likelihood
    statistic on more than 16 distinct bin groups the sampler is ``Generator.poisson``, which
    is not monotone, and P(param) carries Monte Carlo jitter of order its binomial error);
    thresholds are cached per distinct event-free light curve. The
    Monte Carlo uncertainty of the result, ``parameter_error``, is the binomial error of P
    at the target divided by the slope dP/d ln(param), measured between
    ln(param) +- 0.05 (two extra evaluations).

    Parameters
    ----------
    param_to_expected : callable
        ``param -> (expected_with_event, expected_without_event)``, count-rate Quantities of
        shape (n_bins,). ``param`` has the type of ``bracket`` (a Quantity if it is one).
    bin_width : Quantity [time]
    bracket : (lo, hi)
        Positive parameter values with P(lo) and P(hi) on opposite sides of the target.
    target_probability : float in (0, 1)
        e.g. 0.5 or 0.9.
    xtol : float
        Tolerance on ln(param) (default 1e-3, i.e. 0.1 %).
    false_alarm, n_realisations, statistic, windows, seed, background, red_noise, start_time
        As in :func:`detection_probability` (and ``fit_scale``, ``chunk_size``, ``memory_budget``);
        ``seed=None`` draws one fresh seed used for all evaluations.

    Returns
    -------
    xarray.Dataset
        ``parameter``, ``parameter_error``, ``probability`` (at ``parameter``),
        ``probability_error``, ``slope`` (dP/d ln param), and the evaluations made
        (``evaluated_parameter``, ``evaluated_probability`` along ``evaluation``).
    """
    if not callable(param_to_expected):
        raise InputError(f"param_to_expected={param_to_expected!r} must be callable: param -> (with, without)")
    check_range("target_probability", target_probability, lo=0.0, hi=1.0, inclusive=False)
    target = float(target_probability)
    check_range("xtol", xtol, lo=0.0, inclusive=False)
    try:
        lo, hi = bracket
    except (TypeError, ValueError):
        raise InputError(f"bracket={bracket!r} must be a (lo, hi) pair") from None
    unit = None
    if isinstance(lo, u.Quantity) or isinstance(hi, u.Quantity):
        if not (isinstance(lo, u.Quantity) and isinstance(hi, u.Quantity)):
            raise InputError("bracket: give both ends as Quantities or both as numbers")
        unit = lo.unit
        lo_v, hi_v = float(lo.to_value(unit)), float(hi.to_value(unit))
    else:
        lo_v, hi_v = float(lo), float(hi)
    check_range("bracket", np.array([lo_v, hi_v]), lo=0.0, inclusive=False)
    if not hi_v > lo_v:
        raise InputError(f"bracket=({lo_v:g}, {hi_v:g}): the upper end must exceed the lower end")
    setup = None
    evals: dict[float, float] = {}

    def prob(x: float) -> float:
        nonlocal setup
        if x in evals:
            return evals[x]
        value = math.exp(x)
        param = value * unit if unit is not None else value
        out = param_to_expected(param)
        try:
            w, wo = out
        except (TypeError, ValueError):
            raise InputError("param_to_expected must return a pair (expected_with_event, expected_without_event)") \
                from None
        rw = _rates_2d("expected_with_event", w)
        ro = _rates_2d("expected_without_event", wo, rw.shape[-1])
        if rw.ndim != 1 or ro.ndim != 1:
            raise InputError("param_to_expected must return 1-D light curves (one case per parameter value)")
        if setup is None:
            setup = _Setup(rw.size, bin_width, false_alarm, n_realisations, statistic, windows, seed, background,
                           red_noise, start_time, fit_scale, chunk_size, memory_budget)
        elif setup.widths.size != rw.size:
            raise InputError(f"param_to_expected returned {rw.size} bins at param={value:g}, "
                             f"{setup.widths.size} before")
        res = _run_cases(setup, (rw * setup.widths)[None], (ro * setup.widths)[None], 1)
        evals[x] = float(res["probability"][0])
        return evals[x]

    xlo, xhi = math.log(lo_v), math.log(hi_v)
    p_lo, p_hi = prob(xlo), prob(xhi)
    if (p_lo - target) * (p_hi - target) > 0 or (p_lo == target == p_hi):
        raise BracketError(
            f"bracket=({lo_v:g}, {hi_v:g}){' ' + str(unit) if unit else ''} does not straddle "
            f"target_probability={target:g}: P(detect) = {p_lo:.4g} at the lower end and {p_hi:.4g} at the upper "
            f"end (false_alarm={setup.alpha:g}, n_realisations={setup.n}); widen the bracket",
            bracket=(lo_v, hi_v), values=(p_lo, p_hi), target=target, unit=str(unit) if unit else "")
    if p_lo == target:
        x_root = xlo
    elif p_hi == target:
        x_root = xhi
    else:
        x_root = optimize.brentq(lambda x: prob(x) - target, xlo, xhi, xtol=xtol)
    p_root = prob(x_root)
    h = 0.05
    slope = (prob(x_root + h) - prob(x_root - h)) / (2 * h)
    sig_p = math.sqrt(target * (1 - target) / setup.n)
    value = math.exp(x_root)
    par_err = value * sig_p / abs(slope) if slope != 0 else math.inf
    xs = np.array(sorted(evals))
    unit_attr = {"units": unit.to_string()} if unit is not None else {}
    ds = xr.Dataset(
        {
            "parameter": ((), value, {**unit_attr, "long_name": f"parameter where P(detect) = {target:g}"}),
            "parameter_error": ((), par_err, {**unit_attr,
                                              "long_name": "Monte Carlo error: sigma_P / |dP/d ln param| x param"}),
            "probability": ((), p_root, {"units": "1", "long_name": "P(detect) at parameter"}),
            "probability_error": ((), math.sqrt(p_root * (1 - p_root) / setup.n), {"units": "1"}),
            "target_probability": ((), target, {"units": "1"}),
            "slope": ((), slope, {"units": "1", "long_name": "dP/d ln(param) between ln(param) +- 0.05"}),
            "evaluated_parameter": (("evaluation",), np.exp(xs), unit_attr),
            "evaluated_probability": (("evaluation",), np.array([evals[x] for x in xs]), {"units": "1"}),
        },
        attrs={
            "statistic": setup.statistic, "false_alarm": setup.alpha, "n_realisations": setup.n,
            "bracket": [lo_v, hi_v], "probability_at_bracket": [p_lo, p_hi], "n_evaluations": len(evals),
            "seed_entropy": str(setup.seq.entropy), "xtol_ln_param": float(xtol),
            "method": "brentq on ln(param) with common random numbers (fixed seed) and inversion sampling",
        },
    )
    return ds
