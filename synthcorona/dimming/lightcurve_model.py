r"""Fast parametric dimming light-curve model for fitting observed light curves.

:class:`DimmingLightCurveModel` is built once from a
:class:`~synthcorona.dimming.scenario.DimmingScenario`: the quiescent rates, the depth per gram of
CME mass, the flare-excess running integrals and the profile constants are precomputed, so an
evaluation is a handful of vectorised numpy operations over (bands, bins):

.. math:: r_b(t_i) = q_b\,[1 - m\, d_b\, \bar p_i(t_0, \tau)] + s\, \bar F_b(t_i - t_0),

with mass :math:`m`, onset :math:`t_0`, recovery time :math:`\tau`, flare scale :math:`s`,
depth per gram :math:`d_b` and bin averages exactly as in :meth:`DimmingScenario.light_curve`
(same functions, so the two agree to round-off).

The Poisson log-likelihood of binned counts :math:`n_{bi}` is the C-statistic of Cash
(1979, ApJ 228, 939): :math:`\ln L = \sum (n \ln \mu - \mu)` with
:math:`\mu = (r + \text{background})\,\Delta t`; :math:`C = -2 \ln L`.
"""
from __future__ import annotations

import math

import numpy as np
import astropy.units as u
from scipy.special import xlogy

from ..validation import InputError, as_quantity, check_range

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

    Calling convention (hot path): ``model(times, mass=..., t0=..., recovery_time=...,
    flare_scale=...)``. ``times`` are bin centres (a time Quantity, or plain floats in seconds),
    bins of ``bin_width`` (default the scenario's). Parameters may be Quantities or plain
    floats in g and s. Returns a float64 array (n_bands, n_times) in ct/s (plain numbers for
    speed; :meth:`rates` returns the same as a Quantity). Defaults are the scenario's values.
    """

    def __init__(self, scenario):
        from .scenario import DimmingScenario

        if not isinstance(scenario, DimmingScenario):
            raise InputError(f"scenario={scenario!r} must be a DimmingScenario")
        self.bands = list(scenario.labels)
        self.quiescent_rate = scenario.quiescent_rate.copy()
        self.depth_per_gram = scenario.depth_per_gram.copy()
        self._qd = self.quiescent_rate * self.depth_per_gram
        self.onset = scenario.onset
        self.recovery_time = scenario.recovery_time
        self.t0 = scenario.t0
        self.mass = float(scenario.cme.mass.to_value(u.g))
        self.max_mass = float(scenario.max_mass.value)
        self.bin_width = scenario.bin_width
        self.background = scenario.background.copy()
        self.has_flare = scenario.flare is not None
        self._tf = scenario.flare_time.copy()
        self._cum = scenario.flare_cumulative.copy()
        self._tf0, self._tf1 = float(self._tf[0]), float(self._tf[-1])
        self.attrs = scenario._attrs()

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
        out = np.empty((self._qd.size, n))
        out[:] = self.quiescent_rate[:, None]
        # dimming: the profile integral P(t) (profile.profile_integral, inlined) is 0 before t0, so only
        # bins ending after t0 are computed (uniform contiguous bins: the first index is arithmetic)
        k = min(max(int(math.floor(-s0 / bw)) - 1, 0), n)
        if k < n:
            sk = s[k:]
            a = self.onset
            if a > 0:
                c = np.minimum(np.maximum(sk, 0.0), a)
                P = c * c * (0.5 / a)
            else:
                P = 0.0
            P = P - tau * np.expm1(np.maximum(sk - a, 0.0) * (-1.0 / tau))
            p = (P[1:] - P[:-1]) * (1.0 / bw)
            out[:, k:] -= (m * self._qd)[:, None] * p
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
