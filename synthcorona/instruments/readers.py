"""Readers and writers of instrument response files.

Formats
-------
* **OGIP ARF** (ancillary response: effective area) and **OGIP RMF** (redistribution
  matrix with its EBOUNDS channel table), implemented from the open standard:
  George, I. M., Arnaud, K. A., Pence, B., Ruamsuwan, L. & Corcoran, M. F., *The
  Calibration Requirements for Spectral Analysis (Definition of RMF and ARF file
  formats)*, OGIP Calibration Memo CAL/GEN/92-002 (NASA/GSFC, 1992, rev. 2007/2020),
  and its addendum CAL/GEN/92-002a (George & Arnaud 1998).  Section numbers below refer
  to CAL/GEN/92-002.
* **Area tables**: two columns, energy *or* wavelength and effective area, in ECSV
  (units in the column metadata) or plain text with a ``# units: <x unit> <area unit>``
  header line (this package's own convention).
* **CHIANTI ancillary effective areas**: the files in a CHIANTI installation's
  ``ancillary_data/instrument_responses/`` directory, two whitespace-separated columns
  without header, wavelength in Angstrom and effective area in cm^2 (as stated in the
  ``ancillary_data/README`` of the CHIANTI distribution).  They are read in place from
  the user's CHIANTI tree, never copied.

Every malformed file raises :class:`InstrumentFileError` (an
:class:`~synthcorona.errors.InputError`) naming the file and the problem.
"""
from __future__ import annotations

import difflib
import hashlib
import os
import re
import warnings
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import astropy.units as u
import numpy as np
import scipy.sparse as sp
from astropy.io import fits

from ..errors import InputError, InstrumentFileError, InstrumentFileWarning
from ..settings import CHIANTI_ENV, chianti_path
from ..validation import as_quantity
from .response import Instrument

__all__ = [
    "AreaData", "RedistributionData",
    "read_arf", "read_rmf", "read_area_table", "read_chianti_area", "chianti_area_names",
    "write_arf", "write_rmf", "load_instrument", "file_sha256",
]

_CHIANTI_AREA_DIR = Path("ancillary_data") / "instrument_responses"
_REF = "OGIP CAL/GEN/92-002 (George et al. 1992)"




