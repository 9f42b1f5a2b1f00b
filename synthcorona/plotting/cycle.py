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
from ..io.report_render import distance_text, number, wavelength_range_text

__all__ = ["plot_cycle_fluxes", "plot_cycle_count_rates", "plot_cycle_hardness", "plot_cycle_conversion",
           "plot_cycle_dimming", "cycle_figures", "cycle_figures_names", "cycle_captions", "save_cycle_figures",
           "curve_style"]


#: Marker, line style and marker size of the k-th curve of a panel: curves that coincide stay distinguishable
#: (open markers of decreasing size nest inside each other; the line styles differ).
_MARKERS = ("o", "s", "^", "D", "v", "P", "X", "<", ">")
_LINESTYLES = ("-", "--", "-.", ":")


def curve_style(k: int) -> dict:
    """Keyword arguments of the k-th curve of a panel (marker, line style, open marker of decreasing size)."""
    return {"marker": _MARKERS[k % len(_MARKERS)], "ls": _LINESTYLES[k % len(_LINESTYLES)],
            "ms": max(9.0 - 1.2 * (k % 5), 3.5), "mfc": "none", "mew": 1.2, "lw": 1.2}


def _figure(nrows=1, height=3.6):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.5, height * nrows), layout="constrained")
    axes = [fig.add_subplot(nrows, 1, k + 1) for k in range(nrows)]
    return fig, axes


def _legend(fig, ax, first=()):
    """The panel's legend below the figure, never over the data; the labels in ``first`` lead."""
    handles, labels = ax.get_legend_handles_labels()
    order = sorted(range(len(labels)), key=lambda k: (labels[k] not in first, k))
    if labels:
        fig.legend([handles[k] for k in order], [labels[k] for k in order], loc="outside lower center",
                   ncol=min(len(labels), 3), fontsize=8, frameon=False)


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
            ax.annotate(str(lab), (xi, yi), textcoords="offset points", xytext=(0, 7), fontsize=7, ha="center")


def _title(ds, what):
    star = ds.attrs.get("star", "")
    return f"{star}: {what}" if star else what


def plot_cycle_fluxes(ds: xr.Dataset):
    """Energy flux (erg s-1 cm-2) per band against phase, log scale, with luminosity on the right axis."""
    fig, (ax,) = _figure()
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, band in enumerate(ds["band"].values):
        ax.semilogy(x, ds["flux"].values[idx, j], label=str(band), **curve_style(j))
    _annotate(ax, ds, ds["flux"].values[:, 0])
    ax.set_ylabel("unabsorbed flux [erg s$^{-1}$ cm$^{-2}$]")
    _phase_axis(ax, ds)
    d_cm = ds.attrs["star_distance_pc"] * PARSEC_CM
    sec = ax.secondary_yaxis("right", functions=(lambda f: f * 4 * np.pi * d_cm ** 2,
                                                  lambda L: L / (4 * np.pi * d_cm ** 2)))
    sec.set_ylabel("luminosity [erg s$^{-1}$]")
    ax.set_title(_title(ds, f"band fluxes at {distance_text(ds.attrs['star_distance_pc'])} over the cycle"))
    _legend(fig, ax)
    return fig


def plot_cycle_count_rates(ds: xr.Dataset):
    """Count rate (ct/s) per instrument band against phase, log scale."""
    fig, (ax,) = _figure()
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, ch in enumerate(ds["channel"].values):
        y = ds["count_rate"].values[idx, j]
        ax.semilogy(x, np.where(y > 0, y, np.nan), label=str(ch), **curve_style(j))
    ax.set_ylabel("count rate [ct s$^{-1}$]")
    _phase_axis(ax, ds)
    nh = float(ds.attrs.get("nh_cm-2", 0.0))
    ax.set_title(_title(ds, f"count rates, N$_H$ = {number(nh)} cm$^{{-2}}$"))
    _legend(fig, ax)
    return fig


def plot_cycle_hardness(ds: xr.Dataset):
    """Hardness ratio (H - S)/(H + S) and the ratio H/S of each band pair against phase."""
    fig, (a1, a2) = _figure(2, height=3.0)
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, pair in enumerate(ds["pair"].values):
        a1.plot(x, ds["hardness_ratio"].values[idx, j], label=str(pair), **curve_style(j))
        a2.semilogy(x, ds["band_ratio"].values[idx, j], label=str(pair), **curve_style(j))
    a1.set_ylabel("(H - S) / (H + S)")
    a2.set_ylabel("H / S")
    for a in (a1, a2):
        _phase_axis(a, ds)
    a1.set_title(_title(ds, "hardness over the cycle"))
    _legend(fig, a1)
    return fig


