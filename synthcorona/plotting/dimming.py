"""Figures of dimming forecasts (matplotlib object API only: no pyplot state).

Each function returns a :class:`matplotlib.figure.Figure`; save it with ``fig.savefig(path)``.
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from ..errors import InputError

__all__ = ["plot_light_curves", "plot_detection_vs_mass", "plot_min_mass_vs_distance"]


def _figure(n_rows=1, height=3.0):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.0, height * n_rows), layout="constrained")
    axes = [fig.add_subplot(n_rows, 1, i + 1) for i in range(n_rows)]
    return fig, axes


def _need(ds, name, variables, what):
    if not isinstance(ds, xr.Dataset):
        raise InputError(f"{name}={type(ds).__name__} must be an xarray.Dataset from {what}")
    missing = [v for v in variables if v not in ds.variables]
    if missing:
        raise InputError(f"{name} lacks {missing}; pass the Dataset returned by {what}")


#: Colours of the light curves: expected with / without the CME, and the shades of their realisations.
WITH_CME_COLOUR, WITHOUT_CME_COLOUR = "tab:red", "tab:blue"
_WITH_SHADE, _WITHOUT_SHADE = "#f08a8a", "#86b9e3"
#: Line style of realisation 1, 2, 3, ... (the same in every panel).
REALISATION_STYLES = ("-", (0, (4, 2)), (0, (1, 1.5)), (0, (6, 2, 1, 2)))


def rate_scale(values) -> int:
    """Power of ten k by which count rates are divided on a light-curve axis (0 below 10^4 ct/s): the axis then
    reads ``[10^k ct/s]`` with plain tick labels instead of an offset or exponent label."""
    top = float(np.nanmax(np.abs(values))) if np.size(values) else 0.0
    return int(np.floor(np.log10(top))) if top >= 1e4 else 0


def _light_curve_panel(ax, t_h, ds, b, counts, counts_without, width, bg, n_show, scale):
    """One band's panel: realisations (thin steps) under the expected curves (thick lines)."""
    f = 10.0 ** -scale
    styles = REALISATION_STYLES
    if counts_without is not None:
        for i, row in enumerate(counts_without.sel(band=b).values[:n_show]):
            ax.step(t_h, row / width * f, where="mid", lw=0.8, color=_WITHOUT_SHADE, ls=styles[i % len(styles)],
                    zorder=1, label=f"realisation {i + 1} without CME")
    if counts is not None:
        for i, row in enumerate(counts.sel(band=b).values[:n_show]):
            ax.step(t_h, row / width * f, where="mid", lw=0.8, color=_WITH_SHADE, ls=styles[i % len(styles)],
                    zorder=2, label=f"realisation {i + 1} with CME")
    ax.plot(t_h, (ds["expected_without_cme"].sel(band=b).values + bg) * f, color=WITHOUT_CME_COLOUR, lw=1.4,
            zorder=3, label="expected without CME")
    ax.plot(t_h, (ds["expected"].sel(band=b).values + bg) * f, color=WITH_CME_COLOUR, lw=1.6, zorder=4,
            label="expected with CME")
    if "cme_onset_time_s" in ds.attrs:
        ax.axvline(float(ds.attrs["cme_onset_time_s"]) / 3600.0, color="k", ls=":", lw=0.8, zorder=5,
                   label="CME onset")
    ax.ticklabel_format(axis="y", useOffset=False, style="plain")
    ax.set_ylabel(f"{b} [{'' if scale == 0 else '10$^{%d}$ ' % scale}ct/s]")


