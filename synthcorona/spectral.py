"""Spectral axes: wavelength/energy conversion, bin edges and band parsing.

Every band or grid argument in synthcorona may be given in wavelength
(any length unit) or photon energy (any energy unit); internally everything is
photon energy in keV. ``E [keV] = 12.398419843320026 / lambda [Angstrom]``
(CODATA 2018 value of hc, via astropy.constants).
"""
from __future__ import annotations

import numpy as np
import astropy.units as u
import astropy.constants as const

from .validation import InputError, check_finite

__all__ = ["HC_KEV_ANGSTROM", "to_energy_kev", "band_to_energy", "grid_edges", "SpectralGrid"]

#: h c in keV Angstrom (CODATA 2018 through astropy.constants).
HC_KEV_ANGSTROM = float((const.h * const.c).to_value(u.keV * u.AA))


def is_wavelength(q: u.Quantity) -> bool:
    """True if ``q`` has length units, False if energy (or frequency) units."""
    return q.unit.physical_type == "length"


def to_energy_kev(name: str, q) -> np.ndarray:
    """Convert a wavelength or energy Quantity to photon energy in keV (values must be > 0)."""
    if not isinstance(q, u.Quantity):
        raise u.UnitsError(f"{name}={q!r} has no units; give wavelengths (e.g. Angstrom) or energies (e.g. keV)")
    if q.unit.physical_type not in ("length", "energy", "frequency"):
        raise u.UnitsError(f"{name} has units '{q.unit}': expected a wavelength or a photon energy")
    check_finite(name, q)
    if np.any(q.value <= 0):
        raise InputError(f"{name} must be > 0 everywhere; got minimum {np.min(q.value):g} {q.unit}")
    return np.asarray(q.to_value(u.keV, equivalencies=u.spectral()), dtype=float)


def band_to_energy(name: str, band) -> tuple[float, float]:
    """Return a band (two wavelengths or two energies, any order) as (E_lo, E_hi) in keV."""
    e = to_energy_kev(name, band)
    if e.shape != (2,):
        raise InputError(f"{name} must hold exactly two values (lower and upper limit); got shape {e.shape}")
    lo, hi = float(e.min()), float(e.max())
    if lo == hi:
        raise InputError(f"{name} has zero width: both limits are {band[0]}")
    return lo, hi


def grid_edges(centres: np.ndarray) -> np.ndarray:
    """Bin edges for a strictly monotonic grid of bin centres (midpoints; end bins mirrored).

    Raises :class:`InputError` if fewer than two points or not strictly monotonic.
    """
    c = np.asarray(centres, dtype=float)
    if c.ndim != 1 or c.size < 2:
        raise InputError(f"a spectral grid needs at least two points; got {c.size}")
    d = np.diff(c)
    if not (np.all(d > 0) or np.all(d < 0)):
        raise InputError("the spectral grid must be strictly increasing or strictly decreasing")
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate([[c[0] - 0.5 * d[0]], mid, [c[-1] + 0.5 * d[-1]]])


class SpectralGrid:
    """A user's bin grid, remembered in its own units, with energy edges in keV for computation.

    Parameters
    ----------
    name : str
        Argument name for error messages.
    grid : `~astropy.units.Quantity`
        Bin centres in wavelength or energy units (strictly monotonic), or, with
        ``edges=True``, bin edges.
    edges : bool
        Interpret ``grid`` as bin edges (n+1 values for n bins).
    """

    def __init__(self, name: str, grid: u.Quantity, edges: bool = False):
        if not isinstance(grid, u.Quantity):
            raise u.UnitsError(f"{name} has no units; give wavelengths (e.g. Angstrom) or energies (e.g. keV)")
        if grid.unit.physical_type not in ("length", "energy", "frequency"):
            raise u.UnitsError(f"{name} has units '{grid.unit}': expected a wavelength or a photon energy")
        check_finite(name, grid)
        self.unit = grid.unit
        self.wavelength_axis = is_wavelength(grid)
        vals = np.asarray(grid.value, dtype=float)
        if np.any(vals <= 0):
            raise InputError(f"{name} must be > 0 everywhere; got minimum {vals.min():g} {grid.unit}")
        if edges:
            if vals.size < 2 or not (np.all(np.diff(vals) > 0) or np.all(np.diff(vals) < 0)):
                raise InputError(f"{name} bin edges must be strictly monotonic with at least two values")
            self.centres = 0.5 * (vals[1:] + vals[:-1])
            e_native = vals
        else:
            e_native = grid_edges(vals)
            if e_native[0] <= 0 or e_native[-1] <= 0:
                raise InputError(f"{name}: the first bin of the grid would extend to a non-positive value")
            self.centres = vals
        self.native_edges = e_native
        # energy edges (keV), one per native edge, same order as native
        self.energy_edges = (e_native * self.unit).to_value(u.keV, equivalencies=u.spectral())
        self.widths = np.abs(np.diff(e_native))

    @property
    def n(self) -> int:
        return self.centres.size

    def lo_hi_kev(self) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper energy edge of each bin (keV), in the user's bin order."""
        a, b = self.energy_edges[:-1], self.energy_edges[1:]
        return np.minimum(a, b), np.maximum(a, b)
