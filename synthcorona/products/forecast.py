"""The products of a CME-dimming forecast, computed from a scenario file's :class:`ForecastInputs`.

:func:`run_forecast` evaluates, for every band of the scenario's
:class:`~synthcorona.dimming.scenario.DimmingScenario`:

* the full dimming depth (:meth:`DimmingScenario.depth`) and the time profile: onset time a,
  recovery e-folding time tau and the full width at half depth a/2 + tau ln 2 of the linear-rise /
  exponential-recovery profile (:mod:`synthcorona.dimming.profile`);
* flare contamination: the peak flare excess against the peak dimming decrement, and their
  counts in the post-event window of the window test (the flare fills in the dimming there);
* the flare against its class (:meth:`DimmingScenario.flare_summary`): its own peak 1-8 Angstrom flux
  at 1 AU, implied class, peak temperature and emission measure, heating energy, radiated 1-8
  Angstrom energy and strand count;
* the net depth of the expected light curve (flare included), max over bins of (q - r) / q;
* the detection probability at the scenario's CME mass and at every mass of the mass grid
  (:meth:`DimmingScenario.detection_probability`, injection-recovery with the same seed at
  every mass: common random numbers), and the minimum detectable mass at the target probability
  (:meth:`DimmingScenario.minimum_detectable_mass`, Brent's method on ln M), with the onset
  scanned (default; the false-alarm probability holds per observation) or known
  (``[montecarlo] onset``; ``attrs["onset"]`` records which), and errors that include the
  threshold's calibration scatter;
* the expected light curves with and without the CME, Poisson realisations of both, and the
  temperature responses used.

Everything is returned as one :class:`xarray.Dataset` with units and provenance in attrs (the
emissivity table's CHIANTI version, content hash and substituted ions; the scenario file's text
and SHA-256); nothing is written to disk. :func:`forecast_tables` turns it into astropy tables,
:mod:`synthcorona.plotting.forecast` into figures, :mod:`synthcorona.io.report` into the short
report and :mod:`synthcorona.io.writers` into files.
"""
from __future__ import annotations

import datetime
import hashlib
import math
import warnings

import astropy.units as u
import numpy as np
import xarray as xr

from ..errors import BracketError, InputError

__all__ = ["run_forecast", "forecast_tables", "table_provenance", "fwhm_duration", "dimming_snr", "check_realisations",
           "REALISATIONS_RANGE"]

#: Monte Carlo realisations per probability that a forecast accepts (scenario files, the command line and
#: :func:`run_forecast`); at least :func:`synthcorona.dimming.sizes.minimum_realisations` as well.
REALISATIONS_RANGE = (100, 1_000_000)


def fwhm_duration(onset_s: float, recovery_s: float) -> float:
    """Time [s] the dimming profile spends above half its full depth: a/2 + tau ln 2.

    For the linear rise over a and exponential recovery with e-folding time tau of
    :func:`synthcorona.dimming.profile.dimming_profile` (the rise crosses 1/2 at a/2, the
    recovery at a + tau ln 2).
    """
    return 0.5 * float(onset_s) + float(recovery_s) * math.log(2.0)


