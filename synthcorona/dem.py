"""Differential emission measure (DEM) models, vectorised over batches of DEMs.

Conventions
-----------
* The emission measure is ``EM = integral n_e n_H dV`` (volume EM, cm^-3) or
  ``integral n_e n_H dh`` (column EM, cm^-5). Every model carries the unit the
  user gave (converted to exactly ``cm-3`` or ``cm-5``) through to its outputs.
* ``DEM(T) = dEM/dT`` in ``em_unit / K`` (per kelvin). The density per unit
  log10 T is ``dEM/dlog10T = ln(10) T DEM(T)``.
* Parameters may be numpy arrays; all parameters of a model broadcast together
  to the model's ``batch_shape``, so one object holds many DEMs (e.g. 10,000
  Gaussian DEMs from a sampler) and every method is vectorised over the batch.

Emission-measure weights on a log T grid
----------------------------------------
:meth:`DEM.em_weights` gives, for a strictly increasing grid ``x_i = log10 T_i``,
weights ``w_i`` (in ``em_unit``) such that ``sum_i w_i K(T_i)`` approximates
``integral DEM(T) K(T) dT`` for a kernel ``K`` known only on the grid
(emissivities). The rule is the same for every model:

    w_i = integral f(x) phi_i(x) dx,

where ``f = dEM/dlog10T`` and ``phi_i`` are the piecewise-linear "hat" functions
of the grid (1 at ``x_i``, 0 at the neighbouring nodes). Hence ``sum_i w_i K_i``
is the **exact** integral of the DEM against the kernel interpolated linearly in
log T between nodes. Consequences:

* an isothermal component puts its EM on the two neighbouring nodes with
  weights linear in log T (exactly one node if its temperature is on a node,
  to within 1e-6 of the cell width);
* ``sum_i w_i`` equals the EM inside the grid exactly, and the first moment in
  log T is preserved exactly (``sum w_i x_i = integral f x dx``);
* for a smooth DEM it agrees with the trapezoid rule in log T (DEM per log T
  at the nodes times the step, half weight at the end nodes) to second order in
  the step, but it stays exact for kernels linear in log T when the DEM is
  narrower than a grid cell or has a sharp cut-off between nodes (the trapezoid
  rule misplaces such EM by up to half a cell).

The integrals are done in closed form for each model (normal CDF for the
Gaussian, exponentials in log T for power laws and tabulated DEMs). A
continuous DEM with more than 1e-6 of its (non-zero) total EM outside the grid
raises :class:`~synthcorona.errors.InputError`: EM is never dropped silently.
"""
from __future__ import annotations

import copy
import math
import pathlib

import astropy.units as u
import numpy as np
from scipy.special import erfc

from .constants import DEFAULT_LOGT_GRID
from .errors import InputError
from .validation import as_quantity, check_finite, check_positive, check_range

__all__ = [
    "DEFAULT_LOGT_GRID",
    "DEM",
    "IsothermalDEM",
    "GaussianDEM",
    "MultiComponentDEM",
    "PowerLawDEM",
    "TabulatedDEM",
]

_LN10 = math.log(10.0)
_SQRT_HALF = math.sqrt(0.5)
_INV_SQRT_2PI = 1.0 / math.sqrt(2.0 * math.pi)
#: Fraction of total EM allowed outside the grid before em_weights refuses.
OUTSIDE_TOLERANCE = 1e-6
#: An isothermal log T within this fraction of a cell width of a node is put on the node.
SNAP_TOLERANCE = 1e-6

_VOLUME = u.Unit("cm-3")
_COLUMN = u.Unit("cm-5")


# --------------------------------------------------------------------------- helpers
def _as_em(name: str, value) -> tuple[np.ndarray, u.UnitBase]:
    """Validate an emission measure: Quantity in cm^-3 or cm^-5 units, finite, >= 0.

    Returns the values converted to exactly ``cm-3`` or ``cm-5`` and that unit.
    """
    if not isinstance(value, u.Quantity):
        as_quantity(name, value, _VOLUME)  # raises the standard "has no units" UnitsError
    if value.unit.is_equivalent(_VOLUME):
        unit = _VOLUME
    elif value.unit.is_equivalent(_COLUMN):
        unit = _COLUMN
    else:
        raise u.UnitsError(
            f"{name} has units '{value.unit}', which is neither a volume emission measure "
            f"(convertible to 'cm-3') nor a column emission measure (convertible to 'cm-5')"
        )
    arr = np.asarray(value.to_value(unit), dtype=float)
    check_range(name, arr, lo=0.0, unit_label=str(unit))
    return arr, unit


