"""Reading synthcorona's TOML input files: typed, unit-checked keys with errors naming file and key.

A :class:`Section` wraps one TOML table. Each accessor (:meth:`Section.quantity`,
:meth:`Section.number`, :meth:`Section.string`, ...) reads one key, checks its type, unit and
range, and remembers that the key was used; :meth:`Section.finish` then refuses any key that was
not read (a misspelt key is an error, never silently ignored). Every quantity is a string with a
unit parsed by :mod:`astropy.units` (``"12 pc"``, ``"1e15 g"``, ``"1.5 MK"``); dimensionless
numbers (fractions, widths in dex, slopes) are plain TOML numbers.

Error messages have the form ``<file>: [section] key = <value>: <reason> (valid range ...)``.

The shared sub-schemas used by several files live here too: :func:`dem_from_section` (the DEM
models of :mod:`synthcorona.dem`) and :func:`abundances_from_key`.
"""
from __future__ import annotations

import difflib
import math
import pathlib
import tomllib
from typing import Any

import astropy.units as u
import numpy as np

from ..catalog import DEM_MODELS
from ..errors import InputError, ScenarioError

__all__ = ["Section", "load_toml", "read_input_text", "dem_from_section", "abundances_from_key",
           "DEM_MODELS", "RENAMED_DEM_KEYS"]

_MISSING = object()



def _ustr(unit) -> str:
    """Unit as users write it ("cm-3", "erg s-1")."""
    try:
        return u.Unit(unit).to_string("fits")
    except (ValueError, TypeError):
        return u.Unit(unit).to_string()


def _show(value) -> str:
    return repr(value) if not isinstance(value, str) else f'"{value}"'


