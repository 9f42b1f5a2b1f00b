"""Element abundances: named sets, user sets, FIP bias and derived plasma ratios.

An abundance here is always a **number abundance relative to hydrogen**,
``A_X = n_X / n_H`` (so ``A_H = 1``), for the elements H..Zn (Z = 1..30). The
"log eps" scale used in the literature is ``log10(A_X) + 12``.

Named sets (data in ``synthcorona/data/abundance_sets.json``, transcribed from
the publications):

``"photospheric"`` (alias ``"solar_photospheric"``)
    Asplund, Amarsi & Grevesse 2021, A&A 653, A141, Table 2 (present-day solar
    photosphere; He from helioseismology).
``"coronal"`` (alias ``"solar_coronal"``)
    Solar active-region coronal set of G. Del Zanna (2023), distributed with
    CHIANTI 10.1 (Dere et al. 2023, ApJS 268, 52): the Asplund et al. (2021)
    photospheric values with the low-FIP elements Na, Mg, Al, Si, K, Ca, Sc, Ti,
    V, Cr, Mn, Fe, Co, Ni, Cu, Zn raised by 0.5 dex (FIP bias 3.16), consistent
    with Feldman et al. 1992, ApJS 81, 387.
``"coronal_feldman1992"``
    Feldman, Mandelbaum, Seely, Doschek & Gursky 1992, ApJS 81, 387 (15
    elements: H, He, C, N, O, Ne, Na, Mg, Al, Si, S, Ar, Ca, Fe, Ni; the other
    elements are absent, i.e. zero).

First ionization potentials are the NIST Atomic Spectra Database values
(Martin et al. 1995, NIST SRD 61) as tabulated in wavenumbers in CHIANTI 10.1,
converted to eV with the CODATA 2018 value of hc. Atomic masses are IUPAC
standard atomic weights.

Abundance files
---------------
:func:`resolve_abundances` and :meth:`AbundanceSet.write` use this layout.

Text (``.txt``, whitespace separated) or CSV (``.csv``, comma separated)::

    # scale: linear            <- required: "linear" (n_X/n_H) or "log12" (log10(n_X/n_H) + 12)
    # name: my_star            <- optional
    # source: Smith 2020       <- optional
    H   1.0
    He  0.085
    Fe  3.2e-05

Other lines starting with ``#`` and blank lines are ignored. Each data line is
an element symbol and a value. Elements not listed are zero. In the ``log12``
scale, ``H`` (if given) must be 12.

JSON (``.json``)::

    {"scale": "linear", "abundances": {"H": 1.0, "Fe": 3.2e-05}, "name": "...", "source": "..."}

ECSV (``.ecsv``): an astropy table with string column ``element`` and float
column ``abundance``; ``meta["scale"]`` is required, ``meta["name"]`` and
``meta["source"]`` optional.
"""
from __future__ import annotations

import json
import math
import pathlib
from dataclasses import dataclass
from functools import lru_cache
from types import MappingProxyType
from typing import Iterable, Mapping

import astropy.units as u
import numpy as np

from .errors import InputError
from .validation import as_quantity, check_range

__all__ = [
    "ELEMENTS",
    "AbundanceSet",
    "resolve_abundances",
    "available_sets",
    "fip_bias",
    "scale_metallicity",
    "first_ionization_potential",
    "atomic_mass",
    "mean_mass_per_hydrogen",
    "electron_hydrogen_ratio",
]

#: Element symbols H..Zn in order of atomic number (Z = index + 1).
ELEMENTS: tuple[str, ...] = (
    "H", "He", "Li", "Be", "B", "C", "N", "O", "F", "Ne",
    "Na", "Mg", "Al", "Si", "P", "S", "Cl", "Ar", "K", "Ca",
    "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn",
)
_Z = {s: i + 1 for i, s in enumerate(ELEMENTS)}
_LOWER = {s.lower(): s for s in ELEMENTS}

#: Alternative names accepted for the named sets.
ALIASES = MappingProxyType({"solar_photospheric": "photospheric", "solar_coronal": "coronal"})