def _as_plain(name: str, value, unit_label: str = "") -> np.ndarray:
    """A plain float array (numbers or dimensionless Quantity); named errors otherwise."""
    if isinstance(value, u.Quantity):
        if not value.unit.is_equivalent(u.dimensionless_unscaled):
            raise u.UnitsError(
                f"{name} is a plain number{(' in ' + unit_label) if unit_label else ''}; got units '{value.unit}'"
            )
        value = value.to_value(u.dimensionless_unscaled)
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name}={value!r} is not a number") from None
    check_finite(name, arr)
    return arr


def _as_temperature(name: str, value) -> np.ndarray:
    """Temperature Quantity -> float array in K (finite, > 0)."""
    t = as_quantity(name, value, u.K)
    arr = np.asarray(t.value, dtype=float)
    check_positive(name, arr, unit_label="K")
    return arr


def _check_grid(logT_grid) -> np.ndarray:
    """Validate a log10(T/K) grid: 1-D, >= 2 finite nodes, strictly increasing."""
    name = "logT_grid"
    if isinstance(logT_grid, u.Quantity):
        if not logT_grid.unit.is_equivalent(u.dimensionless_unscaled):
            raise u.UnitsError(f"{name} holds log10(T/K) as plain numbers; got units '{logT_grid.unit}'")
        logT_grid = logT_grid.to_value(u.dimensionless_unscaled)
    x = np.asarray(logT_grid, dtype=float)
    if x.ndim != 1 or x.size < 2:
        raise InputError(f"{name} must be a 1-D array of at least two log10(T/K) values; got shape {x.shape}")
    check_finite(name, x)
    if not np.all(np.diff(x) > 0):
        raise InputError(f"{name} must be strictly increasing (log10 T/K); got {x[:4]}...")
    return x


def _trailing(a: np.ndarray, ndim: int) -> np.ndarray:
    """``a`` with ``ndim`` trailing singleton axes (batch params against a T array)."""
    return a.reshape(a.shape + (1,) * ndim)


def _exp_segment(d, lnfa, lnfb):
    """Integrals of an exponential on [0, d] given its logs at the ends.

    For ``f(s) = exp(lnfa + (lnfb - lnfa) s / d)`` returns
    ``I0 = integral_0^d f ds`` and ``I1 = integral_0^d s f ds`` (closed form;
    series for |lnfb - lnfa| < 1e-3 to avoid cancellation). A segment with a
    -inf end (zero value) is zero throughout.
    """
    d, lnfa, lnfb = np.broadcast_arrays(np.asarray(d, float), np.asarray(lnfa, float), np.asarray(lnfb, float))
    valid = np.isfinite(lnfa) & np.isfinite(lnfb)
    a = np.where(valid, lnfa, 0.0)
    b = np.where(valid, lnfb, 0.0)
    L = b - a
    small = np.abs(L) < 1e-3
    Ls = np.where(small, 1.0, L)
    fa, fb = np.exp(a), np.exp(b)
    i0_big = d * (fb - fa) / Ls
    i0 = np.where(small, d * fa * (1.0 + L / 2.0 + L * L / 6.0), i0_big)
    i1 = np.where(small, d * d * fa * (0.5 + L / 3.0 + L * L / 8.0), d * (fb * d - i0_big) / Ls)
    return np.where(valid, i0, 0.0), np.where(valid, i1, 0.0)


def _fmt(v: float) -> str:
    """Four significant digits, for error messages and reprs."""
    return f"{v:.4g}"


#: DEMs per block in GaussianDEM.em_weights (work arrays of a block stay in the CPU cache).
GAUSSIAN_BLOCK = 256


class _GaussianWork:
    """Preallocated work arrays for :func:`_gaussian_cells` (``m`` DEMs x ``n`` nodes)."""

    def __init__(self, m: int, n: int):
        self.z = np.empty((m, n))
        self.a = np.empty((m, n))
        self.s = np.empty((m, n))
        self.t = np.empty((m, n - 1))
        self.neg = np.empty((m, n), dtype=bool)


