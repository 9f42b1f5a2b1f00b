"""The products of a CME-dimming forecast, computed from a scenario file's :class:`ForecastInputs`.

:func:`run_forecast` evaluates, for every band of the scenario's
:class:`~synthcorona.dimming.scenario.DimmingScenario`:

* the full dimming depth (:meth:`DimmingScenario.depth`) and the time profile: onset time a,
  recovery e-folding time tau and the full width at half depth a/2 + tau ln 2 of the linear-rise /
  exponential-recovery profile (:mod:`synthcorona.dimming.profile`);
* flare contamination: the peak flare excess against the peak dimming decrement, and their
  counts in the post-event window of the window test (the flare fills in the dimming there);
* the net depth of the expected light curve (flare included), max over bins of (q - r) / q;
* the detection probability at the scenario's CME mass and at every mass of the mass grid
  (:meth:`DimmingScenario.detection_probability`, injection-recovery with the same seed at
  every mass: common random numbers), and the minimum detectable mass at the target probability
  (:meth:`DimmingScenario.minimum_detectable_mass`, Brent's method on ln M);
* the expected light curves with and without the CME, Poisson realisations of both, and the
  temperature responses used.

Everything is returned as one :class:`xarray.Dataset` with units and provenance in attrs (the
emissivity table's CHIANTI version, content hash and substituted ions; the scenario file's text
and SHA-256).
"""
from __future__ import annotations

import datetime
import hashlib
import math
import warnings

import astropy.units as u
import numpy as np
import xarray as xr

from ..errors import InputError

__all__ = ["run_forecast", "table_provenance", "fwhm_duration"]


def fwhm_duration(onset_s: float, recovery_s: float) -> float:
    """Time [s] the dimming profile spends above half its full depth: a/2 + tau ln 2.

    For the linear rise over a and exponential recovery with e-folding time tau of
    :func:`synthcorona.dimming.profile.dimming_profile` (the rise crosses 1/2 at a/2, the
    recovery at a + tau ln 2).
    """
    return 0.5 * float(onset_s) + float(recovery_s) * math.log(2.0)


def table_provenance(table=None) -> dict:
    """Atomic-data provenance of the emissivity table (default: the embedded one) as flat attrs.

    Keys ``chianti_version``, ``table_content_hash``, ``table_file``, ``chianti_substituted_ions``
    (the ions whose level-resolved files come from older CHIANTI releases) and
    ``chianti_substituted_ion_count``.
    """
    from ..emissivity import load_emissivity

    t = table if table is not None else load_emissivity()
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