class Section:
    """One TOML table of an input file, read key by key with type, unit and range checks.

    Parameters
    ----------
    data : dict
        The parsed TOML table.
    path : str
        Dotted name of the table in the file ("" for the top level), used in messages.
    file : str
        File name used in messages.
    """

    def __init__(self, data: dict, path: str = "", file: str = "<input>"):
        if not isinstance(data, dict):
            raise ScenarioError(f"{file}: [{path}] must be a table (got {type(data).__name__})")
        self.data = data
        self.path = path
        self.file = file
        self._used: set[str] = set()
        self._known: set[str] = set()  # every key asked for, present or not: the valid keys of this table

    # -- messages -------------------------------------------------------------------------------
    def where(self, key: str | None = None) -> str:
        """'file: [path] key' for messages."""
        sect = f"[{self.path}] " if self.path else ""
        return f"{self.file}: {sect}{key or ''}".rstrip()

    def error(self, key: str, reason: str) -> ScenarioError:
        """A :class:`ScenarioError` about ``key`` (its value shown when present)."""
        if key in self.data:
            return ScenarioError(f"{self.where(key)} = {_show(self.data[key])}: {reason}")
        return ScenarioError(f"{self.where(key)}: {reason}")

    # -- raw access -----------------------------------------------------------------------------
    def has(self, key: str) -> bool:
        """True if ``key`` is present (does not mark it used, but makes it a known key for :meth:`finish`)."""
        self._known.add(key)
        return key in self.data

    def _get(self, key, required, default):
        self._known.add(key)
        if key in self.data:
            self._used.add(key)
            return self.data[key]
        if required:
            near = difflib.get_close_matches(key, [k for k in self.data if k not in self._used], n=1, cutoff=0.6)
            hint = f" (found '{near[0]}': a misspelling of '{key}'?)" if near else ""
            raise ScenarioError(f"{self.where(key)}: required key is missing{hint}")
        return default

    def raw(self, key: str, *, required: bool = False, default: Any = None):
        """The value of ``key`` as parsed by TOML, unchecked."""
        return self._get(key, required, default)

    # -- typed accessors ------------------------------------------------------------------------
    def quantity(self, key: str, unit, *, required: bool = False, default: Any = None, lo: float | None = None,
                 hi: float | None = None, lo_inclusive: bool = True, hi_inclusive: bool = True,
                 array: bool = False) -> u.Quantity | None:
        """A quantity with a unit string, converted to ``unit`` and range-checked in ``unit``.

        ``lo``/``hi`` are in ``unit``; ``array=True`` reads a list of strings, each with its unit.
        Temperatures may also be given as energies ("1 keV" = 11.6 MK). ``default`` is returned
        unchecked when the key is absent.
        """
        unit = u.Unit(unit)
        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return default
        if array:
            if not isinstance(val, list) or not val:
                raise self.error(key, f"must be a non-empty list of quantities with units, e.g. [\"1 {unit}\"]")
            q = u.Quantity([self._parse_q(key, v, unit) for v in val])
        else:
            q = self._parse_q(key, val, unit)
        x = np.atleast_1d(q.to_value(unit))
        bad_lo = lo is not None and (np.any(x < lo) if lo_inclusive else np.any(x <= lo))
        bad_hi = hi is not None and (np.any(x > hi) if hi_inclusive else np.any(x >= hi))
        if bad_lo or bad_hi:
            lb = "[" if lo_inclusive else "("
            rb = "]" if hi_inclusive else ")"
            lo_s = f"{lo:g}" if lo is not None else "-inf"
            hi_s = f"{hi:g}" if hi is not None else "inf"
            raise self.error(key, f"out of range; valid range {lb}{lo_s}, {hi_s}{rb} {_ustr(unit)}")
        return q

    def _parse_q(self, key, val, unit) -> u.Quantity:
        if isinstance(val, bool) or not isinstance(val, (str, int, float)):
            raise self.error(key, f"must be a string with a unit, e.g. \"1 {_ustr(unit)}\" "
                                  f"(got a {type(val).__name__})")
        if not isinstance(val, str):
            raise self.error(key, f"needs a unit: write it as a string, e.g. \"{val} {_ustr(unit)}\"")
        try:
            q = u.Quantity(val)
        except (TypeError, ValueError):
            raise self.error(key, f"cannot read it as a number with a unit, e.g. \"1 {_ustr(unit)}\"") from None
        if not np.all(np.isfinite(q.value)):
            raise self.error(key, "must be finite")
        if q.unit == u.dimensionless_unscaled and unit != u.dimensionless_unscaled:
            raise self.error(key, f"needs a unit convertible to {_ustr(unit)}, e.g. \"{q.value:g} "
                                  f"{_ustr(unit)}\"")
        try:
            return q.to(unit, equivalencies=u.temperature_energy() if unit.physical_type == "temperature" else [])
        except u.UnitConversionError:
            raise self.error(key, f"unit '{q.unit}' is not convertible to {_ustr(unit)}") from None

    def number(self, key: str, *, required: bool = False, default: Any = None, lo: float | None = None,
               hi: float | None = None, lo_inclusive: bool = True, hi_inclusive: bool = True,
               integer: bool = False):
        """A plain (dimensionless) TOML number, range-checked; ``integer=True`` requires an integer."""
        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return default
        if isinstance(val, bool) or not isinstance(val, (int, float)):
            kind = "an integer" if integer else "a number"
            raise self.error(key, f"must be {kind} (got a {type(val).__name__})")
        if integer and not isinstance(val, int):
            raise self.error(key, "must be an integer")
        if not math.isfinite(val):
            raise self.error(key, "must be finite")
        bad_lo = lo is not None and (val < lo if lo_inclusive else val <= lo)
        bad_hi = hi is not None and (val > hi if hi_inclusive else val >= hi)
        if bad_lo or bad_hi:
            lb = "[" if lo_inclusive else "("
            rb = "]" if hi_inclusive else ")"
            raise self.error(key, f"out of range; valid range {lb}{'-inf' if lo is None else format(lo, 'g')}, "
                                  f"{'inf' if hi is None else format(hi, 'g')}{rb}")
        return val

    def string(self, key: str, *, required: bool = False, default: Any = None, choices=None) -> str | None:
        """A string; with ``choices`` it must be one of them."""
        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return default
        if not isinstance(val, str):
            raise self.error(key, f"must be a string (got a {type(val).__name__})")
        if choices is not None and val not in choices:
            raise self.error(key, f"must be one of {', '.join(map(repr, choices))}")
        return val

    def strings(self, key: str, *, required: bool = False, default: Any = None) -> list[str] | None:
        """A string or a list of strings -> list."""
        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return default
        if isinstance(val, str):
            return [val]
        if not isinstance(val, list) or not val or not all(isinstance(v, str) for v in val):
            raise self.error(key, "must be a string or a non-empty list of strings")
        return list(val)

    def band(self, key: str, *, required: bool = False, default: Any = None) -> u.Quantity | None:
        """A spectral band: ``"0.1-2.4 keV"``, ``"165-180 Angstrom"`` or ``["0.1 keV", "2.4 keV"]`` -> Quantity pair.

        Read and checked by :class:`~synthcorona.spectral.Band` (energies or wavelengths in any astropy
        unit of either; both limits positive and finite, the lower limit first).
        """
        from ..spectral import Band

        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return default
        example = 'e.g. "0.1-2.4 keV", "165-180 Angstrom" or ["0.1 keV", "2.4 keV"]'
        pair = isinstance(val, list) and len(val) == 2 and all(isinstance(v, str) for v in val)
        if not (isinstance(val, str) or pair):
            raise self.error(key, f"cannot read it as a band; {example}")
        try:
            if pair:
                lo, hi = u.Quantity(val[0]), u.Quantity(val[1])
                band = Band(lo, hi.to(lo.unit, equivalencies=u.spectral()), key)
            else:
                band = Band.parse(val, key)
        except u.UnitsError:
            raise self.error(key, f"band limits must be energies or wavelengths; {example}") from None
        except InputError as exc:
            raise self.error(key, str(exc)) from None
        except (ValueError, TypeError):
            raise self.error(key, f"cannot read it as a band; {example}") from None
        return band.quantity

    def boolean(self, key: str, *, required: bool = False, default: Any = None) -> bool | None:
        """true/false."""
        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return default
        if not isinstance(val, bool):
            raise self.error(key, f"must be true or false (got a {type(val).__name__})")
        return val

    def path_value(self, key: str, *, required: bool = False, default: Any = None) -> pathlib.Path | None:
        """A file path, relative paths taken relative to the input file's folder; must exist."""
        val = self.string(key, required=required, default=_MISSING)
        if val is _MISSING:
            return default
        p = pathlib.Path(val).expanduser()
        if not p.is_absolute() and self.file not in ("<input>", "<string>"):
            p = pathlib.Path(self.file).parent / p
        if not p.exists():
            raise self.error(key, f"file not found ({p})")
        return p

    def section(self, key: str, *, required: bool = False) -> "Section | None":
        """The sub-table ``key`` as a :class:`Section` (None if absent and not required)."""
        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return None
        if not isinstance(val, dict):
            raise self.error(key, f"must be a table [{self._child(key)}] (got a {type(val).__name__})")
        return Section(val, self._child(key), self.file)

    def sections(self, key: str, *, required: bool = False) -> list["Section"]:
        """An array of tables ``[[key]]`` (or a single table) as a list of :class:`Section`."""
        val = self._get(key, required, _MISSING)
        if val is _MISSING:
            return []
        if isinstance(val, dict):
            val = [val]
        if not isinstance(val, list) or not val or not all(isinstance(v, dict) for v in val):
            raise self.error(key, f"must be one or more tables [[{self._child(key)}]]")
        return [Section(v, f"{self._child(key)}[{i}]", self.file) for i, v in enumerate(val)]

    def _child(self, key):
        return f"{self.path}.{key}" if self.path else key

    def finish(self) -> None:
        """Refuse keys that were never read (unknown or misspelt).

        The message names the first unknown key and suggests the nearest valid key of this table
        (:func:`difflib.get_close_matches` among the keys the reader asked for), else lists the valid
        keys: ``t.toml: [observation] exposur: unknown key; did you mean 'exposure'?``.
        """
        unknown = [k for k in self.data if k not in self._used]
        if not unknown:
            return
        k = unknown[0]
        valid = sorted(self._known - set(unknown))
        near = difflib.get_close_matches(k, valid, n=1, cutoff=0.5)
        if near:
            hint = f"; did you mean '{near[0]}'?"
        elif valid:
            hint = f"; valid keys here: {', '.join(valid)}"
        else:
            hint = "; this table takes no keys"
        also = f" (also unknown: {', '.join(unknown[1:])})" if len(unknown) > 1 else ""
        raise ScenarioError(f"{self.where(k)}: unknown key{hint}{also}")


