"""Figures of a forecast (:func:`synthcorona.products.forecast.run_forecast`): light curves, P(detect)
against CME mass, the temperature responses used and the instruments' effective areas (matplotlib
object API only: no pyplot state).

:func:`forecast_figures` returns every figure the Dataset (and, for the effective areas, the
scenario's inputs) has data for, with its file name and a caption that describes exactly what is
drawn, for the output folder and the report of ``synthcorona forecast``.
"""
from __future__ import annotations

import astropy.units as u
import numpy as np
import xarray as xr

from ..constants import HC_KEV_ANGSTROM
from ..io.report_render import distance_text, number
from .dimming import plot_light_curves

__all__ = ["forecast_figures", "plot_forecast_light_curves", "plot_forecast_detection_vs_mass",
           "plot_forecast_responses", "plot_forecast_effective_areas", "MASS_OFFSET_DEX"]

#: Markers and line styles that tell the bands apart where their curves overlap.
_MARKERS = ("o", "s", "^", "D", "v", "P", "X", "<", ">")
_LINESTYLES = ("-", "--", "-.", ":")
#: Horizontal shift [dex] between the bands' points in P(detect) against mass, so that equal values stay visible.
MASS_OFFSET_DEX = 0.02


def _star(ds) -> str:
    name = ds.attrs.get("star_name", "") or "the star"
    return f"{name} at {distance_text(ds.attrs['star_distance_pc'])}"


def _instruments(ds) -> str:
    names = list(dict.fromkeys(str(x) for x in ds["instrument"].values)) if "instrument" in ds.coords else \
        [str(b) for b in ds["band"].values]
    return ", ".join(names)


def plot_forecast_light_curves(ds: xr.Dataset):
    """Expected light curves with (red) and without (blue) the CME, with the Poisson realisations of both
    (light red, light blue); one panel per band (:func:`synthcorona.plotting.dimming.plot_light_curves`)."""
    lc = xr.Dataset({k: ds[k] for k in ("expected", "expected_without_cme", "background") if k in ds},
                    attrs={"bin_width_s": ds.attrs["bin_width_s"], "cme_onset_time_s": ds.attrs["cme_onset_time_s"],
                           "mass_g": float(ds["cme_mass"]), "star_distance_pc": ds.attrs["star_distance_pc"]})
    if "counts" in ds:
        lc["counts"] = ds["counts"]
    return plot_light_curves(lc, n_show=ds.sizes.get("realisation", 0), counts_without_cme=ds.get("counts_without_cme"),
                             star=ds.attrs.get("star_name", ""))


def _legend_outside(fig, ax, first=()):
    """One legend right of the axes (never over the data) for every labelled artist of the figure, the labels
    in ``first`` leading."""
    handles, labels = ax.get_legend_handles_labels()
    for other in fig.axes:
        if other is not ax:
            h, lab = other.get_legend_handles_labels()
            handles, labels = handles + h, labels + lab
    order = sorted(range(len(labels)), key=lambda k: (labels[k] not in first, k))
    fig.legend([handles[k] for k in order], [labels[k] for k in order], loc="outside right upper",
               fontsize="small", frameon=False)


