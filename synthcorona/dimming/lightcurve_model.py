r"""Fast parametric dimming light-curve model for fitting observed light curves.

:class:`DimmingLightCurveModel` is built once from a
:class:`~synthcorona.dimming.scenario.DimmingScenario`: the quiescent rates, the depth per gram of
CME mass, the flare-excess running integrals and the profile constants are precomputed, so an
evaluation is a handful of vectorised numpy operations over (bands, bins):

.. math:: r_b(t_i) = q_b\,[1 - (m\, d_b + x_b)\, \bar p_i(t_0, \tau)] + s\, \bar F_b(t_i - t_0),

with mass :math:`m`, onset :math:`t_0`, recovery time :math:`\tau`, flare scale :math:`s`,
depth per gram :math:`d_b`, the scenario's (fixed) expansion-dimming depth :math:`x_b` and bin averages exactly as in :meth:`DimmingScenario.light_curve`
(same functions, so the two agree to round-off).

The Poisson log-likelihood of binned counts :math:`n_{bi}` is the C-statistic of Cash
(1979, ApJ 228, 939): :math:`\ln L = \sum (n \ln \mu - \mu)` with
:math:`\mu = (r + \text{background})\,\Delta t`; :math:`C = -2 \ln L`.
"""
from __future__ import annotations

import math

import astropy.units as u
import numpy as np
from scipy.special import xlogy

from ..errors import InputError

__all__ = ["DimmingLightCurveModel"]


def _float(name, value, unit):
    if isinstance(value, u.Quantity):
        return float(value.to_value(unit))
    return float(value)


