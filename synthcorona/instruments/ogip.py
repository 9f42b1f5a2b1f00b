"""OGIP response files: ancillary responses (ARF, effective area) and redistribution matrices (RMF).

Implemented from the open standard: George, I. M., Arnaud, K. A., Pence, B., Ruamsuwan, L. &
Corcoran, M. F., *The Calibration Requirements for Spectral Analysis (Definition of RMF and ARF
file formats)*, OGIP Calibration Memo CAL/GEN/92-002 (NASA/GSFC, 1992, rev. 2007/2020), and its
addendum CAL/GEN/92-002a (George & Arnaud 1998).  Section numbers below refer to CAL/GEN/92-002.

Every malformed file raises :class:`~synthcorona.errors.InstrumentFileError` (an
:class:`~synthcorona.errors.InputError`) naming the file and the problem; a CHECKSUM/DATASUM
mismatch warns with :class:`~synthcorona.errors.InstrumentFileWarning`.
:func:`synthcorona.instruments.readers.load_instrument` turns an ARF (with an optional RMF) or a
full response matrix into an :class:`~synthcorona.instruments.instrument.Instrument`.
"""
from __future__ import annotations

import os
import warnings
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np
import scipy.sparse as sp
from astropy.io import fits

from ..errors import InputError, InstrumentFileError, InstrumentFileWarning
from ..validation import as_quantity
from .files import existing_file, file_record
from .instrument import Instrument

__all__ = ["OGIP_REFERENCE", "AreaData", "RedistributionData", "read_arf", "write_arf", "read_rmf", "write_rmf",
           "is_fits", "extension_kinds"]

#: The standard the readers follow, as cited in error messages.
OGIP_REFERENCE = "OGIP CAL/GEN/92-002 (George et al. 1992)"


# ----------------------------------------------------------------------------- containers
@dataclass
class AreaData:
    """Effective area read from an ARF: bins (keV, ascending) and area (cm^2)."""
    energy_lo: u.Quantity
    energy_hi: u.Quantity
    area: u.Quantity
    meta: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict)


@dataclass
class RedistributionData:
    """Redistribution matrix read from an RMF.

    ``matrix`` is a scipy.sparse CSR matrix (n_channels x n_energy), rows in EBOUNDS
    channel order (``channel`` holds the channel numbers), columns in the order of the
    ``energy_lo``/``energy_hi`` bins (keV).  ``includes_area`` is True when the matrix
    also contains the effective area (HDUCLAS3 = 'FULL', or EXTNAME 'SPECRESP MATRIX'
    without HDUCLAS3; section 3.1.1), its elements then being in cm^2.
    """
    energy_lo: u.Quantity
    energy_hi: u.Quantity
    matrix: sp.csr_matrix
    channel: np.ndarray
    channel_lo: u.Quantity
    channel_hi: u.Quantity
    first_channel: int
    includes_area: bool
    meta: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict)


# ----------------------------------------------------------------------------- FITS helpers
_CORRUPT_PATTERNS = ("truncat", "corrupt", "error validating header", "unexpected end")


