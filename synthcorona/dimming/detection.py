r"""Detection probability and minimum detectable event by injection and recovery.

:func:`detection_probability` measures the fraction of simulated light curves *with* the event
in which a test statistic (:mod:`synthcorona.dimming.statistics`) exceeds its detection
threshold at a false-alarm probability (injection--recovery), with its error and the Wilson
(1927, JASA 22, 209) score interval.

Onset. By default (``onset="scan"``) the statistic is maximised over trial onsets and recovery
times (:mod:`synthcorona.dimming.scan`), as a search of an untriggered observation must; with
``onset="known"`` only the true onset is tested (a triggered observation).

Threshold. Where the null distribution is known exactly -- the window test with the onset known
and Poisson noise only -- the exact conditional binomial test is used: detect when its p-value is
<= ``false_alarm`` (Przyborowski & Wilenski 1940, Biometrika 31, 313; the p-value is that of
``scipy.stats.binomtest(..., alternative="less")``), so P(detect | no event) <= ``false_alarm``
exactly (:func:`~synthcorona.dimming.statistics.window_test_size` gives the achieved value).
Everywhere else (scan, red noise, the likelihood ratio) the threshold is calibrated on event-free
simulations with the same statistic (:mod:`synthcorona.dimming.thresholds`): detect when the
statistic is > threshold.

Errors. ``probability_error`` combines the binomial error of the injected simulations,
sqrt(P(1 - P)/n), with the scatter that the threshold's calibration causes (the exact bootstrap
of the calibration set, :func:`~synthcorona.dimming.thresholds.calibration_error`), in
quadrature; both parts are reported.

Exact data reduction: a window statistic depends only on window sums, which are drawn directly as
Poisson variables (see :mod:`synthcorona.dimming.noise`); the likelihood ratio depends on the
counts only through the sums over bins sharing the same ratio :math:`D_i/B_i` (since
:math:`\ln(aB_i - \delta D_i) = \ln B_i + \ln(a - \delta D_i/B_i)`), so such bins (e.g. all
pre-event bins, where :math:`D = 0`) are merged before simulating. Both reductions leave the
statistic's distribution unchanged.

:func:`minimum_detectable` finds the event parameter (e.g. CME mass) at which the detection
probability reaches a target, with :func:`scipy.optimize.brentq` on the log of the
parameter. Every evaluation uses the same seed (common random numbers) and the Poisson
inversion sampler, whose counts are monotone in the expected counts, so with a known onset the
estimated detection probability is a monotone step function of the dimming depth (with the scan,
nearly so: a deeper dimming can also lower trials whose baseline it overlaps).
"""
from __future__ import annotations

import math
from typing import Callable

import astropy.units as u
import numpy as np
import xarray as xr
from scipy import optimize

from ..errors import BracketError, InputError
from ..validation import check_range
from .injection import STATISTICS, DetectionSetup, threshold_is_exact
from .noise import MEMORY_BUDGET, rate_values
from .scan import DEFAULT_RECOVERY_FACTORS, ONSET_MODES

