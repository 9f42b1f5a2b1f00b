r"""Detection probability and minimum detectable event by injection and recovery.

:func:`detection_probability` simulates the light curve *without* the event to calibrate the
detection threshold of a test statistic (:mod:`synthcorona.dimming.statistics`) at a
false-alarm probability (:mod:`synthcorona.dimming.thresholds`), then measures the fraction of
simulations *with* the event above the threshold (injection--recovery), with its binomial
standard error and the Wilson (1927, JASA 22, 209) score interval.

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
from typing import Callable

import astropy.units as u
import numpy as np
import xarray as xr
from scipy import optimize

from ..errors import BracketError, InputError
from ..validation import check_range
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
from .statistics import fit_likelihood_ratio, likelihood_templates, window_sigma
from .thresholds import check_false_alarm, collect_statistic, threshold_from_null

__all__ = ["STATISTICS", "detection_probability", "minimum_detectable"]

#: The test statistics of a detection: the window test and the likelihood ratio.
STATISTICS = ("window", "likelihood")
_WILSON_Z = 1.0  # 1-sigma (68.27 %) Wilson score interval


class _Setup:
    """Validated settings shared by every case / parameter value of one detection calculation."""

    def __init__(self, n_bins, bin_width, false_alarm, n_realisations, statistic, windows, seed, background,
                 red_noise, start_time, fit_scale, chunk_size, memory_budget):
        self.n = check_count("n_realisations", n_realisations)
        self.alpha = check_false_alarm(false_alarm, self.n)
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

    def statistic_for(self, mu_with, mu_without):
        """(statistic_fn, groups, cache key) for one case."""
        if self.statistic == "window":
            q = self.q

            def fn(chunk):
                return window_sigma(chunk[:, 0], chunk[:, 1], q)[0]

            return fn, self.labels, ("window", _digest(mu_without))
        base = mu_without if self.bg is None else mu_without + self.bg
        dim = mu_without - mu_with
        try:
            B, D = likelihood_templates(base, dim, self.fit_scale)
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
            return fit_likelihood_ratio(chunk, Bg, Dg, fit_scale).ts

        # TS is unchanged when D is scaled by c > 0 (delta absorbs c): key on the normalised template.
        return fn, groups, ("likelihood", _digest(mu_without), _digest(D / np.abs(D).max()))

    def run(self, mu_with, mu_without):
        """Threshold (cached per null) and detection count for one case."""
        fn, groups, key = self.statistic_for(mu_with, mu_without)
        thr = self.cache.get(key)
        if thr is None:
            null = self._sampler(mu_without, groups)
            values = collect_statistic(fn, null(self.n, self.null_seq, self.chunk_size, self.memory_budget), self.n)
            thr = threshold_from_null(values, self.alpha)
            self.cache[key] = thr
        event = self._sampler(mu_with, groups)
        hits = 0
        for chunk in event(self.n, self.event_seq, self.chunk_size, self.memory_budget):
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
    the detection threshold at ``false_alarm``
    (:func:`~synthcorona.dimming.thresholds.calibrate_threshold`); as many of the light curve
    *with* the event (independent random numbers) give the fraction detected.
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
        (:func:`~synthcorona.dimming.statistics.window_test`). "likelihood": TS of
        :func:`~synthcorona.dimming.statistics.likelihood_ratio` with baseline =
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
        statistic also ``snr_expected`` (:func:`~synthcorona.dimming.statistics.step_snr` of the
        with-event windows). Dimension ``case`` when several cases are given. Attributes record
        the settings and seed.
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
        "red_noise": "none" if setup.red_noise is None else setup.red_noise.description,
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
    lo_v, hi_v, unit = _parse_bracket(bracket)
    prob = _ProbabilityCurve(param_to_expected, unit, (bin_width, false_alarm, n_realisations, statistic, windows,
                                                       seed, background, red_noise, start_time, fit_scale, chunk_size,
                                                       memory_budget))
    xlo, xhi = math.log(lo_v), math.log(hi_v)
    p_lo, p_hi = prob(xlo), prob(xhi)
    setup = prob.setup
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
    return _minimum_detectable_dataset(prob, unit, value, par_err, p_root, target, slope, (lo_v, hi_v),
                                       (p_lo, p_hi), xtol)


def _parse_bracket(bracket):
    """``bracket`` -> (lo, hi, unit): positive plain values, hi > lo, in the unit of a Quantity bracket (else None)."""
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
    return lo_v, hi_v, unit


class _ProbabilityCurve:
    """P(detect) as a function of x = ln(param) for :func:`minimum_detectable`, each value computed once.

    ``settings``: the arguments of :class:`_Setup` after ``n_bins`` (the setup is made at the first
    evaluation, when the number of bins is known). ``evals`` maps x to P(detect).
    """

    def __init__(self, param_to_expected, unit, settings):
        self.param_to_expected, self.unit, self.settings = param_to_expected, unit, settings
        self.setup = None
        self.evals: dict[float, float] = {}

    def __call__(self, x: float) -> float:
        if x in self.evals:
            return self.evals[x]
        value = math.exp(x)
        param = value * self.unit if self.unit is not None else value
        out = self.param_to_expected(param)
        try:
            w, wo = out
        except (TypeError, ValueError):
            raise InputError("param_to_expected must return a pair (expected_with_event, expected_without_event)") \
                from None
        rw = _rates_2d("expected_with_event", w)
        ro = _rates_2d("expected_without_event", wo, rw.shape[-1])
        if rw.ndim != 1 or ro.ndim != 1:
            raise InputError("param_to_expected must return 1-D light curves (one case per parameter value)")
        if self.setup is None:
            self.setup = _Setup(rw.size, *self.settings)
        elif self.setup.widths.size != rw.size:
            raise InputError(f"param_to_expected returned {rw.size} bins at param={value:g}, "
                             f"{self.setup.widths.size} before")
        setup = self.setup
        res = _run_cases(setup, (rw * setup.widths)[None], (ro * setup.widths)[None], 1)
        self.evals[x] = float(res["probability"][0])
        return self.evals[x]


def _minimum_detectable_dataset(prob: _ProbabilityCurve, unit, value, par_err, p_root, target, slope, bracket,
                                p_bracket, xtol) -> xr.Dataset:
    """The result Dataset of :func:`minimum_detectable`."""
    setup, evals = prob.setup, prob.evals
    xs = np.array(sorted(evals))
    unit_attr = {"units": unit.to_string()} if unit is not None else {}
    return xr.Dataset(
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
            "bracket": list(bracket), "probability_at_bracket": list(p_bracket), "n_evaluations": len(evals),
            "seed_entropy": str(setup.seq.entropy), "xtol_ln_param": float(xtol),
            "method": "brentq on ln(param) with common random numbers (fixed seed) and inversion sampling",
        },
    )
