"""The settings and per-case machinery of an injection--recovery detection calculation.

:class:`DetectionSetup` checks the arguments of :func:`synthcorona.dimming.detection.detection_probability`
once and, for every case (a pair of light curves with and without the event), builds the test
statistic (the window test or the likelihood ratio, with the onset known or scanned,
:mod:`synthcorona.dimming.scan`), its threshold (exact, or calibrated on event-free simulations and
cached, :mod:`synthcorona.dimming.thresholds`) and the detections among the simulations with the event.
"""
from __future__ import annotations

import hashlib
import math
from typing import Callable, NamedTuple

import astropy.units as u
import numpy as np
from scipy import stats

from ..errors import InputError
from .likelihood_fit import fit_likelihood_ratio
from .noise import (
    CountSampler,
    RedNoise,
    as_seed_sequence,
    bin_widths,
    check_count,
    child_sequence,
    rate_values,
    time_values,
)
from .scan import (
    DEFAULT_RECOVERY_FACTORS,
    ONSET_MODES,
    LikelihoodScan,
    WindowScan,
    check_recovery_factors,
    trial_grid,
)
from .statistics import likelihood_templates, window_sigma, window_test_size
from .thresholds import Threshold, calibration_error, check_false_alarm, collect_statistic, threshold_from_null

__all__ = ["STATISTICS", "ONSET_MODES", "Case", "DetectionSetup", "threshold_is_exact", "digest"]

#: The test statistics of a detection: the window test and the likelihood ratio.
STATISTICS = ("window", "likelihood")


def threshold_is_exact(statistic: str, onset: str, red_noise=None) -> bool:
    """Whether the detection threshold is exact (no calibration): the window test, known onset, Poisson noise only."""
    return statistic == "window" and onset == "known" and RedNoise.coerce(red_noise) is None


class Case(NamedTuple):
    """One case (pair of light curves) of a detection calculation.

    ``fn``: statistic per realisation (larger = more dimming-like; with an exact threshold, ln p);
    ``groups``: column labels for the sampler; ``key``: cache key of the threshold; ``exact_size``:
    the exact false-alarm probability (None when calibrated); ``n_trials``: trials of the scan.
    """

    fn: Callable
    groups: np.ndarray | None
    key: tuple
    exact_size: float | None
    n_trials: int


