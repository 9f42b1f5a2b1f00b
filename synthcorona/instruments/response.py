"""Instrument response: effective area, redistribution, named bands, and folding of photon spectra.

Method
------
A photon spectrum, given as a photon flux per bin (photons s^-1 cm^-2 in each bin)
on any energy or wavelength grid, becomes a count rate through three linear maps,
composed once per input grid into a single sparse matrix and cached:

1. **Rebinning** ``O`` (n_energy x n_input): ``O[i, j] = |b_j ∩ e_i| / |b_j|``, the
   fraction of input bin ``b_j`` (measured in photon energy) that lies in instrument
   energy bin ``e_i``.  Photons are assumed uniformly distributed in energy inside each
   input bin, so every photon of an input bin lying inside the instrument grid is
   assigned to exactly one instrument bin: photons are conserved.
2. **Effective area** ``diag(A)``, A in cm^2, piecewise constant on the instrument
   energy bins, the convention of the SPECRESP column of an OGIP ancillary response
   (George et al. 1992, OGIP Calibration Memo CAL/GEN/92-002, section 4).
3. **Redistribution** ``R`` (n_channels x n_energy): ``R[c, i]`` is the probability
   that a photon of energy bin ``i`` is recorded in channel ``c`` (CAL/GEN/92-002,
   sections 2.1 and 3.1).  Without a redistribution matrix the instrument "channels"
   are its energy bins (a perfect-resolution detector).

so that ``counts = R @ diag(A) @ O @ photon_flux`` (counts s^-1 per channel).
Band selection is one more linear map (overlap fractions of channels, see
:meth:`Instrument.band_matrix`), which gives the small dense operator used by
temperature responses.

Nothing is extrapolated: if the input grid does not cover every energy at which the
instrument responds, :class:`~synthcorona.errors.InputError` names the missing range.

Temperature responses and count rates of DEMs
---------------------------------------------
:meth:`Instrument.temperature_response` folds the emissivity table through the band
operator: ``K_b(T) = S_b @ eps(T) / (4 pi (1 pc)^2)`` counts s^-1 per cm^-3 of emission
measure at the reference distance of 1 pc, with ``eps(T)`` the photon emissivity per
unit EM in each bin of an input grid (optionally absorbed by the interstellar medium).
:meth:`Instrument.count_rate` is then one matrix product for a whole batch of DEMs,
``rate = w @ K^T (1 pc / d)^2``, with ``w`` the DEM's emission-measure weights on the
table grid (:meth:`synthcorona.dem.DEM.em_weights`). The same linear-folding approach
underlies the published temperature responses of EUV imagers (e.g. Boerner et al. 2012,
Sol. Phys. 275, 41, eq. 2).
"""
from __future__ import annotations

import copy
import hashlib
import json
import weakref
from collections import OrderedDict

import astropy.units as u
import numpy as np
import scipy.sparse as sp
import xarray as xr

from ..constants import HC_KEV_ANGSTROM
from ..errors import InputError
from ..spectral import SpectralGrid, to_energy_kev
from ..validation import as_quantity, check_finite

__all__ = ["Instrument", "COUNT_RATE_UNIT", "PHOTON_FLUX_UNIT", "TEMPERATURE_RESPONSE_UNIT", "TOTAL_BAND"]

#: Unit of the photon flux per bin accepted by :meth:`Instrument.fold` (``1/(s cm2)`` is accepted too).
PHOTON_FLUX_UNIT = u.ph / (u.s * u.cm**2)
#: Unit of every count rate returned.
COUNT_RATE_UNIT = u.ct / u.s
#: Unit of temperature responses: counts s^-1 per cm^-3 of volume emission measure (at 1 pc).
TEMPERATURE_RESPONSE_UNIT = u.ct * u.cm**3 / u.s
#: Name of the all-channels band of an instrument without named bands.
TOTAL_BAND = "total"
#: Reference distance of temperature responses (1 pc), in pc and cm.
REFERENCE_DISTANCE_PC = 1.0
REFERENCE_DISTANCE_CM = float((1.0 * u.pc).to_value(u.cm))

# Relative tolerance on energy edges: two edges closer than this (relative) are the
# same edge.  It absorbs round-off from wavelength<->energy conversion and float32
# storage in FITS files; it is far below any physical bin width.
_EDGE_RTOL = 1e-9
# Redistribution columns are probabilities; sums above 1 by more than this are refused.
_COLSUM_TOL = 1e-2
# Number of input grids whose matrices are kept per instrument.
_CACHE_SIZE = 32


def _fmt_kev(e: float) -> str:
    """'x keV (y Angstrom)' for error messages."""
    lam = HC_KEV_ANGSTROM / e if e > 0 else np.inf
    return f"{e:.6g} keV ({lam:.6g} Angstrom)"


def _bins_kev(name_lo: str, lo_q, name_hi: str, hi_q, allow_zero: bool = False):
    """Convert two Quantities of bin bounds (energy or wavelength) to (lo, hi) keV arrays.

    The two arrays may be given in wavelength (then ``lo``/``hi`` are swapped by the
    conversion; the element-wise min/max is taken).  Returns 1-D float arrays.
    ``allow_zero`` permits an energy of exactly 0 keV (OGIP EBOUNDS channel 0).
    """
    def conv(name, q):
        """One Quantity -> 1-D keV array (wavelength/frequency converted via hc)."""
        if not isinstance(q, u.Quantity):
            raise u.UnitsError(f"{name}={q!r} has no units; give energies (e.g. keV) or wavelengths (e.g. Angstrom)")
        if allow_zero and q.unit.physical_type == "energy":
            v = as_quantity(name, q, u.keV).value.astype(float)
            check_finite(name, v)
            if np.any(v < 0):
                raise InputError(f"{name} must be >= 0 keV everywhere; got minimum {v.min():g} keV")
            return np.atleast_1d(v)
        return np.atleast_1d(to_energy_kev(name, q))

    a, b = conv(name_lo, lo_q), conv(name_hi, hi_q)
    if a.ndim != 1 or a.shape != b.shape:
        raise InputError(f"{name_lo} and {name_hi} must be 1-D arrays of equal length; got shapes {a.shape} and {b.shape}")
    if a.size == 0:
        raise InputError(f"{name_lo} is empty; at least one bin is required")
    return np.minimum(a, b), np.maximum(a, b)