def file_sha256(path) -> str:
    """SHA-256 hex digest of a file's bytes (read in 1 MiB chunks)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _existing_file(path, what: str) -> Path:
    """Return ``path`` as a Path, raising InstrumentFileError if it is not an existing file."""
    p = Path(os.fspath(path)).expanduser()
    if not p.exists():
        raise InstrumentFileError(f"{what} file '{p}' does not exist")
    if not p.is_file():
        raise InstrumentFileError(f"{what} path '{p}' is not a regular file")
    return p


def _file_record(p: Path, role: str) -> dict:
    """Provenance record of one source file."""
    return {"path": str(p.resolve()), "sha256": file_sha256(p), "role": role}


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
                                  f"(extensions present: {present or 'none'}; see {_REF})")
    return found


def _require_columns(h, p: Path, what: str, cols: tuple[str, ...]):
    """Raise if any of ``cols`` is missing from a table HDU."""
    have = [c.upper() for c in h.columns.names]
    missing = [c for c in cols if c not in have]
    if missing:
        raise InstrumentFileError(f"{what} file '{p}', extension {h.name}: missing column(s) {missing} "
                                  f"(columns present: {h.columns.names}; required by {_REF})")


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
        notes.append(f"{col}: no TUNIT, the OGIP unit '{unit}' was assumed ({_REF})")
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
    p = _existing_file(path, "ARF")
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
    return AreaData(lo * u.keV, hi * u.keV, area * u.cm**2, meta, {"files": [_file_record(p, "ARF")]})


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
    p = _existing_file(path, "RMF")
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

        # EBOUNDS
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
            notes.append(f"F_CHAN has no TLMIN{fcol} and EBOUNDS no CHANNEL; first channel 1 assumed ({_REF})")

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

        # matrix rows
        n_grp = np.asarray(h.data["N_GRP"], dtype=np.int64).reshape(-1)
        F, N, Mx = h.data["F_CHAN"], h.data["N_CHAN"], h.data["MATRIX"]
        n_e = lo.size
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
    # (file closed)
    lo, hi = _check_energy_bins(lo, hi, p, what)
    if not (np.all(np.isfinite(e_min)) and np.all(np.isfinite(e_max))):
        raise InstrumentFileError(f"RMF file '{p}': EBOUNDS E_MIN/E_MAX contain NaN or infinite values")
    if np.any(e_min < 0) or np.any(e_max < e_min):
        k = int(np.argmax((e_min < 0) | (e_max < e_min)))
        raise InstrumentFileError(f"RMF file '{p}': EBOUNDS channel {int(chan[k])} has E_MIN = {e_min[k]:g}, "
                                  f"E_MAX = {e_max[k]:g} keV; need 0 <= E_MIN <= E_MAX")
    data = np.concatenate(vals) if vals else np.zeros(0)
    if not np.all(np.isfinite(data)):
        raise InstrumentFileError(f"RMF file '{p}': MATRIX contains NaN or infinite values")
    if np.any(data < 0):
        raise InstrumentFileError(f"RMF file '{p}': MATRIX has negative elements (minimum {data.min():g})")
    R = sp.csr_matrix((data, (np.concatenate(ri) if ri else np.zeros(0, int),
                              np.concatenate(ci) if ci else np.zeros(0, int))), shape=(n_ch, lo.size))
    meta["notes"] = notes
    meta["EXTNAME"] = extname
    return RedistributionData(lo * u.keV, hi * u.keV, R, chan, e_min * u.keV, e_max * u.keV, first,
                              includes_area, meta, {"files": [_file_record(p, "RMF")]})


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
    ngrp, fch, nch, mat = [], [], [], []
    for j in range(n_e):                    # file writing, not a hot path
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
    hm = fits.BinTableHDU.from_columns(cols, name="SPECRESP MATRIX" if includes_area else "MATRIX")
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


# ----------------------------------------------------------------------------- area tables
def _apply_negative_policy(area: np.ndarray, p: Path, what: str, negative_area: str, x, xunit, notes: list):
    """Raise on negative areas, or (negative_area='zero') set them to 0 and record it."""
    neg = np.flatnonzero(area < 0)
    if neg.size == 0:
        return area
    if negative_area == "zero":
        notes.append(f"{neg.size} negative area value(s) set to 0 on request (negative_area='zero'); "
                     f"first at {x[neg[0]]:g} {xunit}: {area[neg[0]]:g} cm^2")
        area = area.copy()
        area[neg] = 0.0
        return area
    if negative_area != "raise":
        raise InputError(f"negative_area={negative_area!r} must be 'raise' or 'zero'")
    raise InstrumentFileError(
        f"{what} file '{p}': negative effective area {area[neg[0]]:g} cm^2 at {x[neg[0]]:g} {xunit} "
        f"(line/row {neg[0] + 1}; {neg.size} negative value(s)); areas must be >= 0. "
        "Pass negative_area='zero' to set them to zero explicitly (recorded in provenance)")


def _check_axis_unit(unit, p: Path, what: str, col: str):
    """The first column's unit must be a wavelength or an energy (or frequency)."""
    if unit is None:
        raise InstrumentFileError(f"{what} file '{p}': column '{col}' has no units; the first column must be an "
                                  "energy (e.g. keV) or a wavelength (e.g. Angstrom)")
    if unit.physical_type not in ("length", "energy", "frequency"):
        raise InstrumentFileError(f"{what} file '{p}': first column '{col}' has units '{unit}', which is neither a "
                                  "wavelength nor an energy")


def _check_area_unit(unit, p: Path, what: str, col: str):
    """The second column's unit must be an area."""
    if unit is None:
        raise InstrumentFileError(f"{what} file '{p}': column '{col}' has no units; the second column must be an "
                                  "effective area (e.g. cm2 or m2)")
    if unit.physical_type != "area":
        raise InstrumentFileError(f"{what} file '{p}': second column '{col}' has units '{unit}', which is not an "
                                  "area (e.g. cm2, m2)")


_UNITS_LINE = re.compile(r"^\s*#\s*units\s*[:=]\s*(.+?)\s*$", re.IGNORECASE)