class DetectionSetup:
    """Validated settings shared by every case / parameter value of one detection calculation.

    Built by :func:`synthcorona.dimming.detection.detection_probability` and
    :func:`~synthcorona.dimming.detection.minimum_detectable` from their arguments (same names;
    ``n_bins`` the light curve's length). :meth:`run` gives, for one pair of light curves (expected
    counts per bin with and without the event), the threshold, the number of detections, the
    calibration error of P(detect) and the sampler used; thresholds are cached per distinct null.
    """

    def __init__(self, n_bins, bin_width, false_alarm, n_realisations, statistic, windows, seed, background,
                 red_noise, start_time, fit_scale, chunk_size, memory_budget, onset="scan",
                 recovery_factors=DEFAULT_RECOVERY_FACTORS, scan_step=None):
        self.n = check_count("n_realisations", n_realisations)
        self.alpha = check_false_alarm(false_alarm, self.n)
        if statistic not in STATISTICS:
            raise InputError(f"statistic={statistic!r} must be one of {STATISTICS}", argument="statistic")
        if onset not in ONSET_MODES:
            raise InputError(f"onset={onset!r} must be one of {ONSET_MODES}", argument="onset")
        self.statistic, self.onset = statistic, onset
        self.factors = check_recovery_factors(recovery_factors)
        self.scan_step = None if scan_step is None else float(time_values("scan_step", scan_step))
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
        self.exact = threshold_is_exact(statistic, onset, self.red_noise)
        self.fit_scale = bool(fit_scale)
        self.chunk_size = None if chunk_size is None else check_count("chunk_size", chunk_size)
        self.memory_budget = check_count("memory_budget", memory_budget, lo=2**16)
        self.seq = as_seed_sequence(seed)
        self.null_seq = child_sequence(self.seq, 0)
        self.event_seq = child_sequence(self.seq, 1)
        self.windows = None
        self.window_grid = None
        if statistic == "window":
            self._set_windows(windows)
            if onset == "scan":
                w = self.windows
                self.window_grid = trial_grid(edges, w[0, 1], w[0, 0], w[1, 0] - w[0, 1], w[1, 1] - w[1, 0],
                                              self.factors, self.scan_step)
        elif windows is not None:
            raise InputError("windows applies only to statistic='window'; the likelihood statistic fits every bin")
        self.cache: dict = {}
        self.n_trials = 1

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
        if self.onset == "scan" and w[1, 0] < w[0, 1]:
            raise InputError(f"windows: with onset='scan' the post window must start at or after the pre window's end "
                             f"(the reference onset, {w[0, 1]:g} s); it starts at {w[1, 0]:g} s")
        self.windows = w
        self.labels = labels
        self.t_pre = float(self.widths[labels == 0].sum())
        self.t_post = float(self.widths[labels == 1].sum())
        self.q = self.t_post / (self.t_pre + self.t_post)

    # ---------------------------------------------------------------- one case
    def _sampler(self, mu, groups):
        return CountSampler.from_expected_counts(mu, background=self.bg, times=self.centres,
                                                 red_noise=self.red_noise, groups=groups)

    def case_for(self, mu_with, mu_without) -> Case:
        """The statistic, sampler groups and threshold cache key of one case."""
        null = mu_without if self.bg is None else mu_without + self.bg
        if self.statistic == "window":
            return self._window_case(null)
        dim = mu_without - mu_with
        try:
            B, D = likelihood_templates(null, dim, self.fit_scale)
        except InputError as err:
            raise InputError(f"statistic='likelihood' (baseline = expected_without_event [+ background], dimming "
                             f"= expected_without_event - expected_with_event, in counts per bin): {err}") from None
        # TS is unchanged when D is scaled by c > 0 (delta absorbs c): key on the normalised template.
        key = ("likelihood", self.onset, digest(null), digest(D / np.abs(D).max()))
        if self.onset == "scan":
            scan = LikelihoodScan(self.edges, B, D, self.fit_scale, self.factors, self.scan_step)
            return Case(scan.statistic, scan.groups, key, None, scan.grid.n_trials)
        _, labels = np.unique(D / B, return_inverse=True)
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
            return fit_likelihood_ratio(chunk, Bg, Dg, fit_scale).ts

        return Case(fn, groups, key, None, 1)

    def _window_case(self, null) -> Case:
        key = ("window", self.onset, digest(null))
        if self.onset == "scan":
            scan = WindowScan(self.edges, self.centres, self.windows, self.window_grid, null)
            return Case(scan.statistic, scan.groups, key, None, scan.grid.n_trials)
        mu_pre = float(null[self.labels == 0].sum())
        mu_post = float(null[self.labels == 1].sum())
        q0 = mu_post / (mu_pre + mu_post) if mu_pre + mu_post > 0 else self.q
        if self.exact:
            def fn(chunk):
                return window_sigma(chunk[:, 0], chunk[:, 1], q0)[1]

            size = self.cache.get(key)
            if size is None:                        # the exact size depends only on the null: once per null
                size = self.cache[key] = window_test_size(mu_pre, mu_post, self.alpha)
            return Case(fn, self.labels, key, size, 1)

        def fn(chunk):
            return window_sigma(chunk[:, 0], chunk[:, 1], q0)[0]

        return Case(fn, self.labels, key, None, 1)

    def threshold_for(self, case: Case, mu_without):
        """(Threshold, sorted calibration values or None) of a case; calibrated once per distinct null."""
        if case.exact_size is not None:
            thr = Threshold(float(stats.norm.isf(self.alpha)), 0.0, self.alpha, case.exact_size, 0.0, self.n)
            return thr, None
        hit = self.cache.get(case.key)
        if hit is None:
            null = self._sampler(mu_without, case.groups)
            values = collect_statistic(case.fn, null(self.n, self.null_seq, self.chunk_size, self.memory_budget),
                                       self.n)
            values.sort()
            hit = (threshold_from_null(values, self.alpha), values)
            self.cache[case.key] = hit
        return hit

    def run(self, mu_with, mu_without):
        """Threshold, detection count, calibration error of P(detect) and sampler of one case."""
        case = self.case_for(mu_with, mu_without)
        self.n_trials = case.n_trials
        thr, null_values = self.threshold_for(case, mu_without)
        event = self._sampler(mu_with, case.groups)
        values = collect_statistic(case.fn, event(self.n, self.event_seq, self.chunk_size, self.memory_budget),
                                   self.n)
        if case.exact_size is not None:
            hits = int(np.count_nonzero(values <= math.log(self.alpha)))    # p-value <= false_alarm
            cal = 0.0
        else:
            hits = int(np.count_nonzero(values > thr.threshold))
            cal = calibration_error(null_values, values, self.alpha)
        return thr, hits, cal, event.method


def digest(a: np.ndarray) -> str:
    """SHA-1 hex digest of an array's float64 bytes (cache keys of thresholds)."""
    return hashlib.sha1(np.ascontiguousarray(a, dtype=float).tobytes()).hexdigest()
