r"""Detection thresholds calibrated on event-free simulations.

Neither test statistic of :mod:`synthcorona.dimming.statistics` is trusted with its nominal
distribution: flares, trends and red noise break the equal-rate null of the window test and
the asymptotics of the likelihood ratio. The detection threshold is therefore calibrated
empirically (:func:`calibrate_threshold`): simulate the light curve *without* the event, and
take as threshold the order statistic of rank ``n - k`` of the ``n`` simulated values, with
``k + 1 <= false_alarm (n + 1)``. An independent event-free light curve then exceeds it with
probability (k + 1)/(n + 1) <= ``false_alarm`` (exactly so for a continuous statistic; lower with
ties), averaged over calibrations: the rank rule of the Monte Carlo test (Dwass 1957, Ann. Math.
Stat. 28, 181), so the false-alarm probability holds per observation for any number of
simulations, not only as n grows. The threshold's uncertainty comes from the binomial spread of the
rank (the distribution-free quantile interval, e.g. Conover 1999, Practical Nonparametric
Statistics, section 3.2), and its effect on a detection probability from the exact bootstrap of
the calibration set (:func:`calibration_error`).
:mod:`synthcorona.dimming.detection` uses these thresholds for the detection probability.
"""
from __future__ import annotations

import math
from typing import Callable, Iterable, NamedTuple

import numpy as np
from scipy import stats

from ..errors import InputError
from ..validation import check_range
from .noise import as_seed_sequence, check_count

__all__ = ["MIN_EXCEEDANCES", "Threshold", "check_false_alarm", "allowed_exceedances", "threshold_from_null",
           "calibration_error", "collect_statistic", "calibrate_threshold"]

#: Calibration needs at least this many expected null exceedances (false_alarm * n_realisations).
MIN_EXCEEDANCES = 10


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


def check_false_alarm(false_alarm, n: int) -> float:
    """``false_alarm`` as a float in (0, 1), with at least :data:`MIN_EXCEEDANCES` expected exceedances in ``n``
    null simulations; otherwise an :class:`~synthcorona.errors.InputError` naming the ``n_realisations`` needed."""
    check_range("false_alarm", false_alarm, lo=0.0, hi=1.0, inclusive=False)
    alpha = float(false_alarm)
    if alpha * n < MIN_EXCEEDANCES:
        need = int(math.ceil(MIN_EXCEEDANCES / alpha))
        raise InputError(
            f"false_alarm={alpha:g} with n_realisations={n} expects {alpha * n:.3g} null exceedances; "
            f"the threshold needs >= {MIN_EXCEEDANCES}: use n_realisations >= {need}")
    return alpha


def allowed_exceedances(alpha: float, n: int) -> int:
    """Calibration values allowed above the threshold: the largest k with (k + 1)/(n + 1) <= ``alpha``.

    With this k an independent event-free statistic exceeds the order statistic of rank n - k with
    probability (k + 1)/(n + 1) <= alpha (Dwass 1957, Ann. Math. Stat. 28, 181); e.g. 9 for
    alpha = 0.01 and n = 1000, 99 for n = 10,000.
    """
    k = int(math.floor(alpha * (n + 1) + 1e-9)) - 1
    return max(k, 0)


def threshold_from_null(stats_null: np.ndarray, alpha: float) -> Threshold:
    """The :class:`Threshold` at false-alarm probability ``alpha`` from the statistic values of the null simulations.

    The order statistic of rank ``n - k`` (k = :func:`allowed_exceedances`), exceeded by k of the
    ``n`` values; its error from the ranks ``+- sqrt(n alpha (1 - alpha))`` around it (see
    :func:`calibrate_threshold`).
    """
    s = np.sort(stats_null)
    n = s.size
    k = allowed_exceedances(alpha, n)
    idx = n - k - 1
    thr = float(s[idx])
    achieved = float(np.count_nonzero(s > thr)) / n
    m = math.sqrt(n * alpha * (1.0 - alpha))
    lo = s[max(int(round(idx - m)), 0)]
    hi = s[min(int(round(idx + m)), n - 1)]
    thr_err = float(hi - lo) / 2.0 if np.isfinite(hi - lo) else math.inf
    return Threshold(thr, thr_err, alpha, achieved, math.sqrt(alpha * (1.0 - alpha) / n), n)