def _read_text_table(p: Path, what: str, units):
    """Plain-text two-column table; units from ``units`` or a '# units: X Y' header line."""
    text_units = None
    try:
        with open(p, "r", encoding="utf-8", errors="strict") as fh:
            for line in fh:
                m = _UNITS_LINE.match(line)
                if m:
                    text_units = [s for s in re.split(r"[,\s]+", m.group(1)) if s]
                    break
                if line.strip() and not line.lstrip().startswith("#"):
                    break
    except UnicodeDecodeError:
        raise InstrumentFileError(f"{what} file '{p}' is not a text file") from None
    if units is None:
        if text_units is None:
            raise InstrumentFileError(
                f"{what} file '{p}' has no units: add a header line '# units: <x unit> <area unit>' "
                "(e.g. '# units: Angstrom cm2' or '# units: keV m2'), pass units=(x_unit, area_unit), "
                "or write the table as ECSV")
        if len(text_units) != 2:
            raise InstrumentFileError(f"{what} file '{p}': the units line must name exactly two units "
                                      f"(axis, area); got {text_units}")
        try:
            units = [u.Unit(s) for s in text_units]
        except ValueError as exc:
            raise InstrumentFileError(f"{what} file '{p}': cannot parse units line {text_units}: {exc}") from None
    else:
        units = [u.Unit(s) for s in units]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            data = np.loadtxt(p, comments="#", ndmin=2, dtype=float)
    except (ValueError, UserWarning) as exc:
        raise InstrumentFileError(f"{what} file '{p}': cannot read two numeric columns: {exc}") from None
    if data.shape[0] == 0:
        raise InstrumentFileError(f"{what} file '{p}' contains no data rows")
    if data.shape[1] != 2:
        raise InstrumentFileError(f"{what} file '{p}' has {data.shape[1]} columns; expected 2 "
                                  "(energy or wavelength, effective area)")
    return data[:, 0], units[0], data[:, 1], units[1], ("col1", "col2")


def _read_ecsv(p: Path, what: str):
    """ECSV two-column table with units in the column metadata."""
    from astropy.table import Table
    try:
        t = Table.read(p, format="ascii.ecsv")
    except Exception as exc:
        raise InstrumentFileError(f"{what} file '{p}' could not be read as ECSV: {exc}") from None
    if len(t.colnames) != 2:
        raise InstrumentFileError(f"{what} file '{p}' has columns {t.colnames}; expected exactly 2 "
                                  "(energy or wavelength, effective area)")
    c0, c1 = t.colnames
    if len(t) == 0:
        raise InstrumentFileError(f"{what} file '{p}' contains no data rows")
    return (np.asarray(t[c0], dtype=float), t[c0].unit, np.asarray(t[c1], dtype=float), t[c1].unit, (c0, c1))


def read_area_table(path, *, units=None, negative_area: str = "raise", name: str | None = None,
                    bands=None, description: str | None = None) -> Instrument:
    """Read a two-column effective-area table into an :class:`Instrument` (no redistribution).

    Parameters
    ----------
    path : str or Path
        ``.ecsv``: ECSV table whose two columns carry units.  Other suffixes (``.txt``,
        ``.dat``, ...): whitespace-separated numeric columns with ``#`` comments and a header
        line ``# units: <x unit> <area unit>`` (astropy unit strings), unless ``units`` is
        given.
    units : (x_unit, area_unit), optional
        Units of a plain-text table (overrides the header line).
    negative_area : {'raise', 'zero'}
        Negative areas raise; 'zero' sets them to 0 and records that in provenance.
    name, bands, description
        Passed to :class:`Instrument`; ``name`` defaults to the file stem.

    Notes
    -----
    The first column is an energy or a wavelength (detected from its units, any energy,
    frequency or length unit); the second an area (any area unit, stored in cm^2).  The
    rows are point samples of A(x); see :meth:`Instrument.from_samples` for how they
    become bins (piecewise linear in x; a repeated x is a step).

    Raises InstrumentFileError for a missing file, missing units, wrong units, wrong
    number of columns, non-numeric text, non-finite values, negative areas, or an
    abscissa that is not monotonic.
    """
    what = "area table"
    p = _existing_file(path, what)
    if p.suffix.lower() == ".ecsv":
        x, xu, a, au, names = _read_ecsv(p, what)
    else:
        x, xu, a, au, names = _read_text_table(p, what, units)
    _check_axis_unit(xu, p, what, names[0])
    _check_area_unit(au, p, what, names[1])
    return _samples_to_instrument(p, what, x * xu, (a * au).to_value(u.cm**2), negative_area, name, bands,
                                  description or f"effective area from table {p.name}",
                                  {"files": [_file_record(p, "area table")]})