def plot_light_curves(scenario_lightcurve_dataset, n_show: int = 3, counts_without_cme=None, star: str = ""):
    """Expected light curves with and without the CME and up to ``n_show`` Poisson realisations.

    ``scenario_lightcurve_dataset``: the result of ``DimmingScenario.light_curve(...,
    n_realisations=n)``; realisations (``counts``, including background) are drawn as rates
    counts / bin width, in light red; ``counts_without_cme`` (realisation, band, time), optional:
    realisations without the CME, in light blue. One panel per band; time in hours from the start;
    rates of 10^4 ct/s and more in units of a power of ten (:func:`rate_scale`). The legend sits
    below the panels, never over the data; the title gives the CME mass, ``star`` and the distance
    (in AU below 0.001 pc).
    """
    from ..io.report_render import distance_text, number

    ds = scenario_lightcurve_dataset
    _need(ds, "scenario_lightcurve_dataset", ["expected", "expected_without_cme", "time"],
          "DimmingScenario.light_curve")
    n_show = int(n_show)
    if n_show < 0:
        raise InputError(f"n_show={n_show} must be >= 0")
    bands = list(ds["band"].values)
    fig, axes = _figure(len(bands), height=2.4 if len(bands) > 1 else 3.0)
    t_h = ds["time"].values / 3600.0
    width = float(ds.attrs.get("bin_width_s", np.diff(ds["time"].values[:2])[0] if ds.sizes["time"] > 1 else 1.0))
    counts = ds["counts"] if "counts" in ds and n_show > 0 else None
    without = counts_without_cme if n_show > 0 else None
    for ax, b in zip(axes, bands):
        bg = float(ds["background"].sel(band=b)) if "background" in ds else 0.0
        scale = rate_scale(ds["expected_without_cme"].sel(band=b).values + bg)
        _light_curve_panel(ax, t_h, ds, b, counts, without, width, bg, n_show, scale)
    axes[-1].set_xlabel("time [h]")
    handles, labels = axes[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncol=min(len(labels), 3), fontsize="small",
               frameon=False)
    where = f"{star} at " if star else "at "
    dist = ds.attrs.get("star_distance_pc")
    fig.suptitle(f"CME of {number(ds.attrs.get('mass_g', np.nan))} g, {where}"
                 f"{distance_text(dist) if dist is not None else 'unknown distance'}", fontsize="medium")
    return fig


def plot_detection_vs_mass(ds):
    """P(detect) against CME mass (log axis) with binomial error bars, one curve per other grid point.

    ``ds``: a :func:`synthcorona.dimming.grids.detection_grid` result with a ``mass`` dimension;
    every other dimension is stacked into separate labelled curves.
    """
    _need(ds, "ds", ["probability", "mass"], "detection_grid(..., mass=[...])")
    p = ds["probability"]
    if "mass" not in p.dims:
        raise InputError("ds has no mass dimension; call detection_grid with mass=[...]")
    err = ds["probability_error"] if "probability_error" in ds else xr.zeros_like(p)
    others = [d for d in p.dims if d != "mass"]
    fig, (ax,) = _figure(1, 4.0)
    m = ds["mass"].values
    if others:
        ps, es = p.stack(case=others).transpose("case", "mass"), err.stack(case=others).transpose("case", "mass")
        for i in range(ps.sizes["case"]):
            lab = ", ".join(f"{d}={ps['case'].values[i][k]}" for k, d in enumerate(others))
            ax.errorbar(m, ps.values[i], yerr=es.values[i], marker="o", ms=3, capsize=2, label=lab)
        ax.legend(fontsize="small")
    else:
        ax.errorbar(m, p.values, yerr=err.values, marker="o", ms=3, capsize=2)
    ax.set_xscale("log")
    ax.set_ylim(-0.02, 1.02)
    ax.axhline(float(ds.attrs.get("false_alarm", 0.0)), color="0.6", ls=":", lw=0.8)
    ax.set_xlabel("CME mass [g]")
    ax.set_ylabel("P(detect)")
    return fig


def plot_min_mass_vs_distance(ds):
    """Minimum detectable CME mass against distance (log-log), one curve per other grid point.

    ``ds``: a :func:`synthcorona.dimming.grids.detection_grid` result computed with
    ``min_mass=True`` and a ``distance`` dimension. NaN points (target not bracketed) are
    omitted.
    """
    _need(ds, "ds", ["minimum_detectable_mass", "distance"], "detection_grid(..., distance=[...], min_mass=True)")
    mm = ds["minimum_detectable_mass"]
    if "distance" not in mm.dims:
        raise InputError("ds has no distance dimension; call detection_grid with distance=[...]")
    err = ds.get("minimum_detectable_mass_error", xr.zeros_like(mm))
    others = [d for d in mm.dims if d != "distance"]
    fig, (ax,) = _figure(1, 4.0)
    d = ds["distance"].values
    if others:
        ms, es = mm.stack(case=others).transpose("case", "distance"), err.stack(case=others).transpose("case",
                                                                                                      "distance")
        for i in range(ms.sizes["case"]):
            lab = ", ".join(f"{o}={ms['case'].values[i][k]}" for k, o in enumerate(others))
            ok = np.isfinite(ms.values[i])
            ax.errorbar(d[ok], ms.values[i][ok], yerr=es.values[i][ok], marker="o", ms=3, capsize=2, label=lab)
        ax.legend(fontsize="small")
    else:
        ok = np.isfinite(mm.values)
        ax.errorbar(d[ok], mm.values[ok], yerr=err.values[ok], marker="o", ms=3, capsize=2)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(f"distance [{ds['distance'].attrs.get('units', 'pc')}]")
    ax.set_ylabel(f"minimum detectable mass (P = {ds.attrs.get('target_probability', 0.5):g}) [g]")
    return fig