def _gaussian_cells(x, mu, sg, e, first, work=None):
    """Cell integrals of a normal density in log10 T, per unit EM, written into ``e`` and ``first``.

    For each DEM (rows of ``mu``, ``sg``; 1-D) and cell [x_i, x_i+1] of the grid ``x``:
    ``e`` = EM in the cell (difference of normal tail probabilities, via erfc, on one side of
    the peak; one minus both tails for the cell containing the peak) and ``first`` = the share
    of the right node, integral (x - x_i)/(x_i+1 - x_i) f dx, in closed form from the normal
    density at the cell ends (Abramowitz & Stegun 1964, Handbook of Mathematical Functions,
    26.2.2 and 7.1.2). |z| is capped at 37: beyond it both tail and density are < 1e-298
    (and clear of slow subnormal arithmetic). One erfc and one exp per node, in place.
    """
    k, n = mu.size, x.size
    if work is None:
        work = _GaussianWork(k, n)
    z, a, s, t, neg = work.z[:k], work.a[:k], work.s[:k], work.t[:k], work.neg[:k]
    muc, sgc = mu[:, None], sg[:, None]
    np.subtract(x, muc, out=z)
    z /= sgc
    np.abs(z, out=a)
    np.minimum(a, 37.0, out=a)
    np.multiply(a, _SQRT_HALF, out=s)
    erfc(s, out=s)
    s *= 0.5  # tail probability Phi(-|z|), precise in both tails
    a *= a
    a *= -0.5
    np.exp(a, out=a)  # sqrt(2 pi) * normal density
    sl, sr = s[:, :-1], s[:, 1:]
    np.subtract(sl, sr, out=e)
    np.abs(e, out=e)
    # the cell containing the peak (z <= 0 at its left node, > 0 at its right; z increases along x)
    np.less_equal(z, 0.0, out=neg)
    cnt = np.count_nonzero(neg, axis=1)
    rows = np.flatnonzero((cnt >= 1) & (cnt <= n - 1))
    cell = cnt[rows] - 1
    e[rows, cell] = 1.0 - sl[rows, cell] - sr[rows, cell]
    np.subtract(a[:, 1:], a[:, :-1], out=first)
    first *= sgc * -_INV_SQRT_2PI
    np.subtract(muc, x[:-1], out=t)
    t *= e
    first += t  # integral over the cell of (x - x_i) f dx
    first /= np.diff(x)


# --------------------------------------------------------------------------- base
class DEM:
    """Base class of all DEM models (not instantiated directly).

    Attributes
    ----------
    batch_shape : tuple
        Shape of the batch of DEMs held by the object (``()`` for one DEM).
    em_unit : astropy unit
        ``cm-3`` (volume EM) or ``cm-5`` (column EM).
    total_em : Quantity
        Total emission measure over all T, shape ``batch_shape``, in ``em_unit``.
    """

    _em: np.ndarray
    _unit: u.UnitBase
    _params: dict

    def _setup(self, em: np.ndarray, unit, params: dict[str, np.ndarray]):
        """Broadcast EM and parameters to a common batch shape (named error if impossible)."""
        arrays = {"total_em": em, **params}
        try:
            shape = np.broadcast_shapes(*[np.shape(v) for v in arrays.values()])
        except ValueError:
            shapes = ", ".join(f"{k}: {np.shape(v)}" for k, v in arrays.items())
            raise InputError(f"{type(self).__name__} parameters do not broadcast to one batch shape ({shapes})") from None
        self._unit = unit
        self._em = np.broadcast_to(np.asarray(em, float), shape)
        self._params = {k: np.broadcast_to(np.asarray(v, float), shape) for k, v in params.items()}

    # -- public properties ------------------------------------------------------------
    @property
    def batch_shape(self) -> tuple:
        """Shape of the batch of DEMs (``()`` for a single DEM)."""
        return tuple(self._em.shape)

    @property
    def em_unit(self) -> u.UnitBase:
        """``cm-3`` (volume emission measure) or ``cm-5`` (column emission measure)."""
        return self._unit

    @property
    def total_em(self) -> u.Quantity:
        """Total emission measure over all temperatures, shape ``batch_shape``, in ``em_unit``."""
        return np.array(self._em) * self._unit

    # -- evaluation -------------------------------------------------------------------
    def __call__(self, temperature) -> u.Quantity:
        """DEM(T) = dEM/dT at ``temperature`` (Quantity, K), in ``em_unit / K``.

        Result shape ``batch_shape + temperature.shape``. Isothermal (delta
        function) components have no finite density and contribute 0 here; use
        :meth:`em_weights` for integrals.
        """
        t = _as_temperature("temperature", temperature)
        dens = self._density(t)  # per unit EM, per K
        return dens * _trailing(self._em, t.ndim) * (self._unit / u.K)

    def em_weights(self, logT_grid) -> u.Quantity:
        """EM assigned to each node of a log10(T/K) grid, shape ``batch_shape + (n_T,)``, in ``em_unit``.

        ``sum_i w_i K(T_i)`` is the exact integral of the DEM against the kernel
        ``K`` interpolated linearly in log10 T between nodes (hat-function
        projection; see the module docstring). ``sum_i w_i`` is the EM inside
        the grid. ``logT_grid`` must be strictly increasing (uniform or not).

        Raises
        ------
        InputError
            If a continuous DEM has more than 1e-6 of its total EM outside the
            grid, or an isothermal temperature lies outside it.
        """
        x = _check_grid(logT_grid)
        frac = self._node_fractions(x)
        frac *= self._em[..., None]
        return u.Quantity(frac, self._unit, copy=False)

    # -- combination ------------------------------------------------------------------
    def scaled(self, factor) -> "DEM":
        """A copy with every EM multiplied by ``factor`` (dimensionless, finite, >= 0).

        ``factor`` may be an array; it broadcasts with ``batch_shape``.
        """
        f = _as_plain("factor", factor)
        check_range("factor", f, lo=0.0)
        try:
            shape = np.broadcast_shapes(self.batch_shape, f.shape)
        except ValueError:
            raise InputError(f"factor of shape {f.shape} does not broadcast with batch_shape {self.batch_shape}") from None
        new = copy.copy(self)
        new._em = np.broadcast_to(self._em * f, shape)
        new._rebroadcast(shape)
        return new

    def __add__(self, other):
        """``dem1 + dem2`` -> :class:`MultiComponentDEM` of both (same em_unit required)."""
        if isinstance(other, DEM):
            return MultiComponentDEM([self, other])
        return NotImplemented

    def __radd__(self, other):
        """Right addition; ``0 + dem`` returns ``dem`` so that ``sum([dem1, dem2])`` works."""
        if isinstance(other, (int, float)) and other == 0:  # sum([dem1, dem2])
            return self
        if isinstance(other, DEM):
            return MultiComponentDEM([other, self])
        return NotImplemented

    def __repr__(self) -> str:
        """Model name, parameters and total EM (batch: shape and unit only)."""
        if self.batch_shape == ():
            return f"{self._describe(())}, total_em={_fmt(float(self._em))} {self._unit}"
        return f"{type(self).__name__}(batch_shape={self.batch_shape}, em_unit={self._unit})"

    # -- hooks for subclasses ---------------------------------------------------------
    def _rebroadcast(self, shape):
        """Broadcast the stored parameters to a new batch shape (after :meth:`scaled`)."""
        self._params = {k: np.broadcast_to(v, shape) for k, v in self._params.items()}

    def _density(self, t: np.ndarray) -> np.ndarray:
        """dEM/dT per unit total EM (K^-1) at temperatures ``t`` (K); shape batch + t.shape."""
        raise NotImplementedError

    def _node_fractions(self, x: np.ndarray) -> np.ndarray:
        """Fraction of the total EM assigned to each node of the log10 T grid ``x``; batch + (n,)."""
        raise NotImplementedError

    def _describe(self, index) -> str:
        """Model name and parameters of batch member ``index``, for error messages."""
        return type(self).__name__