def _looks_like_toml(path) -> bool:
    return isinstance(path, str) and ("\n" in path or "=" in path)


def read_input_text(path) -> str:
    """The text of an input file, which must be UTF-8.

    Raises :class:`ScenarioError` naming the file if it is missing or unreadable, and, for a byte
    that is not UTF-8, its offset from the start of the file (fields ``file`` and ``byte_offset``).
    """
    shown = str(path) if len(str(path)) <= 80 else str(path)[:77] + "..."
    p = pathlib.Path(path).expanduser()
    try:
        found = p.is_file()
    except OSError:          # e.g. a name longer than the file system allows
        found = False
    if not found:
        hint = " (to read TOML text rather than a file, pass it as text=)" if _looks_like_toml(path) else ""
        raise ScenarioError(f"{shown}: file not found{hint}", file=str(path))
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise ScenarioError(f"{shown}: cannot be read ({exc.strerror or exc})", file=str(path)) from None
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise ScenarioError(f"{shown}: byte {exc.start} (0x{data[exc.start]:02x}, line {line}) is not UTF-8 text; "
                            "save the file as UTF-8", file=str(path), byte_offset=exc.start) from None


def load_toml(path=None, *, text: str | None = None, name: str | None = None) -> Section:
    """Parse a TOML file into a root :class:`Section`: ``load_toml(path)``, or TOML text with ``load_toml(text=...)``.

    ``path`` (a ``str`` or path-like) is always a file path, whatever characters it holds; the file
    must be UTF-8 (:func:`read_input_text`). ``name`` is the file name used in messages (default: the
    path, or ``"<string>"`` for text). Syntax errors name the file and TOML's line/column.
    """
    if (path is None) == (text is None):
        raise InputError("load_toml: give a file path, or TOML text as text=, not both and not neither",
                         argument="path")
    if text is None:
        text = read_input_text(path)
        fname = name or str(path)
    else:
        if not isinstance(text, str):
            raise InputError(f"text must be a str of TOML; got a {type(text).__name__}", argument="text")
        fname = name or "<string>"
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"{fname}: not valid TOML: {exc}") from None
    return Section(data, "", fname)