_FILE_SUFFIXES = (".json", ".txt", ".csv", ".ecsv")
_SCALES = ("linear", "log12")


# --------------------------------------------------------------------------- data
@lru_cache(maxsize=1)
def _data() -> dict:
    """The packaged JSON (abundance sets as log eps, FIPs in eV, masses in u), read once."""
    path = pathlib.Path(__file__).parent / "data" / "abundance_sets.json"
    with open(path, encoding="utf-8") as fh:
        return json.load(fh)


def _symbol(name: str, symbol) -> str:
    """Canonical element symbol ('fe' -> 'Fe'); InputError naming ``name`` if not H..Zn."""
    if isinstance(symbol, str) and symbol.strip().lower() in _LOWER:
        return _LOWER[symbol.strip().lower()]
    raise InputError(
        f"{name}={symbol!r} is not a known element symbol; valid symbols are H..Zn (Z = 1..30): "
        + ", ".join(ELEMENTS)
    )


def _clean_values(name: str, values: Mapping) -> dict[str, float]:
    """Validate a symbol -> abundance mapping (finite, >= 0, known symbols); H set to 1 if absent."""
    out: dict[str, float] = {}
    for key, val in values.items():
        sym = _symbol(f"{name} element", key)
        if sym in out:
            raise InputError(f"{name}: element {sym!r} is given twice")
        try:
            v = float(val)
        except (TypeError, ValueError):
            raise InputError(f"{name}[{sym!r}]={val!r} is not a number; give n_{sym}/n_H as a float") from None
        if not math.isfinite(v) or v < 0:
            raise InputError(
                f"{name}[{sym!r}]={val!r} is outside the valid range [0, inf) "
                "(number abundance relative to H, finite)"
            )
        out[sym] = v
    if "H" in out and out["H"] != 1.0:
        raise InputError(
            f"{name}['H']={out['H']!r} but abundances are relative to hydrogen, so H must be 1 "
            "(divide every value by the H value first)"
        )
    out["H"] = 1.0
    return {s: out[s] for s in ELEMENTS if s in out}