class _ContinuousDEM(DEM):
    """A DEM with a density; weights from per-cell integrals (E, R) of each model."""

    def _cell_integrals(self, x: np.ndarray):
        """Per unit total EM, for each cell [x_i, x_i+1]: E_i = EM in the cell and
        R_i = integral (x - x_i)/(x_i+1 - x_i) f dx (the share of the right node).
        Shapes ``batch_shape + (n - 1,)``."""
        raise NotImplementedError

    def _node_fractions(self, x):
        """Hat-function weights from the per-cell integrals; refuses if EM lies outside ``x``."""
        e, r = self._cell_integrals(x)
        np.clip(r, 0.0, e, out=r)
        w = np.empty(e.shape[:-1] + (x.size,))
        w[..., -1] = 0.0
        w[..., :-1] = e
        w[..., :-1] -= r
        w[..., 1:] += r
        self._refuse_outside(x, 1.0 - e.sum(axis=-1))
        return w

    def _refuse_outside(self, x, outside):
        """Raise InputError naming the worst DEM if more than OUTSIDE_TOLERANCE of its EM lies outside ``x``."""
        bad = (outside > OUTSIDE_TOLERANCE) & (self._em > 0)
        if np.any(bad):
            idx = np.unravel_index(np.argmax(np.where(bad, outside, -np.inf)), bad.shape)
            n_bad = int(np.count_nonzero(bad))
            where = f" (batch index {tuple(int(i) for i in idx)}; {n_bad} DEMs affected)" if bad.ndim else ""
            raise InputError(
                f"{self._describe(idx)} has {outside[idx]:.3g} of its total EM outside logT_grid "
                f"[{x[0]:g}, {x[-1]:g}] (T = {10 ** x[0]:.3g} to {10 ** x[-1]:.3g} K){where}; "
                f"extend logT_grid or change {', '.join(self._param_names)} (at most {OUTSIDE_TOLERANCE:g} "
                "of the EM may lie outside the grid)"
            )

    _param_names: tuple = ()


