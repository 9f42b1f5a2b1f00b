"""Analytic DEM models: isothermal, Gaussian in log T, power law, and sums of components."""
from __future__ import annotations

import astropy.units as u
import numpy as np

from ..errors import InputError
from ..validation import as_quantity, check_positive, check_range
from .base import (
    DEM,
    GAUSSIAN_BLOCK,
    INV_SQRT_2PI,
    LN10,
    SNAP_TOLERANCE,
    ContinuousDEM,
    GaussianWork,
    as_emission_measure,
    as_plain_array,
    as_temperature,
    check_logt_grid,
    exp_segment_integral,
    fmt_value,
    gaussian_cells,
    trailing,
)

__all__ = ["IsothermalDEM", "GaussianDEM", "PowerLawDEM", "MultiComponentDEM"]


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
        t0 = as_temperature("temperature", temperature)
        em, unit = as_emission_measure("total_em", total_em)
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
                f"temperature={fmt_value(bad.flat[0])} K{' (and others)' if bad.size > 1 else ''} "
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
        return f"IsothermalDEM(temperature={fmt_value(10 ** self._params['logT'][index])} K)"


class GaussianDEM(ContinuousDEM):
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
        mu = as_plain_array("peak_logT", peak_logT, "log10 K")
        check_range("peak_logT", mu, lo=1.0, hi=10.0, unit_label="(log10 K)")
        sigma = as_plain_array("width_logT", width_logT, "dex")
        check_positive("width_logT", sigma, unit_label="dex")
        em, unit = as_emission_measure("total_em", total_em)
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
        mu = trailing(self._params["mu"], t.ndim)
        sg = trailing(self._params["sigma"], t.ndim)
        z = (np.log10(t) - mu) / sg
        return np.exp(-0.5 * z * z) * INV_SQRT_2PI / (sg * t * LN10)

    def _cell_integrals(self, x):
        """Closed-form cell integrals of the normal density (E and R as in ContinuousDEM), whole batch at once."""
        mu = self._params["mu"].reshape(-1)
        sg = self._params["sigma"].reshape(-1)
        e = np.empty((mu.size, x.size - 1))
        r = np.empty_like(e)
        gaussian_cells(x, mu, sg, e, r)
        shape = self.batch_shape + (x.size - 1,)
        return e.reshape(shape), r.reshape(shape)

    def _node_fractions(self, x):
        """Hat-function weights, computed in blocks of GAUSSIAN_BLOCK DEMs so that the work arrays stay in
        the CPU cache (same arithmetic as ContinuousDEM._node_fractions, bit for bit)."""
        mu = self._params["mu"].reshape(-1)
        sg = self._params["sigma"].reshape(-1)
        n_rows, n = mu.size, x.size
        w = np.empty((n_rows, n))
        outside = np.empty(n_rows)
        m = max(1, min(GAUSSIAN_BLOCK, n_rows))
        e_buf, r_buf = np.empty((m, n - 1)), np.empty((m, n - 1))
        work = GaussianWork(m, n)
        for i0 in range(0, n_rows, m):
            i1 = min(i0 + m, n_rows)
            e, r = e_buf[: i1 - i0], r_buf[: i1 - i0]
            gaussian_cells(x, mu[i0:i1], sg[i0:i1], e, r, work)
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
        return (f"GaussianDEM(peak_logT={fmt_value(self._params['mu'][index])}, "
                f"width_logT={fmt_value(self._params['sigma'][index])})")


class PowerLawDEM(ContinuousDEM):
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
        s = as_plain_array("slope", slope)
        tp = as_temperature("peak_temperature", peak_temperature)
        tm = as_temperature("min_temperature", min_temperature)
        em, unit = as_emission_measure("total_em", total_em)
        xp, xm = np.log10(tp), np.log10(tm)
        if np.any(np.broadcast_to(xp <= xm, np.broadcast_shapes(xp.shape, xm.shape))):
            bad = np.broadcast_arrays(tp, tm)
            k = np.argmax(np.ravel(bad[0] <= bad[1]))
            raise InputError(
                f"peak_temperature={fmt_value(np.ravel(bad[0])[k])} K must be greater than "
                f"min_temperature={fmt_value(np.ravel(bad[1])[k])} K"
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
        g = self._params["slope"] * LN10
        xp, xm = self._params["xp"], self._params["xm"]
        xref = np.where(g >= 0, xp, xm)
        norm, _ = exp_segment_integral(xp - xm, g * (xm - xref), g * (xp - xref))
        return g, xp, xm, xref, norm

    def _density(self, t):
        """dEM/dT per unit EM (K^-1): normalised T^slope per log10 T divided by T ln 10, zero outside [min, peak]."""
        g, xp, xm, xref, norm = (trailing(a, t.ndim) for a in self._shape_params())
        x = np.log10(t)
        inside = (x >= xm) & (x <= xp)
        f = np.exp(np.where(inside, g * (x - xref), -np.inf)) / norm
        return f / (t * LN10)

    def _cell_integrals(self, x):
        """Closed-form integrals of the exponential (in log10 T) density over each cell clipped to [min, peak]."""
        g, xp, xm, xref, norm = (a[..., None] for a in self._shape_params())
        lo = np.clip(x[:-1], xm, xp)
        hi = np.clip(x[1:], xm, xp)
        i0, i1 = exp_segment_integral(hi - lo, g * (lo - xref), g * (hi - xref))
        dx = np.diff(x)
        return i0 / norm, (i1 + (lo - x[:-1]) * i0) / (norm * dx)

    def _describe(self, index):
        """'PowerLawDEM(slope=..., peak_temperature=..., min_temperature=...)' of batch member ``index``."""
        p = self._params
        return (f"PowerLawDEM(slope={fmt_value(p['slope'][index])}, peak_temperature={fmt_value(10 ** p['xp'][index])} K, "
                f"min_temperature={fmt_value(10 ** p['xm'][index])} K)")


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
            as_emission_measure("ems", ems)
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
        x = check_logt_grid(logT_grid)
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

    def _take_at(self, idx, shape):
        """Batch members ``idx`` of every component."""
        new = super()._take_at(idx, shape)
        new._components = tuple(c._take_at(idx, shape) for c in self._components)
        return new

    def em_weights_nbytes(self, n_nodes: int) -> int:
        """Work memory of :meth:`em_weights` per DEM: the components' plus the running sum."""
        return sum(c.em_weights_nbytes(n_nodes) for c in self._components) + 16 * int(n_nodes)

    def __repr__(self):
        """The components' reprs."""
        return f"MultiComponentDEM([{', '.join(repr(c) for c in self._components)}])"