# --------------------------------------------------------------------------- class
@dataclass(frozen=True)
class AbundanceSet:
    """A set of element number abundances relative to hydrogen (``A_H = 1``), H..Zn.

    Parameters
    ----------
    name : str
        Short identifier (e.g. ``"photospheric"``).
    values : mapping of str to float
        ``{symbol: n_X / n_H}`` (dimensionless, finite, >= 0). Elements absent from
        the mapping have abundance 0. ``H`` is added as 1 if absent and must be 1
        if given.
    source : str
        Citation of the published values (or a description of a user set).
    note : str
        Free-text remarks, e.g. which requested elements are absent (zero).

    Notes
    -----
    ``values`` is stored read-only. ``set[symbol]`` returns the abundance, 0.0 for
    an element H..Zn that the set does not give; an unknown symbol raises
    :class:`~synthcorona.errors.InputError`.
    """

    name: str
    values: Mapping[str, float]
    source: str = ""
    note: str = ""

    def __post_init__(self):
        """Validate and freeze ``values`` (known symbols, finite, >= 0, H = 1)."""
        object.__setattr__(self, "values", MappingProxyType(_clean_values("values", dict(self.values))))

    def __hash__(self) -> int:
        """Hash of name, values, source and note (so a set can key a cache)."""
        return hash((self.name, tuple(self.values.items()), self.source, self.note))

    def __getitem__(self, symbol: str) -> float:
        """Number abundance of ``symbol`` relative to H (0.0 if the set does not give it)."""
        return self.values.get(_symbol("symbol", symbol), 0.0)

    @property
    def elements(self) -> tuple[str, ...]:
        """Symbols with a value in this set (including zeros given explicitly), in order of Z."""
        return tuple(self.values)

    def as_array(self, symbols: Iterable[str]) -> np.ndarray:
        """Abundances for ``symbols`` as a float array (0.0 for elements the set does not give).

        Unknown symbols raise :class:`~synthcorona.errors.InputError`.
        """
        if isinstance(symbols, str):
            symbols = [symbols]
        return np.array([self[s] for s in symbols], dtype=float)

    def missing(self, symbols: Iterable[str]) -> list[str]:
        """Those of ``symbols`` that this set does not give (they count as zero)."""
        return [s for s in (_symbol("elements", x) for x in symbols) if s not in self.values]

    def to_attrs(self, prefix: str = "abundance_") -> dict[str, str]:
        """Provenance for xarray/netCDF attributes (all values are strings).

        Keys ``{prefix}name``, ``{prefix}source``, ``{prefix}note`` and
        ``{prefix}values`` (a JSON object ``{"H": 1.0, ...}`` of n_X/n_H, exact
        float repr, so the set can be reconstructed).
        """
        return {
            f"{prefix}name": self.name,
            f"{prefix}source": self.source,
            f"{prefix}note": self.note,
            f"{prefix}values": json.dumps(dict(self.values)),
        }

    def write(self, path, scale: str = "linear") -> pathlib.Path:
        """Write the set to ``path`` in the file layout of this module (see module docstring).

        The format follows the suffix (.txt, .csv, .json, .ecsv); ``scale`` is
        ``"linear"`` (n_X/n_H) or ``"log12"`` (log10(n_X/n_H) + 12; elements with
        zero abundance are then omitted, since log 0 is undefined). Returns the path.
        """
        path = pathlib.Path(path)
        suffix = path.suffix.lower()
        if suffix not in _FILE_SUFFIXES:
            raise InputError(f"path={str(path)!r} has suffix {suffix!r}; valid suffixes are {', '.join(_FILE_SUFFIXES)}")
        if scale not in _SCALES:
            raise InputError(f"scale={scale!r} is not valid; use one of {', '.join(_SCALES)}")
        items = [(s, v) for s, v in self.values.items() if not (scale == "log12" and v == 0.0)]
        conv = (lambda v: v) if scale == "linear" else (lambda v: math.log10(v) + 12.0)
        if suffix == ".json":
            payload = {"scale": scale, "name": self.name, "source": self.source,
                       "abundances": {s: conv(v) for s, v in items}}
            path.write_text(json.dumps(payload, indent=1), encoding="utf-8")
        elif suffix == ".ecsv":
            from astropy.table import Table

            t = Table({"element": [s for s, _ in items], "abundance": [conv(v) for _, v in items]})
            t.meta.update({"scale": scale, "name": self.name, "source": self.source})
            t.write(path, format="ascii.ecsv", overwrite=True)
        else:
            sep = "," if suffix == ".csv" else " "
            lines = [f"# scale: {scale}", f"# name: {self.name}", f"# source: {self.source}"]
            lines += [f"{s}{sep}{conv(v)!r}" for s, v in items]
            path.write_text("\n".join(lines) + "\n", encoding="utf-8")
        return path


# --------------------------------------------------------------------------- resolution
def available_sets() -> dict[str, str]:
    """Named abundance sets as ``{name: citation}`` (aliases in :data:`ALIASES`)."""
    return {name: entry["source"] for name, entry in _data()["sets"].items()}


def _named_set(key: str) -> AbundanceSet:
    """The named set ``key`` (case-insensitive, aliases allowed) converted from log eps to n_X/n_H."""
    sets = _data()["sets"]
    k = key.strip().lower()
    k = ALIASES.get(k, k)
    if k not in sets:
        known = list(sets) + [f"{a} (= {b})" for a, b in ALIASES.items()]
        raise InputError(
            f"abundances={key!r} is not a known abundance set; known sets: {', '.join(known)} "
            "(or give a dict {symbol: n_X/n_H}, an AbundanceSet or a .json/.txt/.csv/.ecsv file path)"
        )
    entry = sets[k]
    values = {s: 10.0 ** (le - 12.0) for s, le in entry["log_eps"].items()}
    values["H"] = 1.0
    return AbundanceSet(name=k, values=values, source=entry["source"])