# --------------------------------------------------------------------------- models
class IsothermalDEM(DEM):
    """Isothermal plasma: all EM at one temperature, DEM(T) = EM delta(T - T0).

    Parameters
    ----------
    temperature : Quantity (K)
        T0, finite and > 0; array for a batch.
    total_em : Quantity (cm^-3 or cm^-5)
        Emission measure, finite and >= 0.

    Notes
    -----
    On a log T grid the EM goes to the two nodes around log10 T0 with weights
    linear in log T (``(1 - t, t)`` with ``t`` the fractional position in the
    cell), so a kernel is linearly interpolated in log T; a T0 within 1e-6 of
    the cell width of a node is put entirely on that node. ``dem(T)`` is 0
    (a delta function has no finite density).
    """

    def __init__(self, temperature, total_em):
        """Validate T0 (K, > 0) and EM (cm^-3 or cm^-5, >= 0); see the class docstring."""
        t0 = _as_temperature("temperature", temperature)
        em, unit = _as_em("total_em", total_em)
        self._setup(em, unit, {"logT": np.log10(t0)})

    @property
    def temperature(self) -> u.Quantity:
        """T0 in K, shape ``batch_shape``."""
        return 10.0 ** np.array(self._params["logT"]) * u.K

    def _density(self, t):
        """Zero: a delta function has no finite density (K^-1)."""
        return np.zeros(self.batch_shape + t.shape)

    def _node_fractions(self, x):
        """EM fractions on the two nodes around log10 T0, linear in log T (snapped to a node within 1e-6 of a cell)."""
        x0 = self._params["logT"]
        dx = np.diff(x)
        lo_tol, hi_tol = SNAP_TOLERANCE * dx[0], SNAP_TOLERANCE * dx[-1]
        out = (x0 < x[0] - lo_tol) | (x0 > x[-1] + hi_tol)
        if np.any(out):
            bad = 10.0 ** x0[out]
            raise InputError(
                f"temperature={_fmt(bad.flat[0])} K{' (and others)' if bad.size > 1 else ''} "
                f"(log10 T = {np.log10(bad.flat[0]):.4g}) is outside the logT_grid range "
                f"[{10 ** x[0]:.4g}, {10 ** x[-1]:.4g}] K (log10 T = [{x[0]:g}, {x[-1]:g}])"
            )
        x0 = np.clip(x0, x[0], x[-1])
        i = np.clip(np.searchsorted(x, x0, side="right") - 1, 0, x.size - 2)
        t = (x0 - x[i]) / dx[i]
        t = np.where(t < SNAP_TOLERANCE, 0.0, np.where(t > 1.0 - SNAP_TOLERANCE, 1.0, t))
        w = np.zeros(self.batch_shape + (x.size,))
        np.put_along_axis(w, i[..., None], (1.0 - t)[..., None], axis=-1)
        np.put_along_axis(w, (i + 1)[..., None], t[..., None], axis=-1)
        return w

    def _describe(self, index):
        """'IsothermalDEM(temperature=... K)' of batch member ``index``."""
        return f"IsothermalDEM(temperature={_fmt(10 ** self._params['logT'][index])} K)"


