"""Spectral axes: wavelength/energy conversion, bin edges, and :class:`Band`, the one band type.

Every band or grid argument in synthcorona may be given in wavelength
(any length unit) or photon energy (any energy unit); internally everything is
photon energy in keV. ``E [keV] = 12.398419843320026 / lambda [Angstrom]``
(CODATA 2018 value of hc, :data:`synthcorona.constants.HC_KEV_ANGSTROM`).
"""
from __future__ import annotations

import re
from dataclasses import dataclass

import astropy.units as u
import numpy as np

from .errors import InputError
from .validation import check_finite

__all__ = ["Band", "to_energy_kev", "band_to_energy", "grid_edges", "SpectralGrid", "is_wavelength"]



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


_NUM = r"[+]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_BAND_RE = re.compile(rf"^\s*(?:(?P<label>[^:]+?)\s*:)?\s*(?P<lo>{_NUM})\s*(?:-|to)\s*(?P<hi>{_NUM})\s*(?P<unit>\S.*?)\s*$")
_BAND_EXAMPLE = "'0.1-2.4 keV', '170-175 Angstrom' or 'soft: 0.1-2.4 keV'"


@dataclass(frozen=True)
class Band:
    """A spectral band: two limits in energy or wavelength units, and a label.

    Limits without energy or wavelength units raise :class:`astropy.units.UnitsError`; other
    mistakes raise :class:`~synthcorona.errors.InputError` naming the band.

    The limits keep the user's unit; :attr:`energy_kev` gives them as photon energies in keV
    (ascending). ``lo`` must be below ``hi`` in the unit given (so a wavelength band is written
    short-to-long wavelength, an energy band low-to-high energy); reversed or equal limits are an
    error, never swapped.

    Parameters
    ----------
    lo, hi : `~astropy.units.Quantity`
        Scalar limits, both energies or both wavelengths (frequencies are accepted too).
    label : str, optional
        Name of the band; default the range as text, e.g. ``"0.1-2.4 keV"``.

    Examples
    --------
    >>> Band.parse("soft: 0.1-2.4 keV").label
    'soft'
    >>> Band.parse("170-175 Angstrom").energy_kev  # doctest: +FLOAT_CMP
    (0.070848..., 0.072932...)
    """

    lo: u.Quantity
    hi: u.Quantity
    label: str = ""

    def __post_init__(self):
        name = self.label or "band"
        for which, q in (("lower limit", self.lo), ("upper limit", self.hi)):
            if not isinstance(q, u.Quantity) or q.ndim != 0:
                raise InputError(f"{name}: the {which} {q!r} must be a scalar Quantity with energy or wavelength "
                                 f"units, e.g. {_BAND_EXAMPLE}", argument="band")
            if q.unit.physical_type not in ("length", "energy", "frequency"):
                raise u.UnitsError(f"{name}: the {which} has units '{q.unit}'; expected an energy or a wavelength")
        if self.lo.unit.physical_type != self.hi.unit.physical_type:
            raise InputError(f"{name}: limits {self.lo} and {self.hi} mix a wavelength and an energy", argument="band")
        lo, hi = float(self.lo.value), float(self.hi.to_value(self.lo.unit))
        if not (np.isfinite(lo) and np.isfinite(hi)) or lo <= 0 or hi <= 0:
            raise InputError(f"{name}: limits {self.lo} and {self.hi} must be finite and > 0", argument="band")
        if not lo < hi:
            raise InputError(f"{name}: the lower limit {self.lo} is not below the upper limit {self.hi} "
                             f"(valid: lower < upper in the unit given, e.g. {_BAND_EXAMPLE})", argument="band")
        if not self.label:
            object.__setattr__(self, "label", self.range_text)

    @property
    def range_text(self) -> str:
        """The limits as text in the user's unit, e.g. ``"0.1-2.4 keV"``."""
        return f"{self.lo.value:g}-{self.hi.to_value(self.lo.unit):g} {self.lo.unit.to_string()}"

    @property
    def is_wavelength(self) -> bool:
        """True if the limits were given as wavelengths."""
        return self.lo.unit.physical_type == "length"

    @property
    def energy_kev(self) -> tuple[float, float]:
        """(E_lo, E_hi) in keV, ascending."""
        e = u.Quantity([self.lo, self.hi.to(self.lo.unit)]).to_value(u.keV, equivalencies=u.spectral())
        return float(e.min()), float(e.max())

    @property
    def quantity(self) -> u.Quantity:
        """The two limits as a (2,) Quantity in the user's unit."""
        return u.Quantity([self.lo, self.hi.to(self.lo.unit)])

    def __str__(self) -> str:
        return self.label if self.label == self.range_text else f"{self.label} ({self.range_text})"

    @classmethod
    def parse(cls, text: str, name: str = "band") -> "Band":
        """Read ``"[label:] lo-hi unit"``, e.g. ``"0.1-2.4 keV"`` or ``"cool: 170-175 Angstrom"``."""
        m = _BAND_RE.match(str(text))
        if m is None:
            raise InputError(f"{name}={text!r}: cannot read a band; write e.g. {_BAND_EXAMPLE}", argument=name)
        try:
            unit = u.Unit(m["unit"])
        except ValueError:
            raise InputError(f"{name}={text!r}: unknown unit '{m['unit']}'; write e.g. {_BAND_EXAMPLE}",
                             argument=name) from None
        return cls(float(m["lo"]) * unit, float(m["hi"]) * unit, (m["label"] or "").strip())

    @classmethod
    def coerce(cls, value, name: str = "band", label: str = "") -> "Band":
        """A :class:`Band` from a Band, a text (see :meth:`parse`), a (2,) Quantity or a pair of scalar Quantities."""
        if isinstance(value, Band):
            return value if not label or label == value.label else cls(value.lo, value.hi, label)
        if isinstance(value, str):
            b = cls.parse(value, name)
            return cls(b.lo, b.hi, label) if label else b
        if isinstance(value, u.Quantity):
            if value.shape != (2,):
                raise InputError(f"{name} must hold exactly two limits (lower and upper); got shape {value.shape}",
                                 argument=name)
            return cls(value[0], value[1], label)
        if isinstance(value, (tuple, list)) and len(value) == 2 and all(isinstance(v, u.Quantity) for v in value):
            return cls(value[0], value[1], label)
        raise InputError(f"{name}={value!r} is not a band: give two energies or wavelengths as a Quantity, "
                         f"e.g. [0.1, 2.4] * u.keV, or a text such as {_BAND_EXAMPLE}", argument=name)


def band_to_energy(name: str, band) -> tuple[float, float]:
    """A band (anything :meth:`Band.coerce` reads, lower limit first) as (E_lo, E_hi) in keV."""
    return Band.coerce(band, name).energy_kev


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