__all__ = ["STATISTICS", "ONSET_MODES", "detection_probability", "minimum_detectable", "threshold_is_exact"]
_WILSON_Z = 1.0  # 1-sigma (68.27 %) Wilson score interval


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
                          onset="scan", recovery_factors=DEFAULT_RECOVERY_FACTORS, scan_step=None,
                          background=None, red_noise=None, start_time=0 * u.s, fit_scale=True, case=None,
                          chunk_size=None, memory_budget=MEMORY_BUDGET) -> xr.Dataset:
    """Probability of detecting a dimming, by injection and recovery in simulated light curves.

    ``n_realisations`` realisations of the light curve *with* the event give the fraction
    detected. The threshold is exact for the window test with ``onset="known"`` and Poisson
    noise only (detect when the p-value is <= ``false_alarm``); otherwise ``n_realisations``
    realisations *without* the event (independent random numbers) calibrate it
    (:func:`~synthcorona.dimming.thresholds.threshold_from_null`; detect when the statistic is
    > threshold). Vectorised over realisations and processed in chunks within
    ``memory_budget``. Same seed => same numbers for any ``chunk_size``; cases share the random
    numbers (common random numbers), so with the default inversion sampler and a known onset the
    probability is monotone in the dimming depth across cases.

    Parameters
    ----------
    expected_with_event, expected_without_event : Quantity [ct/s]
        Expected source count rate per bin, shape (n_bins,) or (n_cases, n_bins) (e.g. a grid
        of CME masses). ``expected_without_event`` may be (n_bins,) and shared by all cases
        (one calibration for the window statistic).
    bin_width : Quantity [time]
        Scalar or per-bin (> 0).
    false_alarm : float in (0, 1)
        False-alarm probability of the detection threshold, per observation (whole scan);
        ``false_alarm * n_realisations >= 10``.
    n_realisations : int
        Realisations for the calibration and for the injection, each
        (:func:`synthcorona.dimming.sizes.realisations_for_precision` gives the number for a precision).
    statistic : {"window", "likelihood"}
        "window": significance (sigma) of the exact conditional test between the pre- and
        post-event windows, with the expected post-window share of the event-free light curve
        (:func:`~synthcorona.dimming.statistics.window_sigma`). "likelihood": TS of
        :func:`~synthcorona.dimming.statistics.likelihood_ratio` with baseline =
        without-event counts (+ background) and dimming template = without - with (so the
        injected depth is delta = 1).
    windows : ((pre_start, pre_stop), (post_start, post_stop)) of time Quantities
        Required for "window": the windows of the true onset (``pre_stop``). Times on the light
        curve's clock (first bin's left edge at ``start_time``); a bin belongs to a window when its
        centre lies in [start, stop).
    seed : None, int, SeedSequence or numpy Generator
    onset : {"scan", "known"}
        "scan" (default): the statistic is maximised over trial onsets and duration factors
        (:mod:`synthcorona.dimming.scan`) and calibrated with the same scan, so ``false_alarm``
        applies per observation. "known": only the true onset is tested (a triggered observation).
    recovery_factors : sequence of float
        Scan: duration factors tried (the event's rise and recovery stretched by each; default
        (0.5, 1, 2)).
    scan_step : Quantity [time], optional
        Scan: step of the trial onsets (default 1/8 of the event's duration, whole bins).
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
        ``probability`` (P(detect)); ``probability_error``, the quadrature sum of
        ``probability_error_binomial`` (sqrt(P(1-P)/n)) and ``probability_error_calibration``
        (the threshold's calibration scatter, exact bootstrap; 0 for an exact threshold);
        ``probability_lower``/``probability_upper`` (68 % Wilson 1927 score interval, widened in
        quadrature by the calibration part); ``threshold`` and ``threshold_error`` (statistic
        units; for an exact threshold the significance of p = ``false_alarm``);
        ``false_alarm_achieved`` (calibration: fraction of the event-free simulations above the
        threshold; exact: the test's exact size) and ``false_alarm_error``; for the window
        statistic also ``snr_expected`` (:func:`~synthcorona.dimming.statistics.step_snr` of the
        with-event windows of the true onset). Dimension ``case`` when several cases are given.
        Attributes record the settings, seed, onset mode and threshold method.
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
    setup = DetectionSetup(n_bins, bin_width, false_alarm, n_realisations, statistic, windows, seed, background,
                           red_noise, start_time, fit_scale, chunk_size, memory_budget, onset, recovery_factors,
                           scan_step)
    res = _run_cases(setup, rw * setup.widths, ro * setup.widths, n_cases)
    return _dataset(setup, res, multi, case, n_cases)


def _run_cases(setup: DetectionSetup, mu_with, mu_without, n_cases):
    out = {k: np.empty(n_cases) for k in ("probability", "threshold", "threshold_error", "false_alarm_achieved",
                                          "false_alarm_error", "hits", "calibration_error")}
    method = None
    for c in range(n_cases):
        mw = mu_with[c if mu_with.shape[0] > 1 else 0]
        mo = mu_without[c if mu_without.shape[0] > 1 else 0]
        thr, hits, cal, method = setup.run(mw, mo)
        out["hits"][c] = hits
        out["probability"][c] = hits / setup.n
        out["calibration_error"][c] = cal
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


def _method_text(setup: DetectionSetup) -> str:
    stat = ("exact conditional binomial test of two Poisson rates (Przyborowski & Wilenski 1940, Biometrika 31, 313)"
            if setup.statistic == "window" else "Poisson likelihood ratio, C-statistic (Cash 1979, ApJ 228, 939)")
    onset = ("onset known" if setup.onset == "known" else
             f"maximised over {setup.n_trials} trial onsets and duration factors (synthcorona.dimming.scan)")
    thr = ("detect when p-value <= false_alarm (exact threshold)" if setup.exact else
           "threshold = order statistic of event-free simulations with the same statistic (rank rule, Dwass 1957)")
    return f"injection-recovery; {stat}, {onset}; {thr}"


def _dataset(setup: DetectionSetup, res, multi, case, n_cases) -> xr.Dataset:
    n = setup.n
    p = res["probability"]
    cal = res["calibration_error"]
    binom = np.sqrt(p * (1 - p) / n)
    lo, hi = _wilson(res["hits"], n)
    lo = np.clip(p - np.hypot(p - lo, cal), 0.0, 1.0)
    hi = np.clip(p + np.hypot(hi - p, cal), 0.0, 1.0)
    stat_units = "sigma" if setup.statistic == "window" else "1 (Delta C)"
    dims = ("case",) if multi else ()

    def v(x):
        return x if multi else x[0]

    data = {
        "probability": (dims, v(p), {"units": "1", "long_name": "detection probability P(detect)"}),
        "probability_error": (dims, v(np.hypot(binom, cal)),
                              {"units": "1", "long_name": "standard error of P(detect): binomial and threshold "
                                                          "calibration in quadrature"}),
        "probability_error_binomial": (dims, v(binom), {"units": "1",
                                                        "long_name": "binomial standard error sqrt(P(1-P)/n)"}),
        "probability_error_calibration": (dims, v(cal), {"units": "1", "long_name": "scatter of P(detect) from the "
                                                         "threshold's calibration (exact bootstrap)"}),
        "probability_lower": (dims, v(lo), {"units": "1", "long_name": "68% interval, lower (Wilson 1927 score "
                                                                      "interval, calibration scatter added)"}),
        "probability_upper": (dims, v(hi), {"units": "1", "long_name": "68% interval, upper (Wilson 1927 score "
                                                                      "interval, calibration scatter added)"}),
        "threshold": (dims, v(res["threshold"]), {"units": stat_units, "long_name": "detection threshold"}),
        "threshold_error": (dims, v(res["threshold_error"]),
                            {"units": stat_units, "long_name": "threshold standard error (binomial rank spread)"}),
        "false_alarm_achieved": (dims, v(res["false_alarm_achieved"]),
                                 {"units": "1", "long_name": "false-alarm probability achieved (exact test: its "
                                  "size; calibrated: fraction of event-free simulations above threshold)"}),
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
    return xr.Dataset(data, coords=coords, attrs=_attrs(setup, res["method"]))


def _attrs(setup: DetectionSetup, sampler) -> dict:
    attrs = {
        "statistic": setup.statistic,
        "onset": setup.onset,
        "threshold_method": "exact" if setup.exact else "calibrated",
        "n_trials": int(setup.n_trials),
        "false_alarm": setup.alpha,
        "n_realisations": setup.n,
        "seed_entropy": str(setup.seq.entropy),
        "seed_spawn_key": str(tuple(setup.seq.spawn_key)),
        "sampler": sampler or "",
        "n_bins": int(setup.widths.size),
        "red_noise": "none" if setup.red_noise is None else setup.red_noise.description,
        "method": _method_text(setup),
    }
    if setup.onset == "scan":
        attrs["recovery_factors"] = list(setup.factors)
        if setup.window_grid is not None:
            attrs["scan_step_s"] = setup.window_grid.step
    if setup.windows is not None:
        attrs["windows_s"] = setup.windows.ravel().tolist()
        attrs["t_pre_s"] = setup.t_pre
        attrs["t_post_s"] = setup.t_post
    if setup.statistic == "likelihood":
        attrs["fit_scale"] = int(setup.fit_scale)
    return attrs


# ----------------------------------------------------------------------------- minimum detectable
def minimum_detectable(param_to_expected: Callable, bin_width, *, bracket, target_probability=0.5,
                       false_alarm=0.01, n_realisations=10_000, statistic="window", windows=None, seed=0,
                       xtol=1e-3, onset="scan", recovery_factors=DEFAULT_RECOVERY_FACTORS, scan_step=None,
                       background=None, red_noise=None, start_time=0 * u.s, fit_scale=True,
                       chunk_size=None, memory_budget=MEMORY_BUDGET) -> xr.Dataset:
    """Event parameter (e.g. CME mass) at which the detection probability reaches a target.

    Solves P(detect)(param) = ``target_probability`` with :func:`scipy.optimize.brentq` on
    ln(param) inside ``bracket``. Every evaluation of :func:`detection_probability` uses the
    same seed (common random numbers) and the inversion sampler (counts monotone in the
    expected counts), so P(param) is a step function of the dimming depth rather than a noisy
    curve (monotone for the window statistic with a known onset; with red noise and the likelihood
    statistic on more than 16 distinct bin groups the sampler is ``Generator.poisson``, which
    is not monotone, and P(param) carries Monte Carlo jitter of order its binomial error);
    thresholds are cached per distinct event-free light curve. The Monte Carlo uncertainty of
    the result, ``parameter_error``, is the error of P at the root -- binomial and threshold
    calibration (:func:`detection_probability`) in quadrature -- divided by the slope
    dP/d ln(param), measured between ln(param) +- 0.05 (two extra evaluations); both parts are
    also given separately.

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
    false_alarm, n_realisations, statistic, windows, seed, onset, recovery_factors, scan_step, background, red_noise
        As in :func:`detection_probability` (and ``start_time``, ``fit_scale``, ``chunk_size``,
        ``memory_budget``); ``seed=None`` draws one fresh seed used for all evaluations.

    Returns
    -------
    xarray.Dataset
        ``parameter``, ``parameter_error`` (with ``parameter_error_binomial`` and
        ``parameter_error_calibration``), ``probability`` (at ``parameter``),
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
                                                       memory_budget, onset, recovery_factors, scan_step))
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
    value = math.exp(x_root)
    sig_b = math.sqrt(target * (1 - target) / setup.n)
    sig_c = prob.calibration[x_root]
    errors = tuple(value * sig / abs(slope) if slope != 0 else math.inf for sig in (math.hypot(sig_b, sig_c), sig_b,
                                                                                      sig_c))
    p_err = math.hypot(math.sqrt(p_root * (1 - p_root) / setup.n), sig_c)
    return _minimum_detectable_dataset(prob, unit, value, errors, (p_root, p_err), target, slope, (lo_v, hi_v),
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

    ``settings``: the arguments of :class:`DetectionSetup` after ``n_bins`` (the setup is made at the
    first evaluation, when the number of bins is known). ``evals`` maps x to P(detect),
    ``calibration`` x to the calibration part of its error.
    """

    def __init__(self, param_to_expected, unit, settings):
        self.param_to_expected, self.unit, self.settings = param_to_expected, unit, settings
        self.setup = None
        self.evals: dict[float, float] = {}
        self.calibration: dict[float, float] = {}

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
            self.setup = DetectionSetup(rw.size, *self.settings)
        elif self.setup.widths.size != rw.size:
            raise InputError(f"param_to_expected returned {rw.size} bins at param={value:g}, "
                             f"{self.setup.widths.size} before")
        setup = self.setup
        res = _run_cases(setup, (rw * setup.widths)[None], (ro * setup.widths)[None], 1)
        self.evals[x] = float(res["probability"][0])
        self.calibration[x] = float(res["calibration_error"][0])
        return self.evals[x]


def _minimum_detectable_dataset(prob: _ProbabilityCurve, unit, value, errors, p_at_root, target, slope, bracket,
                                p_bracket, xtol) -> xr.Dataset:
    """The result Dataset of :func:`minimum_detectable`; ``errors`` = (total, binomial, calibration) of the parameter,
    ``p_at_root`` = (P(detect), its error) at the parameter."""
    setup, evals = prob.setup, prob.evals
    xs = np.array(sorted(evals))
    unit_attr = {"units": unit.to_string()} if unit is not None else {}
    p_root, p_err = p_at_root
    return xr.Dataset(
        {
            "parameter": ((), value, {**unit_attr, "long_name": f"parameter where P(detect) = {target:g}"}),
            "parameter_error": ((), errors[0], {**unit_attr, "long_name": "Monte Carlo error: sigma_P / "
                                                "|dP/d ln param| x param, sigma_P binomial and calibration"}),
            "parameter_error_binomial": ((), errors[1], {**unit_attr, "long_name": "binomial part"}),
            "parameter_error_calibration": ((), errors[2], {**unit_attr, "long_name": "threshold calibration part"}),
            "probability": ((), p_root, {"units": "1", "long_name": "P(detect) at parameter"}),
            "probability_error": ((), p_err, {"units": "1"}),
            "target_probability": ((), target, {"units": "1"}),
            "slope": ((), slope, {"units": "1", "long_name": "dP/d ln(param) between ln(param) +- 0.05"}),
            "evaluated_parameter": (("evaluation",), np.exp(xs), unit_attr),
            "evaluated_probability": (("evaluation",), np.array([evals[x] for x in xs]), {"units": "1"}),
        },
        attrs={
            "statistic": setup.statistic, "onset": setup.onset,
            "threshold_method": "exact" if setup.exact else "calibrated", "n_trials": int(setup.n_trials),
            "false_alarm": setup.alpha, "n_realisations": setup.n,
            "bracket": list(bracket), "probability_at_bracket": list(p_bracket), "n_evaluations": len(evals),
            "seed_entropy": str(setup.seq.entropy), "xtol_ln_param": float(xtol),
            "method": "brentq on ln(param) with common random numbers (fixed seed) and inversion sampling; "
                      + _method_text(setup),
        },
    )