class GaussianDEM(_ContinuousDEM):
    """DEM Gaussian in log10 T, normalised to ``total_em`` over all T.

    dEM/dlog10T = EM / (sqrt(2 pi) sigma) exp(-(log10 T - mu)^2 / (2 sigma^2)),
    i.e. DEM(T) = dEM/dT = that / (T ln 10).

    Parameters
    ----------
    peak_logT : float or array
        mu, log10 of the peak temperature in K, in [1, 10].
    width_logT : float or array
        sigma in dex (log10 K), > 0.
    total_em : Quantity (cm^-3 or cm^-5)
        Total EM over all T, finite and >= 0.

    Notes
    -----
    Weights use the normal CDF (closed form, exact for any width).
    """

    _param_names = ("peak_logT", "width_logT")

    def __init__(self, peak_logT, width_logT, total_em):
        """Validate mu (log10 K, in [1, 10]), sigma (dex, > 0) and EM; see the class docstring."""
        mu = _as_plain("peak_logT", peak_logT, "log10 K")
        check_range("peak_logT", mu, lo=1.0, hi=10.0, unit_label="(log10 K)")
        sigma = _as_plain("width_logT", width_logT, "dex")
        check_positive("width_logT", sigma, unit_label="dex")
        em, unit = _as_em("total_em", total_em)
        self._setup(em, unit, {"mu": mu, "sigma": sigma})

    @property
    def peak_logT(self) -> np.ndarray:
        """mu (log10 K), shape ``batch_shape``."""
        return np.array(self._params["mu"])

    @property
    def width_logT(self) -> np.ndarray:
        """sigma (dex), shape ``batch_shape``."""
        return np.array(self._params["sigma"])

    def _density(self, t):
        """dEM/dT per unit EM (K^-1): normal density in log10 T divided by T ln 10."""
        mu = _trailing(self._params["mu"], t.ndim)
        sg = _trailing(self._params["sigma"], t.ndim)
        z = (np.log10(t) - mu) / sg
        return np.exp(-0.5 * z * z) * _INV_SQRT_2PI / (sg * t * _LN10)

    def _cell_integrals(self, x):
        """Closed-form cell integrals of the normal density (E and R as in _ContinuousDEM), whole batch at once."""
        mu = self._params["mu"].reshape(-1)
        sg = self._params["sigma"].reshape(-1)
        e = np.empty((mu.size, x.size - 1))
        r = np.empty_like(e)
        _gaussian_cells(x, mu, sg, e, r)
        shape = self.batch_shape + (x.size - 1,)
        return e.reshape(shape), r.reshape(shape)

    def _node_fractions(self, x):
        """Hat-function weights, computed in blocks of GAUSSIAN_BLOCK DEMs so that the work arrays stay in
        the CPU cache (same arithmetic as _ContinuousDEM._node_fractions, bit for bit)."""
        mu = self._params["mu"].reshape(-1)
        sg = self._params["sigma"].reshape(-1)
        n_rows, n = mu.size, x.size
        w = np.empty((n_rows, n))
        outside = np.empty(n_rows)
        m = max(1, min(GAUSSIAN_BLOCK, n_rows))
        e_buf, r_buf = np.empty((m, n - 1)), np.empty((m, n - 1))
        work = _GaussianWork(m, n)
        for i0 in range(0, n_rows, m):
            i1 = min(i0 + m, n_rows)
            e, r = e_buf[: i1 - i0], r_buf[: i1 - i0]
            _gaussian_cells(x, mu[i0:i1], sg[i0:i1], e, r, work)
            np.maximum(r, 0.0, out=r)  # = np.clip(r, 0, e)
            np.minimum(r, e, out=r)
            wc = w[i0:i1]
            wc[:, -1] = 0.0
            np.subtract(e, r, out=wc[:, :-1])
            wc[:, 1:] += r
            np.sum(e, axis=-1, out=outside[i0:i1])
        np.subtract(1.0, outside, out=outside)
        self._refuse_outside(x, outside.reshape(self.batch_shape))
        return w.reshape(self.batch_shape + (n,))

    def _describe(self, index):
        """'GaussianDEM(peak_logT=..., width_logT=...)' of batch member ``index``."""
        return (f"GaussianDEM(peak_logT={_fmt(self._params['mu'][index])}, "
                f"width_logT={_fmt(self._params['sigma'][index])})")