def _from_scale(path, scale, pairs: list[tuple[str, float]]) -> dict[str, float]:
    """Convert (symbol, value) pairs read from ``path`` in ``scale`` to n_X/n_H."""
    where = f"abundances file {str(path)!r}"
    if scale not in _SCALES:
        raise InputError(
            f"{where}: scale={scale!r} is not valid; declare '# scale: linear' (n_X/n_H) "
            "or '# scale: log12' (log10(n_X/n_H) + 12)"
        )
    out: dict[str, float] = {}
    for sym, val in pairs:
        s = _symbol(f"{where}: element", sym)
        if s in out:
            raise InputError(f"{where}: element {s!r} is given twice")
        if not math.isfinite(val):
            raise InputError(f"{where}: {s}={val!r} is not finite; valid range is [0, inf) (linear) or finite (log12)")
        if scale == "log12":
            if s == "H" and val != 12.0:
                raise InputError(f"{where}: H={val!r} in the log12 scale must be 12")
            val = 10.0 ** (val - 12.0)
        if val < 0:
            raise InputError(f"{where}: {s}={val!r} is outside the valid range [0, inf) (n_X/n_H)")
        out[s] = val
    return out


def _read_file(path: pathlib.Path) -> AbundanceSet:
    """Read an abundance file (layout in the module docstring)."""
    where = f"abundances file {str(path)!r}"
    if not path.is_file():
        raise InputError(f"abundances={str(path)!r}: file not found")
    suffix = path.suffix.lower()
    name, source = path.stem, f"user file {path.name}"
    try:
        if suffix == ".json":
            payload = json.loads(path.read_text(encoding="utf-8"))
            if not isinstance(payload, dict) or not isinstance(payload.get("abundances"), dict):
                raise InputError(f"{where}: expected a JSON object with an 'abundances' object {{symbol: value}} and a 'scale'")
            if "scale" not in payload:
                raise InputError(f"{where}: no 'scale' key; add \"scale\": \"linear\" or \"log12\"")
            pairs = [(k, float(v)) for k, v in payload["abundances"].items()]
            scale = payload["scale"]
            name, source = payload.get("name", name), payload.get("source", source)
        elif suffix == ".ecsv":
            from astropy.table import Table

            t = Table.read(path, format="ascii.ecsv")
            if "element" not in t.colnames or "abundance" not in t.colnames:
                raise InputError(f"{where}: needs columns 'element' and 'abundance'; found {t.colnames}")
            if "scale" not in t.meta:
                raise InputError(f"{where}: no 'scale' in the table meta; set meta['scale'] to 'linear' or 'log12'")
            pairs = [(str(s), float(v)) for s, v in zip(t["element"], t["abundance"])]
            scale = t.meta["scale"]
            name, source = t.meta.get("name", name), t.meta.get("source", source)
        else:
            scale = None
            pairs = []
            for lineno, raw in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
                line = raw.strip()
                if not line:
                    continue
                if line.startswith("#"):
                    key, _, val = line[1:].partition(":")
                    key = key.strip().lower()
                    if key == "scale":
                        scale = val.strip().lower()
                    elif key == "name":
                        name = val.strip() or name
                    elif key == "source":
                        source = val.strip() or source
                    continue
                parts = line.split(",") if suffix == ".csv" else line.split()
                parts = [p.strip() for p in parts if p.strip()]
                if len(parts) != 2:
                    raise InputError(f"{where}, line {lineno}: expected 'symbol value', got {raw!r}")
                try:
                    pairs.append((parts[0], float(parts[1])))
                except ValueError:
                    raise InputError(f"{where}, line {lineno}: value {parts[1]!r} is not a number") from None
            if scale is None:
                raise InputError(
                    f"{where}: no '# scale:' header line; add '# scale: linear' (n_X/n_H) "
                    "or '# scale: log12' (log10(n_X/n_H) + 12)"
                )
    except InputError:
        raise
    except (ValueError, TypeError, OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{where} could not be read: {exc}") from None
    if not pairs:
        raise InputError(f"{where} holds no abundances")
    return AbundanceSet(name=str(name), values=_from_scale(path, scale, pairs), source=str(source))


def resolve_abundances(abundances, elements: Iterable[str] | None = None) -> AbundanceSet:
    """Turn any accepted abundance specification into an :class:`AbundanceSet`.

    Parameters
    ----------
    abundances : str, dict, AbundanceSet or path
        * a named set (see :func:`available_sets`; case-insensitive, aliases
          ``"solar_photospheric"``, ``"solar_coronal"``);
        * a dict ``{symbol: n_X / n_H}`` (dimensionless). Missing elements are
          zero; ``H`` is 1 (added if absent);
        * an existing :class:`AbundanceSet` (returned with an updated note);
        * a :class:`pathlib.Path`, or a str ending in .json/.txt/.csv/.ecsv, of a
          file in the layout described in the module docstring.
    elements : iterable of str, optional
        Elements the caller will use (default: H..Zn). Those absent from the set
        are listed in the returned ``.note`` as taken to be zero.

    Returns
    -------
    AbundanceSet
        Number abundances relative to H.

    Raises
    ------
    InputError
        Unknown set name (the message lists the known sets), unknown element
        symbol, negative or non-finite abundance, unreadable or malformed file.
    """
    req = ELEMENTS if elements is None else tuple(_symbol("elements", e) for e in (
        [elements] if isinstance(elements, str) else elements))
    if isinstance(abundances, AbundanceSet):
        base = abundances
    elif isinstance(abundances, pathlib.Path):
        base = _read_file(abundances)
    elif isinstance(abundances, str):
        if abundances.lower().endswith(_FILE_SUFFIXES):
            base = _read_file(pathlib.Path(abundances))
        else:
            base = _named_set(abundances)
    elif isinstance(abundances, Mapping):
        base = AbundanceSet(name="user", values=_clean_values("abundances", abundances),
                            source="user-supplied dict")
    else:
        raise InputError(
            f"abundances={abundances!r} (type {type(abundances).__name__}) is not accepted; give a set name "
            f"({', '.join(available_sets())}), a dict {{symbol: n_X/n_H}}, an AbundanceSet or a file path"
        )
    missing = base.missing(req)
    note = base.note
    if missing:
        extra = f"elements absent from this set, taken as zero: {', '.join(missing)}"
        # Replace an earlier 'absent' remark rather than stacking them.
        kept = [p for p in note.split("; ") if p and not p.startswith("elements absent from this set")]
        note = "; ".join(kept + [extra])
    if note == base.note:
        return base
    return AbundanceSet(name=base.name, values=base.values, source=base.source, note=note)


# --------------------------------------------------------------------------- atomic data
def first_ionization_potential(symbol) -> u.Quantity:
    """First ionization potential of ``symbol`` (str, or a list of str) in eV.

    Values: NIST Atomic Spectra Database ionization energies (Martin, Sugar,
    Musgrove & Dalton 1995, NIST Standard Reference Database 61; Cu, Zn from
    Biemont, Fremat & Quinet 1999, ADNDT 71, 117) as tabulated in CHIANTI 10.1,
    converted from cm^-1 with hc (CODATA 2018), rounded to 1e-4 eV.
    """
    table = _data()["first_ionization_potential_eV"]["values"]
    if isinstance(symbol, str):
        return table[_symbol("symbol", symbol)] * u.eV
    return np.array([table[_symbol("symbol", s)] for s in symbol], dtype=float) * u.eV


def atomic_mass(symbol) -> u.Quantity:
    """Standard atomic weight of ``symbol`` (str or list of str) in atomic mass units (u).

    IUPAC/CIAAW standard atomic weights (abridged values as tabulated in xraydb 4.5).
    """
    table = _data()["atomic_mass_u"]["values"]
    if isinstance(symbol, str):
        return table[_symbol("symbol", symbol)] * u.u
    return np.array([table[_symbol("symbol", s)] for s in symbol], dtype=float) * u.u


def _arrays(abund: AbundanceSet, key: str) -> tuple[np.ndarray, np.ndarray]:
    """Abundances (n_X/n_H) of the elements in ``abund`` and the matching per-element data column ``key``."""
    syms = abund.elements
    table = _data()[key]["values"]
    return abund.as_array(syms), np.array([table[s] for s in syms], dtype=float)


def fip_bias(abund, factor, threshold=10 * u.eV) -> AbundanceSet:
    """Multiply the abundances of low-FIP elements by ``factor`` (the FIP effect).

    Elements whose first ionization potential is below ``threshold`` are scaled;
    H is never scaled (abundances are relative to H). ``factor > 1`` gives the
    solar-type FIP effect of the corona (Feldman & Laming 2000, Physica Scripta
    61, 222); ``factor < 1`` the inverse-FIP pattern of active M dwarfs and RS CVn
    binaries (Laming 2015, Living Rev. Sol. Phys. 12, 2).

    Parameters
    ----------
    abund : anything accepted by :func:`resolve_abundances`
    factor : float
        Dimensionless multiplier, finite and > 0.
    threshold : Quantity (energy), default 10 eV
        FIP below which an element counts as low-FIP. With 10 eV: Li, Be, B, Na,
        Mg, Al, Si, K, Ca, Sc, Ti, V, Cr, Mn, Fe, Co, Ni, Cu, Zn.
    """
    factor = _positive_factor("factor", factor)
    thr = as_quantity("threshold", threshold, u.eV)
    check_range("threshold", thr.value, lo=0.0, unit_label="eV")
    base = resolve_abundances(abund)
    fips = _data()["first_ionization_potential_eV"]["values"]
    low = [s for s in base.elements if s != "H" and fips[s] < thr.value]
    values = {s: (v * factor if s in low else v) for s, v in base.values.items()}
    return AbundanceSet(
        name=f"{base.name}*fip_bias({factor:g})",
        values=values,
        source=f"{base.source}; low-FIP elements (FIP < {thr.value:g} eV: {', '.join(low)}) multiplied by {factor:g}",
        note=base.note,
    )


def scale_metallicity(abund, factor) -> AbundanceSet:
    """Multiply the abundance of every element heavier than He (Z > 2) by ``factor`` (finite, > 0).

    ``factor`` is the linear metallicity ratio, 10**[M/H]. H and He are unchanged.
    """
    factor = _positive_factor("factor", factor)
    base = resolve_abundances(abund)
    values = {s: (v * factor if _Z[s] > 2 else v) for s, v in base.values.items()}
    return AbundanceSet(
        name=f"{base.name}*metallicity({factor:g})",
        values=values,
        source=f"{base.source}; elements heavier than He multiplied by {factor:g}",
        note=base.note,
    )


def _positive_factor(name: str, factor) -> float:
    """A finite, > 0, dimensionless scalar (plain number or dimensionless Quantity)."""
    if isinstance(factor, u.Quantity):
        factor = as_quantity(name, factor, u.dimensionless_unscaled).value
    try:
        f = float(factor)
    except (TypeError, ValueError):
        raise InputError(f"{name}={factor!r} is not a number; valid range (0, inf)") from None
    if not math.isfinite(f) or f <= 0:
        raise InputError(f"{name}={factor!r} is outside the valid range (0, inf)")
    return f


def mean_mass_per_hydrogen(abund) -> float:
    """Mean mass per hydrogen atom in units of the H atom mass, mu_H = sum_X A_X m_X / m_H.

    So that the mass density is ``rho = mu_H * m_H * n_H``. Equal to 1 / X (X =
    hydrogen mass fraction). About 1.34 for the Asplund et al. (2021) photosphere
    (X = 0.7438), 1.4 for the older, He-richer compilations. Masses: IUPAC standard
    atomic weights (see :func:`atomic_mass`).
    """
    a, m = _arrays(resolve_abundances(abund), "atomic_mass_u")
    m_h = _data()["atomic_mass_u"]["values"]["H"]
    return float(np.sum(a * m) / m_h)


def electron_hydrogen_ratio(abund) -> float:
    """n_e / n_H of a fully ionised plasma, sum_X A_X Z_X (dimensionless).

    About 1.17 for the Asplund et al. (2021) photosphere, often rounded to 1.2 in
    coronal work. This is the high-temperature limit; it is not valid where
    H and He are only partly ionised (T below ~1e5 K).
    """
    base = resolve_abundances(abund)
    a = base.as_array(base.elements)
    z = np.array([_Z[s] for s in base.elements], dtype=float)
    return float(np.sum(a * z))
