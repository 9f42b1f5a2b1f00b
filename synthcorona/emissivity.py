"""The emissivity table in memory: loading, provenance, and evaluation at a density or pressure.

An :class:`EmissivityTable` wraps the xarray Dataset described in
``docs/table_format.md``. It answers two questions for the synthesis:
line emissivities (n_lines, n_T) and per-element continua (n_el, n_T, n_E) at a
given electron density (log–log interpolation between the table densities) or at
constant pressure (n_e = p / T along the temperature axis). It never imports
fiasco; tables are built by :mod:`synthcorona.atomic.builder`.
"""
from __future__ import annotations

import functools
import importlib.resources
import pathlib

import astropy.units as u
import numpy as np

from . import settings
from .catalog import DEFAULT_TABLE_NAME, manifest_path, read_manifest, table_repr
from .errors import InputError, TableFileError
from .io.table_file import PACKED_VARS, read_table
from .validation import as_quantity, check_finite

__all__ = ["EmissivityTable", "load_emissivity", "resolve_table", "DEFAULT_TABLE_NAME", "REQUIRED_PROVENANCE"]

#: Provenance attributes every table must carry (checked by :func:`load_emissivity`).
REQUIRED_PROVENANCE = ("chianti_version", "fiasco_version", "ioneq", "content_hash")

_GRID_TOL = 1e-9