#: DEM models of a ``[...dem]`` table: ``model = "<name>"`` -> keys it reads. The keys are the parameter names
#: of the DEM classes of :mod:`synthcorona.dem` (one spelling in Python, files and the command line).

#: Keys of ``[...dem]`` tables that were renamed to the DEM classes' parameter names: old -> new. They are
#: refused with a message naming the new key (by model; None: every model).
RENAMED_DEM_KEYS = {
    None: {"emission_measure": "total_em", "width_dex": "width_logT"},
    "gaussian": {"peak_temperature": "peak_logT"},
}

_T_RANGE = (1e4, 1e9)  # K: what any table can hold (the table's own grid is checked at synthesis)
_LOGT_RANGE = tuple(float(np.log10(t)) for t in _T_RANGE)


def _refuse_renamed_dem_keys(sec: Section, model: str) -> None:
    """A key of :data:`RENAMED_DEM_KEYS` is an error naming its new spelling (never read as an alias)."""
    renamed = {**RENAMED_DEM_KEYS[None], **RENAMED_DEM_KEYS.get(model, {})}
    for old, new in renamed.items():
        if old not in sec.data:  # not sec.has: a former spelling is no valid key to suggest
            continue
        value, note = _show(sec.data[old]), ""
        if new == "peak_logT":
            note = " (log10 of the peak temperature in K, a plain number)"
            try:
                kelvin = u.Quantity(sec.data[old]).to_value(u.K, equivalencies=u.temperature_energy())
                value = format(float(np.log10(kelvin)), ".4g")
            except (TypeError, ValueError, u.UnitsError):
                value = "<log10 T>"
        raise sec.error(old, f"renamed: write {new} = {value}{note}; the keys of a DEM table are the parameter "
                             "names of the DEM classes")