def calibration_error(null_sorted: np.ndarray, event_values: np.ndarray, alpha: float) -> float:
    """Standard deviation of a detection fraction caused by the threshold's calibration (exact bootstrap).

    The threshold is the order statistic of rank n - k of the ``n`` calibration values
    (:func:`threshold_from_null`). Resampling the calibration set with replacement, the threshold
    T* of a resample is at most a value v when at least n - k resampled values are <= v, which has
    probability ``P(Bin(n, F(v)) >= n - k)`` with F the empirical distribution of the calibration
    values: the bootstrap distribution of T* is known exactly over the calibration values, so no
    resampling is needed (the exact bootstrap of an order statistic; Hutson & Ernst 2000, J. R.
    Stat. Soc. B 62, 89). The returned value is the standard deviation, over that
    distribution, of the fraction of ``event_values`` above T*: the calibration part of the error
    of P(detect). Zero when the threshold is exact.

    Parameters
    ----------
    null_sorted : array (n,)
        Calibration (event-free) statistic values, sorted ascending.
    event_values : array (m,)
        Statistic values of the simulations with the event.
    alpha : float
        False-alarm probability of the threshold.
    """
    s = np.asarray(null_sorted, dtype=float)
    n = s.size
    k = allowed_exceedances(alpha, n)
    idx = n - k - 1
    half = int(12.0 * math.sqrt(n * alpha * (1.0 - alpha))) + 3
    lo, hi = max(idx - half, 0), min(idx + half, n - 1)
    vals = np.unique(s[lo:hi + 1])
    ecdf = np.searchsorted(s, vals, side="right") / n                  # F(v) over the calibration set
    below = np.searchsorted(s, vals[0], side="left") / n
    cdf_t = stats.binom.sf(n - k - 1, n, np.concatenate([[below], ecdf]))   # P(T* <= v), P(T* < first)
    prob = np.diff(cdf_t)
    total = prob.sum()
    if not total > 0:
        return 0.0
    prob = prob / total
    ev = np.sort(np.asarray(event_values, dtype=float))
    frac = 1.0 - np.searchsorted(ev, vals, side="right") / ev.size     # fraction of events above v
    mean = float(np.sum(prob * frac))
    return float(math.sqrt(max(float(np.sum(prob * (frac - mean) ** 2)), 0.0)))


def collect_statistic(statistic_fn, chunks: Iterable[np.ndarray], n: int) -> np.ndarray:
    """``statistic_fn`` of every chunk of simulated counts, as one array of ``n`` values (one per realisation).

    Refuses a function that returns the wrong number of values or NaN, and chunks that do not add
    up to ``n`` realisations.
    """
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

    The threshold is the order statistic exceeded by k of the ``n`` null simulations, with k the
    largest number such that (k + 1)/(n + 1) <= ``false_alarm`` (:func:`allowed_exceedances`;
    Dwass 1957, Ann. Math. Stat. 28, 181): an independent event-free statistic exceeds it with
    probability at most ``false_alarm``. Detect when statistic > threshold, so ties never raise
    the false-alarm rate above the request. Its standard
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
    alpha = check_false_alarm(false_alarm, n)
    if not callable(statistic_fn):
        raise InputError(f"statistic_fn={statistic_fn!r} must be callable")
    if not callable(null_sampler):
        raise InputError(f"null_sampler={null_sampler!r} must be callable (n_realisations, seed, chunk_size)")
    values = collect_statistic(statistic_fn, null_sampler(n, as_seed_sequence(seed), chunk_size), n)
    return threshold_from_null(values, alpha)