class EmissivityTable:
    """Line and continuum emissivities on a (log T, log n_e) grid, with provenance.

    Attributes
    ----------
    logT : ndarray
        log10 temperature grid [K].
    log_density : ndarray
        log10 electron densities of the table [cm^-3].
    elements : list of str
        Element symbols of the continuum arrays.
    energy : ndarray
        Continuum energy grid [keV].
    line_wavelength : ndarray
        Line wavelengths [Angstrom], ascending.
    line_Z, line_ion : ndarray
        Atomic number and spectroscopic number of each line's ion.
    provenance : dict
        The file's attributes (CHIANTI version and substitutions, fiasco version, ioneq, ...).
    """

    def __init__(self, dataset, path=None):
        ds = dataset
        self.path = None if path is None else pathlib.Path(path)
        self.logT = np.asarray(ds["logT"].values, dtype=float)
        self.log_density = np.asarray(ds["log_density"].values, dtype=float)
        self.elements = [str(e) for e in ds["element"].values]
        self.energy = np.asarray(ds["energy"].values, dtype=float)
        self.line_wavelength = np.asarray(ds["line_wavelength"].values, dtype=float)
        self.line_Z = np.asarray(ds["line_Z"].values, dtype=int)
        self.line_ion = np.asarray(ds["line_ion"].values, dtype=int)
        self.line_upper = np.asarray(ds["line_upper"].values, dtype=int)
        self.line_lower = np.asarray(ds["line_lower"].values, dtype=int)
        le = ds["line_emissivity"]
        if np.issubdtype(le.dtype, np.integer):  # stored codes, decoded one density plane at a time
            self._line_q = np.asarray(le.values)
            self._line_attrs = dict(le.attrs)
            self._line_eps_full = None
        else:
            self._line_q = None
            self._line_eps_full = np.asarray(le.values)  # (line, n, T)
        self._line_planes: dict = {}
        self._tp_partial = None  # two-photon continuum, decoded plane by plane (_tp_planes)
        self._tp_done: set = set()
        # continua (el, T, E) and two-photon (el, n, T, E): decoded on first use when read lazily
        self._cont_raw = {k: (np.asarray(ds[v].values), dict(ds[v].attrs))
                          for k, v in (("ff", "cont_ff"), ("fb", "cont_fb"), ("2p", "cont_2p"))}
        self.mass_amu = np.asarray(ds["mass_amu"].values, dtype=float)
        self.fip_ev = np.asarray(ds["fip_ev"].values, dtype=float)
        self.provenance = dict(ds.attrs)
        from .abundances import ELEMENTS

        self._z_of_element = np.array([ELEMENTS.index(e) + 1 for e in self.elements])
        # element index of each line (lines of elements absent from the continuum list are refused)
        z_to_idx = {z: i for i, z in enumerate(self._z_of_element)}
        try:
            self.line_element_index = np.array([z_to_idx[z] for z in self.line_Z], dtype=int)
        except KeyError as exc:
            raise TableFileError(f"table {path}: line of element Z={exc.args[0]} has no continuum entry") from None
        self._cache: dict = {}

    def _cont(self, key: str) -> np.ndarray:
        arr, attrs = self._cont_raw[key]
        if np.issubdtype(arr.dtype, np.integer):
            from .io.table_file import decode_full

            arr = decode_full(arr, attrs)
            self._cont_raw[key] = (arr, attrs)
        return arr

    @property
    def _ff(self) -> np.ndarray:
        return self._cont("ff")

    @property
    def _fb(self) -> np.ndarray:
        return self._cont("fb")

    @property
    def _tp(self) -> np.ndarray:
        return self._tp_planes(range(self.log_density.size))

    def _tp_planes(self, planes) -> np.ndarray:
        """Two-photon continuum (el, n, T, E) with at least the density ``planes`` decoded (the others
        may still be zero: a request decodes only the planes around its densities)."""
        arr, attrs = self._cont_raw["2p"]
        if not np.issubdtype(arr.dtype, np.integer):
            return arr
        if self._tp_partial is None:
            self._tp_partial = np.zeros(arr.shape)
        missing = sorted({int(k) for k in planes} - self._tp_done)
        if missing:
            from .io.table_file import decode_plane

            for k in missing:
                self._tp_partial[:, k] = decode_plane(arr, attrs, k, dtype=np.float64)
                self._tp_done.add(k)
        if len(self._tp_done) == arr.shape[1]:  # every plane decoded: the codes are no longer needed
            self._cont_raw["2p"] = (self._tp_partial, attrs)
        return self._tp_partial

    # ------------------------------------------------------------------ description
    def __repr__(self) -> str:
        return table_repr(self.summary())

    def summary(self) -> dict:
        """What ``synthcorona table-info`` and ``synthcorona list`` show, as plain (JSON-able) values:
        ``table_file``, ``lines``, ``elements``, ``logT`` and ``log_density`` (the grids), ``energy_kev``
        (first and last node of the continuum grid), ``n_energy`` and ``provenance`` (every attribute)."""
        def plain(v):
            return v.tolist() if isinstance(v, np.ndarray) else v.item() if isinstance(v, np.generic) else v

        return {"table_file": self.path.name if self.path else None, "lines": int(self.line_wavelength.size),
                "elements": list(self.elements), "logT": self.logT.tolist(), "log_density": self.log_density.tolist(),
                "energy_kev": [float(self.energy[0]), float(self.energy[-1])], "n_energy": int(self.energy.size),
                "provenance": {k: plain(v) for k, v in self.provenance.items()}}

    @property
    def temperature(self) -> u.Quantity:
        """Temperature grid as a Quantity [K]."""
        return (10 ** self.logT) * u.K

    @property
    def density(self) -> u.Quantity:
        """Table electron densities [cm^-3]."""
        return (10 ** self.log_density) * u.cm ** -3

    @property
    def content_hash(self) -> str:
        """SHA-256 of the table's content (its ``content_hash`` provenance attribute): the key of every cache
        that depends on the table. A table without one (built in memory) is keyed on its identity."""
        return str(self.provenance.get("content_hash") or f"in-memory-{id(self)}")

    def provenance_attrs(self) -> dict:
        """Short provenance dict for the attrs of results computed from this table."""
        keys = ("chianti_version", "chianti_provenance", "fiasco_version", "ioneq", "content_hash", "line_threshold")
        out = {f"table_{k}": self.provenance[k] for k in keys if k in self.provenance}
        out["table_path"] = str(self.path) if self.path else ""
        return out

    # ------------------------------------------------------------------ checks
    def check_logT(self, name: str, logT) -> np.ndarray:
        """Return ``logT`` as an array; raise :class:`InputError` if NaN or outside the table grid."""
        arr = np.asarray(logT, dtype=float)
        check_finite(name, arr)
        lo, hi = self.logT[0], self.logT[-1]
        bad = (arr < lo - _GRID_TOL) | (arr > hi + _GRID_TOL)
        if np.any(bad):
            v = arr[bad]
            raise InputError(f"{name}: log10 T = {v[:4]} K outside the table range [{lo:g}, {hi:g}] "
                             f"(T = {10**lo:.3g} to {10**hi:.3g} K); no extrapolation is done")
        return np.clip(arr, lo, hi)

    def _density_weights(self, name: str, log_n: np.ndarray):
        """Indices and log-linear weights of densities on the table grid (raise outside)."""
        check_finite(name, log_n)
        lo, hi = self.log_density[0], self.log_density[-1]
        bad = (log_n < lo - _GRID_TOL) | (log_n > hi + _GRID_TOL)
        if np.any(bad):
            v = 10 ** np.asarray(log_n)[bad]
            raise InputError(f"{name}={v[:4]} cm^-3 is outside the table density range "
                             f"[{10**lo:.3g}, {10**hi:.3g}] cm^-3; no extrapolation is done")
        x = np.clip(log_n, lo, hi)
        i = np.clip(np.searchsorted(self.log_density, x, side="right") - 1, 0, self.log_density.size - 2)
        w = (x - self.log_density[i]) / (self.log_density[i + 1] - self.log_density[i])
        return i, w

    def density_profile(self, density=None, pressure=None) -> tuple[np.ndarray, str]:
        """log10 n_e at each table temperature, and a text label, from a density or a pressure.

        Parameters
        ----------
        density : Quantity [cm^-3], optional
            Constant electron density (default 1e10 cm^-3 if neither is given).
        pressure : Quantity [K cm^-3], optional
            Constant electron pressure n_e T; n_e = p / T at each grid temperature.
            Grid temperatures where n_e falls outside the table get NaN (the synthesis
            raises if the DEM puts emission measure there).
        """
        if density is not None and pressure is not None:
            raise InputError("give density or pressure, not both")
        if pressure is not None:
            p = as_quantity("pressure", pressure, u.K * u.cm ** -3)
            check_finite("pressure", p)
            if np.ndim(p) != 0 or p.value <= 0:
                raise InputError(f"pressure={pressure} must be a single positive value in K cm^-3")
            log_n = np.log10(p.value) - self.logT
            out = (log_n < self.log_density[0] - _GRID_TOL) | (log_n > self.log_density[-1] + _GRID_TOL)
            log_n = np.where(out, np.nan, log_n)
            return log_n, f"constant pressure n_e T = {p.value:.3g} K cm-3"
        if density is None:
            density = 1e10 * u.cm ** -3
        n = as_quantity("density", density, u.cm ** -3)
        if np.ndim(n) != 0:
            raise InputError(f"density must be a single value (got shape {np.shape(n)}); use pressure= for a "
                             "temperature-dependent density")
        if not n.value > 0:
            raise InputError(f"density={density} must be > 0 (table range {10**self.log_density[0]:.3g}-"
                             f"{10**self.log_density[-1]:.3g} cm^-3)")
        log_n = np.full(self.logT.size, np.log10(n.value))
        self._density_weights("density", log_n[:1])
        return log_n, f"constant density n_e = {n.value:.3g} cm-3"

    # ------------------------------------------------------------------ evaluation
    def _interp_density(self, arr: np.ndarray, log_n: np.ndarray, axis_n: int, axis_T: int) -> np.ndarray:
        """Log–log interpolate ``arr`` along its density axis to ``log_n`` (one value per T).

        Zero in either neighbour gives zero (a geometric mean). NaN densities give NaN.
        """
        finite = np.isfinite(log_n)
        i, w = self._density_weights("density", np.where(finite, log_n, self.log_density[0]))
        arr_m = np.moveaxis(arr, (axis_n, axis_T), (-2, -1))  # (..., n, T)
        t_idx = np.arange(self.logT.size)
        a0 = arr_m[..., i, t_idx]
        a1 = arr_m[..., i + 1, t_idx]
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.where((a0 > 0) & (a1 > 0), a0 ** (1 - w) * a1 ** w, np.where(w == 0, a0, np.where(w == 1, a1, 0.0)))
        out = np.where(finite, out, np.nan)
        return out  # (..., T)

    def _line_plane(self, k: int) -> np.ndarray:
        """Decoded line emissivities at table density index ``k``, (n_lines, n_T) float32."""
        if self._line_eps_full is not None:
            return self._line_eps_full[:, k, :]
        return np.take(self._line_values(np.float32), self._line_index(k))

    def _line_index(self, k: int) -> np.ndarray:
        """Stored codes of the line emissivities at table density index ``k`` as indices into
        :meth:`_line_values`, (n_lines, n_T) uint16 (cached)."""
        if k not in self._line_planes:
            from .io.table_file import code_index, plane_codes

            self._line_planes[k] = code_index(plane_codes(self._line_q, self._line_attrs, k))
        return self._line_planes[k]

    def _line_values(self, dtype) -> np.ndarray:
        """The 65 536 values a stored line-emissivity code stands for (as decoded: float32), as ``dtype``."""
        key = ("line_values", np.dtype(dtype).str)
        if key not in self._cache:
            from .io.table_file import code_values

            self._cache[key] = code_values(self._line_attrs, np.float32).astype(dtype)
        return self._cache[key]

    def line_emissivity(self, log_n: np.ndarray) -> np.ndarray:
        """Line emissivities per unit abundance at n_e(T) = 10**log_n, shape (n_lines, n_T) [erg cm3 s-1].

        Log-log interpolation between the two table densities around n_e at each temperature:
        ``eps0**(1-w) * eps1**w`` where both are > 0, else the node value (w = 0 or 1) or 0.
        Only the table density planes needed are decoded.
        """
        key = ("lines", log_n.tobytes())
        if key not in self._cache:
            finite = np.isfinite(log_n)
            i, w = self._density_weights("density", np.where(finite, log_n, self.log_density[0]))
            out = self._interp_line_values(i, w) if self._line_q is None else self._interp_line_codes(i, w)
            if not finite.all():
                out[:, ~finite] = np.nan
            self._cache[key] = out
        return self._cache[key]

    def _interp_line_values(self, i: np.ndarray, w: np.ndarray) -> np.ndarray:
        """:meth:`line_emissivity` of a table decoded in memory: the powers on every pair of values."""
        planes = {k: self._line_plane(k) for k in np.unique(np.concatenate([i, i + 1]))}
        t = np.arange(self.logT.size)
        a0 = np.empty((self.line_wavelength.size, t.size))
        a1 = np.empty_like(a0)
        for k, plane in planes.items():
            for a, m in ((a0, i == k), (a1, i + 1 == k)):
                if m.all():  # one density plane for every T (e.g. a constant density): plain copy
                    a[...] = plane
                elif m.any():
                    a[:, m] = plane[:, t[m]]
        # geometric interpolation where both neighbours are > 0, evaluated only there (the
        # powers dominate the cost and most lines are zero over much of the T grid)
        out = np.where(w == 0, a0, np.where(w == 1, a1, 0.0))
        r, c = np.nonzero((a0 > 0) & (a1 > 0))
        wc = w[c]
        out[r, c] = a0[r, c] ** (1 - wc) * a1[r, c] ** wc
        return out

    def _interp_line_codes(self, i: np.ndarray, w: np.ndarray) -> np.ndarray:
        """:meth:`line_emissivity` of a lazily read table, computed on the stored codes.

        A code stands for one of 65 536 values, so ``eps**(1-w)`` and ``eps**w`` are evaluated once
        per value and weight (same numpy power on the same float64 numbers as
        :meth:`_interp_line_values`, hence the same result bit for bit) and looked up per line.
        Temperatures sharing a density interval and weight (all of them at a constant density) are
        done together. Between table densities the powers of zero values are set to zero, so a plain
        product gives the 0 of a line that is zero in either plane; at a table density (w = 0 or 1)
        only that plane is decoded when the powers reproduce the values exactly (``x**1 == x``,
        ``x**0 == 1``; checked on all 65 536 values).
        """
        values = self._line_values(np.float64)
        positive = values > 0
        out = np.empty((self.line_wavelength.size, self.logT.size))
        groups: dict = {}
        for t, k_w in enumerate(zip(i.tolist(), w.tolist())):
            groups.setdefault(k_w, []).append(t)
        for (k, wk), cols in groups.items():
            every = len(cols) == self.logT.size  # all temperatures (a constant density): write in place
            sel = slice(None) if every else np.array(cols)
            x0 = values ** np.full(values.size, 1 - wk)
            x1 = values ** np.full(values.size, wk)
            if wk in (0.0, 1.0):
                node, other = (x0, x1) if wk == 0.0 else (x1, x0)
                if np.array_equal(node[positive], values[positive]) and np.all(other[positive] == 1.0):
                    # a0**1 * a1**0 == a0 for every code: the value at the node, whatever the other plane
                    c = self._line_index(k + int(wk))
                    if every:
                        np.take(values, c, out=out)
                    else:
                        out[:, sel] = np.take(values, c[:, sel])
                    continue
            c0, c1 = self._line_index(k)[:, sel], self._line_index(k + 1)[:, sel]
            if 0.0 < wk < 1.0:  # where either value is 0 the result is 0: zero the powers there instead
                p0 = np.take(np.where(positive, x0, 0.0), c0, out=out if every else None)
                p0 *= np.take(np.where(positive, x1, 0.0), c1)
                if not every:
                    out[:, sel] = p0
                continue
            both = np.take(positive, c0) & np.take(positive, c1)
            base = np.take(values, c0) if wk == 0.0 else np.take(values, c1)
            out[:, sel] = np.where(both, np.take(x0, c0) * np.take(x1, c1), base)
        return out

    def continuum(self, log_n: np.ndarray) -> np.ndarray:
        """Per-element continuum ff + fb + 2p at n_e(T), shape (n_el, n_T, n_E) [erg cm3 s-1 keV-1]."""
        key = ("cont", log_n.tobytes())
        if key not in self._cache:
            i, _ = self._density_weights("density", np.where(np.isfinite(log_n), log_n, self.log_density[0]))
            tp_grid = self._tp_planes(np.concatenate([i, i + 1]))  # only the planes the interpolation reads
            tp = self._interp_density(np.moveaxis(tp_grid, 3, 1), log_n, 2, 3)  # (el, E, T)
            self._cache[key] = self._ff + self._fb + np.moveaxis(tp, 1, 2)
        return self._cache[key]

    def continuum_components(self) -> dict:
        """Raw continuum arrays: ``ff``, ``fb`` (n_el, n_T, n_E) and ``2p`` (n_el, n_n, n_T, n_E) [erg cm3 s-1 keV-1]."""
        return {"ff": self._ff, "fb": self._fb, "2p": self._tp}

    def line_emissivity_grid(self) -> np.ndarray:
        """Raw line emissivities (n_lines, n_density, n_T) [erg cm3 s-1] per unit abundance (decodes all)."""
        if self._line_eps_full is None:
            self._line_eps_full = np.stack([self._line_plane(k) for k in range(self.log_density.size)], axis=1)
        return self._line_eps_full


