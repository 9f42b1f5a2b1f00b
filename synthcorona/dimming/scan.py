r"""Detection when the onset is not known: the test statistics maximised over trial onsets and recovery times.

A proposal cannot say when the CME will happen. A detection that tests only the true onset
(``onset="known"``, right for a triggered observation, e.g. a CME following a flare seen by
another instrument) overstates what an untriggered observation can find. With ``onset="scan"``
the window test and the likelihood ratio of :mod:`synthcorona.dimming.statistics` are evaluated at
every trial of a grid of onsets and duration factors and the largest value is the statistic; its
threshold is calibrated on event-free simulations with the same scan
(:mod:`synthcorona.dimming.thresholds`), so the false-alarm probability applies to the whole
observation, not to each trial. The onset and the recovery time are thus nuisance parameters,
profiled on a grid; the price is a higher threshold (the "look-elsewhere" effect; its trials
factor is discussed by Gross & Vitells 2010, Eur. Phys. J. C, doi:10.1140/epjc/s10052-010-1470-8).

Trial grid (:func:`trial_grid`)
-------------------------------
Trials are the reference event (the one injected: onset ``t_ref``, duration factor 1) moved to
onsets :math:`\tau_j = t_{ref} + j\,s` and stretched in time about its onset by the factors
``recovery_factors`` f (default :data:`DEFAULT_RECOVERY_FACTORS`: the dimming's rise and
recovery last f times as long). The step s defaults to 1/8 of the reference duration
(:data:`STEP_FRACTION`, at least one bin, whole bins on a uniform grid): a trial is then at
most 1/16 of the event's duration away from any onset. A trial is kept when both of its windows
keep at least half their reference length inside the light curve (and at least one bin):
onsets too close to either end, where most of the event or of the baseline would be outside the
observation, are not tried.

Window scan (:class:`WindowScan`)
---------------------------------
Trial (tau, f): pre-event window from the reference pre window's start to tau, post-event window
[tau + f g, tau + f (g + L)) (g, L: the reference gap and post-window length), cut at the end of
the light curve. Counts are summed over the segments between all window edges (drawn directly,
exact for Poisson counts), so the scan costs a few columns per trial, not the whole light curve.
Each trial's significance is first approximated by :func:`~synthcorona.dimming.statistics.window_root`
and the exact significance (:func:`~synthcorona.dimming.statistics.window_sigma`) of the best trial
is the statistic. The expected share of the post window under the null, q0 = mu_post / (mu_pre +
mu_post), comes from the event-free light curve (quiescent + flare + background) of each trial.

Likelihood scan (:class:`LikelihoodScan`)
-----------------------------------------
The dimming template D (decrement per unit depth) is moved and stretched to every trial,
:math:`D_j(t) = D(t_{ref} + (t - \tau_j)/f_j)`, bin-averaged exactly through the cumulative
integral of D (beyond the light curve D keeps its first / last bin's value). For every trial the
score statistic of the depth at the null fit (Rao's efficient score over its standard deviation,
with the normalisation profiled) is a matrix product; the trial with the largest score is then
fitted in full (:func:`~synthcorona.dimming.likelihood_fit.fit_likelihood_ratio_rows`) and its TS is the
statistic. A realisation whose largest score is <= 0 has TS = 0 at every trial (the profile
likelihood is concave in the depth, so a non-positive slope at zero depth means its maximum over
depth >= 0 is at zero).

Limitation: the flare of the event-free light curve keeps the amplitude and timing given (known
exactly); only the dimming's onset and duration are scanned.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .likelihood_fit import fit_likelihood_ratio, fit_likelihood_ratio_rows
from .statistics import window_root, window_sigma

__all__ = ["ONSET_MODES", "DEFAULT_RECOVERY_FACTORS", "STEP_FRACTION", "TrialGrid", "trial_grid",
           "check_recovery_factors", "stretched_templates", "WindowScan", "LikelihoodScan"]

#: ``onset`` options of the detection functions: scan the onset, or test the true onset only.
ONSET_MODES = ("scan", "known")
#: Default duration factors of the scan: the event's rise and recovery half as long, as given, twice as long.
DEFAULT_RECOVERY_FACTORS = (0.5, 1.0, 2.0)
#: Default step of the trial onsets as a fraction of the reference event's duration.
STEP_FRACTION = 0.125


@dataclass(frozen=True)
class TrialGrid:
    """Trials of an onset scan: ``onsets`` [s] and duration ``factors`` (one per trial, shape (n_trials,)),
    the onset ``step`` [s] and the index ``reference`` of the reference trial (onset t_ref, factor 1)."""

    onsets: np.ndarray
    factors: np.ndarray
    step: float
    reference: int

    @property
    def n_trials(self) -> int:
        return int(self.onsets.size)

    def subset(self, keep: np.ndarray) -> "TrialGrid":
        """The trials where ``keep`` is True (the reference must be among them)."""
        idx = np.flatnonzero(keep)
        return TrialGrid(self.onsets[idx], self.factors[idx], self.step,
                         int(np.searchsorted(idx, self.reference)))


def check_recovery_factors(recovery_factors) -> tuple:
    """``recovery_factors`` as a tuple of floats in [0.05, 20] (at least one), else an error naming them."""
    try:
        f = tuple(float(x) for x in np.atleast_1d(recovery_factors))
    except (TypeError, ValueError):
        raise InputError(f"recovery_factors={recovery_factors!r} must be numbers (duration factors, e.g. "
                         f"{DEFAULT_RECOVERY_FACTORS})", argument="recovery_factors") from None
    if not f or not all(math.isfinite(x) and 0.05 <= x <= 20.0 for x in f):
        raise InputError(f"recovery_factors={recovery_factors!r}: give one or more factors in the valid range "
                         "[0.05, 20]", argument="recovery_factors")
    return f


def trial_grid(edges, t_ref, pre_start, gap, length, factors=DEFAULT_RECOVERY_FACTORS, step=None) -> TrialGrid:
    """The trials of an onset scan (see the module notes).

    Parameters
    ----------
    edges : array (n_bins + 1,)
        Bin edges [s].
    t_ref : float
        Reference onset [s] (the injected event's).
    pre_start : float
        Start [s] of the pre-event window (the light curve's start for the likelihood scan).
    gap, length : float
        Reference time [s] from the onset to the post-event window and the window's length (the
        likelihood scan: 0 and the template's effective duration).
    factors : sequence of float
        Duration factors (:func:`check_recovery_factors`).
    step : float, optional
        Onset step [s]; default :data:`STEP_FRACTION` x ``length`` (at least one bin, whole bins on a
        uniform grid).
    """
    edges = np.asarray(edges, dtype=float)
    widths = np.diff(edges)
    w_min = float(widths.min())
    start, end = float(edges[0]), float(edges[-1])
    if step is None:
        step = max(w_min, STEP_FRACTION * length)
        if np.allclose(widths, widths[0], rtol=1e-9, atol=0.0):
            step = max(1, round(step / widths[0])) * float(widths[0])
    elif not (math.isfinite(step) and step > 0):
        raise InputError(f"scan_step={step!r} s must be a positive time", argument="scan_step")
    eps = 1e-9 * max(abs(start), abs(end), 1.0)
    j = np.arange(math.floor((start - t_ref) / step), math.ceil((end - t_ref) / step) + 1)
    tau = t_ref + j * step
    pre_min = max(0.5 * (t_ref - pre_start), w_min)
    onsets, facs = [], []
    for f in factors:
        post_min = max(0.5 * f * length, w_min)
        ok = (tau - pre_start >= pre_min - eps) & (end - (tau + f * gap) >= post_min - eps)
        if f == 1.0:
            ok |= j == 0
        onsets.append(tau[ok])
        facs.append(np.full(int(ok.sum()), float(f)))
    if 1.0 not in factors:
        onsets.append(np.array([t_ref]))
        facs.append(np.array([1.0]))
    on, fa = np.concatenate(onsets), np.concatenate(facs)
    ref = int(np.flatnonzero((np.abs(on - t_ref) <= eps) & (fa == 1.0))[0])
    return TrialGrid(on, fa, float(step), ref)


# ----------------------------------------------------------------------------- window scan
class WindowScan:
    """The window test at every trial of a :class:`TrialGrid`, from counts summed over segments.

    Parameters
    ----------
    edges, centres : arrays (n_bins + 1,), (n_bins,)
        Bin edges and centres [s]; a bin belongs to a window when its centre is in [start, stop).
    windows : array (2, 2)
        Reference windows ((pre_start, pre_stop), (post_start, post_stop)) [s]; pre_stop is the
        reference onset.
    grid : TrialGrid
    null_counts : array (n_bins,)
        Expected counts per bin without the event (background included): the null shares q0.

    Notes
    -----
    ``groups``: segment label per bin, -1 outside every window (the ``groups`` of a
    :class:`~synthcorona.dimming.noise.CountSampler`); ``q``: null post-window share per trial;
    ``grid``: the trials with at least one bin in each window.
    """

    def __init__(self, edges, centres, windows, grid: TrialGrid, null_counts):
        w = np.asarray(windows, dtype=float)
        pre_start, t_ref = w[0]
        gap, length = w[1, 0] - t_ref, w[1, 1] - w[1, 0]
        end = float(edges[-1])
        tau, f = grid.onsets, grid.factors
        bins = np.asarray(centres, dtype=float)
        a = int(np.searchsorted(bins, pre_start, side="left"))
        b = np.searchsorted(bins, tau, side="left")
        c = np.searchsorted(bins, tau + f * gap, side="left")
        d = np.searchsorted(bins, np.minimum(tau + f * (gap + length), end), side="left")
        keep = (b > a) & (d > c)
        keep[grid.reference] = True
        self.grid = grid.subset(keep)
        b, c, d = b[keep], c[keep], d[keep]
        bounds = np.unique(np.concatenate([[a], b, c, d]))
        n_bins = bins.size
        idx = np.arange(n_bins)
        inside = (idx >= bounds[0]) & (idx < bounds[-1])
        labels = np.full(n_bins, -1, dtype=np.int64)
        labels[inside] = np.searchsorted(bounds, idx[inside], side="right") - 1
        self.groups = labels
        self._ja = np.full(b.size, int(np.searchsorted(bounds, a)))
        self._jb, self._jc, self._jd = (np.searchsorted(bounds, x) for x in (b, c, d))
        mu = np.bincount(labels[inside], weights=np.asarray(null_counts, dtype=float)[inside],
                         minlength=bounds.size - 1)
        cmu = np.concatenate([[0.0], np.cumsum(mu)])
        mu_pre = cmu[self._jb] - cmu[self._ja]
        mu_post = cmu[self._jd] - cmu[self._jc]
        widths = np.diff(edges)  # exposure shares, used where the null has no counts at all
        ct = np.concatenate([[0.0], np.cumsum(widths)])
        e_pre = ct[b] - ct[a]
        e_post = ct[d] - ct[c]
        tot = mu_pre + mu_post
        with np.errstate(divide="ignore", invalid="ignore"):
            self.q = np.where(tot > 0, mu_post / tot, e_post / (e_pre + e_post))
        self.mu_pre, self.mu_post = mu_pre, mu_post

    def window_counts(self, chunk):
        """(n_pre, n_post) per realisation and trial, int64 arrays (rows, n_trials), from segment counts."""
        rows = chunk.shape[0]
        cum = np.zeros((rows, chunk.shape[1] + 1), dtype=np.int64)
        np.cumsum(chunk, axis=1, out=cum[:, 1:])
        return cum[:, self._jb] - cum[:, self._ja], cum[:, self._jd] - cum[:, self._jc]

    def statistic(self, chunk) -> np.ndarray:
        """Exact significance (sigma) of the most significant trial, one value per realisation (row)."""
        n1, n2 = self.window_counts(chunk)
        if n1.shape[1] == 1:
            return window_sigma(n1[:, 0], n2[:, 0], self.q[0])[0]
        best = np.argmax(window_root(n1, n2, self.q), axis=1)
        rows = np.arange(n1.shape[0])
        return window_sigma(n1[rows, best], n2[rows, best], self.q[best])[0]


# ----------------------------------------------------------------------------- likelihood scan
def stretched_templates(edges, template, t_ref, onsets, factors) -> np.ndarray:
    """Bin averages of D(t_ref + (t - tau)/f) for every trial (tau, f), shape (n_trials, n_bins).

    ``template`` D: bin-averaged values (n_bins,) on ``edges``; integrated exactly through its
    cumulative integral (piecewise linear at the edges), extended beyond the light curve with the
    first / last bin's value. The trial (t_ref, 1) returns D.
    """
    edges = np.asarray(edges, dtype=float)
    D = np.asarray(template, dtype=float)
    w = np.diff(edges)
    cum = np.concatenate([[0.0], np.cumsum(D * w)])
    f = np.asarray(factors, dtype=float)[:, None]
    src = t_ref + (edges[None, :] - np.asarray(onsets, dtype=float)[:, None]) / f
    c = np.interp(src, edges, cum)
    c = np.where(src < edges[0], D[0] * (src - edges[0]), c)
    c = np.where(src > edges[-1], cum[-1] + D[-1] * (src - edges[-1]), c)
    return np.diff(c * f, axis=1) / w


class LikelihoodScan:
    """The likelihood ratio profiled over the trials of an onset scan (see the module notes).

    Parameters
    ----------
    edges : array (n_bins + 1,)
        Bin edges [s].
    baseline, template : arrays (n_bins,)
        Expected counts of the null model (B > 0) and the dimming template at the reference trial
        (D, expected count decrement per unit depth), as for
        :func:`~synthcorona.dimming.statistics.likelihood_templates`.
    fit_scale : bool
        Fit the baseline normalisation.
    factors, step : see :func:`trial_grid`.

    The reference onset is the left edge of the first bin with D != 0, the reference duration
    the template's effective duration sum(D dt) / max(D). Bins whose ratio D_j/B is the same for
    every trial j are merged (``groups``, for the sampler), which leaves every trial's statistic
    unchanged.
    """

    def __init__(self, edges, baseline, template, fit_scale, factors=DEFAULT_RECOVERY_FACTORS, step=None):
        edges = np.asarray(edges, dtype=float)
        B = np.asarray(baseline, dtype=float)
        D = np.asarray(template, dtype=float)
        w = np.diff(edges)
        nz = np.flatnonzero(np.abs(D) > 1e-12 * np.abs(D).max())
        t_ref = float(edges[nz[0]])
        rate = D / w
        length = float(np.sum(np.abs(D)) / np.abs(rate).max())
        grid = trial_grid(edges, t_ref, float(edges[0]), 0.0, length, factors, step)
        T = stretched_templates(edges, rate, t_ref, grid.onsets, grid.factors) * w       # counts per bin
        T[grid.reference] = D
        r = T / B
        SB = float(B.sum())
        SD, Q = T.sum(axis=1), np.sum(T * r, axis=1)
        info = Q - SD ** 2 / SB if fit_scale else Q
        usable = info > 1e-9 * np.maximum(Q, 1e-300)
        usable[grid.reference] = True
        self.grid = grid.subset(usable)
        T, r = T[usable], r[usable]
        _, inv = np.unique(r.T, axis=0, return_inverse=True)
        inv = np.asarray(inv).reshape(-1).astype(np.int64)
        n_groups = int(inv.max()) + 1
        self.groups = None if n_groups == B.size else inv
        if self.groups is None:
            self.B, self.T = B, T
        else:
            self.B = np.bincount(inv, weights=B, minlength=n_groups)
            self.T = np.stack([np.bincount(inv, weights=t, minlength=n_groups) for t in T])
        self._R32 = np.ascontiguousarray((self.T / self.B).T, dtype=np.float32)          # (groups, trials)
        self._SB, self._SD = SB, self.T.sum(axis=1)
        self._info = info[usable]
        self.fit_scale = bool(fit_scale)

    def statistic(self, chunk) -> np.ndarray:
        """TS of the trial with the largest score, one value per realisation (row)."""
        if self.T.shape[0] == 1:
            return fit_likelihood_ratio(np.asarray(chunk, dtype=float), self.B, self.T[0], self.fit_scale).ts
        n = np.asarray(chunk, dtype=np.float32)
        # scores in single precision (relative error ~1e-7, far below any difference that matters for
        # choosing the best trial); the chosen trial is then fitted in double precision
        nr = (n @ self._R32).astype(float)                                                # (rows, trials)
        if self.fit_scale:
            N = np.asarray(chunk).sum(axis=1).astype(float)
            ok = N > 0
            a0 = np.where(ok, N / self._SB, 1.0)[:, None]
            z = (self._SD - nr / a0) * np.sqrt(a0 / self._info)
        else:
            ok = np.ones(n.shape[0], dtype=bool)
            z = (self._SD - nr) / np.sqrt(self._info)
        best = np.argmax(z, axis=1)
        fit = np.flatnonzero(ok & (z[np.arange(n.shape[0]), best] > 0))
        ts = np.zeros(n.shape[0])
        if fit.size:
            rows = np.asarray(chunk[fit], dtype=float)
            ts[fit] = fit_likelihood_ratio_rows(rows, self.B, self.T[best[fit]], self.fit_scale).ts
        return ts