class DimmingLightCurveModel:
    """Expected count rates per band as a fast function of (mass, t0, recovery_time, flare_scale).

    Parameters
    ----------
    scenario : DimmingScenario
        Supplies the bands, quiescent rates, depth per gram, onset duration, default recovery
        time, flare excess and background.

    Notes
    -----
    Calling convention (hot path): ``model(times, mass=..., t0=..., recovery_time=...,
    flare_scale=...)``. ``times`` are bin centres (a time Quantity, or plain floats in seconds),
    bins of ``bin_width`` (default the scenario's). Parameters may be Quantities or plain
    floats in g and s. Returns a float64 array (n_bands, n_times) in ct/s (plain numbers for
    speed; :meth:`rates` returns the same as a Quantity). Defaults are the scenario's values.
    ``times`` must be the centres of contiguous bins of equal width (checked from their span).
    The flare excess is zero before ``t0`` and after the end of the scenario's flare run (which
    covers the scenario's light curve from any ``t0`` >= 0, or stops early; see
    ``attrs["flare_termination"]``). A mass above the largest removable mass raises
    :class:`~synthcorona.errors.InputError`.
    """

    def __init__(self, scenario):
        from .scenario import DimmingScenario

        if not isinstance(scenario, DimmingScenario):
            raise InputError(f"scenario={scenario!r} must be a DimmingScenario")
        rates, flare = scenario.prepared.rates, scenario.prepared.flare
        self.bands = list(scenario.labels)
        self.quiescent_rate = rates.quiescent_rate.copy()
        self.depth_per_gram = rates.depth_per_gram.copy()
        self._qd = self.quiescent_rate * self.depth_per_gram
        self._qx = self.quiescent_rate * rates.expansion_depth     # expansion dimming (0 unless enabled)
        self._q_col = self.quiescent_rate[:, None]
        self.onset = scenario.onset
        self.recovery_time = scenario.recovery_time
        self.t0 = scenario.t0
        self.mass = float(scenario.cme.mass.to_value(u.g))
        self.max_mass = float(scenario.max_mass.value)
        self.bin_width = scenario.bin_width
        self.background = rates.background.copy()
        self.has_flare = scenario.flare is not None
        self._tf = flare.times.copy()
        self._cum = flare.cumulative.copy()
        self._tf0, self._tf1 = float(self._tf[0]), float(self._tf[-1])
        self.attrs = scenario.result_attrs()

    # ------------------------------------------------------------------ evaluation
    def _edges(self, times, bin_width):
        t = times.to_value(u.s) if isinstance(times, u.Quantity) else np.asarray(times, dtype=float)
        bw = self.bin_width if bin_width is None else _float("bin_width", bin_width, u.s)
        n = t.size
        if t.ndim != 1 or n < 1:
            raise InputError(f"times must be a 1-D array of bin centres, got shape {t.shape}")
        span = t[-1] - t[0]
        if n > 1 and abs(span - (n - 1) * bw) > 1e-6 * bw * n:
            raise InputError(f"times span {span:g} s over {n} bins; they must be the centres of contiguous bins of "
                             f"bin_width={bw:g} s (span {(n - 1) * bw:g} s)")
        e = np.empty(n + 1)
        e[:-1] = t
        e[-1] = t[-1] + bw
        e -= 0.5 * bw
        return e, bw

    def __call__(self, times, mass=None, t0=None, recovery_time=None, flare_scale=1.0, bin_width=None):
        m = self.mass if mass is None else _float("mass", mass, u.g)
        t0 = self.t0 if t0 is None else _float("t0", t0, u.s)
        tau = self.recovery_time if recovery_time is None else _float("recovery_time", recovery_time, u.s)
        if not (0.0 <= m <= self.max_mass):
            raise InputError(f"mass={m:.6g} g is outside the valid range [0, {self.max_mass:.6g}] g (the largest "
                             "mass the corona can supply at the source density)")
        if not tau > 0:
            raise InputError(f"recovery_time={tau!r} s is outside the valid range (0, inf) s")
        e, bw = self._edges(times, bin_width)
        s = e - t0
        n = s.size - 1
        s0 = float(s[0])
        # dimming: bin averages of the profile from its closed-form integral P(t) (profile.profile_integral,
        # inlined); the 1/bin_width is folded into the per-band coefficient
        a = self.onset
        if a > 0:
            c = np.minimum(np.maximum(s, 0.0), a)
            P = c * c * (0.5 / a) - tau * np.expm1(np.maximum(s - a, 0.0) * (-1.0 / tau))
        else:
            P = -tau * np.expm1(np.maximum(s, 0.0) * (-1.0 / tau))
        coef = (m * self._qd + self._qx) * (1.0 / bw)
        out = self._q_col - np.multiply.outer(coef, P[1:] - P[:-1])
        if self.has_flare and flare_scale != 0:
            # only bins overlapping the flare run [t0 + tf[0], t0 + tf[-1]] get an excess (the running
            # integral is constant outside it, and np.interp holds the end values there)
            i0 = min(max(int(math.floor((self._tf0 - s0) / bw)) - 1, 0), n)
            i1 = min(max(int(math.ceil((self._tf1 - s0) / bw)) + 2, 0), n + 1)
            if i1 - i0 >= 2:
                ss = s[i0:i1]
                tf = self._tf
                c = np.array([np.interp(ss, tf, cb) for cb in self._cum])   # loop over bands only
                out[:, i0:i1 - 1] += (c[:, 1:] - c[:, :-1]) * (flare_scale / bw)
        return out

    def rates(self, times, **params) -> u.Quantity:
        """As :meth:`__call__`, as a Quantity in ct/s."""
        return u.Quantity(self(times, **params), u.ct / u.s)

    def expected_counts(self, times, bin_width=None, **params) -> np.ndarray:
        """Expected counts per bin including the background, (n_bands, n_times)."""
        bw = self.bin_width if bin_width is None else _float("bin_width", bin_width, u.s)
        return (self(times, bin_width=bin_width, **params) + self.background[:, None]) * bw

    def loglike(self, counts, times, bin_width=None, **params) -> float:
        """Poisson log-likelihood sum(n ln mu - mu) (Cash 1979, ApJ 228, 939) of counts (n_bands, n_times)."""
        mu = self.expected_counts(times, bin_width=bin_width, **params)
        n = np.asarray(counts)
        if n.shape != mu.shape:
            raise InputError(f"counts has shape {n.shape}; expected (n_bands, n_times) = {mu.shape}")
        if np.any(mu <= 0):
            return -np.inf
        return float(np.sum(xlogy(n, mu) - mu))

    def cash(self, counts, times, bin_width=None, **params) -> float:
        """C-statistic C = -2 ln L (Cash 1979, ApJ 228, 939)."""
        return -2.0 * self.loglike(counts, times, bin_width=bin_width, **params)