def _default_path() -> pathlib.Path:
    return pathlib.Path(str(importlib.resources.files("synthcorona") / "data" / DEFAULT_TABLE_NAME))


@functools.lru_cache(maxsize=4)
def _load_cached(path: str, mtime_ns: int, size: int) -> EmissivityTable:
    # A table file with a manifest beside it whose SHA-256 of the whole file matches (the embedded table) was
    # verified when the manifest was written (synthcorona.io.table_file.write_manifest): any changed byte
    # changes the SHA-256 and brings back the content-hash check, which is ~0.1 s against ~15 ms.
    manifest = read_manifest(path)
    ds = read_table(path, verify=manifest is None, lazy=PACKED_VARS)
    if manifest is not None and ds.attrs.get("content_hash") != manifest.get("content_hash"):
        raise TableFileError(f"emissivity table {path}: content hash {ds.attrs.get('content_hash')} differs from "
                             f"{manifest.get('content_hash')} recorded in {manifest_path(path)}")
    return EmissivityTable(ds, path)


def load_emissivity(path=None) -> EmissivityTable:
    """Load an emissivity table and verify its content hash and provenance.

    Parameters
    ----------
    path : str or pathlib.Path, optional
        A table built with ``synthcorona build-table`` (e.g. from a full CHIANTI
        install). Default: the file named by the environment variable ``SYNTHCORONA_TABLE``
        if set, else the table embedded in the package (CHIANTI 10.1 composite; see its
        ``provenance`` and the README).

    Raises
    ------
    TableFileError
        Missing, corrupted or foreign file, or a table without CHIANTI provenance.
    """
    env = settings.table_path() if path is None else None
    p = pathlib.Path(path) if path is not None else (env if env is not None else _default_path())
    if not p.is_file():
        if env:
            raise TableFileError(f"{settings.TABLE_ENV}={env}: no such emissivity table file")
        if path is None:
            raise TableFileError(f"the embedded emissivity table {p} is missing from this installation; "
                                 "reinstall synthcorona or build one with 'synthcorona build-table'")
        raise TableFileError(f"emissivity table {p}: no such file")
    st = p.stat()
    table = _load_cached(str(p.resolve()), st.st_mtime_ns, st.st_size)
    for key in REQUIRED_PROVENANCE:
        if not table.provenance.get(key):
            raise TableFileError(f"emissivity table {p} has no '{key}' provenance attribute")
    return table


def resolve_table(table=None, name: str = "table") -> EmissivityTable:
    """The emissivity table of a computation: ``table`` itself if it is an :class:`EmissivityTable`, the file
    it names if it is a path, else (None) the default of :func:`load_emissivity`."""
    if isinstance(table, EmissivityTable):
        return table
    if table is None or isinstance(table, (str, pathlib.PurePath)):
        return load_emissivity(table)
    raise InputError(f"{name}={table!r} is neither an EmissivityTable nor the path of a table file", argument=name)
