"""Figures of an activity-cycle comparison (:func:`synthcorona.products.cycle.compare_cycle`) against phase.

Each function takes the comparison Dataset and returns a matplotlib ``Figure`` (object API only: no
pyplot state, no backend selection); :func:`cycle_figures` gives every applicable figure and
:func:`save_cycle_figures` writes them as PNG.
"""
from __future__ import annotations

import pathlib

import numpy as np
import xarray as xr

from ..constants import PARSEC_CM

__all__ = ["plot_cycle_fluxes", "plot_cycle_count_rates", "plot_cycle_hardness", "plot_cycle_conversion",
           "plot_cycle_dimming", "cycle_figures", "save_cycle_figures"]


def _figure(nrows=1, height=3.6):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.5, height * nrows))
    axes = [fig.add_subplot(nrows, 1, k + 1) for k in range(nrows)]
    return fig, axes


def _phase_axis(ax, ds: xr.Dataset):
    unit = ds["phase"].attrs.get("units", "1")
    ax.set_xlabel("time since reference epoch [yr]" if unit == "yr" else "cycle phase")


def _order(ds):
    return np.argsort(ds["phase"].values, kind="stable")


def _annotate(ax, ds, y):
    """Phase labels above the points of the first curve."""
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for xi, yi, lab in zip(x, np.asarray(y)[idx], ds["label"].values[idx]):
        if np.isfinite(yi):
            ax.annotate(str(lab), (xi, yi), textcoords="offset points", xytext=(0, 6), fontsize=7, ha="center")


def _title(ds, what):
    star = ds.attrs.get("star", "")
    return f"{what}{(' -- ' + star) if star else ''}"


def plot_cycle_fluxes(ds: xr.Dataset):
    """Energy flux (erg s-1 cm-2) per band against phase, log scale, with luminosity on the right axis."""
    fig, (ax,) = _figure()
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, band in enumerate(ds["band"].values):
        ax.semilogy(x, ds["flux"].values[idx, j], "o-", label=str(band))
    _annotate(ax, ds, ds["flux"].values[:, 0])
    ax.set_ylabel(f"flux [{ds['flux'].attrs['units']}]")
    _phase_axis(ax, ds)
    ax.legend(fontsize=8)
    d_cm = ds.attrs["star_distance_pc"] * PARSEC_CM
    sec = ax.secondary_yaxis("right", functions=(lambda f: f * 4 * np.pi * d_cm ** 2,
                                                  lambda L: L / (4 * np.pi * d_cm ** 2)))
    sec.set_ylabel("luminosity [erg / s]")
    ax.set_title(_title(ds, "band fluxes over the cycle"))
    fig.tight_layout()
    return fig


def plot_cycle_count_rates(ds: xr.Dataset):
    """Count rate (ct/s) per instrument band against phase, log scale."""
    fig, (ax,) = _figure()
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, ch in enumerate(ds["channel"].values):
        y = ds["count_rate"].values[idx, j]
        ax.semilogy(x, np.where(y > 0, y, np.nan), "o-", label=str(ch))
    ax.set_ylabel("count rate [ct / s]")
    _phase_axis(ax, ds)
    ax.legend(fontsize=8)
    ax.set_title(_title(ds, f"count rates (N_H = {ds.attrs.get('nh_cm-2', 0):.3g} cm-2)"))
    fig.tight_layout()
    return fig


def plot_cycle_hardness(ds: xr.Dataset):
    """Hardness ratio (H - S)/(H + S) and the ratio H/S of each band pair against phase."""
    fig, (a1, a2) = _figure(2, height=3.0)
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, pair in enumerate(ds["pair"].values):
        a1.plot(x, ds["hardness_ratio"].values[idx, j], "o-", label=str(pair))
        a2.semilogy(x, ds["band_ratio"].values[idx, j], "o-", label=str(pair))
    a1.set_ylabel("(H - S) / (H + S)")
    a2.set_ylabel("H / S")
    for a in (a1, a2):
        _phase_axis(a, ds)
    a1.legend(fontsize=8)
    a1.set_title(_title(ds, "hardness over the cycle"))
    fig.tight_layout()
    return fig


def plot_cycle_conversion(ds: xr.Dataset):
    """Counts-to-flux factors of the source and target bands and the rate ratio against phase."""
    fig, (a1, a2) = _figure(2, height=3.0)
    idx = _order(ds)
    x = ds["phase"].values[idx]
    src, tgt = ds.attrs.get("conversion_source", "source"), ds.attrs.get("conversion_target", "target")
    a1.semilogy(x, ds["counts_to_flux_source"].values[idx], "o-", label=f"per ct/s in {src}")
    a1.semilogy(x, ds["counts_to_flux_target"].values[idx], "s-", label=f"per ct/s in {tgt}")
    a1.set_ylabel(f"flux per count [{ds['counts_to_flux_source'].attrs['units']}]")
    a1.legend(fontsize=8)
    a2.semilogy(x, ds["rate_conversion"].values[idx], "o-")
    a2.set_ylabel(f"rate({tgt}) / rate({src})")
    for a in (a1, a2):
        _phase_axis(a, ds)
    a1.set_title(_title(ds, f"conversion, flux band {ds.attrs.get('conversion_flux_band_kev', '')} keV"))
    fig.tight_layout()
    return fig


def plot_cycle_dimming(ds: xr.Dataset):
    """Dimming depth and detection probability of the reference CME per band against phase."""
    fig, (a1, a2) = _figure(2, height=3.0)
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, b in enumerate(ds["dimming_band"].values):
        a1.plot(x, 100 * ds["dimming_depth"].values[idx, j], "o-", label=str(b))
        a2.errorbar(x, ds["detection_probability"].values[idx, j],
                    yerr=ds["detection_probability_error"].values[idx, j], fmt="o-", capsize=2, label=str(b))
    a1.set_ylabel("depth [%]")
    a2.set_ylabel("P(detect)")
    a2.set_ylim(-0.02, 1.02)
    fa = ds.attrs.get("dimming_false_alarm")
    if fa is not None:
        a2.axhline(float(fa), color="0.5", lw=0.8, ls=":", label="false alarm")
    for a in (a1, a2):
        _phase_axis(a, ds)
    a1.legend(fontsize=8)
    a1.set_title(_title(ds, f"reference CME ({ds.attrs.get('dimming_reference_cme_mass_g', float('nan')):.3g} g)"))
    fig.tight_layout()
    return fig


def cycle_figures(ds: xr.Dataset) -> dict:
    """``{PNG file name: Figure}`` of every figure that the Dataset has data for."""
    jobs = [("cycle_fluxes.png", plot_cycle_fluxes, "flux"),
            ("cycle_count_rates.png", plot_cycle_count_rates, "count_rate"),
            ("cycle_hardness.png", plot_cycle_hardness, "hardness_ratio"),
            ("cycle_conversion.png", plot_cycle_conversion, "rate_conversion"),
            ("cycle_dimming.png", plot_cycle_dimming, "detection_probability")]
    return {fname: fn(ds) for fname, fn, needs in jobs if needs in ds}


def save_cycle_figures(ds: xr.Dataset, out_dir, dpi: int = 120) -> list[pathlib.Path]:
    """Write :func:`cycle_figures` as PNG into ``out_dir`` (created if needed; see
    :func:`synthcorona.io.writers.write_figures`); returns the paths."""
    from ..io.writers import write_figures

    return write_figures(cycle_figures(ds), out_dir, dpi=dpi)
