"""The :class:`Instrument`: effective area, redistribution, named bands, and folding of photon spectra.

Method
------
A photon spectrum, given as a photon flux per bin (photons s^-1 cm^-2 in each bin)
on any energy or wavelength grid, becomes a count rate through three linear maps,
composed once per input grid into a single sparse matrix and cached:

1. **Rebinning** ``O`` (n_energy x n_input): ``O[i, j] = |b_j ∩ e_i| / |b_j|``, the
   fraction of input bin ``b_j`` (measured in photon energy) that lies in instrument
   energy bin ``e_i``.  Photons are assumed uniformly distributed in energy inside each
   input bin, so every photon of an input bin lying inside the instrument grid is
   assigned to exactly one instrument bin: photons are conserved
   (:func:`synthcorona.instruments.binning.rebin_overlaps`).
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

Temperature responses and count rates of DEMs (:meth:`Instrument.temperature_response`,
:meth:`Instrument.count_rate`, :meth:`Instrument.count_rates`) are computed in
:mod:`synthcorona.instruments.dem_response`.
"""
from __future__ import annotations

import copy
import hashlib
from collections import OrderedDict

import astropy.units as u
import numpy as np
import scipy.sparse as sp

from ..errors import InputError
from ..spectral import Band, SpectralGrid
from ..validation import as_quantity, check_finite
from .binning import (
    bins_kev,
    channel_fractions,
    check_coverage,
    check_redistribution,
    check_sorted_bins,
    interpolate_bins,
    interpolate_samples,
    rebin_overlaps,
    samples_to_bins,
)

__all__ = ["Instrument", "COUNT_RATE_UNIT", "PHOTON_FLUX_UNIT"]

