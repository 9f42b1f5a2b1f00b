"""Figures of a forecast (:func:`synthcorona.products.forecast.run_forecast`): light curves, P(detect)
against CME mass and the temperature responses used (matplotlib object API only: no pyplot state).

:func:`forecast_figures` returns every figure the Dataset has data for, with its file name and caption,
for the output folder and the report of ``synthcorona forecast``.
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from .dimming import plot_detection_vs_mass, plot_light_curves
from .instruments import plot_temperature_responses

__all__ = ["forecast_figures", "plot_forecast_light_curves", "plot_forecast_detection_vs_mass",
           "plot_forecast_responses"]


def plot_forecast_light_curves(ds: xr.Dataset):
    """Expected light curves with and without the CME, with the Poisson realisations of both; one panel per band."""
    lc = xr.Dataset({k: ds[k] for k in ("expected", "expected_without_cme", "background") if k in ds},
                    attrs={"bin_width_s": ds.attrs["bin_width_s"], "cme_onset_time_s": ds.attrs["cme_onset_time_s"],
                           "mass_g": float(ds["cme_mass"]), "star_distance_pc": ds.attrs["star_distance_pc"]})
    if "counts" in ds:
        lc["counts"] = ds["counts"]
    fig = plot_light_curves(lc, n_show=ds.sizes.get("realisation", 0))
    if "counts_without_cme" in ds:
        t_h = ds["time"].values / 3600.0
        for ax, b in zip(fig.axes, ds["band"].values):
            rows = ds["counts_without_cme"].sel(band=b).values
            for i, row in enumerate(rows):
                ax.step(t_h, row / ds.attrs["bin_width_s"], where="mid", lw=0.6, alpha=0.5, color="tab:cyan",
                        zorder=0, label="realisations (without CME)" if i == 0 else None)
            ax.legend(fontsize="x-small", loc="best")
    return fig


def plot_forecast_detection_vs_mass(ds: xr.Dataset):
    """P(detect) against CME mass per band, with the scenario's mass (dotted) and the target probability (dashed)."""
    pv = xr.Dataset({"probability": ds["probability_vs_mass"], "probability_error": ds["probability_vs_mass_error"]},
                    attrs={"false_alarm": ds.attrs["false_alarm"]})
    fig = plot_detection_vs_mass(pv)
    ax = fig.axes[0]
    ax.axhline(ds.attrs["target_probability"], color="0.4", ls="--", lw=0.8)
    ax.axvline(float(ds["cme_mass"]), color="k", ls=":", lw=0.8)
    ax.set_title(f"{ds.attrs['n_realisations']} realisations, seed {ds.attrs['seed']}")
    return fig


def plot_forecast_responses(ds: xr.Dataset):
    """Temperature responses of the bands, the quiescent EM per node (dashed, right axis) and the CME source
    temperature (dotted)."""
    resp = ds["temperature_response"].copy()
    resp.attrs.update({"units": "ct cm3 / s", "reference_distance": "1 pc", "instrument": "band"})
    fig = plot_temperature_responses(resp)
    ax = fig.axes[0]
    ax.axvline(float(ds.attrs["source_temperature_K"]), color="k", ls=":", lw=0.8)
    w = ds["dem_em_weights"].values
    if np.any(w > 0):
        ax2 = ax.twinx()
        ax2.plot(10 ** ds["logT"].values, np.where(w > 0, w, np.nan), color="0.5", lw=1.0, ls="--")
        ax2.set_yscale("log")
        ax2.set_ylim(w.max() * 1e-4, w.max() * 3)
        ax2.set_ylabel("quiescent EM per node [cm$^{-3}$] (dashed)")
    return fig


def forecast_figures(ds: xr.Dataset) -> dict:
    """``name -> (file name, Figure, caption)`` of every figure of a forecast Dataset."""
    figs = {"light_curves": ("light_curves.png", plot_forecast_light_curves(ds),
                             "Expected light curves with (red) and without (blue) the CME, with Poisson realisations "
                             "of both; dotted line: CME onset.")}
    if ds.sizes.get("mass", 0):
        figs["detection_vs_mass"] = ("detection_vs_mass.png", plot_forecast_detection_vs_mass(ds),
                                     "P(detect) against CME mass per band (dotted: the scenario's mass; dashed: "
                                     "target probability; grey: false-alarm probability).")
    figs["temperature_responses"] = ("temperature_responses.png", plot_forecast_responses(ds),
                                     "Temperature responses of the bands used (at 1 pc, interstellar absorption "
                                     "included), the quiescent EM distribution (dashed) and the CME source "
                                     "temperature (dotted).")
    return figs
