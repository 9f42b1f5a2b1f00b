"""Figures of instruments: effective areas, temperature responses, folded spectra (matplotlib).

Every function returns the :class:`matplotlib.figure.Figure` it drew on (a new one
unless ``ax`` is given) and never calls ``plt.show``; figures are built with the
object-oriented API, so they work with the non-interactive Agg backend (batch jobs,
CI). Axis labels carry units.
"""
from __future__ import annotations

import astropy.units as u
import numpy as np
import xarray as xr

from ..constants import HC_KEV_ANGSTROM
from ..errors import InputError
from ..instruments.instrument import Instrument
from ..spectral import grid_edges

__all__ = ["plot_effective_area", "plot_temperature_responses", "plot_folded_spectrum"]


def _new_axes(ax, nrows: int = 1, figsize=(7.0, 4.5)):
    """(figure, axes) -- a new Agg-safe figure unless ``ax`` is given."""
    if ax is not None:
        return ax.figure, ax
    from matplotlib.figure import Figure

    fig = Figure(figsize=figsize, layout="constrained")
    axes = fig.subplots(nrows, 1, sharex=True) if nrows > 1 else fig.subplots()
    return fig, axes


def _flatten(items, kind, name):
    out = []
    for it in items:
        if isinstance(it, (list, tuple)):
            out.extend(it)
        elif isinstance(it, dict):
            out.extend(it.values())
        else:
            out.append(it)
    if not out:
        raise InputError(f"{name}: give at least one {kind.__name__}")
    for k, it in enumerate(out):
        if not isinstance(it, kind):
            raise InputError(f"{name}[{k}]={it!r:.60} is not a {kind.__name__}")
    return out


def plot_effective_area(*instruments, axis: str = "energy", ax=None, logy: bool = True, floor: float = 1e-4):
    """Effective area curves of one or more instruments on one axes.

    Parameters
    ----------
    *instruments : Instrument (or lists/dicts of them)
    axis : {"energy", "wavelength"}
        x axis: photon energy [keV] or wavelength [Angstrom]; log scale.
    ax : matplotlib Axes, optional
    logy : bool
        Logarithmic area axis (zero areas are not drawn).
    floor : float
        With ``logy``, the lower y limit as a fraction of the largest area plotted.

    Returns
    -------
    matplotlib.figure.Figure
        One line per instrument, labelled with its name. The area is
        the bin value (cm^2) at each energy-bin centre.
    """
    insts = _flatten(instruments, Instrument, "instruments")
    if axis not in ("energy", "wavelength"):
        raise InputError(f"axis={axis!r} must be 'energy' or 'wavelength'")
    fig, ax = _new_axes(ax)
    top = 0.0
    for inst in insts:
        c = 0.5 * (inst.energy_lo.value + inst.energy_hi.value)
        a = inst.area.value
        x = c if axis == "energy" else HC_KEV_ANGSTROM / c
        y = np.where(a > 0, a, np.nan) if logy else a
        ax.plot(x, y, label=inst.name, lw=1.2)
        top = max(top, float(np.nanmax(a)))
    ax.set_xscale("log")
    if logy and top > 0:
        ax.set_yscale("log")
        ax.set_ylim(top * floor, top * 2)
    ax.set_xlabel("Photon energy [keV]" if axis == "energy" else "Wavelength [Å]")
    ax.set_ylabel("Effective area [cm$^2$]")
    ax.legend(fontsize="small")
    ax.grid(True, which="both", alpha=0.3)
    return fig


def plot_temperature_responses(*responses, ax=None, normalize: bool = False, floor: float = 1e-4):
    """Temperature responses of several instruments and bands on one log-log figure.

    Parameters
    ----------
    *responses : xarray.DataArray
        Results of :meth:`Instrument.temperature_response` (dims band, logT), or lists of them.
    ax : matplotlib Axes, optional
    normalize : bool
        Divide each curve by its maximum (compare shapes).
    floor : float
        Lower y limit as a fraction of the largest value plotted.

    Returns
    -------
    matplotlib.figure.Figure; one line per (instrument, band), labelled "instrument: band".
    """
    resps = _flatten(responses, xr.DataArray, "responses")
    fig, ax = _new_axes(ax)
    unit_labels = set()
    top = 0.0
    for r in resps:
        if "logT" not in r.dims:
            raise InputError(f"responses: DataArray '{r.name}' has dims {r.dims}; expected a temperature response "
                             "with a 'logT' dimension")
        rr = r if "band" in r.dims else r.expand_dims(band=["total"])
        for b in rr.band.values:
            y = np.asarray(rr.sel(band=b).values, dtype=float)
            if normalize and np.nanmax(y) > 0:
                y = y / np.nanmax(y)
            y = np.where(y > 0, y, np.nan)
            ax.plot(10 ** rr.logT.values, y, label=f"{r.attrs.get('instrument', r.name)}: {b}", lw=1.3)
            if np.any(np.isfinite(y)):
                top = max(top, float(np.nanmax(y)))
        unit_labels.add(r.attrs.get("units", ""))
    ax.set_xscale("log")
    ax.set_yscale("log")
    if top > 0:
        ax.set_ylim(top * floor, top * 2)
    ax.set_xlabel("Temperature [K]")
    if normalize:
        ax.set_ylabel("Temperature response / maximum")
    else:
        unit = " or ".join(sorted(unit_labels)) or "?"
        dist = resps[0].attrs.get("reference_distance", "")
        ax.set_ylabel(f"Temperature response [{unit}]" + (f" at {dist}" if dist else ""))
    ax.legend(fontsize="small")
    ax.grid(True, which="both", alpha=0.3)
    return fig