def plot_forecast_detection_vs_mass(ds: xr.Dataset):
    """P(detect) against CME mass per band (markers and line styles per band, points shifted by
    :data:`MASS_OFFSET_DEX` between bands), with the scenario's mass (dotted), the target probability
    (dashed) and the false-alarm probability (grey dotted), all named in the legend; the title names the
    star, the instruments and the exposure."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.4, 3.6), layout="constrained")
    ax = fig.add_subplot()
    m = ds["mass"].values
    nb = ds.sizes["band"]
    for j, b in enumerate(ds["band"].values):
        shift = 10.0 ** (MASS_OFFSET_DEX * (j - (nb - 1) / 2.0)) if nb > 1 else 1.0
        ax.errorbar(m * shift, ds["probability_vs_mass"].values[:, j], yerr=ds["probability_vs_mass_error"].values[:, j],
                    marker=_MARKERS[j % len(_MARKERS)], ls=_LINESTYLES[j % len(_LINESTYLES)], ms=5, mfc="none",
                    capsize=2, lw=1.1, label=str(b))
    target, fa = float(ds.attrs["target_probability"]), float(ds.attrs["false_alarm"])
    ax.axhline(target, color="0.35", ls="--", lw=0.9, label=f"target P = {number(target)}")
    ax.axhline(fa, color="0.6", ls=":", lw=0.9, label=f"false-alarm probability {number(fa)}")
    ax.axvline(float(ds["cme_mass"]), color="k", ls=":", lw=0.9, label=f"scenario's mass {number(float(ds['cme_mass']))} g")
    ax.set_xscale("log")
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel("CME mass [g]")
    ax.set_ylabel("P(detect)")
    ax.set_title(f"{_star(ds)}; {_instruments(ds)}; {number(ds.attrs['exposure_s'] / 3600.0)} h exposure\n"
                 f"{ds.attrs['n_realisations']} realisations per point, seed {ds.attrs['seed']}", fontsize="medium")
    _legend_outside(fig, ax, first=[str(b) for b in ds["band"].values])
    return fig


def em_per_dex(logT, weights) -> np.ndarray:
    """Emission measure per unit log10 T [cm-3 dex-1] from the EM per node of a log T grid: each node's weight
    over its share of the grid, :func:`numpy.gradient` of log T (the area of its hat function)."""
    x = np.asarray(logT, dtype=float)
    return np.asarray(weights, dtype=float) / np.gradient(x)


def plot_forecast_responses(ds: xr.Dataset, floor: float = 1e-4):
    """Count rate per unit emission measure of each band for the star's distance and N_H (solid, left axis),
    the quiescent DEM as emission measure per unit log T (dashed, right axis) and the CME source temperature
    (dotted). The temperature axis spans exactly the range where a curve is drawn."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.4, 3.8), layout="constrained")
    ax = fig.add_subplot()
    t = 10 ** ds["logT"].values
    scale = 1.0 / float(ds.attrs["star_distance_pc"]) ** 2          # the responses are stored for 1 pc
    resp = ds["temperature_response"].values * scale
    top = float(np.nanmax(resp)) if np.any(resp > 0) else 1.0
    shown = np.zeros(t.size, dtype=bool)
    for j, b in enumerate(ds["band"].values):
        y = np.where(resp[j] > 0, resp[j], np.nan)
        ax.plot(t, y, ls=_LINESTYLES[j % len(_LINESTYLES)], lw=1.4, label=str(b))
        shown |= resp[j] >= top * floor
    ax.set_yscale("log")
    ax.set_ylim(top * floor, top * 2)
    ax.axvline(float(ds.attrs["source_temperature_K"]), color="k", ls=":", lw=0.9, label="CME source temperature")
    em = em_per_dex(ds["logT"].values, ds["dem_em_weights"].values)
    if np.any(em > 0):
        ax2 = ax.twinx()
        ax2.plot(t, np.where(em > 0, em, np.nan), color="0.45", lw=1.1, ls="--", label="quiescent EM per dex")
        ax2.set_yscale("log")
        ax2.set_ylim(em.max() * 1e-4, em.max() * 3)
        ax2.set_ylabel("quiescent EM per unit log T [cm$^{-3}$ dex$^{-1}$]")
        shown |= em >= em.max() * 1e-4
    idx = np.flatnonzero(shown)
    if idx.size:
        ax.set_xlim(t[idx[0]], t[idx[-1]])
    ax.set_xscale("log")
    ax.set_xlabel("temperature [K]")
    ax.set_ylabel("count rate per unit EM [ct s$^{-1}$ cm$^{3}$]")
    nh = float(ds.attrs.get("nh_cm-2", 0.0))
    ax.set_title(f"{_star(ds)}, N$_H$ = {number(nh)} cm$^{{-2}}$", fontsize="medium")
    ax.grid(True, which="major", alpha=0.3)
    _legend_outside(fig, ax)
    return fig