def plot_cycle_conversion(ds: xr.Dataset):
    """Counts-to-flux factors of the source and target bands and the rate ratio against phase; the title
    names both bands and the flux band (to 3 significant digits) and where its limits come from."""
    fig, (a1, a2) = _figure(2, height=3.0)
    idx = _order(ds)
    x = ds["phase"].values[idx]
    src, tgt = ds.attrs.get("conversion_source", "source"), ds.attrs.get("conversion_target", "target")
    a1.semilogy(x, ds["counts_to_flux_source"].values[idx], label=f"per ct/s in {src}", **curve_style(0))
    a1.semilogy(x, ds["counts_to_flux_target"].values[idx], label=f"per ct/s in {tgt}", **curve_style(1))
    a1.set_ylabel("flux per count [erg cm$^{-2}$ ct$^{-1}$]")
    a2.semilogy(x, ds["rate_conversion"].values[idx], **curve_style(0))
    a2.set_ylabel(f"rate({tgt}) / rate({src})")
    for a in (a1, a2):
        _phase_axis(a, ds)
    band = ds.attrs.get("conversion_flux_band_kev", "")
    if band:
        lo, hi = (float(v) for v in band.split("-"))
        origin = ds.attrs.get("conversion_flux_band_origin", "")
        band = (f"\nflux in {number(lo, 3)} to {number(hi, 3)} keV ({wavelength_range_text(lo, hi)})"
                + (f", {origin}" if origin and origin != "given" else ""))
    a1.set_title(_title(ds, f"counts in {src} converted to {tgt}{band}"), fontsize="medium")
    _legend(fig, a1)
    return fig


def plot_cycle_dimming(ds: xr.Dataset):
    """Dimming depth and detection probability of the reference CME per band against phase."""
    fig, (a1, a2) = _figure(2, height=3.0)
    idx = _order(ds)
    x = ds["phase"].values[idx]
    for j, b in enumerate(ds["dimming_band"].values):
        a1.plot(x, 100 * ds["dimming_depth"].values[idx, j], label=str(b), **curve_style(j))
        a2.errorbar(x, ds["detection_probability"].values[idx, j],
                    yerr=ds["detection_probability_error"].values[idx, j], capsize=2, label=str(b),
                    **curve_style(j))
    a1.set_ylabel("depth [%]")
    a2.set_ylabel("P(detect)")
    a2.set_ylim(-0.02, 1.02)
    fa = ds.attrs.get("dimming_false_alarm")
    if fa is not None:
        a2.axhline(float(fa), color="0.5", lw=0.8, ls=":", label=f"false-alarm probability {number(float(fa))}")
    for a in (a1, a2):
        _phase_axis(a, ds)
    mass = ds.attrs.get("dimming_reference_cme_mass_g", float("nan"))
    a1.set_title(_title(ds, f"reference CME of {number(mass)} g"))
    _legend(fig, a2, first=[str(b) for b in ds["dimming_band"].values])
    return fig


def cycle_captions(ds: xr.Dataset) -> dict:
    """``{PNG file name: caption}`` of the figures of :func:`cycle_figures`, for the cycle report."""
    caps = {"cycle_fluxes.png": "Unabsorbed energy flux in each band against phase (right axis: luminosity); "
                                "labels: the phases.",
            "cycle_count_rates.png": "Count rate in each instrument band against phase, with interstellar "
                                     "absorption; open markers of decreasing size and different line styles keep "
                                     "coinciding curves visible.",
            "cycle_hardness.png": "Hardness ratio (H − S)/(H + S) (top) and ratio H/S (bottom) of each band pair "
                                  "against phase.",
            "cycle_conversion.png": "Flux per count of the source and target instrument bands (top) and the "
                                    "target rate per unit source rate (bottom) against phase.",
            "cycle_dimming.png": "Depth (top) and detection probability with its binomial error (bottom) of the "
                                 "reference CME against phase; dotted: the false-alarm probability."}
    return {k: v for k, v in caps.items() if k in cycle_figures_names(ds)}


def cycle_figures_names(ds: xr.Dataset) -> list:
    """File names of the figures that :func:`cycle_figures` draws for ``ds``, in order."""
    return [fname for fname, _, needs in _JOBS if needs in ds]


#: (file name, figure function, the variable it needs) of every cycle figure, in order.
_JOBS = [("cycle_fluxes.png", plot_cycle_fluxes, "flux"),
         ("cycle_count_rates.png", plot_cycle_count_rates, "count_rate"),
         ("cycle_hardness.png", plot_cycle_hardness, "hardness_ratio"),
         ("cycle_conversion.png", plot_cycle_conversion, "rate_conversion"),
         ("cycle_dimming.png", plot_cycle_dimming, "detection_probability")]


def cycle_figures(ds: xr.Dataset) -> dict:
    """``{PNG file name: Figure}`` of every figure that the Dataset has data for."""
    return {fname: fn(ds) for fname, fn, needs in _JOBS if needs in ds}


def save_cycle_figures(ds: xr.Dataset, out_dir, dpi: int = 120) -> list[pathlib.Path]:
    """Write :func:`cycle_figures` as PNG into ``out_dir`` (created if needed; see
    :func:`synthcorona.io.writers.write_figures`); returns the paths."""
    from ..io.writers import write_figures

    return write_figures(cycle_figures(ds), out_dir, dpi=dpi)