@contextmanager
def _fits(p: Path, what: str):
    """Open a FITS file with every HDU loaded; turn astropy's damage reports into errors.

    Truncation or corruption (reported by astropy as warnings, or as exceptions while
    reading) raises :class:`InstrumentFileError`; a CHECKSUM/DATASUM mismatch is
    re-issued as :class:`InstrumentFileWarning`.
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            hdul = fits.open(p, memmap=False, checksum=True, lazy_load_hdus=False)
        except Exception as exc:   # astropy raises OSError/ValueError/TypeError on damaged files
            raise InstrumentFileError(f"{what} file '{p}' could not be read as FITS "
                                      f"(truncated or not a FITS file?): {exc}") from None
        _raise_if_damaged(caught, p, what, hdul)
        try:
            try:
                yield hdul
            except InputError:
                raise
            except Exception as exc:
                raise InstrumentFileError(f"{what} file '{p}': could not read its contents "
                                          f"(truncated or corrupt?): {type(exc).__name__}: {exc}") from None
        finally:
            hdul.close()
    _raise_if_damaged(caught, p, what)
    for w in caught:
        low = str(w.message).lower()
        if "checksum" in low or "datasum" in low:
            warnings.warn(f"{what} file '{p}': {str(w.message).strip()} (the file may have been modified or damaged)",
                          InstrumentFileWarning, stacklevel=4)


def _raise_if_damaged(caught, p: Path, what: str, hdul=None):
    """Raise InstrumentFileError if astropy warned about truncation/corruption (closing ``hdul``)."""
    for w in caught:
        msg = str(w.message)
        if any(k in msg.lower() for k in _CORRUPT_PATTERNS):
            if hdul is not None:
                hdul.close()
            raise InstrumentFileError(f"{what} file '{p}' is truncated or corrupt: {' '.join(msg.split())}")


def _find_hdu(hdul, p: Path, what: str, names: tuple[str, ...], hduclas2: tuple[str, ...] = ()):
    """Return the binary-table HDUs whose EXTNAME is in ``names`` or HDUCLAS2 in ``hduclas2``."""
    found = []
    for h in hdul[1:]:
        if not isinstance(h, fits.BinTableHDU):
            continue
        ext = str(h.header.get("EXTNAME", "")).strip().upper()
        cls2 = str(h.header.get("HDUCLAS2", "")).strip().upper()
        if ext in names or cls2 in hduclas2:
            found.append(h)
    if not found:
        present = [str(h.header.get("EXTNAME", f"#{k}")) for k, h in enumerate(hdul) if k > 0]
        raise InstrumentFileError(f"{what} file '{p}' has no {' or '.join(names)} extension "
                                  f"(extensions present: {present or 'none'}; see {OGIP_REFERENCE})")
    return found


def _require_columns(h, p: Path, what: str, cols: tuple[str, ...]):
    """Raise if any of ``cols`` is missing from a table HDU."""
    have = [c.upper() for c in h.columns.names]
    missing = [c for c in cols if c not in have]
    if missing:
        raise InstrumentFileError(f"{what} file '{p}', extension {h.name}: missing column(s) {missing} "
                                  f"(columns present: {h.columns.names}; required by {OGIP_REFERENCE})")


def _column_unit(h, col: str):
    """The TUNIT of a column as an astropy unit, or None if absent/blank."""
    s = h.columns[col].unit
    if s is None or not str(s).strip():
        return None
    s = str(s).strip()
    for fmt in ("ogip", "fits", None):
        try:
            return u.Unit(s, format=fmt) if fmt else u.Unit(s)
        except ValueError:
            continue
    return s   # unparseable; reported by the caller


def _column_in(h, p: Path, what: str, col: str, unit, notes: list) -> np.ndarray:
    """A table column converted to ``unit`` (float64).  A missing TUNIT means the OGIP
    unit (noted in provenance); a unit of the wrong kind raises."""
    vals = np.asarray(h.data[col], dtype=float)
    un = _column_unit(h, col)
    if un is None:
        notes.append(f"{col}: no TUNIT, the OGIP unit '{unit}' was assumed ({OGIP_REFERENCE})")
        return vals
    if isinstance(un, str):
        raise InstrumentFileError(f"{what} file '{p}': column {col} has unrecognised units '{un}'; expected '{unit}'")
    try:
        return vals * un.to(unit)
    except u.UnitConversionError:
        raise InstrumentFileError(f"{what} file '{p}': column {col} has units '{un}', which cannot be converted "
                                  f"to '{unit}'") from None


def _check_energy_bins(lo: np.ndarray, hi: np.ndarray, p: Path, what: str):
    """ENERG_LO/ENERG_HI must be finite, > 0, ascending, of positive width and non-overlapping."""
    if lo.size == 0:
        raise InstrumentFileError(f"{what} file '{p}' has no rows")
    if not (np.all(np.isfinite(lo)) and np.all(np.isfinite(hi))):
        raise InstrumentFileError(f"{what} file '{p}': ENERG_LO/ENERG_HI contain NaN or infinite values")
    if np.any(lo < 0):
        k = int(np.argmax(lo < 0))
        raise InstrumentFileError(f"{what} file '{p}': ENERG_LO[{k}] = {lo[k]:g} keV is negative")
    if np.any(lo <= 0):
        k = int(np.argmax(lo <= 0))
        raise InstrumentFileError(f"{what} file '{p}': ENERG_LO[{k}] = {lo[k]:g} keV; energies must be > 0 keV")
    bad = hi <= lo
    if np.any(bad):
        k = int(np.argmax(bad))
        raise InstrumentFileError(f"{what} file '{p}': energy bin {k} has ENERG_HI = {hi[k]:g} keV <= "
                                  f"ENERG_LO = {lo[k]:g} keV")
    if lo.size > 1:
        d = np.diff(lo)
        if np.any(d <= 0):
            k = int(np.argmax(d <= 0)) + 1
            raise InstrumentFileError(f"{what} file '{p}': energy bins are not sorted in increasing energy: "
                                      f"ENERG_LO[{k}] = {lo[k]:g} keV follows ENERG_LO[{k - 1}] = {lo[k - 1]:g} keV")
        over = hi[:-1] - lo[1:]
        bad = over > 1e-6 * hi[:-1]        # float32 storage round-off is ~6e-8 relative
        if np.any(bad):
            k = int(np.argmax(bad))
            raise InstrumentFileError(
                f"{what} file '{p}': energy bins overlap: bin {k} is {lo[k]:g}-{hi[k]:g} keV and bin {k + 1} is "
                f"{lo[k + 1]:g}-{hi[k + 1]:g} keV")
        hi = hi.copy()
        hi[:-1] = np.minimum(hi[:-1], lo[1:])
    return lo, hi


def _header_meta(h) -> dict:
    """OGIP identification keywords of an extension header."""
    keys = ("TELESCOP", "INSTRUME", "DETNAM", "FILTER", "HDUCLASS", "HDUCLAS1", "HDUCLAS2", "HDUCLAS3",
            "HDUVERS", "CHANTYPE", "DETCHANS", "LO_THRES", "EFFAREA")
    return {k: h.header[k] for k in keys if k in h.header}


# ----------------------------------------------------------------------------- ARF
def read_arf(path) -> AreaData:
    """Read an OGIP ancillary response file (effective area).

    Reads the SPECRESP extension (EXTNAME 'SPECRESP' or HDUCLAS2 'SPECRESP') with columns
    ENERG_LO, ENERG_HI (keV) and SPECRESP (cm^2), section 4 of CAL/GEN/92-002.  Any energy
    or area unit in TUNIT is converted; a missing TUNIT means the OGIP unit (recorded in
    ``meta['notes']``).  Only type I ARFs (one area curve per file) are supported.

    Returns
    -------
    AreaData
        With energy_lo, energy_hi (keV), area (cm^2), meta (header keywords) and
        provenance (path and SHA-256).

    Raises
    ------
    InstrumentFileError
        Missing file or extension or column, truncated FITS, wrong units, non-finite or
        negative area, unsorted or overlapping energy bins.
    """
    p = existing_file(path, "ARF")
    what = "ARF"
    notes: list[str] = []
    with _fits(p, what) as hdul:
        h = _find_hdu(hdul, p, what, ("SPECRESP",), ("SPECRESP",))[0]
        _require_columns(h, p, what, ("ENERG_LO", "ENERG_HI", "SPECRESP"))
        if np.ndim(h.data["SPECRESP"]) != 1:
            raise InstrumentFileError(f"ARF file '{p}': SPECRESP is a vector column (type II ARF with several "
                                      "responses); only single-response (type I) ARFs are supported")
        lo = _column_in(h, p, what, "ENERG_LO", u.keV, notes)
        hi = _column_in(h, p, what, "ENERG_HI", u.keV, notes)
        area = _column_in(h, p, what, "SPECRESP", u.cm**2, notes)
        meta = _header_meta(h)
    lo, hi = _check_energy_bins(lo, hi, p, what)
    if not np.all(np.isfinite(area)):
        raise InstrumentFileError(f"ARF file '{p}': SPECRESP contains NaN or infinite values")
    if np.any(area < 0):
        k = np.flatnonzero(area < 0)
        raise InstrumentFileError(f"ARF file '{p}': negative effective area SPECRESP[{k[0]}] = {area[k[0]]:g} cm^2 "
                                  f"at {lo[k[0]]:g}-{hi[k[0]]:g} keV ({k.size} negative value(s)); areas must be >= 0")
    meta["notes"] = notes
    return AreaData(lo * u.keV, hi * u.keV, area * u.cm**2, meta, {"files": [file_record(p, "ARF")]})


def write_arf(path, energy_lo, energy_hi, area, *, telescope: str = "NONE", instrument: str = "NONE",
              filter: str = "NONE", double: bool = False, overwrite: bool = False) -> Path:
    """Write an OGIP ARF (CAL/GEN/92-002 section 4; HDUVERS 1.1.0) with CHECKSUM/DATASUM.

    Parameters
    ----------
    path : str or Path
    energy_lo, energy_hi : Quantity
        Bin bounds in energy or wavelength (converted to keV, written in ascending energy).
    area : Quantity
        Effective area per bin, any area unit (written in cm^2), >= 0.
    telescope, instrument, filter : str
        TELESCOP, INSTRUME, FILTER keywords ('NONE' if not applicable).
    double : bool
        Write 8-byte reals (format 'D') instead of the standard's 4-byte reals ('E').
    overwrite : bool

    Returns
    -------
    Path
        The path written.  The bins are validated exactly as in :class:`Instrument`.
    """
    inst = Instrument("arf", energy_lo, energy_hi, area)   # validates units, order, overlaps, area >= 0
    fmt = "D" if double else "E"
    cols = [
        fits.Column("ENERG_LO", fmt, unit="keV", array=inst.energy_lo.value),
        fits.Column("ENERG_HI", fmt, unit="keV", array=inst.energy_hi.value),
        fits.Column("SPECRESP", fmt, unit="cm**2", array=inst.area.value),
    ]
    h = fits.BinTableHDU.from_columns(cols, name="SPECRESP")
    for k, v, c in (("TELESCOP", telescope, "mission/satellite name"), ("INSTRUME", instrument, "instrument/detector"),
                    ("FILTER", filter, "filter in use"), ("HDUCLASS", "OGIP", "format conforms to OGIP standard"),
                    ("HDUCLAS1", "RESPONSE", "dataset relates to spectral response"),
                    ("HDUCLAS2", "SPECRESP", "dataset contains spectral response"),
                    ("HDUVERS", "1.1.0", "version of format (OGIP memo CAL/GEN/92-002a)"),
                    ("CREATOR", "synthcorona", "program that wrote this file")):
        h.header[k] = (v, c)
    p = Path(os.fspath(path))
    fits.HDUList([fits.PrimaryHDU(), h]).writeto(p, overwrite=overwrite, checksum=True)
    return p


# ----------------------------------------------------------------------------- RMF
def read_rmf(path) -> RedistributionData:
    """Read an OGIP redistribution matrix file into a scipy.sparse CSR matrix.

    Method (CAL/GEN/92-002 section 3)
    ---------------------------------
    The matrix extension (EXTNAME 'MATRIX' or 'SPECRESP MATRIX', or HDUCLAS2
    'RSP_MATRIX') has one row per photon-energy bin with ENERG_LO, ENERG_HI (keV), N_GRP
    (number of channel groups), F_CHAN and N_CHAN (first channel and number of channels of
    each group; scalar, fixed-length vector or variable-length array columns, of which the
    first N_GRP entries are used) and MATRIX (the non-zero elements of all groups,
    concatenated).  Channel numbers start at the TLMIN value of the F_CHAN column (0 or
    1); without TLMIN the first CHANNEL of EBOUNDS is used, and failing that 1 (the
    standard's default).  EBOUNDS gives CHANNEL, E_MIN, E_MAX (keV).  Rows are read in a
    Python loop (file reading only); the CSR matrix is assembled in one call.

    Only RMFs with a single matrix extension are supported.

    Returns
    -------
    RedistributionData
        See its docstring.  ``includes_area`` tells whether the matrix
        contains the effective area (HDUCLAS3 = 'FULL').
    """
    p = existing_file(path, "RMF")
    what = "RMF"
    notes: list[str] = []
    with _fits(p, what) as hdul:
        mats = _find_hdu(hdul, p, what, ("MATRIX", "SPECRESP MATRIX"), ("RSP_MATRIX",))
        if len(mats) > 1:
            raise InstrumentFileError(f"RMF file '{p}' has {len(mats)} matrix extensions; only RMFs with a single "
                                      "matrix extension are supported")
        h = mats[0]
        eb = _find_hdu(hdul, p, what, ("EBOUNDS",), ("EBOUNDS",))[0]
        _require_columns(h, p, what, ("ENERG_LO", "ENERG_HI", "N_GRP", "F_CHAN", "N_CHAN", "MATRIX"))
        _require_columns(eb, p, what, ("E_MIN", "E_MAX"))
        lo = _column_in(h, p, what, "ENERG_LO", u.keV, notes)
        hi = _column_in(h, p, what, "ENERG_HI", u.keV, notes)
        meta = _header_meta(h)
        extname = str(h.header.get("EXTNAME", "")).strip().upper()
        cls3 = str(h.header.get("HDUCLAS3", "")).strip().upper()
        includes_area = cls3 == "FULL" or (extname == "SPECRESP MATRIX" and cls3 not in ("REDIST", "DETECTOR"))
        chan, e_min, e_max, first = _rmf_channels(h, eb, p, what, notes)
        ri, ci, data = _rmf_matrix_rows(h, p, lo.size, e_min.size, first)
    # (file closed)
    lo, hi = _check_energy_bins(lo, hi, p, what)
    if not (np.all(np.isfinite(e_min)) and np.all(np.isfinite(e_max))):
        raise InstrumentFileError(f"RMF file '{p}': EBOUNDS E_MIN/E_MAX contain NaN or infinite values")
    if np.any(e_min < 0) or np.any(e_max < e_min):
        k = int(np.argmax((e_min < 0) | (e_max < e_min)))
        raise InstrumentFileError(f"RMF file '{p}': EBOUNDS channel {int(chan[k])} has E_MIN = {e_min[k]:g}, "
                                  f"E_MAX = {e_max[k]:g} keV; need 0 <= E_MIN <= E_MAX")
    if not np.all(np.isfinite(data)):
        raise InstrumentFileError(f"RMF file '{p}': MATRIX contains NaN or infinite values")
    if np.any(data < 0):
        raise InstrumentFileError(f"RMF file '{p}': MATRIX has negative elements (minimum {data.min():g})")
    R = sp.csr_matrix((data, (ri, ci)), shape=(e_min.size, lo.size))
    meta["notes"] = notes
    meta["EXTNAME"] = extname
    return RedistributionData(lo * u.keV, hi * u.keV, R, chan, e_min * u.keV, e_max * u.keV, first,
                              includes_area, meta, {"files": [file_record(p, "RMF")]})


def _rmf_channels(h, eb, p: Path, what: str, notes: list):
    """EBOUNDS of an RMF: (channel numbers, E_MIN, E_MAX in keV, all in channel order; first channel).

    The first channel is the TLMIN of F_CHAN, else the first EBOUNDS CHANNEL, else 1.
    """
    e_min = _column_in(eb, p, what, "E_MIN", u.keV, notes)
    e_max = _column_in(eb, p, what, "E_MAX", u.keV, notes)
    if "CHANNEL" in [c.upper() for c in eb.columns.names]:
        chan = np.asarray(eb.data["CHANNEL"], dtype=np.int64)
    else:
        chan = None
    # first channel: TLMIN of F_CHAN > first EBOUNDS CHANNEL > 1
    fcol = [c.upper() for c in h.columns.names].index("F_CHAN") + 1
    tlmin = h.header.get(f"TLMIN{fcol}")
    if tlmin is not None:
        first = int(tlmin)
    elif chan is not None and chan.size:
        first = int(chan.min())
        notes.append(f"F_CHAN has no TLMIN{fcol}; first channel {first} taken from EBOUNDS CHANNEL")
    else:
        first = 1
        notes.append(f"F_CHAN has no TLMIN{fcol} and EBOUNDS no CHANNEL; first channel 1 assumed ({OGIP_REFERENCE})")

    n_ch = e_min.size
    detchans = h.header.get("DETCHANS")
    if detchans is not None and int(detchans) != n_ch:
        raise InstrumentFileError(f"RMF file '{p}': DETCHANS = {detchans} in {h.name} but EBOUNDS has {n_ch} rows")
    if chan is not None:
        order = np.argsort(chan, kind="stable")
        chan, e_min, e_max = chan[order], e_min[order], e_max[order]
        expected = first + np.arange(n_ch)
        if not np.array_equal(chan, expected):
            raise InstrumentFileError(
                f"RMF file '{p}': EBOUNDS CHANNEL runs {chan[:3].tolist()}... but channels are expected to run "
                f"contiguously from {first} (TLMIN of F_CHAN) to {first + n_ch - 1}")
    else:
        chan = first + np.arange(n_ch)
    return chan, e_min, e_max, first


def _rmf_matrix_rows(h, p: Path, n_e: int, n_ch: int, first: int):
    """The grouped matrix rows of an RMF as COO triplets (channel index, energy index, value).

    Rows are read in a Python loop (file reading only); each row's groups are expanded at once.
    """
    n_grp = np.asarray(h.data["N_GRP"], dtype=np.int64).reshape(-1)
    F, N, Mx = h.data["F_CHAN"], h.data["N_CHAN"], h.data["MATRIX"]
    if n_grp.size != n_e:
        raise InstrumentFileError(f"RMF file '{p}': N_GRP has {n_grp.size} values for {n_e} energy rows")
    ri, ci, vals = [], [], []
    for r in range(n_e):
        ng = int(n_grp[r])
        if ng == 0:
            continue
        f = np.atleast_1d(np.asarray(F[r], dtype=np.int64))
        nc = np.atleast_1d(np.asarray(N[r], dtype=np.int64))
        if ng < 0 or f.size < ng or nc.size < ng:
            raise InstrumentFileError(
                f"RMF file '{p}': row {r} has N_GRP = {ng} but F_CHAN/N_CHAN hold {f.size}/{nc.size} groups")
        f, nc = f[:ng], nc[:ng]
        if np.any(nc < 0):
            raise InstrumentFileError(f"RMF file '{p}': row {r} has a negative N_CHAN {nc.tolist()}")
        tot = int(nc.sum())
        m = np.atleast_1d(np.asarray(Mx[r], dtype=float))
        if m.size < tot:
            raise InstrumentFileError(f"RMF file '{p}': row {r} MATRIX has {m.size} elements but its groups "
                                      f"(N_CHAN {nc.tolist()}) need {tot}")
        idx = np.arange(tot) - np.repeat(np.cumsum(nc) - nc, nc) + np.repeat(f, nc) - first
        if tot and (idx.min() < 0 or idx.max() >= n_ch):
            raise InstrumentFileError(
                f"RMF file '{p}': row {r} addresses channel {int(idx.min() + first)}..{int(idx.max() + first)}, "
                f"outside the channels {first}..{first + n_ch - 1} (first channel from TLMIN of F_CHAN)")
        ri.append(idx)
        ci.append(np.full(tot, r, dtype=np.int64))
        vals.append(m[:tot])
    if not vals:
        return np.zeros(0, int), np.zeros(0, int), np.zeros(0)
    return np.concatenate(ri), np.concatenate(ci), np.concatenate(vals)


def _groups(col: np.ndarray, threshold: float):
    """Contiguous runs of elements > threshold in one matrix column: (starts, lengths, values)."""
    nz = np.flatnonzero(col > threshold)
    if nz.size == 0:
        return np.zeros(0, np.int32), np.zeros(0, np.int32), np.zeros(0, np.float32)
    brk = np.flatnonzero(np.diff(nz) > 1)
    starts = np.concatenate([[nz[0]], nz[brk + 1]])
    ends = np.concatenate([nz[brk], [nz[-1]]])
    vals = np.concatenate([col[s:e + 1] for s, e in zip(starts, ends)])
    return starts.astype(np.int32), (ends - starts + 1).astype(np.int32), vals.astype(np.float32)


def write_rmf(path, energy_lo, energy_hi, matrix, channel_lo, channel_hi, *, first_channel: int = 1,
              threshold: float = 0.0, includes_area: bool = False, telescope: str = "NONE",
              instrument: str = "NONE", filter: str = "NONE", chantype: str = "PI",
              overwrite: bool = False) -> Path:
    """Write an OGIP RMF (CAL/GEN/92-002 section 3; MATRIX HDUVERS 1.3.0, EBOUNDS 1.2.0).

    Parameters
    ----------
    path : str or Path
    energy_lo, energy_hi : Quantity
        Photon-energy bins (energy units, ascending, non-overlapping).
    matrix : ndarray or scipy.sparse, shape (n_channels, n_energy)
        Redistribution probabilities (or, with ``includes_area``, response in cm^2).
    channel_lo, channel_hi : Quantity
        EBOUNDS E_MIN/E_MAX of each channel (energy units).
    first_channel : int
        Number of the first channel (0 or 1), written as TLMIN of F_CHAN and first CHANNEL.
    threshold : float
        Elements <= threshold are not stored (LO_THRES keyword).
    includes_area : bool
        Write EXTNAME 'SPECRESP MATRIX' with HDUCLAS3 'FULL' instead of 'MATRIX'/'REDIST'.

    Notes
    -----
    Method: each energy row is split into groups of contiguous channels with elements
    above ``threshold``; N_GRP is a scalar column, F_CHAN, N_CHAN and MATRIX are
    variable-length arrays ('PJ()', 'PE()').  CHECKSUM/DATASUM are written.
    """
    lo = np.atleast_1d(as_quantity("energy_lo", energy_lo, u.keV).value).astype(float)
    hi = np.atleast_1d(as_quantity("energy_hi", energy_hi, u.keV).value).astype(float)
    lo, hi = _check_energy_bins(lo, hi, Path(os.fspath(path)), "RMF to write")
    clo = np.atleast_1d(as_quantity("channel_lo", channel_lo, u.keV).value).astype(float)
    chi = np.atleast_1d(as_quantity("channel_hi", channel_hi, u.keV).value).astype(float)
    if not (np.all(np.isfinite(clo)) and np.all(np.isfinite(chi))) or np.any(clo < 0) or np.any(chi < clo):
        raise InputError("channel_lo/channel_hi must be finite with 0 <= channel_lo <= channel_hi (keV)")
    M = sp.csc_matrix(matrix, dtype=float)
    n_ch, n_e = M.shape
    if n_e != lo.size or clo.size != n_ch or chi.size != n_ch:
        raise InputError(f"matrix has shape {M.shape}; expected ({clo.size} channels, {lo.size} energy bins)")
    if np.any(M.data < 0) or not np.all(np.isfinite(M.data)):
        raise InputError("matrix must be finite and >= 0")
    if first_channel not in (0, 1):
        raise InputError(f"first_channel={first_channel} must be 0 or 1")
    hm = _matrix_hdu(M, lo, hi, first_channel, threshold, includes_area)
    common = (("TELESCOP", telescope, "mission/satellite name"), ("INSTRUME", instrument, "instrument/detector"),
              ("FILTER", filter, "filter in use"), ("CHANTYPE", chantype, "channel type (PHA or PI)"),
              ("DETCHANS", n_ch, "total number of detector channels"),
              ("HDUCLASS", "OGIP", "format conforms to OGIP standard"),
              ("HDUCLAS1", "RESPONSE", "dataset relates to spectral response"),
              ("CREATOR", "synthcorona", "program that wrote this file"))
    for k, v, c in common:
        hm.header[k] = (v, c)
    hm.header["HDUCLAS2"] = ("RSP_MATRIX", "dataset is a spectral response matrix")
    hm.header["HDUCLAS3"] = ("FULL" if includes_area else "REDIST", "includes effective area" if includes_area
                             else "photon redistribution only")
    hm.header["HDUVERS"] = ("1.3.0", "version of format (OGIP memo CAL/GEN/92-002a)")
    hm.header["LO_THRES"] = (float(threshold), "lower threshold used to construct the matrix")
    hm.header["TLMIN4"] = (first_channel, "first channel number")
    hm.header["TLMAX4"] = (first_channel + n_ch - 1, "last channel number")
    eb = fits.BinTableHDU.from_columns([
        fits.Column("CHANNEL", "J", array=first_channel + np.arange(n_ch, dtype=np.int32)),
        fits.Column("E_MIN", "E", unit="keV", array=clo),
        fits.Column("E_MAX", "E", unit="keV", array=chi),
    ], name="EBOUNDS")
    for k, v, c in common:
        eb.header[k] = (v, c)
    eb.header["HDUCLAS2"] = ("EBOUNDS", "nominal energies of channel boundaries")
    eb.header["HDUVERS"] = ("1.2.0", "version of format (OGIP memo CAL/GEN/92-002a)")
    eb.header["TLMIN1"] = (first_channel, "first channel number")
    eb.header["TLMAX1"] = (first_channel + n_ch - 1, "last channel number")
    p = Path(os.fspath(path))
    fits.HDUList([fits.PrimaryHDU(), hm, eb]).writeto(p, overwrite=overwrite, checksum=True)
    return p


def _matrix_hdu(M, lo, hi, first_channel: int, threshold: float, includes_area: bool):
    """The MATRIX (or SPECRESP MATRIX) table of an RMF: each energy row split into groups of contiguous
    channels above ``threshold`` (variable-length F_CHAN, N_CHAN, MATRIX columns)."""
    ngrp, fch, nch, mat = [], [], [], []
    for j in range(M.shape[1]):             # file writing, not a hot path
        col = M[:, j].toarray().ravel()
        s, n, v = _groups(col, threshold)
        ngrp.append(s.size)
        fch.append((s + first_channel).astype(np.int32))
        nch.append(n)
        mat.append(v)
    cols = [
        fits.Column("ENERG_LO", "E", unit="keV", array=lo),
        fits.Column("ENERG_HI", "E", unit="keV", array=hi),
        fits.Column("N_GRP", "J", array=np.asarray(ngrp, dtype=np.int32)),
        fits.Column("F_CHAN", "PJ()", array=np.array(fch, dtype=object)),
        fits.Column("N_CHAN", "PJ()", array=np.array(nch, dtype=object)),
        fits.Column("MATRIX", "PE()", unit="cm**2" if includes_area else "", array=np.array(mat, dtype=object)),
    ]
    return fits.BinTableHDU.from_columns(cols, name="SPECRESP MATRIX" if includes_area else "MATRIX")


def extension_kinds(path) -> tuple[bool, bool, list[str]]:
    """Whether a FITS file holds an ARF (SPECRESP) and/or an RMF (MATRIX / SPECRESP MATRIX) extension.

    Returns ``(is_arf, is_rmf, extnames)``; damaged files raise :class:`InstrumentFileError`.
    """
    p = existing_file(path, "instrument response")
    with _fits(p, "instrument response") as hdul:
        exts = [(str(h.header.get("EXTNAME", "")).strip().upper(), str(h.header.get("HDUCLAS2", "")).strip().upper())
                for h in hdul[1:]]
    is_arf = any(e == "SPECRESP" or c == "SPECRESP" for e, c in exts)
    is_rmf = any(e in ("MATRIX", "SPECRESP MATRIX") or c == "RSP_MATRIX" for e, c in exts)
    return is_arf, is_rmf, [e for e, _ in exts]


def is_fits(path) -> bool:
    """True if the file starts with the FITS primary keyword SIMPLE."""
    with open(path, "rb") as fh:
        return fh.read(9) == b"SIMPLE  ="
