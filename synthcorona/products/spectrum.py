"""Spectra, band fluxes, luminosities and count rates of a corona: the products of ``synthcorona spectrum``
and ``synthcorona emission``.

* :func:`scenario_spectrum` -- the corona of a forecast scenario file (its ``[star]``, ``[corona]``,
  ``[[instrument]]`` and ``[output]`` tables): band fluxes and luminosities of ``[output]
  flux_bands``, count rates of every instrument band (interstellar absorption of ``[star] nh``
  included) and the spectrum at the observer on the ``[output] spectrum_range`` grid.
* :func:`dem_spectrum` -- the same fluxes, luminosities and spectrum for a DEM given directly.

Fluxes are energy fluxes at the observer without interstellar absorption; luminosities are into
4 pi. Everything is returned in a :class:`SpectrumProducts` (astropy ``QTable`` objects with units
and an :class:`xarray.DataArray` with units and provenance in attrs); nothing is written to disk
(see :mod:`synthcorona.io.writers`).
"""
from __future__ import annotations

from typing import NamedTuple

import astropy.units as u
import numpy as np
import xarray as xr
from astropy.table import QTable

from ..errors import InputError
from ..spectral import Band

__all__ = ["SpectrumProducts", "scenario_spectrum", "dem_spectrum", "emission_density", "table_density",
           "wavelength_grid", "band_table", "DEFAULT_FLUX_BANDS"]

#: Bands of the flux table when none are given (scenario files' ``[output] flux_bands`` and ``emission --band``).
DEFAULT_FLUX_BANDS = tuple(Band.parse(t) for t in ("0.1-2.4 keV", "0.3-2.0 keV", "2.0-10.0 keV", "165-180 Angstrom",
                                                     "185-200 Angstrom", "60-400 Angstrom"))
_FLUX = u.erg / u.s / u.cm ** 2


class SpectrumProducts(NamedTuple):
    """Result of :func:`scenario_spectrum` and :func:`dem_spectrum`."""

    fluxes: QTable           #: one row per band: ``band``, ``flux`` [erg s-1 cm-2], ``luminosity`` [erg s-1]
    rates: QTable | None     #: one row per instrument band: ``label``, ``instrument``, ``band``, ``count_rate`` [ct/s]
    spectrum: xr.DataArray   #: flux density at the observer on a wavelength grid (provenance in attrs)
    meta: dict               #: provenance shared by the three (DEM, distance, abundances, density, table)
    lines: xr.Dataset | None = None   #: the strongest lines in the spectrum's range (:func:`strongest_lines`)


def emission_density(inputs) -> tuple[u.Quantity, str]:
    """Electron density [cm-3] for the emissivities of a scenario's corona, and where it came from.

    ``[corona] density``, else the scaling law of Rosner, Tucker & Vaiana (1978, ApJ 220, 643) at the
    CME source temperature for loops of ``[corona] loop_half_length``, as in
    :class:`~synthcorona.dimming.scenario.DimmingScenario`.
    """
    from ..dimming.mass_removal import rtv_density

    if inputs.corona.density is not None:
        return inputs.corona.density.to(u.cm ** -3), "[corona] density"
    n = rtv_density(inputs.cme.source_temperature, inputs.corona.loop_half_length).to(u.cm ** -3)
    return n, "Rosner, Tucker & Vaiana (1978) scaling law at the CME source temperature"


def table_density(density, table) -> u.Quantity:
    """``density`` [cm-3] limited to the emissivity table's density range (the nearest density it holds)."""
    lo, hi = 10 ** float(table.log_density[0]), 10 ** float(table.log_density[-1])
    return float(np.clip(density.to_value(u.cm ** -3), lo, hi)) * u.cm ** -3