def _check_sorted_bins(lo: np.ndarray, hi: np.ndarray, what: str):
    """Validate ascending, positive-width, non-overlapping bins; return (lo, hi, reversed_flag).

    Bins given in descending energy (e.g. ascending wavelength) are reversed.  Overlaps
    smaller than ``_EDGE_RTOL`` (relative) are round-off and are closed by moving the
    upper edge down onto the next lower edge.  Gaps between bins are allowed (no
    response there).
    """
    rev = False
    if lo.size > 1 and lo[0] > lo[-1]:
        lo, hi, rev = lo[::-1].copy(), hi[::-1].copy(), True
    else:
        lo, hi = lo.copy(), hi.copy()
    width = hi - lo
    if np.any(width <= 0):
        k = int(np.argmax(width <= 0))
        raise InputError(f"{what}: bin {k} has zero or negative width ({lo[k]:.6g} to {hi[k]:.6g} keV)")
    if lo.size > 1:
        d = np.diff(lo)
        if np.any(d <= 0):
            k = int(np.argmax(d <= 0)) + 1
            raise InputError(
                f"{what}: energy bins are not sorted: bin {k} starts at {lo[k]:.6g} keV, not above "
                f"bin {k - 1} which starts at {lo[k - 1]:.6g} keV")
        over = hi[:-1] - lo[1:]
        bad = over > _EDGE_RTOL * hi[:-1]
        if np.any(bad):
            k = int(np.argmax(bad))
            raise InputError(
                f"{what}: energy bins overlap: bin {k} ({lo[k]:.6g} to {hi[k]:.6g} keV) and bin {k + 1} "
                f"({lo[k + 1]:.6g} to {hi[k + 1]:.6g} keV)")
        hi[:-1] = np.minimum(hi[:-1], lo[1:])
    return lo, hi, rev


def _parse_band(name: str, value) -> tuple[float, float]:
    """A band (two energies or two wavelengths, any order; a Quantity of shape (2,) or a
    pair of scalar Quantities) as (E_lo, E_hi) in keV."""
    if isinstance(value, (tuple, list)):
        if len(value) != 2:
            raise InputError(f"{name} must hold exactly two limits; got {len(value)} values")
        e = np.array([float(np.squeeze(to_energy_kev(f"{name}[{k}]", v))) for k, v in enumerate(value)])
    elif isinstance(value, u.Quantity):
        e = np.atleast_1d(to_energy_kev(name, value))
        if e.shape != (2,):
            raise InputError(f"{name} must hold exactly two limits (lower and upper); got shape {e.shape}")
    else:
        raise InputError(
            f"{name}={value!r} is not a band: give two energies or wavelengths as a Quantity, e.g. [0.5, 2] * u.keV")
    lo, hi = float(e.min()), float(e.max())
    if lo == hi:
        raise InputError(f"{name} has zero width: both limits are {_fmt_kev(lo)}")
    return lo, hi


def _photon_flux_values(name: str, q) -> np.ndarray:
    """Photon flux per bin as a float array in photons s^-1 cm^-2 (Quantity required)."""
    if not isinstance(q, u.Quantity):
        raise u.UnitsError(
            f"{name} has no units; give a Quantity in photons s^-1 cm^-2 per bin, e.g. values * u.ph / (u.s * u.cm**2)")
    for target in (PHOTON_FLUX_UNIT, 1 / (u.s * u.cm**2)):
        try:
            v = q.to_value(target)
            break
        except u.UnitConversionError:
            continue
    else:
        raise u.UnitsError(
            f"{name} has units '{q.unit}'; expected a photon flux per bin, photons s^-1 cm^-2 (e.g. 'ph / (s cm2)'). "
            "A flux density (per keV or per Angstrom) must first be multiplied by the bin widths.")
    v = np.asarray(v, dtype=float)
    check_finite(name, v)
    if np.any(v < 0):
        raise InputError(f"{name} must be >= 0 (a photon flux); got minimum {v.min():g} photons s^-1 cm^-2")
    return v