class PowerLawDEM(_ContinuousDEM):
    """Power-law DEM of the loop type, dEM/dlog10T proportional to T^slope.

    The slope is defined **per unit log10 T**: dEM/dlog10T = C T^slope, i.e.
    DEM(T) = dEM/dT = C T^(slope - 1) / ln 10, between ``min_temperature`` and
    ``peak_temperature``, zero outside, and normalised so that its integral is
    ``total_em``. ``slope = 1.5`` is the classic EM distribution of static,
    conductively dominated coronal loops below their apex temperature (Jordan
    1980, A&A 86, 355; Antiochos & Noci 1986, ApJ 301, 440); in the per-kelvin
    convention that is DEM proportional to T^0.5.

    Parameters
    ----------
    slope : float or array
        Exponent of dEM/dlog10T in T (finite; any sign).
    peak_temperature : Quantity (K)
        Upper cut-off (loop-top temperature), > min_temperature.
    total_em : Quantity (cm^-3 or cm^-5)
        Total EM, finite and >= 0.
    min_temperature : Quantity (K), default 1e5 K
        Lower cut-off.

    Notes
    -----
    Normalisation and weights are closed-form integrals of exponentials in log T.
    """

    _param_names = ("slope", "peak_temperature", "min_temperature")

    def __init__(self, slope, peak_temperature, total_em, min_temperature=1e5 * u.K):
        """Validate slope (finite), cut-off temperatures (K, peak > min) and EM; see the class docstring."""
        s = _as_plain("slope", slope)
        tp = _as_temperature("peak_temperature", peak_temperature)
        tm = _as_temperature("min_temperature", min_temperature)
        em, unit = _as_em("total_em", total_em)
        xp, xm = np.log10(tp), np.log10(tm)
        if np.any(np.broadcast_to(xp <= xm, np.broadcast_shapes(xp.shape, xm.shape))):
            bad = np.broadcast_arrays(tp, tm)
            k = np.argmax(np.ravel(bad[0] <= bad[1]))
            raise InputError(
                f"peak_temperature={_fmt(np.ravel(bad[0])[k])} K must be greater than "
                f"min_temperature={_fmt(np.ravel(bad[1])[k])} K"
            )
        self._setup(em, unit, {"slope": s, "xp": xp, "xm": xm})

    @property
    def slope(self) -> np.ndarray:
        """Exponent of dEM/dlog10T in T, shape ``batch_shape``."""
        return np.array(self._params["slope"])

    @property
    def peak_temperature(self) -> u.Quantity:
        """Upper cut-off temperature (K), shape ``batch_shape``."""
        return 10.0 ** np.array(self._params["xp"]) * u.K

    @property
    def min_temperature(self) -> u.Quantity:
        """Lower cut-off temperature (K), shape ``batch_shape``."""
        return 10.0 ** np.array(self._params["xm"]) * u.K

    def _shape_params(self):
        """g = slope ln 10, reference point (the end where the density is largest) and norm."""
        g = self._params["slope"] * _LN10
        xp, xm = self._params["xp"], self._params["xm"]
        xref = np.where(g >= 0, xp, xm)
        norm, _ = _exp_segment(xp - xm, g * (xm - xref), g * (xp - xref))
        return g, xp, xm, xref, norm

    def _density(self, t):
        """dEM/dT per unit EM (K^-1): normalised T^slope per log10 T divided by T ln 10, zero outside [min, peak]."""
        g, xp, xm, xref, norm = (_trailing(a, t.ndim) for a in self._shape_params())
        x = np.log10(t)
        inside = (x >= xm) & (x <= xp)
        f = np.exp(np.where(inside, g * (x - xref), -np.inf)) / norm
        return f / (t * _LN10)

    def _cell_integrals(self, x):
        """Closed-form integrals of the exponential (in log10 T) density over each cell clipped to [min, peak]."""
        g, xp, xm, xref, norm = (a[..., None] for a in self._shape_params())
        lo = np.clip(x[:-1], xm, xp)
        hi = np.clip(x[1:], xm, xp)
        i0, i1 = _exp_segment(hi - lo, g * (lo - xref), g * (hi - xref))
        dx = np.diff(x)
        return i0 / norm, (i1 + (lo - x[:-1]) * i0) / (norm * dx)

    def _describe(self, index):
        """'PowerLawDEM(slope=..., peak_temperature=..., min_temperature=...)' of batch member ``index``."""
        p = self._params
        return (f"PowerLawDEM(slope={_fmt(p['slope'][index])}, peak_temperature={_fmt(10 ** p['xp'][index])} K, "
                f"min_temperature={_fmt(10 ** p['xm'][index])} K)")


class TabulatedDEM(_ContinuousDEM):
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
        t = _as_temperature("temperature", temperature)
        if t.ndim != 1 or t.size < 2:
            raise InputError(f"temperature must be 1-D with at least two values; got shape {t.shape}")
        if not np.all(np.diff(t) > 0):
            raise InputError("temperature must be strictly increasing")
        if not isinstance(dem, u.Quantity):
            as_quantity("dem", dem, _VOLUME / u.K)
        if dem.unit.is_equivalent(_VOLUME / u.K):
            unit = _VOLUME
        elif dem.unit.is_equivalent(_COLUMN / u.K):
            unit = _COLUMN
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
            lnf = np.log(d) + np.log(t) + math.log(_LN10)  # ln(dEM/dlog10T); -inf where DEM = 0
        top = np.max(np.where(np.isfinite(lnf), lnf, -np.inf), axis=-1, keepdims=True)
        top = np.where(np.isfinite(top), top, 0.0)
        i0, _ = _exp_segment(np.diff(self._xt), lnf[..., :-1] - top, lnf[..., 1:] - top)
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
        if not (unit.is_equivalent(_VOLUME) or unit.is_equivalent(_COLUMN)):
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
        return np.exp(self._log_density_at(np.log10(t))) / (t * _LN10)

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
        i0, i1 = _exp_segment(hi - lo, la, lb)
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
        return (f"TabulatedDEM(temperature={_fmt(10 ** self._xt[0])} to {_fmt(10 ** self._xt[-1])} K, "
                f"dem given per K)")