def wavelength_grid(limits, step, name: str = "wavelength range", step_name: str = "the bin") -> u.Quantity:
    """Bin centres [Angstrom] from the shorter to the longer wavelength of ``limits`` (a Band, text or
    Quantity pair, wavelengths or energies) in bins of ``step`` (a length). ``name`` and ``step_name``
    name the settings in errors.

    A bin that is not a positive length raises :class:`InputError` naming ``step_name``; a grid whose
    spectrum would exceed the memory budget (:func:`synthcorona.synthesis.spectrum_nbytes`,
    :mod:`synthcorona.memory`) raises :class:`~synthcorona.errors.MemoryBudgetError` with the estimate,
    the budget and ``step_name``, before the grid is allocated.
    """
    from ..memory import check_allocation
    from ..synthesis import spectrum_nbytes
    from ..validation import as_quantity

    band = Band.coerce(limits, name)
    w = u.Quantity([band.lo, band.hi]).to_value(u.AA, equivalencies=u.spectral())
    wlo, whi = float(w.min()), float(w.max())
    q = as_quantity(step_name, step, u.AA)
    if np.ndim(q) != 0 or not (np.isfinite(q.value) and q.value > 0):
        raise InputError(f"{step_name}={step}: give one positive bin width (e.g. '0.02 Angstrom')",
                         argument=step_name)
    step_aa = float(q.value)
    n_bins = np.ceil((whi - wlo) / step_aa)
    check_allocation(f"the spectrum over {name} {wlo:g}-{whi:g} Angstrom in {step_aa:g} Angstrom bins "
                     f"({n_bins:,.0f} bins)", spectrum_nbytes(n_bins), f"{step_name} (wider bins) or {name}",
                     argument=step_name)
    return np.arange(wlo, whi, step_aa) * u.AA


def band_table(dem, bands, distance, table, abundances, density) -> QTable:
    """Energy flux at the observer (unabsorbed) and luminosity of ``dem`` in each band, one row per band
    (columns ``band``, ``flux``, ``luminosity``; without a ``distance`` (None) no ``flux`` column)."""
    from ..synthesis import band_flux, luminosity

    rows = []
    for b in bands:
        band = Band.coerce(b, "band")
        lum = luminosity(dem, band=band, table=table, abundances=abundances, density=density).to(u.erg / u.s)
        if distance is None:
            rows.append((band.range_text, lum))
            continue
        f = band_flux(dem, band=band, distance=distance, table=table, abundances=abundances, density=density)
        rows.append((band.range_text, f.to(_FLUX), lum))
    return QTable(rows=rows, names=("band", "luminosity") if distance is None else ("band", "flux", "luminosity"))


def _rate_table(inputs, table, density) -> QTable:
    """Count rate of the scenario's corona in every instrument band, interstellar absorption included."""
    dem, abund, dist, nh = inputs.corona.dem, inputs.corona.abundances, inputs.star.distance, inputs.star.nh
    rows = []
    for e in inputs.instruments:
        ins = e.instrument
        for b in e.bands:
            r = ins.count_rate(dem, distance=dist, nh=nh, band=b, table=table, abundances=abund, density=density)
            label = ins.name if b == "total" else f"{ins.name}:{b}"
            rows.append((label, ins.name, b, float(np.asarray(r.to_value(u.ct / u.s))) * u.ct / u.s))
    return QTable(rows=rows, names=("label", "instrument", "band", "count_rate"))


def _meta(dem, distance, abundances, density, table) -> dict:
    return {"dem": repr(dem), "distance": str(distance) if distance is not None else "none (luminosities)", "abundances": str(getattr(abundances, "name", abundances)),
            "density": str(density), "table": str(table.path),
            "chianti_version": str(table.provenance.get("chianti_version")),
            "table_content_hash": str(table.provenance.get("content_hash"))}


