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


def plot_light_curves(scenario_lightcurve_dataset, n_show: int = 3):
    """Expected light curves with and without the CME and up to ``n_show`` Poisson realisations.

    ``scenario_lightcurve_dataset``: the result of ``DimmingScenario.light_curve(...,
    n_realisations=n)``; realisations (``counts``, including background) are drawn as rates
    counts / bin width. One panel per band; time in hours from the start.
    """
    ds = scenario_lightcurve_dataset
    _need(ds, "scenario_lightcurve_dataset", ["expected", "expected_without_cme", "time"],
          "DimmingScenario.light_curve")
    n_show = int(n_show)
    if n_show < 0:
        raise InputError(f"n_show={n_show} must be >= 0")
    bands = list(ds["band"].values)
    fig, axes = _figure(len(bands))
    t_h = ds["time"].values / 3600.0
    width = float(ds.attrs.get("bin_width_s", np.diff(ds["time"].values[:2])[0] if ds.sizes["time"] > 1 else 1.0))
    for ax, b in zip(axes, bands):
        bg = float(ds["background"].sel(band=b)) if "background" in ds else 0.0
        if "counts" in ds and n_show > 0:
            c = ds["counts"].sel(band=b).values[:n_show]
            for i, row in enumerate(c):
                ax.step(t_h, row / width, where="mid", lw=0.6, alpha=0.6, color="0.5",
                        label="realisations (with CME)" if i == 0 else None)
        ax.plot(t_h, ds["expected_without_cme"].sel(band=b).values + bg, color="tab:blue", lw=1.2,
                label="expected without CME")
        ax.plot(t_h, ds["expected"].sel(band=b).values + bg, color="tab:red", lw=1.5, label="expected with CME")
        if "cme_onset_time_s" in ds.attrs:
            ax.axvline(float(ds.attrs["cme_onset_time_s"]) / 3600.0, color="k", ls=":", lw=0.8)
        ax.set_ylabel(f"{b} [ct/s]")
        ax.legend(fontsize="small", loc="best")
    axes[-1].set_xlabel("time [h]")
    axes[0].set_title(f"CME mass {float(ds.attrs.get('mass_g', np.nan)):.3g} g at "
                      f"{float(ds.attrs.get('star_distance_pc', np.nan)):.3g} pc")
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