def dimming_snr(deficit_counts, expected_counts) -> np.ndarray:
    r"""Photon-noise signal-to-noise of a dimming: :math:`S/N = \Delta N / \sqrt{N}`.

    ``deficit_counts`` :math:`\Delta N`: the counts the dimming removes from a window;
    ``expected_counts`` :math:`N`: the counts expected in that window (source, flare and
    background), whose Poisson variance is :math:`N`. This is the "simple" on/off significance
    of Li & Ma (1983, ApJ 272, 317, eq. 5), :math:`N_s / \sqrt{N_{on} + \alpha^2 N_{off}}`, in the
    limit of a perfectly known pre-event level (:math:`\alpha^2 N_{off} \to 0`): an upper bound on
    what a before/after comparison reaches. NaN where ``expected_counts`` is 0.
    """
    d = np.asarray(deficit_counts, dtype=float)
    n = np.asarray(expected_counts, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(n > 0, d / np.sqrt(np.where(n > 0, n, 1.0)), np.nan)


def table_provenance(table=None) -> dict:
    """Atomic-data provenance of an emissivity table (an EmissivityTable or a path; default: see
    :func:`synthcorona.emissivity.resolve_table`) as flat attrs.

    Keys ``chianti_version``, ``table_content_hash``, ``table_file``, ``chianti_substituted_ions``
    (the ions whose level-resolved files come from older CHIANTI releases) and
    ``chianti_substituted_ion_count``.
    """
    from ..emissivity import resolve_table

    t = resolve_table(table)
    prov = t.provenance
    subst = str(prov.get("chianti_substituted_ions", ""))
    body = subst.split(":", 1)[1] if ":" in subst else subst
    n_sub = len([x for x in body.split(";") if x.strip()])
    return {
        "chianti_version": str(prov.get("chianti_version", "unknown")),
        "table_content_hash": str(prov.get("content_hash", "unknown")),
        "table_file": str(getattr(t, "path", "")),
        "table_format": str(prov.get("format", "")),
        "fiasco_version_at_build": str(prov.get("fiasco_version", "")),
        "chianti_substituted_ions": subst,
        "chianti_substituted_ion_count": n_sub,
    }


def check_realisations(n: int, false_alarm: float | None = None, name: str = "realisations") -> int:
    """``n`` as an int if it lies in :data:`REALISATIONS_RANGE` and, given ``false_alarm``, calibrates the
    detection threshold (:func:`synthcorona.dimming.sizes.minimum_realisations`); else :class:`InputError`
    naming ``name``."""
    from ..dimming.sizes import MIN_EXCEEDANCES, minimum_realisations

    lo, hi = REALISATIONS_RANGE
    if not lo <= n <= hi:
        raise InputError(f"{name}={n} is outside the valid range [{lo}, {hi}] (and at least {MIN_EXCEEDANCES} / "
                         "false-alarm probability)", argument=name)
    if false_alarm is not None:
        need = minimum_realisations(false_alarm)
        if n < need:
            raise InputError(f"{name}={n} is too few to calibrate the detection threshold at false-alarm probability "
                             f"{float(false_alarm):g}: give at least {need} ({MIN_EXCEEDANCES} / false-alarm "
                             "probability)", argument=name)
    return int(n)


def _min_mass(scenario, band, target, bracket, statistic, n, seed, onset="scan"):
    """Minimum detectable mass of one band: (mass g, error g, note)."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            res = scenario.minimum_detectable_mass(target, bracket=bracket, band=band, statistic=statistic,
                                                   n_realisations=n, seed=seed, onset=onset)
    except BracketError as exc:
        lo, hi = (float(b.to_value(u.g)) for b in bracket)
        p_lo, p_hi = exc.values
        return math.nan, math.nan, (f"not bracketed in [{lo:.3g}, {hi:.3g}] g: P(detect) = {p_lo:.4g} at the lower "
                                    f"end and {p_hi:.4g} at the upper end")
    except InputError as exc:
        return math.nan, math.nan, " ".join(str(exc).split())
    note = res.attrs.get("bracket_note", "")
    return float(res["mass"]), float(res["mass_error"]), "" if note == "bracket used as given" else note


def _scenario(inputs, table):
    """(scenario, table): the scenario of ``inputs`` built on ``table`` unless it already uses a table of the
    same content, and the table to record (``table`` if given, else the scenario's)."""
    from ..emissivity import resolve_table

    sc = inputs.scenario
    if table is None:
        sc = sc if sc is not None else inputs.with_scenario().scenario
        return sc, sc.table
    tab = resolve_table(table)
    if sc is None or tab.content_hash != sc.table.content_hash:
        sc = inputs.with_scenario(table=tab).scenario
    return sc, tab


def _light_curve_products(sc, nshow: int, seed: int):
    """Light curves with and without the CME, the net depth and the flare contamination of the post-event window.

    Returns (light curve, light curve without the CME or None, variables over ``band``, post-event
    window (start, stop) in s).
    """
    lc = sc.light_curve(seed=seed, n_realisations=nshow) if nshow > 0 else sc.light_curve()
    lc0 = sc.light_curve(seed=seed, n_realisations=nshow, mass=0 * u.g) if nshow > 0 else None
    q = sc.prepared.rates.quiescent_rate
    net = np.max((q[:, None] - lc["expected"].values) / q[:, None], axis=1)
    t_edges = sc.edges
    w0, w1 = (float(x.to_value(u.s)) for x in sc.detection_windows()[1])
    lo_e, hi_e = np.clip(t_edges[:-1], w0, w1), np.clip(t_edges[1:], w0, w1)
    frac = (hi_e - lo_e) / np.diff(t_edges)                    # part of each bin inside the post-event window
    widths = np.diff(t_edges)
    flare_counts = (lc["flare_excess"].values * widths * frac).sum(axis=1)
    dim_counts = (lc["dimming_decrement"].values * widths * frac).sum(axis=1)
    bg = sc.prepared.rates.background
    all_counts = ((lc["expected"].values + bg[:, None]) * widths * frac).sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(dim_counts > 0, flare_counts / dim_counts, np.inf if sc.flare is not None else 0.0)
    band = ("band",)
    data = {
        "net_depth": (band, net, {"units": "1", "long_name": "largest fractional deficit of the expected light "
                                                             "curve below quiescence, flare included"}),
        "flare_peak_excess": (band, lc["flare_excess"].values.max(axis=1),
                              {"units": "ct / s", "long_name": "largest bin-averaged flare excess"}),
        "dimming_peak_decrement": (band, lc["dimming_decrement"].values.max(axis=1),
                                   {"units": "ct / s", "long_name": "largest bin-averaged dimming decrement"}),
        "flare_counts_post_window": (band, flare_counts,
                                     {"units": "ct", "long_name": "flare excess counts in the post-event window"}),
        "dimming_counts_post_window": (band, dim_counts,
                                       {"units": "ct", "long_name": "dimming deficit counts in the post-event window"}),
        "flare_to_dimming": (band, ratio, {"units": "1", "long_name": "flare excess / dimming deficit counts in "
                                                                      "the post-event window"}),
        "counts_post_window": (band, all_counts, {"units": "ct", "long_name": "expected counts in the post-event "
                                                                          "window (CME, flare and background)"}),
        "dimming_snr": (band, dimming_snr(dim_counts, all_counts),
                        {"units": "1", "long_name": "photon-noise S/N of the dimming in the post-event window, "
                                                    "deficit counts / sqrt(expected counts)"}),
    }
    return lc, lc0, data, (w0, w1)


def _mass_grid_products(sc, inputs, n, stat, seed, onset="scan") -> tuple[np.ndarray, dict, str]:
    """P(detect) and depth at every mass of the grid (common random numbers: the same seed at every mass).

    Returns (masses used [g], variables over ``mass`` and ``band``, note on masses left out).
    """
    grid = np.asarray(inputs.mass_grid.to_value(u.g), dtype=float)
    mmax = float(sc.max_mass.to_value(u.g))
    dropped = grid[grid > mmax * (1 + 1e-12)]
    grid = grid[grid <= mmax * (1 + 1e-12)]
    note = (f"masses {', '.join(f'{m:.3g}' for m in dropped)} g exceed the largest removable mass {mmax:.4g} g "
            "and were left out") if dropped.size else "all masses of the grid used"
    nb = len(sc.labels)
    pv = np.full((grid.size, nb), np.nan)
    pe, plo, phi = np.full_like(pv, np.nan), np.full_like(pv, np.nan), np.full_like(pv, np.nan)
    for k, m in enumerate(grid):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            r = sc.detection_probability(n, statistic=stat, seed=seed, mass=m * u.g, onset=onset)
        pv[k], pe[k] = r["probability"].values, r["probability_error"].values
        plo[k], phi[k] = r["probability_lower"].values, r["probability_upper"].values
    depth_grid = sc.depths_for(grid) if grid.size else np.zeros((0, nb))
    data = {
        "probability_vs_mass": (("mass", "band"), pv, {"units": "1", "long_name": "P(detect) at each mass of the grid"}),
        "probability_vs_mass_error": (("mass", "band"), pe, {"units": "1", "long_name": "standard error: binomial "
                                                                       "and threshold calibration"}),
        "probability_vs_mass_lower": (("mass", "band"), plo, {"units": "1", "long_name": "Wilson 68 % lower"}),
        "probability_vs_mass_upper": (("mass", "band"), phi, {"units": "1", "long_name": "Wilson 68 % upper"}),
        "depth_vs_mass": (("mass", "band"), depth_grid, {"units": "1"}),
    }
    return grid, data, note


def _minimum_mass_products(sc, inputs, grid, n, stat, seed, onset="scan") -> tuple[dict, tuple[float, float]]:
    """Minimum detectable mass per band in a bracket of 1/100 of the smallest to 100 x the largest grid mass
    (at most the largest removable mass). Returns (variables over ``band``, bracket in g)."""
    mmax = float(sc.max_mass.to_value(u.g))
    positive = grid[grid > 0]      # a mass of 0 g (no CME) is a valid grid point but no end of a bracket in ln M
    lo_b = (positive.min() if positive.size else float(inputs.cme.mass.to_value(u.g)) or 1e15) / 100.0
    hi_b = min((positive.max() if positive.size else lo_b * 1e6) * 100.0, mmax)
    bracket = (lo_b * u.g, hi_b * u.g)
    nb = len(sc.labels)
    mm = np.full(nb, np.nan)
    mme = np.full(nb, np.nan)
    notes = [""] * nb
    for b, lab in enumerate(sc.labels):
        mm[b], mme[b], notes[b] = _min_mass(sc, lab, inputs.target_probability, bracket, stat, n, seed, onset)
    band = ("band",)
    data = {
        "minimum_detectable_mass": (band, mm, {"units": "g", "long_name": "CME mass with P(detect) = "
                                                                          f"{inputs.target_probability:g}"}),
        "minimum_detectable_mass_error": (band, mme, {"units": "g", "long_name": "Monte Carlo error (binomial and "
                                                                       "threshold calibration)"}),
        "minimum_detectable_mass_note": (band, np.array(notes, dtype=object)),
    }
    return data, (lo_b, hi_b)


def _band_luminosities(sc) -> np.ndarray:
    """(n_b,) erg/s: unabsorbed quiescent luminosity of the corona within each band's energy limits (into 4 pi),
    at the emissivity density of the scenario (:func:`synthcorona.synthesis.luminosity`)."""
    from ..spectral import Band
    from ..synthesis import luminosity

    density = sc.prepared.source.emissivity_density * u.cm ** -3
    return np.array([float(luminosity(sc.corona.dem, Band(lo * u.keV, hi * u.keV), table=sc.table,
                                      abundances=sc.corona.abundances, density=density).to_value(u.erg / u.s))
                     for lo, hi in sc.prepared.kernels.band_limits])


def _depth_variables(sc, d, net_depth) -> dict:
    """Depths, quiescent rates, fluxes and luminosities, background and decrement per band."""
    band = ("band",)
    return {
        "depth": (band, d["depth"].values, {"units": "1", "long_name": "full fractional count-rate depth"}),
        "depth_energy_flux": (band, d["depth_energy_flux"].values,
                              {"units": "1", "long_name": "full fractional energy-flux depth (band limits)"}),
        "net_depth": net_depth,
        "quiescent_rate": (band, sc.prepared.rates.quiescent_rate, {"units": "ct / s"}),
        "quiescent_energy_flux": (band, d["quiescent_energy_flux"].values,
                                  {"units": "erg / (s cm2)", "long_name": "quiescent energy flux at the observer "
                                                                          "within the band limits, ISM absorption "
                                                                          "included"}),
        "quiescent_luminosity": (band, _band_luminosities(sc),
                                 {"units": "erg / s", "long_name": "quiescent luminosity within the band limits, "
                                                                   "unabsorbed"}),
        "background": (band, sc.prepared.rates.background, {"units": "ct / s"}),
        "rate_decrement": (band, d["rate_decrement"].values,
                           {"units": "ct / s", "long_name": "full dimming decrement of the count rate"}),
    }


def _detection_variables(det, stat) -> dict:
    """P(detect) at the scenario's mass and the detection threshold per band."""
    band = ("band",)
    return {
        "probability": (band, det["probability"].values,
                        {"units": "1", "long_name": "P(detect) at the scenario's CME mass"}),
        "probability_error": (band, det["probability_error"].values,
                              {"units": "1", "long_name": "standard error: binomial and threshold calibration in "
                                                          "quadrature"}),
        "probability_error_calibration": (band, det["probability_error_calibration"].values,
                                          {"units": "1", "long_name": "part of the error from the threshold's "
                                                                      "calibration (0 for an exact threshold)"}),
        "probability_lower": (band, det["probability_lower"].values,
                              {"units": "1", "long_name": "Wilson (1927) 68 % score interval, lower"}),
        "probability_upper": (band, det["probability_upper"].values,
                              {"units": "1", "long_name": "Wilson (1927) 68 % score interval, upper"}),
        "threshold": (band, det["threshold"].values,
                      {"units": "sigma" if stat == "window" else "1", "long_name": "detection threshold"}),
    }


def _curve_variables(sc, lc, inputs) -> dict:
    """Expected light curves, temperature responses, quiescent EM and the time profile."""
    curve = ("band", "time")
    onset, tau = float(sc.onset), float(sc.recovery_time)
    return {
        "expected": (curve, lc["expected"].values, {"units": "ct / s", "long_name": "with CME and flare"}),
        "expected_without_cme": (curve, lc["expected_without_cme"].values,
                                 {"units": "ct / s", "long_name": "quiescent + flare"}),
        "flare_excess": (curve, lc["flare_excess"].values, {"units": "ct / s"}),
        "dimming_decrement": (curve, lc["dimming_decrement"].values, {"units": "ct / s"}),
        # temperature responses used (ct s-1 cm3 at 1 pc, ISM absorption included)
        "temperature_response": (("band", "logT"), sc.prepared.kernels.kernel,
                                 {"units": "ct cm3 / s", "long_name": "temperature response at 1 pc, ISM absorption "
                                                                      "included"}),
        "dem_em_weights": (("logT",), sc.prepared.source.quiescent_weights,
                           {"units": "cm-3", "long_name": "quiescent EM per table temperature node"}),
        "onset_time": ((), onset, {"units": "s", "long_name": "linear rise time of the dimming"}),
        "recovery_time": ((), tau, {"units": "s", "long_name": "e-folding recovery time"}),
        "fwhm_duration": ((), fwhm_duration(onset, tau), {"units": "s", "long_name": "time above half depth"}),
        "cme_mass": ((), float(inputs.cme.mass.to_value(u.g)), {"units": "g"}),
        "max_removable_mass": ((), float(sc.max_mass.to_value(u.g)), {"units": "g"}),
    }


def _flare_variables(sc) -> tuple[dict, dict]:
    """The flare against its class (:meth:`DimmingScenario.flare_summary`): scalar variables and attrs."""
    from ..dimming.flare_class import SUMMARY_VARIABLES

    fs = sc.flare_summary()
    data = {k: ((), fs[k].values.item(), dict(fs[k].attrs)) for k in SUMMARY_VARIABLES + ("n_strands",)}
    attrs = {"flare_rule": fs.attrs["flare_rule"],
             "flare_class_flux_convention": fs.attrs["flare_class_flux_convention"]}
    return data, attrs


def _attrs(sc, table, inputs, n, seed, stat, bracket, mass_note, window, det) -> dict:
    """Provenance: the scenario's settings, the scenario file's text and hash, the Monte Carlo and the table."""
    attrs = {k: (v if isinstance(v, (str, int, float)) else str(v)) for k, v in sc.result_attrs().items()}
    text = inputs.raw_text
    attrs.update({
        "title": inputs.title,
        "description": inputs.description,
        "scenario_file": str(inputs.source),
        "scenario_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(),
        "scenario_toml": text,
        "star_name": inputs.star_name or "",
        "flare_energy_erg": float(sc.resolved_flare.energy.to_value(u.erg)) if sc.flare is not None else 0.0,
        "flare_class": inputs.flare_class or "",
        "n_realisations": n,
        "seed": seed,
        "statistic": stat,
        "onset": det.attrs["onset"],
        "threshold_method": det.attrs["threshold_method"],
        "n_trials": int(det.attrs["n_trials"]),
        "realisations_from": _realisations_source(inputs, n),
        "false_alarm": float(inputs.observation.false_alarm),
        "target_probability": float(inputs.target_probability),
        "min_mass_bracket_g": f"{float(bracket[0])!r} {float(bracket[1])!r}",  # exact: the search can be redone
        "mass_grid_note": mass_note,
        "best_band": sc.best_band(),
        "bin_width_s": float(sc.bin_width),
        "exposure_s": float(inputs.observation.exposure.to_value(u.s)),
        "post_event_window_s": f"{window[0]:.6g} {window[1]:.6g}",
        "synthcorona_version": _version(),
        "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        "method": attrs.get("method", "") + "; P(detect) by injection-recovery (synthcorona.dimming.detection)",
    })
    attrs.update(table_provenance(table))
    return attrs


def run_forecast(inputs, *, realisations: int | None = None, seed: int | None = None,
                 show_realisations: int | None = None, table=None, onset: str | None = None) -> xr.Dataset:
    """All forecast products of a scenario (see the module docstring) as one Dataset.

    Parameters
    ----------
    inputs : ForecastInputs
        From :func:`synthcorona.io.forecast_file.read_forecast_file` (its scenario is built here if
        it was read with ``build=False``).
    realisations, seed : int, optional
        Override the file's ``[montecarlo]`` values (Monte Carlo realisations per probability, see
        :func:`check_realisations`; integer seed of every random draw).
    show_realisations : int, optional
        Poisson light-curve realisations stored (with and without the CME); default the file's
        ``[output] show_realisations``.
    table : EmissivityTable or path, optional
        Emissivity table (default: the one the scenario was built with, else see
        :func:`synthcorona.emissivity.resolve_table`); its provenance goes into the attrs.
    onset : {"scan", "known"}, optional
        Override the file's ``[montecarlo] onset``: scan the CME onset (and recovery time) over the
        observation, or test the true onset only (a triggered observation). ``attrs["onset"]``
        records which was used.

    Returns
    -------
    xarray.Dataset
        Over ``band``, ``mass`` (the mass grid, g), ``time`` (bin centres, s),
        ``realisation`` and ``logT``, and the flare's scalars (``peak_flux_1_8A``, ``implied_class``,
        ``peak_temperature``, ``peak_emission_measure``, ``heating_energy``, ``radiated_energy_1_8A``,
        ``n_strands``); see the variables' ``long_name`` and ``units`` attrs.
    """
    mc = inputs.montecarlo
    n = check_realisations(int(mc.realisations if realisations is None else realisations),
                           inputs.observation.false_alarm)
    sd = int(mc.seed if seed is None else seed)
    if sd < 0:
        raise InputError(f"seed={sd} must be a non-negative integer", argument="seed")
    nshow = int(inputs.output.get("show_realisations", 2) if show_realisations is None else show_realisations)
    stat = mc.statistic
    onset = mc.onset if onset is None else onset
    if onset not in ("scan", "known"):
        raise InputError(f"onset={onset!r} must be 'scan' or 'known'", argument="onset")
    sc, tab = _scenario(inputs, table)

    # depth and profile
    d = sc.depth()
    lc, lc0, lc_vars, window = _light_curve_products(sc, nshow, sd)
    # detection at the scenario's mass
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        det = sc.detection_probability(n, statistic=stat, seed=sd, onset=onset)
    # P(detect) vs mass, and the minimum detectable mass per band
    grid, vs_mass, mass_note = _mass_grid_products(sc, inputs, n, stat, sd, onset)
    min_mass, bracket = _minimum_mass_products(sc, inputs, grid, n, stat, sd, onset)

    flare_vars, flare_attrs = _flare_variables(sc)
    data = {**_depth_variables(sc, d, lc_vars.pop("net_depth")), **lc_vars, **_detection_variables(det, stat),
            **vs_mass, **min_mass, **_curve_variables(sc, lc, inputs), **flare_vars}
    if nshow > 0:
        data["counts"] = (("realisation", "band", "time"), lc["counts"].values,
                          {"units": "ct", "long_name": "Poisson realisations with CME (background included)"})
        data["counts_without_cme"] = (("realisation", "band", "time"), lc0["counts"].values,
                                      {"units": "ct", "long_name": "Poisson realisations without CME"})
    coords = {"band": list(sc.labels), "mass": ("mass", grid, {"units": "g"}),
              "time": ("time", lc["time"].values, {"units": "s", "long_name": "bin centre from the start"}),
              "logT": ("logT", sc.logT, {"units": "log10(K)"}),
              "band_lo": ("band", sc.prepared.kernels.band_limits[:, 0], {"units": "keV"}),
              "band_hi": ("band", sc.prepared.kernels.band_limits[:, 1], {"units": "keV"}),
              "instrument": ("band", [ins.name for _, ins, _ in sc.channels])}
    attrs = {**_attrs(sc, tab, inputs, n, sd, stat, bracket, mass_note, window, det), **flare_attrs}
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _realisations_source(inputs, n: int) -> str:
    """How the number of realisations was chosen, for the attrs."""
    mc = inputs.montecarlo
    if n == mc.realisations and mc.precision is not None:
        return (f"precision {mc.precision:g} (standard error of P(detect)) at false-alarm probability "
                f"{float(inputs.observation.false_alarm):g} (synthcorona.dimming.sizes.realisations_for_precision)")
    return "given" if n == mc.realisations else "given (override)"


def forecast_tables(ds: xr.Dataset):
    """The forecast as two astropy ``QTable`` (with units): one row per band (depth, time profile, flare
    contamination, P(detect), minimum detectable mass) and one row per (mass, band) of P(detect) vs mass.

    Both carry the provenance (scenario file and hash, Monte Carlo, table) in ``meta``.
    """
    from astropy.table import QTable

    bands = [str(b) for b in ds["band"].values]
    nb = len(bands)
    t = QTable()
    t["band"] = bands
    t["instrument"] = [str(x) for x in ds["instrument"].values]
    t["band_lo"] = ds["band_lo"].values * u.keV
    t["band_hi"] = ds["band_hi"].values * u.keV
    t["quiescent_rate"] = ds["quiescent_rate"].values * u.ct / u.s
    t["background"] = ds["background"].values * u.ct / u.s
    t["quiescent_energy_flux"] = ds["quiescent_energy_flux"].values * u.erg / (u.s * u.cm ** 2)
    t["quiescent_luminosity"] = ds["quiescent_luminosity"].values * u.erg / u.s
    t["depth"] = ds["depth"].values
    t["depth_energy_flux"] = ds["depth_energy_flux"].values
    t["net_depth"] = ds["net_depth"].values
    t["onset_time"] = np.full(nb, float(ds["onset_time"])) * u.s
    t["recovery_time"] = np.full(nb, float(ds["recovery_time"])) * u.s
    t["fwhm_duration"] = np.full(nb, float(ds["fwhm_duration"])) * u.s
    t["flare_peak_excess"] = ds["flare_peak_excess"].values * u.ct / u.s
    t["dimming_peak_decrement"] = ds["dimming_peak_decrement"].values * u.ct / u.s
    t["flare_to_dimming"] = ds["flare_to_dimming"].values
    t["counts_post_window"] = ds["counts_post_window"].values * u.ct
    t["dimming_snr"] = ds["dimming_snr"].values
    t["probability"] = ds["probability"].values
    t["probability_error"] = ds["probability_error"].values
    t["minimum_detectable_mass"] = ds["minimum_detectable_mass"].values * u.g
    t["minimum_detectable_mass_error"] = ds["minimum_detectable_mass_error"].values * u.g
    t["note"] = [str(x) for x in ds["minimum_detectable_mass_note"].values]
    keep = ("title", "scenario_file", "scenario_sha256", "cme_onset_time_s", "n_realisations", "seed", "statistic", "onset",
            "false_alarm", "target_probability", "chianti_version", "table_content_hash", "synthcorona_version",
            "created")
    meta = {k: ds.attrs[k] for k in keep if k in ds.attrs}
    meta["cme_mass_g"] = float(ds["cme_mass"])
    t.meta.update(meta)
    m = QTable()
    nm = ds.sizes.get("mass", 0)
    m["mass"] = np.repeat(ds["mass"].values, nb) * u.g
    m["band"] = np.tile(bands, nm) if nm else np.array([], dtype=str)
    m["depth"] = ds["depth_vs_mass"].values.ravel()
    m["probability"] = ds["probability_vs_mass"].values.ravel()
    m["probability_error"] = ds["probability_vs_mass_error"].values.ravel()
    m.meta.update(meta)
    return t, m


def _version() -> str:
    from .. import __version__

    return __version__
