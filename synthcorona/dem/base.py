"""The DEM base class, its continuous-model base and the numerical helpers shared by the models.

The conventions (EM units, em_weights as hat-function integrals) are in :mod:`synthcorona.dem`.
"""
from __future__ import annotations

import copy
import math

import astropy.units as u
import numpy as np
from scipy.special import erfc

from ..errors import InputError
from ..validation import as_quantity, check_finite, check_positive, check_range

__all__ = [
    "DEM", "ContinuousDEM", "as_emission_measure", "as_plain_array", "as_temperature", "check_logt_grid", "trailing",
    "exp_segment_integral", "fmt_value", "GaussianWork", "gaussian_cells", "LN10", "SQRT_HALF", "INV_SQRT_2PI",
    "VOLUME_EM_UNIT", "COLUMN_EM_UNIT", "OUTSIDE_TOLERANCE", "SNAP_TOLERANCE", "GAUSSIAN_BLOCK",
    "EM_WEIGHTS_BYTES_PER_NODE",
]

LN10 = math.log(10.0)
SQRT_HALF = math.sqrt(0.5)
INV_SQRT_2PI = 1.0 / math.sqrt(2.0 * math.pi)
#: Fraction of total EM allowed outside the grid before em_weights refuses.
OUTSIDE_TOLERANCE = 1e-6
#: An isothermal log T within this fraction of a cell width of a node is put on the node.
SNAP_TOLERANCE = 1e-6
#: Work memory of :meth:`DEM.em_weights` per DEM and grid node, bytes: an upper estimate (tracemalloc peaks
#: of the models on the embedded table's grid: 9 Gaussian or isothermal, 130 power law, 103 tabulated with 30
#: table nodes, per DEM and grid node).
EM_WEIGHTS_BYTES_PER_NODE = 160

VOLUME_EM_UNIT = u.Unit("cm-3")
COLUMN_EM_UNIT = u.Unit("cm-5")


# --------------------------------------------------------------------------- helpers
def as_emission_measure(name: str, value) -> tuple[np.ndarray, u.UnitBase]:
    """Validate an emission measure: Quantity in cm^-3 or cm^-5 units, finite, >= 0.

    Returns the values converted to exactly ``cm-3`` or ``cm-5`` and that unit.
    """
    if not isinstance(value, u.Quantity):
        as_quantity(name, value, VOLUME_EM_UNIT)  # raises the standard "has no units" UnitsError
    if value.unit.is_equivalent(VOLUME_EM_UNIT):
        unit = VOLUME_EM_UNIT
    elif value.unit.is_equivalent(COLUMN_EM_UNIT):
        unit = COLUMN_EM_UNIT
    else:
        raise u.UnitsError(
            f"{name} has units '{value.unit}', which is neither a volume emission measure "
            f"(convertible to 'cm-3') nor a column emission measure (convertible to 'cm-5')"
        )
    arr = np.asarray(value.to_value(unit), dtype=float)
    check_range(name, arr, lo=0.0, unit_label=str(unit))
    return arr, unit


def as_plain_array(name: str, value, unit_label: str = "") -> np.ndarray:
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


def as_temperature(name: str, value) -> np.ndarray:
    """Temperature Quantity -> float array in K (finite, > 0)."""
    t = as_quantity(name, value, u.K)
    arr = np.asarray(t.value, dtype=float)
    check_positive(name, arr, unit_label="K")
    return arr


def check_logt_grid(logT_grid) -> np.ndarray:
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


def trailing(a: np.ndarray, ndim: int) -> np.ndarray:
    """``a`` with ``ndim`` trailing singleton axes (batch params against a T array)."""
    return a.reshape(a.shape + (1,) * ndim)


def exp_segment_integral(d, lnfa, lnfb):
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


def fmt_value(v: float) -> str:
    """Four significant digits, for error messages and reprs."""
    return f"{v:.4g}"


#: DEMs per block in GaussianDEM.em_weights (work arrays of a block stay in the CPU cache).
GAUSSIAN_BLOCK = 256