def dem_from_section(sec: Section, *, em_unit="cm-3"):
    """Build a DEM (:mod:`synthcorona.dem`) from a ``[...dem]`` table; calls ``sec.finish()``.

    The keys are the parameter names of the DEM classes (see :data:`DEM_MODELS`): temperatures in
    K-convertible units (``"2 MK"``), ``total_em`` in ``em_unit`` (volume cm-3 by default, column
    cm-5), ``peak_logT`` (log10 K), ``width_logT`` (dex) and ``slope`` plain numbers. The former
    spellings (:data:`RENAMED_DEM_KEYS`) are errors naming the new key.
    """
    from .. import dem as demmod

    em_unit = u.Unit(em_unit)
    model = sec.string("model", required=True, choices=tuple(DEM_MODELS))
    _refuse_renamed_dem_keys(sec, model)
    if model == "isothermal":
        d = demmod.IsothermalDEM(temperature=sec.quantity("temperature", u.K, required=True, lo=_T_RANGE[0],
                                                          hi=_T_RANGE[1]),
                                 total_em=sec.quantity("total_em", em_unit, required=True, lo=0.0))
    elif model == "gaussian":
        d = demmod.GaussianDEM(peak_logT=sec.number("peak_logT", required=True, lo=_LOGT_RANGE[0],
                                                    hi=_LOGT_RANGE[1]),
                               width_logT=sec.number("width_logT", required=True, lo=0.0, lo_inclusive=False, hi=3.0),
                               total_em=sec.quantity("total_em", em_unit, required=True, lo=0.0))
    elif model == "power_law":
        d = demmod.PowerLawDEM(slope=sec.number("slope", required=True, lo=-20, hi=20),
                               peak_temperature=sec.quantity("peak_temperature", u.K, required=True,
                                                             lo=_T_RANGE[0], hi=_T_RANGE[1]),
                               total_em=sec.quantity("total_em", em_unit, required=True, lo=0.0),
                               min_temperature=sec.quantity("min_temperature", u.K, default=1e5 * u.K,
                                                            lo=_T_RANGE[0], hi=_T_RANGE[1]))
    elif model == "tabulated":
        dem_unit = em_unit / u.K
        if sec.has("file"):
            from astropy.table import QTable

            path = sec.path_value("file", required=True)
            try:
                t = QTable.read(path, format="ascii.ecsv" if path.suffix == ".ecsv" else "ascii.csv")
            except Exception as exc:  # noqa: BLE001 - any reader failure is a user-file problem
                raise sec.error("file", f"cannot read the table: {exc}") from None
            missing = [c for c in ("temperature", "dem") if c not in t.colnames]
            if missing:
                raise sec.error("file", f"table lacks column(s) {missing}; needs 'temperature' (K) and 'dem' "
                                        f"({_ustr(dem_unit)})")
            temp = t["temperature"] if isinstance(t["temperature"], u.Quantity) else t["temperature"] * u.K
            dem = t["dem"] if isinstance(t["dem"], u.Quantity) else np.asarray(t["dem"]) * dem_unit
        else:
            temp = sec.quantity("temperature", u.K, required=True, array=True, lo=_T_RANGE[0], hi=_T_RANGE[1])
            dem = sec.quantity("dem", dem_unit, required=True, array=True, lo=0.0)
        try:
            d = demmod.TabulatedDEM(temperature=temp, dem=dem.to(dem_unit))
        except InputError as exc:
            raise ScenarioError(f"{sec.where()}: {exc}") from None
    else:  # components
        comps = sec.sections("component", required=True)
        parts = []
        for c in comps:
            if c.data.get("model") not in ("isothermal", "gaussian"):
                raise c.error("model", "a component must be model = \"isothermal\" or \"gaussian\"")
            parts.append(dem_from_section(c, em_unit=em_unit))
        d = demmod.MultiComponentDEM(parts)
    sec.finish()
    return d


def abundances_from_key(sec: Section, key: str = "abundances", default: str = "coronal"):
    """Abundances from ``key`` of ``sec``: a set name (``"coronal"``) or a table
    ``{set = "photospheric", fip_bias = 4.0, metallicity = 1.0}``.

    ``fip_bias`` multiplies the low-FIP elements (Feldman & Laming 2000, Physica Scripta 61, 222),
    ``metallicity`` every element heavier than He (linear factor 10**[M/H]). Returns an
    :class:`~synthcorona.abundances.AbundanceSet`.
    """
    from ..abundances import available_sets, fip_bias, resolve_abundances, scale_metallicity

    known = f"known sets: {', '.join(available_sets())}"
    if isinstance(sec.data.get(key), dict):
        sub = sec.section(key)
        name = sub.string("set", default=default)
        fip = sub.number("fip_bias", default=None, lo=0.0, lo_inclusive=False, hi=100.0)
        met = sub.number("metallicity", default=None, lo=0.0, lo_inclusive=False, hi=100.0)
        sub.finish()
        try:
            a = resolve_abundances(name)
        except InputError:
            raise sub.error("set", f"unknown abundance set; {known}") from None
        if fip is not None:
            a = fip_bias(a, fip)
        if met is not None:
            a = scale_metallicity(a, met)
        return a
    name = sec.string(key, default=default)
    try:
        return resolve_abundances(name)
    except InputError:
        raise sec.error(key, f"unknown abundance set; {known}") from None