def _samples_to_instrument(p, what, xq, area, negative_area, name, bands, description, provenance) -> Instrument:
    """Validate sampled areas of a file and build the Instrument; errors name the file."""
    notes: list[str] = []
    x = np.asarray(xq.value, dtype=float)
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(area))):
        raise InstrumentFileError(f"{what} file '{p}' contains NaN or infinite values")
    if np.any(x <= 0):
        k = int(np.argmax(x <= 0))
        raise InstrumentFileError(f"{what} file '{p}': abscissa {x[k]:g} {xq.unit} in row {k + 1} must be > 0")
    if x.size < 2:
        raise InstrumentFileError(f"{what} file '{p}' has {x.size} row(s); at least 2 are needed")
    d = np.diff(x)
    if not (np.all(d >= 0) or np.all(d <= 0)) or np.all(d == 0):
        sgn = 1 if x[-1] >= x[0] else -1
        k = int(np.argmax(sgn * d < 0)) + 1
        raise InstrumentFileError(
            f"{what} file '{p}': the first column is not sorted: row {k + 1} ({x[k]:g} {xq.unit}) follows row {k} "
            f"({x[k - 1]:g} {xq.unit}); energies or wavelengths must be monotonic (a repeated value marks a step)")
    area = _apply_negative_policy(area, p, what, negative_area, x, xq.unit, notes)
    provenance = dict(provenance)
    provenance["notes"] = notes
    try:
        return Instrument.from_samples(name or p.stem, xq, area * u.cm**2, bands=bands, description=description,
                                       provenance=provenance)
    except InstrumentFileError:
        raise
    except InputError as exc:
        raise InstrumentFileError(f"{what} file '{p}': {exc}") from None


# ----------------------------------------------------------------------------- CHIANTI
def _chianti_dir(chianti_root) -> Path:
    """Locate <root>/ancillary_data/instrument_responses from the argument or $SYNTHCORONA_CHIANTI
    (an ASCII CHIANTI tree, or a .tar.xz of one)."""
    if chianti_root is not None:
        root, source = Path(os.fspath(chianti_root)).expanduser(), "the chianti_root argument"
    elif chianti_path() is not None:
        root, source = chianti_path(), f"${CHIANTI_ENV}"
    else:
        raise InstrumentFileError(
            f"no CHIANTI installation given: pass chianti_root= or set the environment variable {CHIANTI_ENV} to "
            f"the CHIANTI root directory (the one containing '{_CHIANTI_AREA_DIR}')")
    if root.is_file() and root.name.endswith((".tar.xz", ".txz")):
        # a packed CHIANTI copy: extracted once into the user cache by the locator (no fiasco import on this path)
        from ..atomic.locate import find_chianti

        root = find_chianti(root).root
    d = root / _CHIANTI_AREA_DIR
    if not d.is_dir():
        raise InstrumentFileError(f"CHIANTI root '{root}' (from {source}) has no directory '{_CHIANTI_AREA_DIR}'; "
                                  f"looked for '{d}'")
    return d


def chianti_area_names(chianti_root=None) -> list[str]:
    """Names (file stems) of the effective-area files of a CHIANTI installation, sorted."""
    d = _chianti_dir(chianti_root)
    return sorted(f.stem for f in d.glob("*.area") if f.is_file())


def read_chianti_area(name: str, chianti_root=None, *, negative_area: str = "raise", bands=None) -> Instrument:
    """Read one effective-area file of a CHIANTI installation as an :class:`Instrument`.

    Parameters
    ----------
    name : str
        File name in ``<root>/ancillary_data/instrument_responses/`` with or without the
        ``.area`` suffix, e.g. ``"rosat_pspc_r1r2"``.
    chianti_root : str or Path, optional
        CHIANTI root; default ``$SYNTHCORONA_CHIANTI``.
    negative_area : {'raise', 'zero'}
        A few files hold tiny negative areas (e.g. -0.0005 cm^2 at 4.125 Angstrom in the
        ROSAT PSPC open/boron files of CHIANTI 10.1); they raise unless 'zero' is asked for.
    bands : dict, optional
        Photon-energy bands of the instrument.

    Notes
    -----
    Format: two columns, wavelength (Angstrom) and effective area (cm^2), ascending in
    wavelength; repeated wavelengths mark steps at absorption edges (CHIANTI
    ``ancillary_data/README``).  Converted with :meth:`Instrument.from_samples`.  The file
    is read from the user's tree; its path and SHA-256, and the CHIANTI VERSION, are
    recorded in ``provenance``.
    """
    d = _chianti_dir(chianti_root)
    stem = name[:-5] if name.endswith(".area") else name
    p = d / f"{stem}.area"
    if not p.is_file():
        avail = sorted(f.stem for f in d.glob("*.area"))
        close = difflib.get_close_matches(stem, avail, n=5)
        raise InstrumentFileError(
            f"no CHIANTI effective-area file '{stem}.area' in '{d}'"
            + (f"; did you mean {close}?" if close else "")
            + f" Available ({len(avail)}): {', '.join(avail)}")
    version_file = d.parent.parent / "VERSION"
    version = version_file.read_text().strip() if version_file.is_file() else "unknown"
    prov = {"files": [_file_record(p, "CHIANTI effective area")], "chianti_version": version,
            "format": "CHIANTI ancillary_data/instrument_responses: wavelength [Angstrom], area [cm^2]"}
    return _read_dot_area(p, negative_area, stem, bands,
                          f"effective area '{stem}' from CHIANTI {version} ancillary data", prov)