def scenario_spectrum(inputs, table=None) -> SpectrumProducts:
    """Band fluxes, luminosities, count rates and the spectrum of a forecast scenario's corona.

    Parameters
    ----------
    inputs : ForecastInputs
        From :func:`synthcorona.io.forecast_file.read_forecast_file` (``build=False`` suffices).
    table : EmissivityTable or path, optional
        Default: see :func:`synthcorona.emissivity.resolve_table`.

    Notes
    -----
    The emissivities are taken at :func:`emission_density` limited to the table's density range
    (:func:`table_density`).
    """
    from ..emissivity import resolve_table
    from ..synthesis import strongest_lines, synthesize

    table = resolve_table(table)
    dem, abund, dist, nh = inputs.corona.dem, inputs.corona.abundances, inputs.star.distance, inputs.star.nh
    n_e, n_from = emission_density(inputs)
    dens = table_density(n_e, table)
    fluxes = band_table(dem, inputs.output["flux_bands"], dist, table, abund, dens)
    rates = _rate_table(inputs, table, dens)
    grid = wavelength_grid(inputs.output["spectrum_range"], inputs.output["spectrum_bin"],
                           name="[output] spectrum_range", step_name="[output] spectrum_bin")
    spec = synthesize(dem, wavelength=grid, table=table, abundances=abund, density=dens, distance=dist)
    meta = _meta(dem, dist, abund, dens, table)
    meta.update({"nh": str(nh) if nh is not None else "0 cm-2", "density_from": n_from,
                 "scenario_file": str(inputs.source)})
    meta = {k: meta[k] for k in ("dem", "distance", "nh", "abundances", "density", "density_from", "scenario_file",
                                 "table", "chianti_version", "table_content_hash")}
    fluxes.meta.update(meta)
    fluxes.meta["note"] = "energy flux at the observer without interstellar absorption; luminosity into 4 pi"
    rates.meta.update(meta)
    rates.meta["note"] = "count rates with interstellar absorption of the [star] nh column"
    spec.attrs.update(meta)
    lines = strongest_lines(dem, inputs.output["spectrum_range"], table=table, abundances=abund, density=dens)
    return SpectrumProducts(fluxes, rates, spec, meta, lines)


def dem_spectrum(dem, distance, *, bands=DEFAULT_FLUX_BANDS, density=1e10 * u.cm ** -3, abundances="coronal",
                 wavelength_range=(1.0, 400.0) * u.AA, wavelength_bin=0.02 * u.AA, table=None) -> SpectrumProducts:
    """Band fluxes, luminosities and the spectrum at the observer of a DEM (no count rates: ``rates`` is None).

    Parameters
    ----------
    dem : DEM
        A single volume DEM (cm-3).
    distance : Quantity [length] or None
        Distance of the observer. None: luminosities only (no ``flux`` column) and the spectrum as
        a luminosity density (erg s-1 per Angstrom).
    bands : sequence of Band, text or Quantity pairs
        Bands of the flux table (default :data:`DEFAULT_FLUX_BANDS`).
    density : Quantity [cm-3]
        Electron density of the emissivities.
    abundances : str or Abundances
    wavelength_range : Band, text or Quantity pair
        Limits of the spectrum (wavelengths or energies).
    wavelength_bin : Quantity [length]
        Bin width of the spectrum.
    table : EmissivityTable or path, optional
        Default: see :func:`synthcorona.emissivity.resolve_table`.
    """
    from ..emissivity import resolve_table
    from ..synthesis import strongest_lines, synthesize

    table = resolve_table(table)
    fluxes = band_table(dem, bands, distance, table, abundances, density)
    grid = wavelength_grid(wavelength_range, wavelength_bin, name="wavelength_range", step_name="wavelength_bin")
    spec = synthesize(dem, wavelength=grid, table=table, abundances=abundances, density=density, distance=distance)
    meta = _meta(dem, distance, abundances, density, table)
    fluxes.meta.update(meta)
    spec.attrs.update(meta)
    lines = strongest_lines(dem, wavelength_range, table=table, abundances=abundances, density=density)
    return SpectrumProducts(fluxes, None, spec, meta, lines)