def plot_forecast_effective_areas(ds: xr.Dataset, inputs):
    """Effective area of every instrument of the scenario against photon energy (wavelength on the top axis),
    with the energy limits of the bands used drawn as labelled bars at the bottom (a band that is an
    instrument's whole response is not drawn)."""
    from matplotlib.transforms import blended_transform_factory

    from .instruments import plot_effective_area

    fig = plot_effective_area(*[e.instrument for e in inputs.instruments], axis="energy")
    fig.set_size_inches(7.4, 3.6)
    ax = fig.axes[0]
    ax.get_legend().remove()
    along = blended_transform_factory(ax.transData, ax.transAxes)      # x in keV, y in axes fraction
    k = 0
    for e in inputs.instruments:
        for b in e.bands:
            if b == "total":
                continue
            lo, hi = sorted(float(x) for x in e.instrument.bands[b].to_value(u.keV, equivalencies=u.spectral()))
            y = 0.05 + 0.075 * k
            ax.plot([lo, hi], [y, y], transform=along, color="0.25", lw=2.5, solid_capstyle="butt")
            ax.text(np.sqrt(lo * hi), y + 0.012, f"{e.instrument.name}:{b}", transform=along, ha="center",
                    va="bottom", fontsize=7)
            k += 1
    top = ax.secondary_xaxis("top", functions=(lambda x: HC_KEV_ANGSTROM / np.maximum(x, 1e-30),
                                               lambda w: HC_KEV_ANGSTROM / np.maximum(w, 1e-30)))
    top.set_xlabel("wavelength [Å]")
    ax.set_xlabel("photon energy [keV]")
    ax.set_ylabel("effective area [cm$^2$]")
    _legend_outside(fig, ax)
    return fig


def _light_curve_caption(ds) -> str:
    n = ds.sizes.get("realisation", 0)
    text = "Expected count rate (star and background) with the CME (red) and without it (blue)"
    if n:
        what = "one Poisson realisation of each" if n == 1 else f"{n} Poisson realisations of each"
        styles = "" if n == 1 else "; the first solid, the second dashed" + ("; the third dotted" if n > 2 else "")
        text += (f", and {what} (thin steps: light red with the CME, light blue without{styles}; before the CME "
                 "the two coincide, as both use the same random numbers)")
    return text + "; dotted line: CME onset."


def forecast_figures(ds: xr.Dataset, inputs=None) -> dict:
    """``name -> (file name, Figure, caption)`` of every figure of a forecast Dataset; with the scenario's
    ``inputs`` (:class:`~synthcorona.io.forecast_file.ForecastInputs`) also the effective areas."""
    figs = {}
    if inputs is not None:
        figs["effective_area"] = ("effective_area.png", plot_forecast_effective_areas(ds, inputs),
                                  "Effective area of each instrument against photon energy (top axis: wavelength); "
                                  "bars: the energy limits of the bands used (a band that is the whole response is "
                                  "not drawn).")
    figs["light_curves"] = ("light_curves.png", plot_forecast_light_curves(ds), _light_curve_caption(ds))
    if ds.sizes.get("mass", 0):
        shift = " (the bands' points are shifted slightly in mass so that equal values stay visible)" \
            if ds.sizes["band"] > 1 else ""
        figs["detection_vs_mass"] = ("detection_vs_mass.png", plot_forecast_detection_vs_mass(ds),
                                     "P(detect) against CME mass per band with its binomial error" + shift +
                                     "; dotted black: the scenario's mass; dashed: the target probability; grey "
                                     "dotted: the false-alarm probability.")
    nh = float(ds.attrs.get("nh_cm-2", 0.0))
    figs["temperature_responses"] = (
        "temperature_responses.png", plot_forecast_responses(ds),
        f"Count rate per unit emission measure in each band for the star at {distance_text(ds.attrs['star_distance_pc'])}"
        f"{f' behind N_H = {number(nh)} cm⁻²' if nh > 0 else ' without interstellar absorption'} (solid), the "
        "quiescent DEM as emission measure per unit log T (dashed, right axis) and the CME source temperature "
        "(dotted).")
    return figs