class MultiComponentDEM(DEM):
    """Sum of DEM components (the usual 2T/3T description of stellar coronae).

    Parameters
    ----------
    components : list of DEM
        Any models (isothermal, Gaussian, ...), all with the same ``em_unit``;
        their batch shapes broadcast together. Nested multi-component DEMs are
        flattened.

    Notes
    -----
    ``total_em``, ``dem(T)`` and ``em_weights`` are sums over the components.
    """

    def __init__(self, components):
        """Collect and check the components (same em_unit, broadcastable batch shapes)."""
        comps = list(components) if not isinstance(components, DEM) else [components]
        if not comps:
            raise InputError("components is empty; give at least one DEM")
        flat = []
        for j, c in enumerate(comps):
            if isinstance(c, MultiComponentDEM):
                flat.extend(c.components)
            elif isinstance(c, DEM):
                flat.append(c)
            else:
                raise InputError(f"components[{j}] is a {type(c).__name__}, not a DEM model")
        units = {c.em_unit for c in flat}
        if len(units) > 1:
            raise InputError(
                "components mix volume (cm-3) and column (cm-5) emission measures: "
                + ", ".join(f"components[{j}]: {c.em_unit}" for j, c in enumerate(flat))
            )
        try:
            shape = np.broadcast_shapes(*[c.batch_shape for c in flat])
        except ValueError:
            raise InputError(
                "components have batch shapes that do not broadcast: "
                + ", ".join(f"components[{j}]: {c.batch_shape}" for j, c in enumerate(flat))
            ) from None
        self._components = tuple(flat)
        self._unit = flat[0].em_unit
        self._em = np.broadcast_to(sum(c._em for c in flat), shape)
        self._params = {}

    @classmethod
    def from_temperatures(cls, temperatures, ems) -> "MultiComponentDEM":
        """Multi-temperature isothermal DEM, one component per entry along the first axis.

        Parameters
        ----------
        temperatures : Quantity (K), shape (k, ...)
        ems : Quantity (cm^-3 or cm^-5), shape (k, ...)
            EM of each component; trailing axes (if any) form the batch.

        Examples
        --------
        ``from_temperatures([3e6, 1e7] * u.K, [1e51, 5e50] * u.cm**-3)``.
        """
        if isinstance(temperatures, (list, tuple)) and all(isinstance(v, u.Quantity) for v in temperatures):
            temperatures = u.Quantity(temperatures)  # list of scalar Quantities
        if isinstance(ems, (list, tuple)) and all(isinstance(v, u.Quantity) for v in ems):
            try:
                ems = u.Quantity(ems)
            except u.UnitsError:
                raise u.UnitsError("ems mixes units that cannot be converted to one another") from None
        t = as_quantity("temperatures", temperatures, u.K)
        if not isinstance(ems, u.Quantity):
            _as_em("ems", ems)
        t = np.atleast_1d(t)
        em = np.atleast_1d(ems)
        if t.shape[0] != em.shape[0]:
            raise InputError(
                f"temperatures has {t.shape[0]} components but ems has {em.shape[0]}; give one EM per temperature"
            )
        comps = []
        for j in range(t.shape[0]):  # loop over components (few), never over a T grid
            try:
                comps.append(IsothermalDEM(t[j], em[j]))
            except InputError as exc:
                raise InputError(f"temperatures/ems component {j}: {exc}") from None
        return cls(comps)

    @property
    def components(self) -> tuple:
        """The component DEMs."""
        return self._components

    def __call__(self, temperature) -> u.Quantity:
        """Sum of the components' DEM(T) (em_unit / K), shape ``batch_shape + temperature.shape``."""
        t = as_quantity("temperature", temperature, u.K)
        total = sum(c(t) for c in self._components)
        return np.broadcast_to(total, self.batch_shape + np.shape(t.value), subok=True)

    def em_weights(self, logT_grid) -> u.Quantity:
        """Sum of the components' :meth:`DEM.em_weights`, shape ``batch_shape + (n_T,)``."""
        x = _check_grid(logT_grid)
        total = np.zeros(self.batch_shape + (x.size,))
        for j, c in enumerate(self._components):
            try:
                total = total + c.em_weights(x).to_value(self._unit)
            except InputError as exc:
                raise InputError(f"components[{j}]: {exc}") from None
        return total * self._unit

    def scaled(self, factor) -> "MultiComponentDEM":
        """A copy with every component's EM multiplied by ``factor`` (finite, >= 0)."""
        return MultiComponentDEM([c.scaled(factor) for c in self._components])

    def __repr__(self):
        """The components' reprs."""
        return f"MultiComponentDEM([{', '.join(repr(c) for c in self._components)}])"