def _read_dot_area(p: Path, negative_area, name, bands, description, provenance) -> Instrument:
    """Read a headerless two-column '.area' file (wavelength Angstrom, area cm^2)."""
    what = "CHIANTI effective-area"
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            data = np.loadtxt(p, ndmin=2, dtype=float)
    except (ValueError, UserWarning) as exc:
        raise InstrumentFileError(f"{what} file '{p}': cannot read two numeric columns: {exc}") from None
    if data.shape[0] == 0 or data.shape[1] != 2:
        raise InstrumentFileError(f"{what} file '{p}' has shape {data.shape}; expected rows of 2 columns "
                                  "(wavelength in Angstrom, area in cm^2)")
    return _samples_to_instrument(p, what, data[:, 0] * u.AA, data[:, 1], negative_area, name, bands,
                                  description, provenance)


# ----------------------------------------------------------------------------- dispatcher
def _is_fits(p: Path) -> bool:
    """True if the file starts with the FITS primary keyword SIMPLE."""
    with open(p, "rb") as fh:
        return fh.read(9) == b"SIMPLE  ="


def _ogip_name(meta: dict, p: Path) -> str:
    """Instrument name from TELESCOP/INSTRUME/FILTER keywords, else the file stem."""
    parts = [str(meta.get(k, "")).strip() for k in ("TELESCOP", "INSTRUME", "FILTER")]
    parts = [s for s in parts if s and s.upper() != "NONE"]
    return "_".join(parts) if parts else p.stem


def _check_same_grid(a_lo, a_hi, r_lo, r_hi, arf_p, rmf_p):
    """The ARF and RMF energy grids must coincide (section 2.3 of CAL/GEN/92-002)."""
    if a_lo.size != r_lo.size:
        raise InstrumentFileError(f"ARF '{arf_p}' has {a_lo.size} energy bins but RMF '{rmf_p}' has {r_lo.size}; "
                                  "an ARF and an RMF must share one energy grid")
    tol = 1e-5 * np.maximum(np.abs(r_hi), 1e-30)
    bad = (np.abs(a_lo - r_lo) > tol) | (np.abs(a_hi - r_hi) > tol)
    if np.any(bad):
        k = int(np.argmax(bad))
        raise InstrumentFileError(
            f"ARF '{arf_p}' and RMF '{rmf_p}' energy grids differ at bin {k}: {a_lo[k]:g}-{a_hi[k]:g} keV vs "
            f"{r_lo[k]:g}-{r_hi[k]:g} keV")


