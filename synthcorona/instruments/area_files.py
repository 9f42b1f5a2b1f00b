"""Effective-area files given as point samples: area tables (ECSV or text) and CHIANTI ``.area`` files.

Formats
-------
* **Area tables**: two columns, energy *or* wavelength and effective area, in ECSV
  (units in the column metadata) or plain text with a ``# units: <x unit> <area unit>``
  header line (this package's own convention).
* **CHIANTI ancillary effective areas**: the files in a CHIANTI installation's
  ``ancillary_data/instrument_responses/`` directory, two whitespace-separated columns
  without header, wavelength in Angstrom and effective area in cm^2 (as stated in the
  ``ancillary_data/README`` of the CHIANTI distribution).  They are read in place from
  the user's CHIANTI tree, never copied.

The samples become an :class:`~synthcorona.instruments.instrument.Instrument` through
:meth:`Instrument.from_samples <synthcorona.instruments.instrument.Instrument.from_samples>`.
Every malformed file raises :class:`~synthcorona.errors.InstrumentFileError` (an
:class:`~synthcorona.errors.InputError`) naming the file and the problem.
"""
from __future__ import annotations

import difflib
import os
import re
import warnings
from pathlib import Path

import astropy.units as u
import numpy as np

from ..errors import InputError, InstrumentFileError
from ..settings import CHIANTI_ENV, chianti_path
from .files import existing_file, file_record
from .instrument import Instrument

__all__ = ["read_area_table", "read_chianti_area", "chianti_area_names", "read_dot_area"]

_CHIANTI_AREA_DIR = Path("ancillary_data") / "instrument_responses"


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
    p = existing_file(path, what)
    if p.suffix.lower() == ".ecsv":
        x, xu, a, au, names = _read_ecsv(p, what)
    else:
        x, xu, a, au, names = _read_text_table(p, what, units)
    _check_axis_unit(xu, p, what, names[0])
    _check_area_unit(au, p, what, names[1])
    return _samples_to_instrument(p, what, x * xu, (a * au).to_value(u.cm**2), negative_area, name, bands,
                                  description or f"effective area from table {p.name}",
                                  {"files": [file_record(p, "area table")]})


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
    prov = {"files": [file_record(p, "CHIANTI effective area")], "chianti_version": version,
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




def read_dot_area(path, *, name: str | None = None, bands=None, negative_area: str = "raise") -> Instrument:
    """Read a headerless two-column ``.area`` file (wavelength in Angstrom, area in cm^2) from anywhere.

    The format of the CHIANTI ancillary effective areas (see :func:`read_chianti_area`, which
    also records the CHIANTI version); ``name`` defaults to the file stem.
    """
    p = existing_file(path, "area table")
    return _read_dot_area(p, negative_area, name or p.stem, bands, f"effective area from {p.name} (Angstrom, cm^2)",
                          {"files": [file_record(p, "area table (.area: Angstrom, cm^2)")]})
