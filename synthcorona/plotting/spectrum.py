"""Figure of a synthetic spectrum (matplotlib object API only: no pyplot state)."""
from __future__ import annotations

import numpy as np
import xarray as xr

from ..errors import InputError

__all__ = ["plot_spectrum"]


def plot_spectrum(spectrum: xr.DataArray, title: str = "", dynamic_range: float = 1e6, lines: xr.Dataset | None = None):
    """Flux density against wavelength, log scale, from :func:`synthcorona.synthesize` on a wavelength grid.

    ``lines`` (from :func:`synthcorona.synthesis.strongest_lines`) labels those lines with their ion at
    the top of the spectrum bin that holds them.

    The y axis spans ``dynamic_range`` below the peak (to three times the peak); zero bins are
    drawn at 1e-300. Returns a :class:`matplotlib.figure.Figure`.
    """
    from matplotlib.figure import Figure

    if not isinstance(spectrum, xr.DataArray) or "wavelength" not in spectrum.dims:
        raise InputError("spectrum must be an xarray.DataArray over 'wavelength' from synthcorona.synthesize",
                         argument="spectrum")
    fig = Figure(figsize=(9, 4), layout="constrained")
    ax = fig.add_subplot()
    values = np.asarray(spectrum.values, dtype=float)
    ax.semilogy(spectrum["wavelength"].values, np.maximum(values, 1e-300), lw=0.6)
    pos = values[values > 0]
    if pos.size:
        ax.set_ylim(pos.max() / dynamic_range, pos.max() * 3)
    if lines is not None and lines.sizes.get("line", 0):
        x = spectrum["wavelength"].values
        for wl, ion in zip(lines["wavelength"].values, lines["ion"].values):
            k = int(np.argmin(np.abs(x - wl)))
            y = max(values[k], 1e-300)
            ax.annotate(f"{ion} {wl:.2f}", (wl, y), xytext=(0, 4), textcoords="offset points", rotation=90,
                        fontsize=6, ha="center", va="bottom")
    ax.set_xlabel("wavelength [Angstrom]")
    ax.set_ylabel(f"flux density [{spectrum.attrs.get('units', '')}]")
    if title:
        ax.set_title(title, fontsize="small")
    return fig