def load_instrument(path, rmf=None, name: str | None = None, bands=None) -> Instrument:
    """Build an :class:`Instrument` from a response file, dispatching on its content.

    * FITS with a SPECRESP extension: an OGIP ARF; ``rmf`` optionally names the matching
      OGIP RMF (same energy grid, checked).  An RMF whose matrix already includes the
      area (HDUCLAS3 'FULL') cannot be combined with an ARF.
    * FITS with a MATRIX/SPECRESP MATRIX extension: an RMF alone; allowed only if it
      includes the effective area, which is then split as ``A_i = sum_c M[c, i]`` (the
      area for events in any channel) and ``R = M / A`` (columns summing to 1; zero
      columns stay zero), so that ``R @ diag(A) = M`` exactly.
    * ``.ecsv``, ``.txt``, ``.dat`` (or other text): :func:`read_area_table`.
    * ``.area``: a CHIANTI ancillary effective-area file (Angstrom, cm^2).

    ``bands`` are channel-energy bands when an RMF is used, photon-energy bands otherwise.
    ``provenance`` lists every file read with its SHA-256.
    """
    p = _existing_file(path, "instrument response")
    if _is_fits(p):
        with _fits(p, "instrument response") as hdul:
            exts = [(str(h.header.get("EXTNAME", "")).strip().upper(), str(h.header.get("HDUCLAS2", "")).strip().upper())
                    for h in hdul[1:]]
        is_arf = any(e == "SPECRESP" or c == "SPECRESP" for e, c in exts)
        is_rmf = any(e in ("MATRIX", "SPECRESP MATRIX") or c == "RSP_MATRIX" for e, c in exts)
        if is_arf:
            arf = read_arf(p)
            prov = {"files": list(arf.provenance["files"]), "notes": list(arf.meta["notes"])}
            desc = f"OGIP ARF {p.name} ({', '.join(f'{k}={arf.meta[k]}' for k in ('TELESCOP', 'INSTRUME', 'FILTER') if k in arf.meta)})"
            kw = {}
            if rmf is not None:
                r = read_rmf(rmf)
                if r.includes_area:
                    raise InstrumentFileError(
                        f"RMF '{r.provenance['files'][0]['path']}' already includes the effective area "
                        f"(HDUCLAS3='FULL'/SPECRESP MATRIX); combining it with ARF '{p}' would count the area twice")
                _check_same_grid(arf.energy_lo.value, arf.energy_hi.value, r.energy_lo.value, r.energy_hi.value,
                                 p, r.provenance["files"][0]["path"])
                kw = dict(redistribution=r.matrix, channel_lo=r.channel_lo, channel_hi=r.channel_hi)
                prov["files"] += r.provenance["files"]
                prov["notes"] += r.meta["notes"]
                prov["first_channel"] = r.first_channel
                desc += f" with OGIP RMF {Path(os.fspath(rmf)).name}"
            try:
                return Instrument(name or _ogip_name(arf.meta, p), arf.energy_lo, arf.energy_hi, arf.area,
                                  bands=bands, description=desc, provenance=prov, **kw)
            except InstrumentFileError:
                raise
            except InputError as exc:
                raise InstrumentFileError(f"instrument from '{p}'{' and ' + str(rmf) if rmf else ''}: {exc}") from None
        if is_rmf:
            if rmf is not None:
                raise InstrumentFileError(f"'{p}' is an RMF; pass the ARF as path and the RMF as rmf=")
            r = read_rmf(p)
            if not r.includes_area:
                raise InstrumentFileError(
                    f"RMF '{p}' holds only the redistribution (HDUCLAS3='{r.meta.get('HDUCLAS3', '')}'); an effective "
                    "area is also needed: pass the ARF as path and this file as rmf=")
            M = r.matrix.tocsc()
            area = np.asarray(M.sum(axis=0)).ravel()
            inv = np.divide(1.0, area, out=np.zeros_like(area), where=area > 0)
            R = (M @ sp.diags(inv)).tocsr()
            prov = {"files": list(r.provenance["files"]), "first_channel": r.first_channel,
                    "notes": list(r.meta["notes"]) + ["effective area = column sums of the full response matrix"]}
            try:
                return Instrument(name or _ogip_name(r.meta, p), r.energy_lo, r.energy_hi, area * u.cm**2,
                                  redistribution=R, channel_lo=r.channel_lo, channel_hi=r.channel_hi, bands=bands,
                                  description=f"OGIP full response matrix {p.name}", provenance=prov)
            except InstrumentFileError:
                raise
            except InputError as exc:
                raise InstrumentFileError(f"instrument from '{p}': {exc}") from None
        raise InstrumentFileError(f"FITS file '{p}' has neither a SPECRESP (ARF) nor a MATRIX (RMF) extension "
                                  f"(extensions: {[e for e, _ in exts]}; see {_REF})")
    if rmf is not None:
        raise InstrumentFileError(f"rmf= can only be combined with an OGIP ARF; '{p}' is not a FITS file")
    if p.suffix.lower() == ".area":
        return _read_dot_area(p, "raise", name or p.stem, bands, f"effective area from {p.name} (Angstrom, cm^2)",
                              {"files": [_file_record(p, "area table (.area: Angstrom, cm^2)")]})
    return read_area_table(p, name=name, bands=bands)
