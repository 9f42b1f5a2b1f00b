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
from scipy import special

from ..errors import InputError
from ..validation import check_finite, check_range
from .noise import check_count, rate_values, time_values

__all__ = [
    "WindowTest", "LikelihoodRatio", "WINDOW_NORMAL_LIMIT", "LR_BLOCK",
    "count_values", "window_sigma", "window_test", "step_snr", "poisson_loglike", "cash_statistic",
    "likelihood_templates", "likelihood_ratio", "fit_likelihood_ratio",
]


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


#: Realisations fitted together by fit_likelihood_ratio: the (rows, bins) work arrays of a block stay in the CPU
#: cache across Newton iterations (about 2x faster than one pass over 10,000 x 1000 at once).
LR_BLOCK = 128


def fit_likelihood_ratio(n, B, D, fit_scale, max_iter=50, tol=1e-8) -> LikelihoodRatio:
    """Core of :func:`likelihood_ratio`, without argument checks: ``n`` counts (k, m) of any numeric dtype,
    ``B``, ``D`` templates (m,) from :func:`likelihood_templates`; one result per row.

    Rows are fitted in blocks of ``LR_BLOCK`` (each row's fit is independent of the others).
    """
    k = n.shape[0]
    if k <= LR_BLOCK:
        return _lr_fit_block(np.asarray(n, dtype=float), B, D, fit_scale, max_iter, tol)
    parts = [_lr_fit_block(np.asarray(n[i:i + LR_BLOCK], dtype=float), B, D, fit_scale, max_iter, tol)
             for i in range(0, k, LR_BLOCK)]
    return LikelihoodRatio(*(np.concatenate(field) for field in zip(*parts)))


class _Templates(NamedTuple):
    """Per-block constants of the likelihood-ratio fit, from the templates B, D (m,)."""

    B: np.ndarray
    r: np.ndarray          # D / B
    r_ext: tuple           # (max r, min r): where positivity of mu binds
    SB: float
    SD: float
    Q: float               # sum D r
    R2: np.ndarray         # (m, 2) [1, r]
    R3: np.ndarray         # (m, 3) [1, r, r^2]
    P: np.ndarray          # (2, m): s = [a, delta] @ P in one BLAS pass

    @classmethod
    def of(cls, B, D) -> "_Templates":
        m = B.size
        r = D / B
        return cls(B, r, (float(r.max()), float(r.min())), float(B.sum()), float(D.sum()), float(np.sum(D * r)),
                   np.stack([np.ones(m), r], axis=1), np.stack([np.ones(m), r, r * r], axis=1),
                   np.ascontiguousarray(np.stack([np.ones(m), -r])))


def _lr_fit_block(n, B, D, fit_scale, max_iter=50, tol=1e-8) -> LikelihoodRatio:
    """Newton fit of one block of realisations for :func:`fit_likelihood_ratio`. ``n`` float (k, m).

    With s = a - delta r (r = D/B, so mu = B s), the Cash gradient and observed information
    need only n/s and n/s^2 against [1, r] and [1, r, r^2]: two elementwise passes and two
    small matrix products per Newton iteration.
    """
    k = n.shape[0]
    tp = _Templates.of(B, D)
    N = n.sum(axis=1)
    ok = N > 0 if fit_scale else np.ones(k, dtype=bool)
    a0 = np.where(ok, N / tp.SB, 0.0) if fit_scale else np.ones(k)
    a0_safe = np.where(ok, a0, 1.0)
    a, d = _fisher_start(n, tp, a0_safe, fit_scale)
    var_d, converged = _newton_iterations(n, tp, a, d, ok, fit_scale, max_iter, tol)
    ts = _test_statistic(n, tp, a, d, ok, a0_safe, N)
    delta = np.maximum(d, 0.0)
    scale = np.where(d > 0, a, a0)
    return LikelihoodRatio(ts, delta, np.where(ok, d, 0.0), np.sqrt(var_d), scale, converged)