class GaussianWork:
    """Preallocated work arrays for :func:`gaussian_cells` (``m`` DEMs x ``n`` nodes)."""

    def __init__(self, m: int, n: int):
        self.z = np.empty((m, n))
        self.a = np.empty((m, n))
        self.s = np.empty((m, n))
        self.t = np.empty((m, n - 1))
        self.neg = np.empty((m, n), dtype=bool)


def gaussian_cells(x, mu, sg, e, first, work=None):
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
        work = GaussianWork(k, n)
    z, a, s, t, neg = work.z[:k], work.a[:k], work.s[:k], work.t[:k], work.neg[:k]
    muc, sgc = mu[:, None], sg[:, None]
    np.subtract(x, muc, out=z)
    z /= sgc
    np.abs(z, out=a)
    np.minimum(a, 37.0, out=a)
    np.multiply(a, SQRT_HALF, out=s)
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
    first *= sgc * -INV_SQRT_2PI
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
        t = as_temperature("temperature", temperature)
        dens = self._density(t)  # per unit EM, per K
        return dens * trailing(self._em, t.ndim) * (self._unit / u.K)

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
        x = check_logt_grid(logT_grid)
        frac = self._node_fractions(x)
        frac *= self._em[..., None]
        return u.Quantity(frac, self._unit, copy=False)

    def em_weights_nbytes(self, n_nodes: int) -> int:
        """Work memory (bytes) of :meth:`em_weights` per DEM of the batch on a grid of ``n_nodes`` nodes
        (an upper estimate, see :data:`EM_WEIGHTS_BYTES_PER_NODE`)."""
        return EM_WEIGHTS_BYTES_PER_NODE * int(n_nodes)

    # -- batches ----------------------------------------------------------------------
    def take(self, indices) -> "DEM":
        """The DEMs at positions ``indices`` of the batch flattened in C order, as a batch of shape ``(len(indices),)``.

        ``indices`` is a 1-D array of integers in ``[0, prod(batch_shape))`` (a single DEM counts as a
        batch of one). ``take(indices).em_weights(x)`` equals ``em_weights(x).reshape(-1, x.size)[indices]``;
        the batch functions of :mod:`synthcorona.synthesis` use it to work through large batches in chunks.
        """
        idx = np.asarray(indices)
        shape = self.batch_shape or (1,)
        size = math.prod(shape)
        if idx.ndim != 1 or not (idx.size == 0 or np.issubdtype(idx.dtype, np.integer)):
            raise InputError(f"indices must be a 1-D array of integers; got {idx.dtype} of shape {idx.shape}",
                             argument="indices")
        if idx.size and (idx.min() < 0 or idx.max() >= size):
            raise InputError(f"indices must lie in [0, {size}) for a batch of shape {self.batch_shape}; got "
                             f"{idx.min()}-{idx.max()}", argument="indices")
        return self._take_at(np.unravel_index(idx.astype(np.intp), shape), shape)

    def _take_at(self, idx: tuple, shape: tuple) -> "DEM":
        """A copy holding batch members ``idx`` (index arrays into ``shape``, a shape this batch broadcasts to)."""
        new = copy.copy(self)
        new._em = np.broadcast_to(self._em, shape)[idx]
        new._params = {k: np.broadcast_to(v, shape)[idx] for k, v in self._params.items()}
        return new

    # -- combination ------------------------------------------------------------------
    def scaled(self, factor) -> "DEM":
        """A copy with every EM multiplied by ``factor`` (dimensionless, finite, >= 0).

        ``factor`` may be an array; it broadcasts with ``batch_shape``.
        """
        f = as_plain_array("factor", factor)
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
            from .models import MultiComponentDEM  # models build on this module

            return MultiComponentDEM([self, other])
        return NotImplemented

    def __radd__(self, other):
        """Right addition; ``0 + dem`` returns ``dem`` so that ``sum([dem1, dem2])`` works."""
        if isinstance(other, (int, float)) and other == 0:  # sum([dem1, dem2])
            return self
        if isinstance(other, DEM):
            from .models import MultiComponentDEM

            return MultiComponentDEM([other, self])
        return NotImplemented

    def __repr__(self) -> str:
        """Model name, parameters and total EM (batch: shape and unit only)."""
        if self.batch_shape == ():
            return f"{self._describe(())}, total_em={fmt_value(float(self._em))} {self._unit}"
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


class ContinuousDEM(DEM):
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