def plot_folded_spectrum(instrument: Instrument, spectrum: xr.DataArray, edges=None, axes=None):
    """A photon spectrum and the count spectrum it produces in an instrument (two panels).

    Parameters
    ----------
    instrument : Instrument
    spectrum : xarray.DataArray
        From :func:`synthcorona.synthesize` with ``photons=True`` and a ``distance`` (units
        ph s-1 cm-2 per keV or per Angstrom), on a grid covering the instrument's response.
    edges : Quantity, optional
        The spectrum's bin edges (as given to synthesize with ``edges=True``); default:
        midpoints between the bin centres (exact for uniform grids).
    axes : pair of matplotlib Axes, optional

    Returns
    -------
    matplotlib.figure.Figure
        Top: the photon flux density of the input spectrum. Bottom:
        counts s^-1 keV^-1 per channel (per energy bin without a redistribution matrix), drawn as
        steps over channel energy.
    """
    if not isinstance(instrument, Instrument):
        raise InputError(f"instrument={instrument!r:.60} is not an Instrument")
    if not isinstance(spectrum, xr.DataArray) or spectrum.ndim != 1:
        raise InputError("spectrum must be a 1-D xarray.DataArray from synthcorona.synthesize")
    dim = spectrum.dims[0]
    unit = u.Unit(spectrum.attrs.get("units", ""))
    xunit = u.Unit(spectrum[dim].attrs.get("units", "keV" if dim == "energy" else "Angstrom"))
    per_bin = unit * xunit
    if not per_bin.is_equivalent(u.ph / (u.s * u.cm**2)):
        raise InputError(f"spectrum has units '{unit}': plot_folded_spectrum needs a photon flux density "
                         "(synthesize(..., photons=True, distance=...))")
    centres = np.asarray(spectrum[dim].values, dtype=float)
    e = grid_edges(centres) if edges is None else np.asarray(edges.to_value(xunit, equivalencies=u.spectral()))
    if e.size != centres.size + 1:
        raise InputError(f"edges has {e.size} values; expected {centres.size + 1} for {centres.size} bins")
    flux = np.asarray(spectrum.values, dtype=float) * np.abs(np.diff(e)) * per_bin
    counts = instrument.fold(flux.to(u.ph / (u.s * u.cm**2)), e * xunit).value
    if instrument.channel_lo is not None:
        clo, chi = instrument.channel_lo.value, instrument.channel_hi.value
    else:
        clo, chi = instrument.energy_lo.value, instrument.energy_hi.value
    width = chi - clo
    dens = np.divide(counts, width, out=np.zeros_like(counts), where=width > 0)

    if axes is None:
        fig, (ax0, ax1) = _new_axes(None, nrows=2, figsize=(7.0, 6.5))
    else:
        ax0, ax1 = axes
        fig = ax0.figure
    e_kev = (centres * xunit).to_value(u.keV, equivalencies=u.spectral())
    ax0.plot(e_kev, np.where(spectrum.values > 0, spectrum.values, np.nan), lw=0.8)
    ax0.set_yscale("log")
    ax0.set_ylabel(f"Photon flux [{unit.to_string('latex_inline')}]")
    ax0.set_title(f"Spectrum folded through '{instrument.name}'")
    y = np.where(dens > 0, dens, np.nan)
    if clo.size > 1 and np.allclose(clo[1:], chi[:-1], rtol=1e-9, atol=0):
        ax1.stairs(y, np.concatenate([clo, chi[-1:]]), lw=1.0)
    else:                                   # gaps between bins: points at the bin centres
        ax1.plot(0.5 * (clo + chi), y, lw=1.0)
    ax1.set_yscale("log")
    ax1.set_xscale("log")
    ax1.set_xlabel("Channel energy [keV]" if instrument.channel_lo is not None else "Photon energy [keV]")
    ax1.set_ylabel("Count rate [ct s$^{-1}$ keV$^{-1}$]")
    for a in (ax0, ax1):
        a.grid(True, which="both", alpha=0.3)
    ax0.set_xlim(max(instrument.energy_range.value[0], e_kev.min()), instrument.energy_range.value[1])
    return fig