def _fisher_start(n, tp: _Templates, a0_safe, fit_scale):
    """Start: one Fisher-scoring step from the null fit (a0, 0); exact in the Gaussian limit. -> (a, d)."""
    k = n.shape[0]
    g_d = -tp.SD + (n @ tp.r) / a0_safe
    if fit_scale:
        det0 = tp.SB * tp.Q - tp.SD**2
        da = -a0_safe * tp.SD * g_d / det0
        dd = -a0_safe * tp.SB * g_d / det0
    else:
        da = np.zeros(k)
        dd = -a0_safe * g_d / tp.Q
    a = a0_safe.copy()
    d = np.zeros(k)
    t = _step_fraction(a, d, da, dd, tp.r_ext)
    a += t * da
    d += t * dd
    return a, d


def _newton_iterations(n, tp: _Templates, a, d, ok, fit_scale, max_iter, tol):
    """Newton steps on the rows ``ok`` until converged, updating ``a`` and ``d`` in place. -> (var_d, converged).

    Self-concordance (Boyd & Vandenberghe 2004, Convex Optimization, sec. 9.6; -n ln s is
    self-concordant for integer n >= 1): after a full Newton step from decrement lam, the
    remaining C gap is <= 2 (lam / (1 - lam))^4. A row stops when that is below tol.
    """
    k = n.shape[0]
    var_d = np.full(k, np.nan)
    converged = ~ok
    lam_stop = 1.0 / (1.0 + 1.0 / (0.5 * tol) ** 0.25)
    act = np.flatnonzero(ok)
    for _ in range(max_iter):
        if act.size == 0:
            break
        nn = n if act.size == k else n[act]
        aa, dd_ = a[act], d[act]
        step_a, step_d, v_d, lam2, bad = _newton_step(nn, aa, dd_, tp, fit_scale)
        t = _step_fraction(aa, dd_, step_a, step_d, tp.r_ext)
        a[act] = aa + t * step_a
        d[act] = dd_ + t * step_d
        var_d[act] = v_d
        done = (np.sqrt(np.maximum(lam2, 0.0)) < lam_stop) & (t == 1.0) & ~bad
        converged[act[done]] = True
        act = act[~done]
    return var_d, converged


def _newton_step(nn, aa, dd_, tp: _Templates, fit_scale):
    """Newton step of the active rows. -> (step_a, step_d, variance of delta, lam^2, rows with Fisher scoring)."""
    s_ = np.column_stack([aa, dd_]) @ tp.P
    w = np.divide(nn, s_)
    g1, gr = (w @ tp.R2).T
    w /= s_
    H = w @ tp.R3
    del w
    g_a = tp.SB - g1
    g_d = -tp.SD + gr
    Haa, Had, Hdd = H[:, 0], -H[:, 1], H[:, 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        if fit_scale:
            det = Haa * Hdd - Had * Had
            step_a = -(Hdd * g_a - Had * g_d) / det
            step_d = -(Haa * g_d - Had * g_a) / det
            v_d = Haa / det
        else:
            det = Hdd
            step_a = np.zeros(aa.size)
            step_d = -g_d / Hdd
            v_d = 1.0 / Hdd
        bad = ~(det > 0) | ~np.isfinite(step_a) | ~np.isfinite(step_d)
        if np.any(bad):  # observed information singular (e.g. all counts in one bin): Fisher scoring there
            B, r = tp.B, tp.r
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
    lam2 = -(g_a * step_a + g_d * step_d)
    return step_a, step_d, v_d, lam2, bad


def _test_statistic(n, tp: _Templates, a, d, ok, a0_safe, N):
    """TS = C_null - C_alt = 2 [(a0 - a) SB + delta SD + sum n ln(s) - N ln a0] where delta > 0 (else 0)."""
    k = n.shape[0]
    ts = np.zeros(k)
    pos = np.flatnonzero(ok & (d > 0))
    if pos.size:
        ap, dp = a[pos], d[pos]
        X = np.column_stack([ap, dp]) @ tp.P
        np.log(X, out=X)
        lnl = np.einsum("ij,ij->i", n[pos] if pos.size < k else n, X)
        del X
        ts[pos] = 2.0 * ((a0_safe[pos] - ap) * tp.SB + dp * tp.SD + lnl - N[pos] * np.log(a0_safe[pos]))
        np.maximum(ts, 0.0, out=ts)
    return ts


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