#: Unit of the photon flux per bin accepted by :meth:`Instrument.fold` (``1/(s cm2)`` is accepted too).
PHOTON_FLUX_UNIT = u.ph / (u.s * u.cm**2)
#: Unit of every count rate returned.
COUNT_RATE_UNIT = u.ct / u.s
# Number of input grids whose matrices are kept per instrument.
_CACHE_SIZE = 32


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

        lo, hi = bins_kev("energy_lo", energy_lo, "energy_hi", energy_hi)
        lo, hi, rev = check_sorted_bins(lo, hi, f"instrument '{name}'")
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
        self._set_redistribution(redistribution, channel_lo, channel_hi, rev)
        for arr in (self._lo, self._hi, self._area, self._ch_lo, self._ch_hi):
            if arr is not None:
                arr.setflags(write=False)

        self._samples = None   # (x ascending, area, "energy"|"wavelength") for from_samples instruments
        self._bands: dict[str, tuple[float, float]] = {}
        for bname, bval in (bands or {}).items():
            self._bands[str(bname)] = self._validate_band(f"bands['{bname}']", bval)
        self._cache: OrderedDict = OrderedDict()

    def _set_redistribution(self, redistribution, channel_lo, channel_hi, reverse: bool) -> None:
        """Validate and store the redistribution matrix and the channel bounds (keV), or none."""
        self._R = None
        self._ch_lo = self._ch_hi = None
        if redistribution is None:
            if channel_lo is not None or channel_hi is not None:
                raise InputError("channel_lo/channel_hi were given without a redistribution matrix")
            return
        R, colsum = check_redistribution(redistribution, self._lo.size, reverse)
        if channel_lo is None or channel_hi is None:
            raise InputError("channel_lo and channel_hi (channel energy bounds, e.g. the EBOUNDS of an RMF) "
                             "are required with a redistribution matrix")
        clo, chi = bins_kev("channel_lo", channel_lo, "channel_hi", channel_hi, allow_zero=True)
        if clo.size != R.shape[0]:
            raise InputError(f"channel_lo has {clo.size} channels but redistribution has {R.shape[0]} rows")
        R.eliminate_zeros()
        self._R, self._ch_lo, self._ch_hi = R, clo, chi
        self._colsum = colsum

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
        x, a, kind, elo, ehi, abin = samples_to_bins(grid, area)
        inst = cls(name, elo * u.keV, ehi * u.keV, abin * u.cm**2, **kwargs)
        inst._samples = (x, a, kind)
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
        """A band (anything :meth:`Band.coerce <synthcorona.spectral.Band.coerce>` reads) as (lo, hi) keV,
        checked to overlap the axis it selects on."""
        lo, hi = Band.coerce(value, label, label=label).energy_kev
        if self._R is not None:
            alo, ahi, axis = float(self._ch_lo.min()), float(self._ch_hi.max()), "channel energies"
        else:
            alo, ahi, axis = float(self._lo[0]), float(self._hi[-1]), "photon energies"
        if hi <= alo or lo >= ahi:
            raise InputError(
                f"{label} = {lo:.6g}-{hi:.6g} keV does not overlap the instrument's {axis} "
                f"({alo:.6g}-{ahi:.6g} keV)")
        return lo, hi

    def without_caches(self) -> "Instrument":
        """A shallow copy with empty response-matrix caches: cheap to send to worker processes."""
        import copy

        c = copy.copy(self)
        c._cache = OrderedDict()
        return c

    def with_bands(self, **bands) -> "Instrument":
        """Return a copy with bands added (a band of an existing name is replaced).

        Each keyword value is a band: a :class:`~synthcorona.spectral.Band`, a text such as
        ``"0.5-2 keV"``, or a (lo, hi) pair of energies or wavelengths (Quantity), lower limit
        first in the unit given. Channel-energy bands with a redistribution matrix,
        photon-energy bands otherwise.
        """
        new = copy.copy(self)
        new._bands = dict(self._bands)
        for bname, bval in bands.items():
            new._bands[bname] = self._validate_band(f"band '{bname}'", bval)
        new._cache = self._cache   # matrices depend on the grid only; band rows are keyed by limits
        new.provenance = copy.deepcopy(self.provenance)
        return new

    def resolve_bands(self, bands) -> list[tuple[str, float, float]]:
        """Normalise a band specification to a list of (label, lo_keV, hi_keV).

        Accepted: None (all named bands), a band name, a :class:`~synthcorona.spectral.Band`, a
        (lo, hi) Quantity, a dict name -> band, or a list/tuple of names and bands. Unnamed
        limits are labelled by their range in keV; a Band keeps its own label.
        """
        if bands is None:
            if not self._bands:
                raise InputError(f"instrument '{self.name}' has no named bands; pass bands=, e.g. "
                                 "[(0.5, 2.0) * u.keV] or a dict of named ranges")
            return [(k, lo, hi) for k, (lo, hi) in self._bands.items()]
        if isinstance(bands, dict):
            return [(str(k), *self._validate_band(f"bands['{k}']", v)) for k, v in bands.items()]
        if isinstance(bands, (str, Band)) or isinstance(bands, u.Quantity) and bands.shape == (2,):
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
                out.append((b.label if isinstance(b, Band) else f"{lo:.6g}-{hi:.6g} keV", lo, hi))
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
        if self._samples is not None:
            val = interpolate_samples(energy_or_wavelength, *self._samples, self.name)
        else:
            val = interpolate_bins(energy_or_wavelength, self._lo, self._hi, self._area, self.name)
        return val * u.cm**2

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
        """Parse an input grid; return its cache entry: overlaps (:func:`~.binning.rebin_overlaps`) and matrices."""
        g = SpectralGrid("energy_edges", energy_edges, edges=True)
        edges_kev = np.ascontiguousarray(g.energy_edges, dtype=float)
        key = hashlib.blake2b(edges_kev.tobytes(), digest_size=16).hexdigest()
        entry = self._cache.get(key)
        if entry is not None:
            self._cache.move_to_end(key)
            return entry
        entry = rebin_overlaps(self._lo, self._hi, g)
        AO = sp.csr_matrix(entry.pop("O").multiply(self._area[:, None]))
        entry.update({"M": AO if self._R is None else (self._R @ AO).tocsr(), "total": None, "bands": {},
                      "stacks": {}})
        self._cache[key] = entry
        if len(self._cache) > _CACHE_SIZE:
            self._cache.popitem(last=False)
        return entry

    def _check_coverage(self, entry, need, what: str):
        """Raise InputError if the input grid of ``entry`` does not cover the energy range ``need`` (keV)."""
        check_coverage(entry["range"], need, f"instrument '{self.name}' responds {what}")

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
        blist = self.resolve_bands(bands)
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
            sel = channel_fractions(self._ch_lo, self._ch_hi, lo, hi)
            row = np.asarray(entry["M"].T @ sel).ravel()
        row.setflags(write=False)
        return row, self.band_support(lo, hi)

    def band_support(self, lo=None, hi=None):
        """Photon-energy range (lo, hi) in keV that contributes to the band [lo, hi] keV, or None if none does.

        The band limits are channel energies with a redistribution matrix, photon energies without;
        ``lo = hi = None`` means all channels (the instrument's full response range).
        """
        if lo is None:
            return self._support(self._response_weights())
        if self._R is None:
            return self._support(np.where((self._hi > lo) & (self._lo < hi), self._area, 0.0), clip=(lo, hi))
        sel = channel_fractions(self._ch_lo, self._ch_hi, lo, hi)
        return self._support(self._area * np.asarray(self._R.T @ sel).ravel())

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
            row = self.total_band_row(energy_edges)
        else:
            row = self.band_matrix(energy_edges, [band])[0]
        self._flat_batch(f, row.size)          # shape check
        return np.asarray(f @ row) * COUNT_RATE_UNIT

    def total_band_row(self, energy_edges) -> np.ndarray:
        """Row (n_input,) of counts s^-1 in all channels per photon s^-1 cm^-2 in each input bin.

        ``energy_edges`` as for :meth:`fold`; raises :class:`InputError` if they miss part of the
        range where the instrument responds.  Cached per grid (read-only).
        """
        entry = self._grid(energy_edges)
        self._check_coverage(entry, self._support(self._response_weights()), "(non-zero effective area)")
        if entry["total"] is None:
            total = np.asarray(entry["M"].sum(axis=0)).ravel()
            total.setflags(write=False)
            entry["total"] = total
        return entry["total"]

    # ------------------------------------------------------------------ DEMs (synthcorona.instruments.dem_response)
    def temperature_response(self, table=None, abundances="coronal", density=None, pressure=None, bands=None,
                             nh=None, ism_abundances="photospheric", input_grid=None):
        """Temperature response K_b(T) of each band (counts s^-1 per cm^-3 of EM at 1 pc), as an xarray.DataArray.

        See :func:`synthcorona.instruments.dem_response.temperature_response` for the arguments,
        the result and the method.
        """
        from .dem_response import temperature_response

        return temperature_response(self, table=table, abundances=abundances, density=density, pressure=pressure,
                                    bands=bands, nh=nh, ism_abundances=ism_abundances, input_grid=input_grid)

    def count_rate(self, dem, distance=None, nh=None, band=None, table=None, abundances="coronal", density=None,
                   pressure=None, ism_abundances="photospheric", solid_angle=None) -> u.Quantity:
        """Count rate (counts s^-1) of a DEM or a batch of DEMs, with interstellar absorption.

        See :func:`synthcorona.instruments.dem_response.count_rate` for the arguments, the
        result and the method.
        """
        from .dem_response import count_rate

        return count_rate(self, dem, distance=distance, nh=nh, band=band, table=table, abundances=abundances,
                          density=density, pressure=pressure, ism_abundances=ism_abundances,
                          solid_angle=solid_angle)

    def count_rates(self, dem, distance=None, nh=None, band=None, table=None, abundances="coronal", density=None,
                    pressure=None, ism_abundances="photospheric", solid_angle=None):
        """Count rates per band as an xarray.DataArray with units and provenance.

        Same arguments and numbers as :meth:`count_rate`; see
        :func:`synthcorona.instruments.dem_response.count_rates`.
        """
        from .dem_response import count_rates

        return count_rates(self, dem, distance=distance, nh=nh, band=band, table=table, abundances=abundances,
                           density=density, pressure=pressure, ism_abundances=ism_abundances,
                           solid_angle=solid_angle)
