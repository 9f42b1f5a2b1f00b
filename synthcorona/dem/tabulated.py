"""A DEM tabulated on a log T grid, from arrays or from a two-column text file."""
from __future__ import annotations

import math
import pathlib

import astropy.units as u
import numpy as np

from ..errors import InputError
from ..validation import as_quantity, check_finite, check_range
from .base import (
    COLUMN_EM_UNIT,
    EM_WEIGHTS_BYTES_PER_NODE,
    LN10,
    VOLUME_EM_UNIT,
    ContinuousDEM,
    as_temperature,
    exp_segment_integral,
    fmt_value,
)

__all__ = ["TabulatedDEM"]


class TabulatedDEM(ContinuousDEM):
    """DEM given as a table of DEM(T) per kelvin.

    Between table nodes log DEM is interpolated linearly in log T (a piecewise
    power law); a segment with a zero end is zero. Outside the tabulated
    temperature range the DEM **is zero** (this defines the model; there is no
    extrapolation). The total EM is the closed-form integral of that
    interpolant.

    Parameters
    ----------
    temperature : Quantity (K), shape (n,)
        Strictly increasing, > 0, n >= 2.
    dem : Quantity (cm^-3 K^-1 or cm^-5 K^-1), shape (..., n)
        DEM per kelvin, finite and >= 0; leading axes form the batch.
    """

    _param_names = ("temperature", "dem")

    def __init__(self, temperature, dem):
        """Validate the table (K; em_unit K^-1, >= 0) and integrate the total EM; see the class docstring."""
        t = as_temperature("temperature", temperature)
        if t.ndim != 1 or t.size < 2:
            raise InputError(f"temperature must be 1-D with at least two values; got shape {t.shape}")
        if not np.all(np.diff(t) > 0):
            raise InputError("temperature must be strictly increasing")
        if not isinstance(dem, u.Quantity):
            as_quantity("dem", dem, VOLUME_EM_UNIT / u.K)
        if dem.unit.is_equivalent(VOLUME_EM_UNIT / u.K):
            unit = VOLUME_EM_UNIT
        elif dem.unit.is_equivalent(COLUMN_EM_UNIT / u.K):
            unit = COLUMN_EM_UNIT
        else:
            raise u.UnitsError(
                f"dem has units '{dem.unit}', which is neither 'cm-3 / K' (volume DEM) nor 'cm-5 / K' (column DEM)"
            )
        d = np.asarray(dem.to_value(unit / u.K), dtype=float)
        if d.ndim < 1 or d.shape[-1] != t.size:
            raise InputError(f"dem must have shape (..., {t.size}) to match temperature; got {d.shape}")
        check_range("dem", d, lo=0.0, unit_label=f"{unit} / K")
        self._xt = np.log10(t)
        with np.errstate(divide="ignore"):
            lnf = np.log(d) + np.log(t) + math.log(LN10)  # ln(dEM/dlog10T); -inf where DEM = 0
        top = np.max(np.where(np.isfinite(lnf), lnf, -np.inf), axis=-1, keepdims=True)
        top = np.where(np.isfinite(top), top, 0.0)
        i0, _ = exp_segment_integral(np.diff(self._xt), lnf[..., :-1] - top, lnf[..., 1:] - top)
        rel_total = i0.sum(axis=-1)
        em = rel_total * np.exp(top[..., 0])
        with np.errstate(divide="ignore"):
            self._lnf = lnf - top - np.log(np.where(rel_total > 0, rel_total, 1.0))[..., None]
        self._setup(em, unit, {})

    @classmethod
    def from_file(cls, path, em_unit=None) -> "TabulatedDEM":
        """Read a DEM table.

        * ``.ecsv``: an astropy table with columns ``temperature`` (K units) and
          ``dem`` (cm^-3 K^-1 or cm^-5 K^-1 units); without those names the first
          two columns are used. Units are required.
        * any other suffix (e.g. ``.txt``, ``.dat``; ``.csv`` comma separated):
          two columns, log10(T / K) and log10(DEM per K), the common layout of
          published DEM tables; ``-inf`` means DEM = 0. Lines starting with ``#``
          are comments. The EM unit comes from a header line ``# em_unit: cm-5``
          (or ``cm-3``) or from the ``em_unit`` argument. Rows may be in
          increasing or decreasing T.
        """
        path = pathlib.Path(path)
        where = f"DEM file {str(path)!r}"
        if not path.is_file():
            raise InputError(f"path={str(path)!r}: file not found")
        if path.suffix.lower() == ".ecsv":
            from astropy.table import QTable

            try:
                tab = QTable.read(path, format="ascii.ecsv")
            except Exception as exc:  # astropy raises many types for malformed ECSV
                raise InputError(f"{where} could not be read as ECSV: {exc}") from None
            names = tab.colnames
            if len(names) < 2:
                raise InputError(f"{where} needs two columns (temperature, dem); found {names}")
            tcol, dcol = ("temperature", "dem") if {"temperature", "dem"} <= set(names) else names[:2]
            temp, dem = tab[tcol], tab[dcol]
            if not isinstance(temp, u.Quantity) or not isinstance(dem, u.Quantity):
                raise u.UnitsError(f"{where}: columns {tcol!r} and {dcol!r} must carry units (K and cm-3/K or cm-5/K)")
            return cls(temp, dem)
        header_unit = None
        try:
            text = path.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"{where} could not be read: {exc}") from None
        for line in text.splitlines():
            s = line.strip()
            if s.startswith("#"):
                key, _, val = s[1:].partition(":")
                if key.strip().lower() == "em_unit":
                    header_unit = val.strip()
        unit_text = em_unit if em_unit is not None else header_unit
        if unit_text is None:
            raise InputError(
                f"{where} has no '# em_unit:' header line; pass em_unit='cm-3' (volume EM) or 'cm-5' (column EM)"
            )
        try:
            unit = u.Unit(unit_text)
        except (ValueError, TypeError):
            raise InputError(f"em_unit={unit_text!r} is not a unit; use 'cm-3' or 'cm-5'") from None
        if not (unit.is_equivalent(VOLUME_EM_UNIT) or unit.is_equivalent(COLUMN_EM_UNIT)):
            raise u.UnitsError(f"em_unit='{unit}' is neither 'cm-3' (volume EM) nor 'cm-5' (column EM)")
        if em_unit is not None and header_unit is not None and u.Unit(header_unit) != unit:
            raise InputError(f"em_unit={em_unit!r} contradicts the file header '# em_unit: {header_unit}' in {where}")
        try:
            data = np.loadtxt(path, comments="#", delimiter="," if path.suffix.lower() == ".csv" else None, ndmin=2)
        except ValueError as exc:
            raise InputError(f"{where}: expected two numeric columns log10(T/K), log10(DEM per K): {exc}") from None
        if data.shape[1] != 2 or data.shape[0] < 2:
            raise InputError(f"{where}: expected at least two rows of two columns (log10 T, log10 DEM); got shape {data.shape}")
        logt, logd = data[:, 0], data[:, 1]
        check_finite(f"{where}: log10 T column", logt)
        if np.any(np.isnan(logd)) or np.any(logd == np.inf):
            raise InputError(f"{where}: log10 DEM column contains NaN or +inf (use -inf for DEM = 0)")
        if np.all(np.diff(logt) < 0):
            logt, logd = logt[::-1], logd[::-1]
        with np.errstate(over="ignore"):
            return cls(10.0 ** logt * u.K, 10.0 ** logd * (unit / u.K))

    @property
    def temperature(self) -> u.Quantity:
        """Tabulated temperatures (K)."""
        return 10.0 ** self._xt * u.K

    def _rebroadcast(self, shape):
        """Broadcast the normalised log density table to a new batch shape."""
        self._lnf = np.broadcast_to(self._lnf, tuple(shape) + (self._xt.size,))

    def _take_at(self, idx, shape):
        """Batch members ``idx`` with their rows of the normalised log density table."""
        new = super()._take_at(idx, shape)
        new._lnf = np.broadcast_to(self._lnf, tuple(shape) + (self._xt.size,))[idx]
        return new

    def em_weights_nbytes(self, n_nodes: int) -> int:
        """Work memory of :meth:`em_weights` per DEM: the cell integrals run over table and grid nodes together."""
        return EM_WEIGHTS_BYTES_PER_NODE * (int(n_nodes) + self._xt.size)

    def _log_density_at(self, x):
        """ln(dEM/dlog10T per unit EM) at log10 T values ``x`` (any shape): batch + x.shape."""
        xt, lnf = self._xt, self._lnf
        k = np.clip(np.searchsorted(xt, x, side="right") - 1, 0, xt.size - 2)
        t = (x - xt[k]) / (xt[k + 1] - xt[k])
        a, b = lnf[..., k], lnf[..., k + 1]
        both = np.isfinite(a) & np.isfinite(b)
        with np.errstate(invalid="ignore"):
            mid = np.where(both, a + (b - a) * t, -np.inf)
        val = np.where(t == 0, a, np.where(t == 1, b, mid))
        inside = (x >= xt[0]) & (x <= xt[-1])
        return np.where(inside, val, -np.inf)

    def _density(self, t):
        """dEM/dT per unit EM (K^-1) from the log-log interpolated table; zero outside it."""
        return np.exp(self._log_density_at(np.log10(t))) / (t * LN10)

    def _cell_integrals(self, x):
        """Closed-form integrals over sub-intervals bounded by table and grid nodes (exponential in log10 T on each), summed per grid cell."""
        xt = self._xt
        # Sub-intervals bounded by table nodes and grid nodes inside the table range.
        b = np.unique(np.concatenate([xt, x[(x > xt[0]) & (x < xt[-1])]]))
        lo, hi = b[:-1], b[1:]
        mid = 0.5 * (lo + hi)
        k = np.clip(np.searchsorted(xt, mid) - 1, 0, xt.size - 2)
        fa, fb = self._lnf[..., k], self._lnf[..., k + 1]
        seg = xt[k + 1] - xt[k]
        both = np.isfinite(fa) & np.isfinite(fb)
        with np.errstate(invalid="ignore"):
            la = np.where(both, fa + (fb - fa) * (lo - xt[k]) / seg, -np.inf)
            lb = np.where(both, fa + (fb - fa) * (hi - xt[k]) / seg, -np.inf)
        i0, i1 = exp_segment_integral(hi - lo, la, lb)
        cell = np.searchsorted(x, mid) - 1
        ok = (cell >= 0) & (cell <= x.size - 2)
        dx = np.diff(x)
        c = np.where(ok, cell, 0)
        right = (i1 + (lo - x[c]) * i0) / dx[c]
        onehot = np.zeros((lo.size, x.size - 1))
        onehot[np.nonzero(ok)[0], cell[ok]] = 1.0
        return i0 @ onehot, right @ onehot

    def _describe(self, index):
        """Tabulated temperature range, for error messages."""
        return (f"TabulatedDEM(temperature={fmt_value(10 ** self._xt[0])} to {fmt_value(10 ** self._xt[-1])} K, "
                f"dem given per K)")