def _min_mass(scenario, band, target, bracket, statistic, n, seed):
    """Minimum detectable mass of one band: (mass g, error g, note)."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            res = scenario.minimum_detectable_mass(target, bracket=bracket, band=band, statistic=statistic,
                                                   n_realisations=n, seed=seed)
    except InputError as exc:
        msg = " ".join(str(exc).split())
        if "does not straddle" in msg:
            lo, hi = (float(b.to_value(u.g)) for b in bracket)
            p = msg.split("P(detect) = ", 1)[-1].split(" (false_alarm", 1)[0]
            msg = f"not bracketed in [{lo:.3g}, {hi:.3g}] g: P(detect) = {p}"
        return math.nan, math.nan, msg
    note = res.attrs.get("bracket_note", "")
    return float(res["mass"]), float(res["mass_error"]), "" if note == "bracket used as given" else note


def run_forecast(inputs, *, realisations: int | None = None, seed: int | None = None,
                 show_realisations: int | None = None) -> xr.Dataset:
    """All forecast products of a scenario (see the module docstring) as one Dataset.

    Parameters
    ----------
    inputs : ForecastInputs
        From :func:`synthcorona.io.forecast_file.read_forecast_file` (with its scenario built).
    realisations, seed : int, optional
        Override the file's ``[montecarlo]`` values (Monte Carlo realisations per probability;
        integer seed of every random draw).
    show_realisations : int, optional
        Poisson light-curve realisations stored (with and without the CME); default the file's
        ``[output] show_realisations``.

    Returns
    -------
    xarray.Dataset
        Over ``band``, ``mass`` (the mass grid, g), ``time`` (bin centres, s),
        ``realisation`` and ``logT``; see the variables' ``long_name`` and ``units`` attrs.
    """
    sc = inputs.scenario
    if sc is None:
        raise InputError("inputs.scenario is None: read the file with build=True")
    mc = inputs.montecarlo
    n = int(mc.realisations if realisations is None else realisations)
    if n < 100:
        raise InputError(f"realisations={n} is too few to calibrate a false-alarm threshold; valid range [100, 1e6]")
    sd = int(mc.seed if seed is None else seed)
    if sd < 0:
        raise InputError(f"seed={sd} must be a non-negative integer")
    nshow = int(inputs.output.get("show_realisations", 2) if show_realisations is None else show_realisations)
    stat = mc.statistic
    labels = list(sc.labels)
    nb = len(labels)

    # depth and profile
    d = sc.depth()
    onset, tau = float(sc.onset), float(sc.recovery_time)
    lc = sc.light_curve(seed=sd, n_realisations=nshow) if nshow > 0 else sc.light_curve()
    lc0 = sc.light_curve(seed=sd, n_realisations=nshow, mass=0 * u.g) if nshow > 0 else None
    q = sc.prepared.rates.quiescent_rate
    net = np.max((q[:, None] - lc["expected"].values) / q[:, None], axis=1)
    win = sc.detection_windows()[1]
    t_edges = sc.edges
    w0, w1 = (float(x.to_value(u.s)) for x in win)
    lo_e, hi_e = np.clip(t_edges[:-1], w0, w1), np.clip(t_edges[1:], w0, w1)
    frac = (hi_e - lo_e) / np.diff(t_edges)                    # part of each bin inside the post-event window
    widths = np.diff(t_edges)
    flare_counts = (lc["flare_excess"].values * widths * frac).sum(axis=1)
    dim_counts = (lc["dimming_decrement"].values * widths * frac).sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(dim_counts > 0, flare_counts / dim_counts, np.inf if sc.flare is not None else 0.0)

    # detection at the scenario's mass
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        det = sc.detection_probability(n, statistic=stat, seed=sd)

    # P(detect) vs mass (common random numbers: the same seed at every mass)
    grid = np.asarray(inputs.mass_grid.to_value(u.g), dtype=float)
    mmax = float(sc.max_mass.to_value(u.g))
    dropped = grid[grid > mmax * (1 + 1e-12)]
    grid = grid[grid <= mmax * (1 + 1e-12)]
    mass_note = (f"masses {', '.join(f'{m:.3g}' for m in dropped)} g exceed the largest removable mass {mmax:.4g} g "
                 "and were left out") if dropped.size else "all masses of the grid used"
    pv = np.full((grid.size, nb), np.nan)
    pe = np.full_like(pv, np.nan)
    for k, m in enumerate(grid):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            r = sc.detection_probability(n, statistic=stat, seed=sd, mass=m * u.g)
        pv[k], pe[k] = r["probability"].values, r["probability_error"].values
    depth_grid = sc.depths_for(grid) if grid.size else np.zeros((0, nb))

    # minimum detectable mass per band
    lo_b = (grid.min() if grid.size else float(inputs.cme.mass.to_value(u.g)) or 1e15) / 100.0
    hi_b = min((grid.max() if grid.size else lo_b * 1e6) * 100.0, mmax)
    bracket = (lo_b * u.g, hi_b * u.g)
    mm = np.full(nb, np.nan)
    mme = np.full(nb, np.nan)
    notes = [""] * nb
    for b, lab in enumerate(labels):
        mm[b], mme[b], notes[b] = _min_mass(sc, lab, inputs.target_probability, bracket, stat, n, sd)
    best = sc.best_band()

    # temperature responses used (ct s-1 cm3 at 1 pc, ISM absorption included)
    band_dims = ("band",)
    data = {
        "depth": (band_dims, d["depth"].values, {"units": "1", "long_name": "full fractional count-rate depth"}),
        "depth_energy_flux": (band_dims, d["depth_energy_flux"].values,
                              {"units": "1", "long_name": "full fractional energy-flux depth (band limits)"}),
        "net_depth": (band_dims, net, {"units": "1", "long_name": "largest fractional deficit of the expected light "
                                                                  "curve below quiescence, flare included"}),
        "quiescent_rate": (band_dims, q, {"units": "ct / s"}),
        "quiescent_energy_flux": (band_dims, d["quiescent_energy_flux"].values, {"units": "erg / (s cm2)"}),
        "background": (band_dims, sc.prepared.rates.background, {"units": "ct / s"}),
        "rate_decrement": (band_dims, d["rate_decrement"].values,
                           {"units": "ct / s", "long_name": "full dimming decrement of the count rate"}),
        "flare_peak_excess": (band_dims, lc["flare_excess"].values.max(axis=1),
                              {"units": "ct / s", "long_name": "largest bin-averaged flare excess"}),
        "dimming_peak_decrement": (band_dims, lc["dimming_decrement"].values.max(axis=1),
                                   {"units": "ct / s", "long_name": "largest bin-averaged dimming decrement"}),
        "flare_counts_post_window": (band_dims, flare_counts,
                                     {"units": "ct", "long_name": "flare excess counts in the post-event window"}),
        "dimming_counts_post_window": (band_dims, dim_counts,
                                       {"units": "ct", "long_name": "dimming deficit counts in the post-event window"}),
        "flare_to_dimming": (band_dims, ratio, {"units": "1", "long_name": "flare excess / dimming deficit counts in "
                                                                           "the post-event window"}),
        "probability": (band_dims, det["probability"].values,
                        {"units": "1", "long_name": "P(detect) at the scenario's CME mass"}),
        "probability_error": (band_dims, det["probability_error"].values, {"units": "1", "long_name": "binomial error"}),
        "threshold": (band_dims, det["threshold"].values,
                      {"units": "sigma" if stat == "window" else "1", "long_name": "detection threshold"}),
        "probability_vs_mass": (("mass", "band"), pv, {"units": "1", "long_name": "P(detect) at each mass of the grid"}),
        "probability_vs_mass_error": (("mass", "band"), pe, {"units": "1"}),
        "depth_vs_mass": (("mass", "band"), depth_grid, {"units": "1"}),
        "minimum_detectable_mass": (band_dims, mm, {"units": "g", "long_name": "CME mass with P(detect) = "
                                                                               f"{inputs.target_probability:g}"}),
        "minimum_detectable_mass_error": (band_dims, mme, {"units": "g", "long_name": "Monte Carlo error"}),
        "minimum_detectable_mass_note": (band_dims, np.array(notes, dtype=object)),
        "expected": (("band", "time"), lc["expected"].values, {"units": "ct / s", "long_name": "with CME and flare"}),
        "expected_without_cme": (("band", "time"), lc["expected_without_cme"].values,
                                 {"units": "ct / s", "long_name": "quiescent + flare"}),
        "flare_excess": (("band", "time"), lc["flare_excess"].values, {"units": "ct / s"}),
        "dimming_decrement": (("band", "time"), lc["dimming_decrement"].values, {"units": "ct / s"}),
        "temperature_response": (("band", "logT"), sc.prepared.bands.kernel,
                                 {"units": "ct cm3 / s", "long_name": "temperature response at 1 pc, ISM absorption "
                                                                      "included"}),
        "dem_em_weights": (("logT",), sc.prepared.source.quiescent_weights,
                           {"units": "cm-3", "long_name": "quiescent EM per table temperature node"}),
        "onset_time": ((), onset, {"units": "s", "long_name": "linear rise time of the dimming"}),
        "recovery_time": ((), tau, {"units": "s", "long_name": "e-folding recovery time"}),
        "fwhm_duration": ((), fwhm_duration(onset, tau), {"units": "s", "long_name": "time above half depth"}),
        "cme_mass": ((), float(inputs.cme.mass.to_value(u.g)), {"units": "g"}),
        "max_removable_mass": ((), mmax, {"units": "g"}),
    }
    if nshow > 0:
        data["counts"] = (("realisation", "band", "time"), lc["counts"].values,
                          {"units": "ct", "long_name": "Poisson realisations with CME (background included)"})
        data["counts_without_cme"] = (("realisation", "band", "time"), lc0["counts"].values,
                                      {"units": "ct", "long_name": "Poisson realisations without CME"})
    attrs = {k: (v if isinstance(v, (str, int, float)) else str(v)) for k, v in sc.result_attrs().items()}
    text = inputs.raw_text
    attrs.update({
        "title": inputs.title,
        "description": inputs.description,
        "scenario_file": str(inputs.source),
        "scenario_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest(),
        "scenario_toml": text,
        "star_name": inputs.star_name or "",
        "flare_energy_erg": float(inputs.flare.energy.to_value(u.erg)) if inputs.flare is not None else 0.0,
        "flare_class": inputs.flare_class or "",
        "n_realisations": n,
        "seed": sd,
        "statistic": stat,
        "false_alarm": float(inputs.observation.false_alarm),
        "target_probability": float(inputs.target_probability),
        "min_mass_bracket_g": f"{lo_b:.6g} {hi_b:.6g}",
        "mass_grid_note": mass_note,
        "best_band": best,
        "bin_width_s": float(sc.bin_width),
        "exposure_s": float(inputs.observation.exposure.to_value(u.s)),
        "post_event_window_s": f"{w0:.6g} {w1:.6g}",
        "synthcorona_version": _version(),
        "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        "method": attrs.get("method", "") + "; P(detect) by injection-recovery (synthcorona.dimming.detection)",
    })
    attrs.update(table_provenance())
    coords = {"band": labels, "mass": ("mass", grid, {"units": "g"}),
              "time": ("time", lc["time"].values, {"units": "s", "long_name": "bin centre from the start"}),
              "logT": ("logT", sc.logT, {"units": "log10(K)"}),
              "band_lo": ("band", sc.prepared.bands.band_limits[:, 0], {"units": "keV"}),
              "band_hi": ("band", sc.prepared.bands.band_limits[:, 1], {"units": "keV"})}
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _version() -> str:
    from .. import __version__

    return __version__