class Instrument:
    """Effective area, optional redistribution matrix and named bands of an X-ray/EUV instrument.

    Parameters
    ----------
    name : str
        Short identifier.
    energy_lo, energy_hi : `~astropy.units.Quantity`
        Lower and upper bounds of the instrument's photon-energy bins (n_energy values
        each), in energy or wavelength units; stored as keV in ascending energy.  Bins
        must not overlap (gaps are allowed and have no response).
    area : `~astropy.units.Quantity`
        Effective area of each bin (any area unit; stored in cm^2), >= 0; the bin average,
        as the SPECRESP column of an OGIP ARF (CAL/GEN/92-002, section 4).
    redistribution : ndarray or scipy.sparse matrix, optional
        Dimensionless matrix of shape (n_channels, n_energy), in the order of the bins as
        given: element [c, i] is the probability that a photon of energy bin i is recorded
        in channel c.  Each column must sum to <= 1 (within 1 %).
    channel_lo, channel_hi : `~astropy.units.Quantity`, optional
        Nominal energy bounds of each channel (the EBOUNDS of an OGIP RMF), keV or any
        energy unit (0 allowed) or wavelength.  Required with ``redistribution``.
    bands : dict, optional
        Name -> (lo, hi) as a Quantity pair in energy or wavelength.  **With a
        redistribution matrix these are channel-energy bands** (they select channels by
        their EBOUNDS energies); **without one they are photon-energy bands**.
    description : str
        Free text, e.g. "generic design, not any real mission's calibration".
    provenance : dict, optional
        Source files and checksums (see :mod:`synthcorona.instruments.readers`).

    Attributes
    ----------
    name, description, provenance
    energy_lo, energy_hi : Quantity (keV), ascending.
    area : Quantity (cm^2).
    redistribution : scipy.sparse.csr_matrix or None, columns in ascending-energy order.
    channel_lo, channel_hi : Quantity (keV) or None.
    bands : dict name -> Quantity [E_lo, E_hi] in keV.

    Notes
    -----
    Instances are immutable: arrays are read-only, and :meth:`with_bands` returns a copy.
    Matrices for each input grid are cached (least recently used, 32 grids).
    """

    def __init__(self, name: str, energy_lo, energy_hi, area, *, redistribution=None,
                 channel_lo=None, channel_hi=None, bands=None, description: str = "",
                 provenance: dict | None = None):
        """Validate and store the bins (keV), area (cm^2), redistribution and bands; see the class docstring."""
        if not isinstance(name, str) or not name:
            raise InputError(f"name={name!r} must be a non-empty string")
        self.name = name
        self.description = str(description)
        self.provenance = copy.deepcopy(provenance) if provenance is not None else {}

        lo, hi = _bins_kev("energy_lo", energy_lo, "energy_hi", energy_hi)
        lo, hi, rev = _check_sorted_bins(lo, hi, f"instrument '{name}'")
        a = np.atleast_1d(as_quantity("area", area, u.cm**2).value).astype(float)
        if a.shape != lo.shape:
            raise InputError(f"area has shape {a.shape}, but there are {lo.size} energy bins")
        check_finite("area", a)
        if np.any(a < 0):
            k = np.flatnonzero(a < 0)
            raise InputError(
                f"area must be >= 0 cm^2; got {a[k[0]]:g} cm^2 in bin {k[0]} (and {k.size - 1} more negative values)")
        if rev:
            a = a[::-1].copy()
        if not np.any(a > 0):
            raise InputError(f"area of instrument '{name}' is zero in every bin; nothing can be detected")
        self._lo, self._hi, self._area = lo, hi, a

        self._R = None
        self._ch_lo = self._ch_hi = None
        if redistribution is not None:
            R = sp.csr_matrix(redistribution, dtype=float)
            n_e = lo.size
            if R.ndim != 2 or R.shape[1] != n_e:
                hint = " (transposed? rows are channels, columns energy bins)" if R.shape[0] == n_e else ""
                raise InputError(
                    f"redistribution has shape {R.shape}; expected (n_channels, {n_e}) for {n_e} energy bins{hint}")
            check_finite("redistribution", R.data)
            if np.any(R.data < 0):
                raise InputError(f"redistribution has negative elements (minimum {R.data.min():g}); "
                                 "elements are probabilities >= 0")
            if rev:
                R = R[:, ::-1].tocsr()
            colsum = np.asarray(R.sum(axis=0)).ravel()
            if np.any(colsum > 1 + _COLSUM_TOL):
                k = int(np.argmax(colsum))
                raise InputError(
                    f"redistribution column {k} sums to {colsum[k]:.6g} > 1: columns are probabilities that a "
                    "photon is recorded in some channel. A matrix that includes the effective area must be split "
                    "into area and redistribution first")
            if channel_lo is None or channel_hi is None:
                raise InputError("channel_lo and channel_hi (channel energy bounds, e.g. the EBOUNDS of an RMF) "
                                 "are required with a redistribution matrix")
            clo, chi = _bins_kev("channel_lo", channel_lo, "channel_hi", channel_hi, allow_zero=True)
            if clo.size != R.shape[0]:
                raise InputError(f"channel_lo has {clo.size} channels but redistribution has {R.shape[0]} rows")
            R.eliminate_zeros()
            self._R, self._ch_lo, self._ch_hi = R, clo, chi
            self._colsum = colsum
        elif channel_lo is not None or channel_hi is not None:
            raise InputError("channel_lo/channel_hi were given without a redistribution matrix")

        for arr in (self._lo, self._hi, self._area, self._ch_lo, self._ch_hi):
            if arr is not None:
                arr.setflags(write=False)

        self._samples = None   # (x ascending, area, "energy"|"wavelength") for from_samples instruments
        self._bands: dict[str, tuple[float, float]] = {}
        for bname, bval in (bands or {}).items():
            self._bands[str(bname)] = self._validate_band(f"bands['{bname}']", bval)
        self._cache: OrderedDict = OrderedDict()
        self._kcache: OrderedDict = OrderedDict()   # temperature responses, see _response_kernel

    # ------------------------------------------------------------------ constructors
    @classmethod
    def from_samples(cls, name: str, grid, area, **kwargs) -> "Instrument":
        """Build an instrument from point samples A(x) of the effective area.

        Parameters
        ----------
        name : str
        grid : `~astropy.units.Quantity`
            Sample abscissae in wavelength or energy units, monotonic (ascending or
            descending).  A repeated abscissa (two consecutive equal values) marks a step,
            e.g. at an absorption edge.
        area : `~astropy.units.Quantity`
            Effective area at each sample (any area unit), >= 0.
        **kwargs
            ``bands``, ``description``, ``provenance`` as for :class:`Instrument`.

        Method
        ------
        The samples are read as a curve piecewise linear in the *given* variable
        (wavelength or energy).  Each interval between consecutive samples becomes one
        energy bin whose area is the exact energy average of that linear piece:
        for an energy grid, (A1 + A2)/2; for a wavelength grid,
        ``A1 + (A2 - A1)/(l2 - l1) * (<l> - l1)`` with the energy-weighted mean wavelength
        ``<l> = l1 l2 ln(l2/l1) / (l2 - l1)`` (from integrating ``hc/E`` over the bin).
        Zero-width intervals (steps) are dropped.  No bin extends beyond the outermost
        samples.  :meth:`effective_area` then interpolates the samples themselves,
        linearly in the given variable.
        """
        if not isinstance(grid, u.Quantity) or grid.unit.physical_type not in ("length", "energy", "frequency"):
            raise u.UnitsError(f"grid must be a Quantity of wavelengths or energies; got {grid!r:.60}")
        wl = grid.unit.physical_type == "length"
        x = np.atleast_1d(grid.to_value(u.AA) if wl else grid.to_value(u.keV, equivalencies=u.spectral())).astype(float)
        a = np.atleast_1d(as_quantity("area", area, u.cm**2).value).astype(float)
        check_finite("grid", x)
        check_finite("area", a)
        if x.ndim != 1 or x.size < 2 or a.shape != x.shape:
            raise InputError(f"grid and area must be 1-D of equal length >= 2; got shapes {x.shape} and {a.shape}")
        if np.any(x <= 0):
            raise InputError(f"grid must be > 0 everywhere; got minimum {x.min():g} {grid.unit}")
        if x[-1] < x[0]:
            x, a = x[::-1].copy(), a[::-1].copy()
        d = np.diff(x)
        if np.any(d < 0):
            k = int(np.argmax(d < 0)) + 1
            raise InputError(
                f"grid must be monotonic; sample {k} ({x[k]:g}) comes after sample {k - 1} ({x[k - 1]:g}) "
                f"in a grid that otherwise increases")
        if np.any(a < 0):
            k = int(np.argmax(a < 0))
            raise InputError(f"area must be >= 0 cm^2; got {a[k]:g} cm^2 at sample {k} ({x[k]:g} {'Angstrom' if wl else 'keV'})")
        keep = d > 0
        x1, x2, a1, a2 = x[:-1][keep], x[1:][keep], a[:-1][keep], a[1:][keep]
        if wl:
            mean_l = x1 * x2 * np.log1p((x2 - x1) / x1) / (x2 - x1)
            abin = a1 + (a2 - a1) / (x2 - x1) * (mean_l - x1)
            elo, ehi = HC_KEV_ANGSTROM / x2, HC_KEV_ANGSTROM / x1
        else:
            abin = 0.5 * (a1 + a2)
            elo, ehi = x1, x2
        inst = cls(name, elo * u.keV, ehi * u.keV, abin * u.cm**2, **kwargs)
        inst._samples = (x, a, "wavelength" if wl else "energy")
        for arr in (x, a):
            arr.setflags(write=False)
        return inst

    # ------------------------------------------------------------------ attributes
    @property
    def energy_lo(self) -> u.Quantity:
        """Lower energy bound of each instrument bin (keV, ascending)."""
        return self._lo * u.keV

    @property
    def energy_hi(self) -> u.Quantity:
        """Upper energy bound of each instrument bin (keV, ascending)."""
        return self._hi * u.keV

    @property
    def area(self) -> u.Quantity:
        """Effective area of each instrument bin (cm^2; bin average)."""
        return self._area * u.cm**2

    @property
    def redistribution(self):
        """Redistribution matrix (scipy.sparse CSR, n_channels x n_energy) or None."""
        return self._R

    @property
    def channel_lo(self):
        """Lower channel energy bound (keV) or None without a redistribution matrix."""
        return None if self._ch_lo is None else self._ch_lo * u.keV

    @property
    def channel_hi(self):
        """Upper channel energy bound (keV) or None without a redistribution matrix."""
        return None if self._ch_hi is None else self._ch_hi * u.keV

    @property
    def n_channels(self) -> int:
        """Number of output channels of :meth:`fold` (energy bins when there is no redistribution)."""
        return self._lo.size if self._R is None else self._R.shape[0]

    @property
    def band_axis(self) -> str:
        """'channel energy' with a redistribution matrix, else 'photon energy'."""
        return "photon energy" if self._R is None else "channel energy"

    @property
    def bands(self) -> dict:
        """Named bands: name -> Quantity [E_lo, E_hi] in keV (see :attr:`band_axis`)."""
        return {k: np.array(v) * u.keV for k, v in self._bands.items()}

    @property
    def energy_range(self) -> u.Quantity:
        """[lowest, highest] photon energy (keV) at which the instrument responds (area > 0,
        and a non-zero redistribution column if there is a matrix)."""
        lo, hi = self._support(self._response_weights())
        return np.array([lo, hi]) * u.keV

    def __repr__(self) -> str:
        """One-line summary: bins, energy range, channels, bands."""
        rng = self.energy_range.value
        rmf = f", {self.n_channels} channels" if self._R is not None else ", no redistribution"
        return (f"<Instrument '{self.name}': {self._lo.size} energy bins, responds {rng[0]:.4g}-{rng[1]:.4g} keV"
                f"{rmf}, bands {list(self._bands)}>")

    # ------------------------------------------------------------------ bands
    def _validate_band(self, label: str, value) -> tuple[float, float]:
        """Parse a band and check it overlaps the axis it selects on."""
        lo, hi = _parse_band(label, value)
        if self._R is not None:
            alo, ahi, axis = float(self._ch_lo.min()), float(self._ch_hi.max()), "channel energies"
        else:
            alo, ahi, axis = float(self._lo[0]), float(self._hi[-1]), "photon energies"
        if hi <= alo or lo >= ahi:
            raise InputError(
                f"{label} = {lo:.6g}-{hi:.6g} keV does not overlap the instrument's {axis} "
                f"({alo:.6g}-{ahi:.6g} keV)")
        return lo, hi

    def with_bands(self, **bands) -> "Instrument":
        """Return a copy with bands added (a band of an existing name is replaced).

        Each keyword value is a (lo, hi) pair of energies or wavelengths (Quantity).
        Channel-energy bands with a redistribution matrix, photon-energy bands otherwise.
        """
        new = copy.copy(self)
        new._bands = dict(self._bands)
        for bname, bval in bands.items():
            new._bands[bname] = self._validate_band(f"band '{bname}'", bval)
        new._cache = self._cache   # matrices depend on the grid only; band rows are keyed by limits
        new.provenance = copy.deepcopy(self.provenance)
        return new

    def _resolve_bands(self, bands) -> list[tuple[str, float, float]]:
        """Normalise a band specification to a list of (label, lo_keV, hi_keV).

        Accepted: None (all named bands), a band name, a (lo, hi) Quantity, a dict
        name -> range, or a list/tuple of names and ranges.
        """
        if bands is None:
            if not self._bands:
                raise InputError(f"instrument '{self.name}' has no named bands; pass bands=, e.g. "
                                 "[(0.5, 2.0) * u.keV] or a dict of named ranges")
            return [(k, lo, hi) for k, (lo, hi) in self._bands.items()]
        if isinstance(bands, dict):
            return [(str(k), *self._validate_band(f"bands['{k}']", v)) for k, v in bands.items()]
        if isinstance(bands, str) or isinstance(bands, u.Quantity) and bands.shape == (2,):
            bands = [bands]
        elif isinstance(bands, tuple) and len(bands) == 2 and all(isinstance(b, u.Quantity) and b.isscalar for b in bands):
            bands = [bands]
        out = []
        for k, b in enumerate(bands):
            if isinstance(b, str):
                if b not in self._bands:
                    raise InputError(f"band '{b}' is not defined for instrument '{self.name}'; "
                                     f"defined bands: {sorted(self._bands) or 'none'}")
                out.append((b, *self._bands[b]))
            else:
                lo, hi = self._validate_band(f"bands[{k}]", b)
                out.append((f"{lo:.6g}-{hi:.6g} keV", lo, hi))
        if not out:
            raise InputError("bands is empty")
        return out

    # ------------------------------------------------------------------ effective area
    def effective_area(self, energy_or_wavelength) -> u.Quantity:
        """Effective area (cm^2) at given photon energies or wavelengths, by linear interpolation.

        Method: for an instrument built from point samples (:meth:`from_samples`, area
        tables, CHIANTI files) the samples are interpolated linearly in their own variable
        (wavelength or energy).  For binned areas (ARF) the bin values are placed at the
        bin centres and interpolated linearly in energy; in the outer half of the first and
        last bin the bin value is returned (no extrapolation).  Points outside the
        instrument grid, or in a gap between bins, raise :class:`InputError`.
        """
        e = to_energy_kev("energy_or_wavelength", energy_or_wavelength)
        shape = np.shape(e)
        e = np.atleast_1d(e).astype(float)
        if self._samples is not None:
            xs, As, kind = self._samples
            if kind == "wavelength":
                q = energy_or_wavelength
                # wavelengths are used as given (no round trip through energy)
                x = (np.atleast_1d(q.to_value(u.AA)).astype(float) if q.unit.physical_type == "length"
                     else HC_KEV_ANGSTROM / e)
            else:
                x = e
            bad = (x < xs[0] * (1 - _EDGE_RTOL)) | (x > xs[-1] * (1 + _EDGE_RTOL))
            if np.any(bad):
                unit = "Angstrom" if kind == "wavelength" else "keV"
                raise InputError(
                    f"energy_or_wavelength={x[bad][:4]} {unit} is outside the effective-area grid of '{self.name}' "
                    f"[{xs[0]:.6g}, {xs[-1]:.6g}] {unit}; nothing is extrapolated")
            val = np.interp(x, xs, As)
        else:
            idx = np.searchsorted(self._lo, e * (1 + _EDGE_RTOL), side="right") - 1
            ok = idx >= 0
            idx_c = np.clip(idx, 0, self._lo.size - 1)
            ok &= e <= self._hi[idx_c] * (1 + _EDGE_RTOL)
            if not np.all(ok):
                raise InputError(
                    f"energy_or_wavelength={e[~ok][:4]} keV is outside the effective-area grid of '{self.name}' "
                    f"[{self._lo[0]:.6g}, {self._hi[-1]:.6g}] keV (or in a gap between its bins); nothing is "
                    "extrapolated")
            centres = 0.5 * (self._lo + self._hi)
            val = np.interp(e, centres, self._area)
        return val.reshape(shape) * u.cm**2

    # ------------------------------------------------------------------ matrices
    def _response_weights(self) -> np.ndarray:
        """Per energy bin: area times probability of landing in any channel (cm^2)."""
        return self._area if self._R is None else self._area * self._colsum

    def _support(self, weights: np.ndarray, clip: tuple[float, float] | None = None):
        """Energy range (keV) spanned by bins with weights > 0, optionally clipped to a band."""
        nz = np.flatnonzero(weights > 0)
        if nz.size == 0:
            return None
        lo, hi = float(self._lo[nz[0]]), float(self._hi[nz[-1]])
        if clip is not None:
            lo, hi = max(lo, clip[0]), min(hi, clip[1])
        return lo, hi

    def _grid(self, energy_edges):
        """Parse an input grid; return (cache entry) with overlap data and matrices.

        Method: the input bins are sorted by energy; for every instrument bin the range of
        overlapping input bins is found by ``searchsorted`` and all (instrument bin, input
        bin) pairs are generated at once with ``np.repeat`` (no Python loop).  The overlap
        interval [s, t] of each pair is kept for exact band cuts.
        """
        g = SpectralGrid("energy_edges", energy_edges, edges=True)
        edges_kev = np.ascontiguousarray(g.energy_edges, dtype=float)
        key = hashlib.blake2b(edges_kev.tobytes(), digest_size=16).hexdigest()
        entry = self._cache.get(key)
        if entry is not None:
            self._cache.move_to_end(key)
            return entry
        in_lo, in_hi = g.lo_hi_kev()
        n_in = in_lo.size
        order = np.argsort(in_lo, kind="stable")
        e_asc = np.concatenate([in_lo[order], in_hi[order][-1:]])
        n_e = self._lo.size
        j0 = np.clip(np.searchsorted(e_asc, self._lo, side="right") - 1, 0, n_in - 1)
        j1 = np.clip(np.searchsorted(e_asc, self._hi, side="left") - 1, 0, n_in - 1)
        cnt = np.maximum(j1 - j0 + 1, 0)
        rows = np.repeat(np.arange(n_e), cnt)
        offs = np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt)
        js = np.repeat(j0, cnt) + offs
        s = np.maximum(e_asc[js], self._lo[rows])
        t = np.minimum(e_asc[js + 1], self._hi[rows])
        keep = t > s
        rows, js, s, t = rows[keep], js[keep], s[keep], t[keep]
        width = e_asc[js + 1] - e_asc[js]
        cols = order[js]                      # back to the user's bin order
        O = sp.csr_matrix(((t - s) / width, (rows, cols)), shape=(n_e, n_in))
        AO = sp.csr_matrix(O.multiply(self._area[:, None]))
        M = AO if self._R is None else (self._R @ AO).tocsr()
        entry = {
            "n_in": n_in, "range": (float(e_asc[0]), float(e_asc[-1])),
            "rows": rows, "cols": cols, "s": s, "t": t, "width": width,
            "M": M, "total": None, "bands": {}, "stacks": {},
        }
        self._cache[key] = entry
        if len(self._cache) > _CACHE_SIZE:
            self._cache.popitem(last=False)
        return entry

    def _check_coverage(self, entry, need, what: str):
        """Raise InputError if the input grid does not cover the energy range ``need`` (keV)."""
        if need is None:
            return
        glo, ghi = entry["range"]
        nlo, nhi = need
        missing = []
        if glo > nlo * (1 + _EDGE_RTOL):
            missing.append(f"{_fmt_kev(nlo)} to {_fmt_kev(min(glo, nhi))}")
        if ghi < nhi * (1 - _EDGE_RTOL):
            missing.append(f"{_fmt_kev(max(ghi, nlo))} to {_fmt_kev(nhi)}")
        if missing:
            raise InputError(
                f"energy_edges cover {_fmt_kev(glo)} to {_fmt_kev(ghi)}, but instrument '{self.name}' responds "
                f"{what} from {_fmt_kev(nlo)} to {_fmt_kev(nhi)}; the spectrum is missing "
                f"{' and '.join(missing)}. Extend the spectral grid (nothing is extrapolated).")

    def response_matrix(self, energy_edges):
        """Sparse CSR matrix (n_channels x n_input_bins) mapping photon flux per input bin
        (photons s^-1 cm^-2) to counts s^-1 per channel: ``R @ diag(A) @ O``.

        ``energy_edges`` are the input bin edges (n_input_bins + 1 values, energy or
        wavelength, monotonic).  Raises :class:`InputError` if they do not cover the
        energies where the instrument responds.  Cached per grid; do not modify.
        """
        entry = self._grid(energy_edges)
        self._check_coverage(entry, self._support(self._response_weights()), "(non-zero effective area)")
        return entry["M"]

    def fold(self, photon_flux, energy_edges) -> u.Quantity:
        """Count rate per channel (counts s^-1) of a photon spectrum.

        Parameters
        ----------
        photon_flux : `~astropy.units.Quantity`
            Photons s^-1 cm^-2 in each input bin, shape (..., n_bins); leading batch
            dimensions are allowed.  Must be >= 0 and finite.
        energy_edges : `~astropy.units.Quantity`
            The n_bins + 1 input bin edges, in energy or wavelength, monotonic; the last
            axis of ``photon_flux`` follows their order.

        Returns
        -------
        Quantity
            Shape (..., n_channels), counts s^-1 per channel (per instrument energy
            bin when there is no redistribution matrix).

        Method
        ------
        ``R @ diag(A) @ O @ f`` with the cached sparse matrix of
        :meth:`response_matrix` (see module docstring).  Raises :class:`InputError` if
        the grid misses part of the energy range where the instrument responds.
        """
        M = self.response_matrix(energy_edges)
        f = _photon_flux_values("photon_flux", photon_flux)
        f2 = self._flat_batch(f, M.shape[1])
        out = (M @ f2.T).T
        return out.reshape(f.shape[:-1] + (M.shape[0],)) * COUNT_RATE_UNIT

    @staticmethod
    def _flat_batch(f: np.ndarray, n_in: int) -> np.ndarray:
        """Reshape (..., n_in) to (batch, n_in), checking the last axis."""
        if f.ndim == 0 or f.shape[-1] != n_in:
            raise InputError(f"photon_flux has shape {f.shape}; its last axis must have {n_in} elements, one per "
                             "bin of energy_edges (n_edges - 1)")
        return f.reshape(-1, n_in)

    def band_matrix(self, energy_edges, bands=None) -> np.ndarray:
        """Linear operator from photon flux per input bin to count rate per band.

        Parameters
        ----------
        energy_edges : `~astropy.units.Quantity`
            Input bin edges (energy or wavelength).
        bands : None, str, Quantity pair, dict or list of these
            None selects all named bands in definition order.  Ranges are in energy or
            wavelength.

        Returns
        -------
        ndarray (n_bands, n_input_bins)
            Float, read-only: counts s^-1 in band b per
            (photon s^-1 cm^-2) in input bin j.  Row order follows ``bands``.

        Method
        ------
        With a redistribution matrix the band weights each channel by the fraction of its
        EBOUNDS width [E_MIN, E_MAX] inside the band (photons assumed uniform across the
        channel; a zero-width channel counts if E_lo <= E_MIN < E_hi), and the row is
        ``S_b @ R @ diag(A) @ O``.  Without one, the band is a photon-energy band and the
        cut is exact at the level of the piecewise-constant model: the contribution of
        each (instrument bin i, input bin j) pair is
        ``A_i |b_j ∩ e_i ∩ band| / |b_j|``.  Cached per (grid, band limits).  Raises
        :class:`InputError` if the grid misses part of the energy range that contributes
        to any requested band.
        """
        entry = self._grid(energy_edges)
        blist = self._resolve_bands(bands)
        skey = tuple((round(lo, 15), round(hi, 15)) for _, lo, hi in blist)
        stacked = entry["stacks"].get(skey)
        if stacked is not None:
            return stacked
        rows = []
        for label, lo, hi in blist:
            key = (round(lo, 15), round(hi, 15))
            cached = entry["bands"].get(key)
            if cached is None:
                cached = self._band_row(entry, lo, hi)
                entry["bands"][key] = cached
            row, need = cached
            self._check_coverage(entry, need, f"in band '{label}' ({lo:.6g}-{hi:.6g} keV {self.band_axis})")
            rows.append(row)
        out = np.vstack(rows)
        out.setflags(write=False)
        entry["stacks"][skey] = out
        return out

    def _band_row(self, entry, lo: float, hi: float):
        """Compute one band row (n_input,) and the photon-energy range it needs (keV)."""
        n_in = entry["n_in"]
        if self._R is None:
            s = np.maximum(entry["s"], lo)
            t = np.minimum(entry["t"], hi)
            w = self._area[entry["rows"]] * np.clip(t - s, 0.0, None) / entry["width"]
            row = np.bincount(entry["cols"], weights=w, minlength=n_in)
        else:
            sel = self._channel_fractions(lo, hi)
            row = np.asarray(entry["M"].T @ sel).ravel()
        row.setflags(write=False)
        return row, self._band_need(lo, hi)

    def _band_need(self, lo, hi):
        """Photon-energy range (keV) that contributes to a band, or None if none does.

        ``lo = hi = None`` means all channels (the instrument's full response range).
        """
        if lo is None:
            return self._support(self._response_weights())
        if self._R is None:
            return self._support(np.where((self._hi > lo) & (self._lo < hi), self._area, 0.0), clip=(lo, hi))
        sel = self._channel_fractions(lo, hi)
        return self._support(self._area * np.asarray(self._R.T @ sel).ravel())

    def _channel_fractions(self, lo: float, hi: float) -> np.ndarray:
        """Fraction of each channel's EBOUNDS width inside [lo, hi] keV (vectorised)."""
        clo, chi = self._ch_lo, self._ch_hi
        width = chi - clo
        ov = np.clip(np.minimum(chi, hi) - np.maximum(clo, lo), 0.0, None)
        with np.errstate(invalid="ignore", divide="ignore"):
            frac = np.where(width > 0, ov / np.where(width > 0, width, 1.0), ((clo >= lo) & (clo < hi)).astype(float))
        return frac

    def count_rate_from_spectrum(self, photon_flux, energy_edges, band=None) -> u.Quantity:
        """Total count rate (counts s^-1) of a photon spectrum, optionally in one band.

        Parameters
        ----------
        photon_flux : Quantity (..., n_bins)
            Photons s^-1 cm^-2 per input bin.
        energy_edges : Quantity
            Input bin edges, energy or wavelength.
        band : None, str or (lo, hi) Quantity
            None: all channels.  A band name, or limits in energy or wavelength —
            channel-energy limits with a redistribution matrix, photon-energy limits without.
            A band edge inside a channel takes the fraction of the channel's width inside
            the band (see :meth:`band_matrix`).

        Returns
        -------
        Quantity (...) in counts s^-1.
        """
        f = _photon_flux_values("photon_flux", photon_flux)
        if band is None:
            row = self._total_row(energy_edges)
        else:
            row = self.band_matrix(energy_edges, [band])[0]
        self._flat_batch(f, row.size)          # shape check
        return np.asarray(f @ row) * COUNT_RATE_UNIT

    def _total_row(self, energy_edges) -> np.ndarray:
        """Row (n_input,) of counts s^-1 in all channels per photon s^-1 cm^-2 in each input bin."""
        entry = self._grid(energy_edges)
        self._check_coverage(entry, self._support(self._response_weights()), "(non-zero effective area)")
        if entry["total"] is None:
            total = np.asarray(entry["M"].sum(axis=0)).ravel()
            total.setflags(write=False)
            entry["total"] = total
        return entry["total"]

    # ------------------------------------------------------------------ temperature responses
    def _response_bands(self, bands) -> list[tuple[str, float | None, float | None]]:
        """Bands of a response request as (label, lo_keV, hi_keV); (TOTAL_BAND, None, None) = all channels.

        None: all named bands, or the single band "total" if the instrument has none.
        The name "total" always means all channels unless the instrument defines a band of
        that name.
        """
        if bands is None:
            return self._resolve_bands(None) if self._bands else [(TOTAL_BAND, None, None)]
        if isinstance(bands, dict):
            return self._resolve_bands(bands)
        if _is_single_band(bands):
            bands = [bands]
        out = []
        for b in bands:
            if isinstance(b, str) and b == TOTAL_BAND and TOTAL_BAND not in self._bands:
                out.append((TOTAL_BAND, None, None))
            else:
                out.extend(self._resolve_bands([b]))
        if not out:
            raise InputError("bands is empty")
        return out

    def _response_edges(self, prep, blist, nh: float | None, input_grid):
        """Input energy grid (ascending keV edges) for the temperature responses; see temperature_response."""
        from .observables import ism_range_kev, refine_edges

        if input_grid is not None:
            g = SpectralGrid("input_grid", input_grid, edges=True)
            e = np.asarray(g.energy_edges, dtype=float)
            return (e if e[-1] > e[0] else e[::-1].copy()), "user input_grid"
        e_tab = prep.table.energy
        lim = [float(e_tab[0]), float(e_tab[-1])]
        limit_txt = f"the emissivity table's continuum grid ({lim[0]:.6g}-{lim[1]:.6g} keV)"
        if nh:
            ilo, ihi = ism_range_kev()
            lim = [max(lim[0], ilo), min(lim[1], ihi)]
            limit_txt += f" and the interstellar absorption model ({ilo:.6g}-{ihi:.6g} keV, needed with nh)"
        needs = []
        for label, lo, hi in blist:
            need = self._band_need(lo, hi)
            if need is None:
                continue
            if need[0] < lim[0] * (1 - _EDGE_RTOL) or need[1] > lim[1] * (1 + _EDGE_RTOL):
                where = "in all channels" if lo is None else f"in band '{label}' ({lo:.6g}-{hi:.6g} keV {self.band_axis})"
                raise InputError(
                    f"instrument '{self.name}' responds {where} to photons from {_fmt_kev(need[0])} to "
                    f"{_fmt_kev(need[1])}, outside {limit_txt}; choose a band inside "
                    f"{lim[0]:.6g}-{lim[1]:.6g} keV (nothing is extrapolated)")
            needs.append(need)
        if not needs:
            raise InputError(f"instrument '{self.name}' has no response in the requested bands "
                             f"{[b[0] for b in blist]}")
        lo = min(n[0] for n in needs)
        hi = max(n[1] for n in needs)
        extra = [] if self._R is not None else [x for _, a, b in blist if a is not None for x in (a, b)]
        e = np.unique(np.concatenate([self._lo, self._hi, np.asarray(extra, dtype=float)]))
        e = np.concatenate([[lo], e[(e > lo) & (e < hi)], [hi]])
        desc = f"the instrument's own energy bins and band edges, {lo:.6g}-{hi:.6g} keV"
        if nh:
            e = refine_edges(e)
            desc += " (split to relative bin width <= 0.1 % for the absorption)"
        return e, desc

    def _response_kernel(self, prep, blist, nh: float | None, ism_abundances, input_grid):
        """Temperature responses (n_bands, n_T) in counts s^-1 per cm^-3 of EM at 1 pc, and the grid text."""
        from .observables import _FOUR_PI_PC2, binned_emissivity, ism_key

        if input_grid is None:
            kkey = (id(prep), nh, ism_key(ism_abundances) if nh else None, tuple((b[1], b[2]) for b in blist))
            hit = self._kcache.get(kkey)
            if hit is not None and hit[0]() is prep:
                self._kcache.move_to_end(kkey)
                return hit[1]
        edges, grid_desc = self._response_edges(prep, blist, nh, input_grid)
        eq = edges * u.keV
        try:
            rows = []
            named = [(lo, hi) for _, lo, hi in blist if lo is not None]
            bm = self.band_matrix(eq, [np.array(p) * u.keV for p in named]) if named else None
            k = 0
            for _, lo, hi in blist:
                if lo is None:
                    rows.append(self._total_row(eq))
                else:
                    rows.append(bm[k])
                    k += 1
        except InputError as exc:
            if input_grid is not None:
                raise InputError(f"input_grid: {exc}") from None
            raise
        B = np.vstack(rows)                                                            # (n_b, n_in) cm^2
        E = binned_emissivity(edges, prep, photons=True, nh=nh, ism_abundances=ism_abundances)   # (n_T, n_in)
        # einsum, not B @ E.T: OpenBLAS takes ~100x longer on this short-wide product on some machines
        K = np.einsum("bi,ti->bt", B, E) / _FOUR_PI_PC2
        K.setflags(write=False)
        if input_grid is None:
            self._kcache[kkey] = (weakref.ref(prep), (K, grid_desc, edges))   # weak: prepared tables are large
            if len(self._kcache) > _CACHE_SIZE:
                self._kcache.popitem(last=False)
        return K, grid_desc, edges

    def _response_attrs(self, prep, nh, ism_abundances, grid_desc, edges) -> dict:
        """attrs shared by temperature responses and count rates."""
        from .observables import ism_attrs

        attrs = prep.attrs()
        attrs.update(ism_attrs(nh, ism_abundances))
        attrs.update({
            "instrument": self.name,
            "instrument_description": self.description,
            "instrument_provenance": json.dumps(self.provenance, default=str, sort_keys=True),
            "band_axis": self.band_axis,
            "input_grid": f"{grid_desc}; {edges.size - 1} bins",
        })
        return attrs

    def temperature_response(self, table=None, abundances="coronal", density=None, pressure=None, bands=None,
                             nh=None, ism_abundances="photospheric", input_grid=None):
        """Temperature response K_b(T) of each band: counts s^-1 per unit emission measure at 1 pc.

        ``rate_b = sum_T EM(T) K_b(T) (1 pc / d)^2`` for a volume DEM at distance d, EM =
        integral n_e n_H dV in cm^-3.

        Parameters
        ----------
        table : EmissivityTable, optional
            Default: the embedded table (:func:`synthcorona.load_emissivity`).
        abundances : str, dict or AbundanceSet
            Named set or {symbol: n_X/n_H}; elements missing from a dict are zero and are listed
            in ``attrs["abundance_note"]``.
        density, pressure : Quantity, optional
            Electron density [cm^-3] (default 1e10) or constant pressure n_e T [K cm^-3].
        bands : None, str, Quantity pair, dict or list of these
            None: every named band, or a single band "total" (all channels) if the instrument
            has none. "total" always selects all channels unless a band has that name. Limits
            are channel energies with a redistribution matrix, photon energies without.
        nh : Quantity [cm^-2], optional
            Interstellar hydrogen column in [0, 1e24]; default: no absorption. Needs the
            response inside the absorption model's 10 eV-10 keV.
        ism_abundances : str or dict
            Abundances of the absorbing gas.
        input_grid : Quantity, optional
            Bin edges (energy or wavelength) of the photon spectrum to fold instead of the
            automatic grid (see Method).

        Returns
        -------
        xarray.DataArray
            Dims ("band", "logT"), units ``attrs["units"]`` = "cm3 ct / s"
            (counts s^-1 per cm^-3 of EM at the reference distance 1 pc); coordinates ``band_lo``,
            ``band_hi`` (keV; the instrument's response range for "total"). ``attrs`` carry the
            reference distance, absorption, abundances (with the note on missing elements),
            density model, table provenance and the instrument's name and provenance.

        Method
        ------
        ``K_b(T) = S_b @ eps(T) / (4 pi (1 pc)^2)`` with ``S_b = band_matrix(edges)`` (cm^2 per
        input bin, including the redistribution and channel selection) and ``eps`` the photon
        emissivity per unit EM in each input bin, absorbed by ``exp(-sigma N_H)``
        (:func:`synthcorona.instruments.observables.binned_emissivity`). The automatic input
        grid is the instrument's own energy-bin edges plus the band edges, over the photon
        energies that contribute to the requested bands. On that grid the result is exact for
        the instrument's piecewise-constant effective area: the continuum is integrated
        exactly over each bin and each line falls in the one bin holding its energy. With
        ``nh`` the bins are split to a relative width <= 0.1 % and the continuum takes the
        transmission at each bin's log-centre, the lines at their own energy. If a band needs
        photons outside the table's continuum grid (or outside 10 eV-10 keV with ``nh``)
        :class:`InputError` says so. Emissivity matrices are cached per (abundances/density,
        grid, N_H).
        """
        from .observables import nh_value

        nhv = nh_value(nh)
        from ..synthesis import prepare

        prep = prepare(table, abundances, density, pressure)
        blist = self._response_bands(bands)
        K, grid_desc, edges = self._response_kernel(prep, blist, nhv, ism_abundances, input_grid)
        rng = self.energy_range.value
        lo = np.array([rng[0] if a is None else a for _, a, _ in blist])
        hi = np.array([rng[1] if b is None else b for _, _, b in blist])
        attrs = self._response_attrs(prep, nhv, ism_abundances, grid_desc, edges)
        attrs.update({
            "units": TEMPERATURE_RESPONSE_UNIT.to_string(),
            "quantity": ("count rate per unit volume emission measure (EM = integral n_e n_H dV, cm-3) of "
                         "isothermal plasma at the reference distance"),
            "reference_distance": f"{REFERENCE_DISTANCE_PC:g} pc",
        })
        return xr.DataArray(
            K, dims=("band", "logT"),
            coords={"band": [b[0] for b in blist], "logT": prep.table.logT.copy(),
                    "band_lo": ("band", lo, {"units": "keV"}), "band_hi": ("band", hi, {"units": "keV"})},
            attrs=attrs, name="temperature_response")

    def _count_rate_values(self, dem, distance, nh, band, table, abundances, density, pressure, ism_abundances,
                           solid_angle):
        """Count rates (batch + (n_bands,)) in counts s^-1, the band list, and attrs pieces."""
        from ..synthesis import dem_weights, prepare
        from .observables import _distance_cm, nh_value

        nhv = nh_value(nh)
        prep = prepare(table, abundances, density, pressure)
        w, em_unit = dem_weights(dem, prep)
        blist = self._response_bands(band)
        batch = w.shape[:-1]
        if em_unit.is_equivalent(u.cm**-3):
            if solid_angle is not None:
                raise InputError("solid_angle applies to a column DEM (cm^-5); this DEM is a volume DEM (cm^-3): "
                                 "give distance= instead")
            scale = (REFERENCE_DISTANCE_CM / _distance_cm(distance, batch)) ** 2
            geometry = {"distance_pc": np.asarray(as_quantity("distance", distance, u.pc).value).tolist()}
        else:
            if distance is not None:
                raise InputError("distance is meaningless for a column DEM (cm^-5), which gives an intensity; "
                                 "give solid_angle= (the solid angle observed, e.g. one pixel) instead")
            if solid_angle is None:
                raise InputError("a column DEM (cm^-5) needs solid_angle= (e.g. the solid angle of one pixel, "
                                 "in sr or arcsec^2) to give a count rate")
            om = as_quantity("solid_angle", solid_angle, u.sr)
            check_finite("solid_angle", om)
            if np.ndim(om) != 0 or not om.value > 0:
                raise InputError(f"solid_angle={solid_angle} must be a single value > 0 sr (valid range (0, 4 pi] sr)")
            scale = np.full(batch, REFERENCE_DISTANCE_CM**2 * float(om.value))
            geometry = {"solid_angle_sr": float(om.value)}
        K, grid_desc, edges = self._response_kernel(prep, blist, nhv, ism_abundances, None)
        vals = (w @ K.T) * scale[..., None]
        return vals, blist, (prep, nhv, grid_desc, edges, geometry)

    def count_rate(self, dem, distance=None, nh=None, band=None, table=None, abundances="coronal", density=None,
                   pressure=None, ism_abundances="photospheric", solid_angle=None) -> u.Quantity:
        """Count rate (counts s^-1) of a DEM or a batch of DEMs, with interstellar absorption.

        Parameters
        ----------
        dem : synthcorona.dem.DEM
            ``dem.em_weights(table.logT)`` has shape batch + (n_T,). A volume DEM (cm^-3) needs
            ``distance``; a column DEM (cm^-5) needs ``solid_angle`` instead.
        distance : Quantity [length]
            Distance of the star, > 0; broadcast against the DEM batch shape.
        nh : Quantity [cm^-2], optional
            Interstellar hydrogen column, [0, 1e24] cm^-2.
        band : None, str, Quantity pair, or list/dict of these
            None: all named bands (or "total"), result has a last axis of bands in definition
            order. A single band name or (lo, hi) Quantity: no band axis. A list or dict: a
            last axis in that order. (lo, hi) limits are channel energies with a
            redistribution matrix, photon energies otherwise.
        table, abundances, density, pressure, ism_abundances
            As for :meth:`temperature_response`.
        solid_angle : Quantity [sr], optional
            Solid angle observed, for a column DEM (e.g. one pixel).

        Returns
        -------
        Quantity
            In counts s^-1, shape batch (+ (n_bands,)). See :meth:`count_rates` for the
            same numbers as a labelled xarray.DataArray with provenance.

        Method
        ------
        ``rate = w @ K^T (1 pc / d)^2`` with ``w`` the EM weights of the DEM on the table grid
        and ``K`` from :meth:`temperature_response` (one matrix product for the whole batch).
        For a column DEM, ``rate = w @ (S @ eps)^T / (4 pi sr) * Omega``.
        """
        vals, blist, _ = self._count_rate_values(dem, distance, nh, band, table, abundances, density, pressure,
                                                 ism_abundances, solid_angle)
        q = vals * COUNT_RATE_UNIT
        if band is not None and _is_single_band(band):
            return q[..., 0]
        return q

    def count_rates(self, dem, distance=None, nh=None, band=None, table=None, abundances="coronal", density=None,
                    pressure=None, ism_abundances="photospheric", solid_angle=None):
        """Count rates per band as an xarray.DataArray with units and provenance.

        Same arguments and numbers as :meth:`count_rate`; dims are the DEM batch dims
        ("dem" for a 1-D batch, "dem_0", "dem_1", ... otherwise; none for one DEM) followed
        by "band" (always present). ``attrs`` give units (counts s^-1), distance or solid
        angle, absorption, abundances (including which elements were taken as zero),
        density model, table and instrument provenance.
        """
        vals, blist, (prep, nhv, grid_desc, edges, geometry) = self._count_rate_values(
            dem, distance, nh, band, table, abundances, density, pressure, ism_abundances, solid_angle)
        nb = vals.ndim - 1
        dims = (() if nb == 0 else ("dem",) if nb == 1 else tuple(f"dem_{i}" for i in range(nb))) + ("band",)
        attrs = self._response_attrs(prep, nhv, ism_abundances, grid_desc, edges)
        attrs.update({"units": COUNT_RATE_UNIT.to_string(), "quantity": "count rate", "dem": repr(dem)})
        attrs.update({k: json.dumps(v) for k, v in geometry.items()})
        return xr.DataArray(vals, dims=dims, coords={"band": [b[0] for b in blist]}, attrs=attrs, name="count_rate")


def _is_single_band(band) -> bool:
    """True for one band: a name, a (2,) Quantity, or a pair of scalar Quantities."""
    if isinstance(band, str):
        return True
    if isinstance(band, u.Quantity):
        return band.shape == (2,)
    return (isinstance(band, tuple) and len(band) == 2
            and all(isinstance(b, u.Quantity) and b.isscalar for b in band))
