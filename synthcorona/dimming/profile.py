r"""Time profile of a mass-loss dimming: onset, full depth, recovery.

Shape
-----
The fractional decrement :math:`p(t) \in [0, 1]` (multiplying the full depth
:math:`\delta_b`) is 0 before the onset time :math:`t_0`, rises linearly to 1 over the onset
duration :math:`a` (default: source size / CME speed, the time the CME front needs to clear the
source region) and then recovers exponentially with time constant :math:`\tau`:

.. math:: p(t) = \begin{cases} 0 & t < t_0 \\ (t - t_0)/a & t_0 \le t < t_0 + a \\
          \exp[-(t - t_0 - a)/\tau] & t \ge t_0 + a. \end{cases}

Light curves are averaged over each time bin exactly, from the closed-form integral
:math:`P(t) = \int_{-\infty}^t p\,dt'` (so fits in :math:`t_0` are smooth even for bins wider
than the onset).

Recovery time
-------------
``recovery_time(method=...)``:

* ``"refill"`` (default): refilling of the evacuated loops by evaporative upflow at a fraction
  :math:`f` of the sound speed, :math:`\tau = L / (f c_s)`, :math:`c_s = \sqrt{\gamma\, 2 k_B T / m_p}`
  (:math:`\gamma = 5/3`, fully ionised hydrogen). Loop timescales as in Reale (2014, Living Rev.
  Sol. Phys. 11, 4). Default :math:`f = 0.05` (upflows of ~10 km/s at 1-2 MK; Doppler upflows
  of order 10-40 km/s are reported in dimming regions, e.g. Harra & Sterling 2001, ApJ 561,
  L215, from memory); with L = 1e10 cm and T = 1.5 MK this gives ~2.7 h, inside the hours to
  ~a day observed for solar EUV dimmings (Reinard & Biesecker 2008, ApJ 674, 576; Mason et al.
  2016, ApJ 830, 20; from memory).
* ``"cooling"``: the combined radiative/conductive cooling (draining) time of the source loops,
  :math:`1/\tau = 1/\tau_{rad} + 1/\tau_{cond}` with :math:`\tau_{rad} = 3 k_B T / (n \Lambda(T))`
  and :math:`\tau_{cond} = 3 n k_B L^2 / (\kappa_0 T^{5/2})` (Cargill 1994, ApJ 422, 381), Λ from
  the embedded CHIANTI table (:func:`synthcorona.synthesis.radiative_loss`).
* a Quantity: the user's value.
"""
from __future__ import annotations

import astropy.units as u
import numpy as np

from ..constants import K_B_CGS as K_B
from ..constants import M_P_G as M_P
from ..errors import InputError
from ..validation import as_quantity, as_scalar, check_range
from .flare import conductive_cooling_time, radiative_cooling_time

__all__ = ["sound_speed", "refill_time", "cooling_time", "recovery_time", "onset_time",
           "dimming_profile", "profile_integral", "binned_profile", "DEFAULT_UPFLOW_FRACTION"]

GAMMA = 5.0 / 3.0
#: Default upflow speed as a fraction of the sound speed (see module docstring).
DEFAULT_UPFLOW_FRACTION = 0.05


def _pos_scalar(name, value, unit, lo=0.0, hi=None, unit_label=""):
    """A single value strictly inside (lo, hi)."""
    return as_scalar(name, value, unit, lo=lo, hi=hi, unit_label=unit_label, inclusive=False)


def sound_speed(temperature, gamma: float = GAMMA) -> u.Quantity:
    r"""Sound speed :math:`c_s = \sqrt{\gamma\, 2 k_B T / m_p}` of a fully ionised H plasma [cm/s]."""
    t = as_quantity("temperature", temperature, u.K)
    check_range("temperature", t.value, lo=0.0, inclusive=False, unit_label="K")
    check_range("gamma", gamma, lo=1.0, hi=5.0 / 3.0)
    return u.Quantity(np.sqrt(gamma * 2.0 * K_B * t.value / M_P), u.cm / u.s)


def refill_time(loop_half_length, temperature, upflow_fraction: float = DEFAULT_UPFLOW_FRACTION) -> u.Quantity:
    r"""Refilling time :math:`\tau = L / (f c_s)` [s] (see the module docstring)."""
    length = _pos_scalar("loop_half_length", loop_half_length, u.cm, unit_label="cm")
    check_range("upflow_fraction", upflow_fraction, lo=0.0, hi=1.0, inclusive=False)
    cs = sound_speed(temperature).value
    return u.Quantity(length / (float(upflow_fraction) * cs), u.s)


def cooling_time(loop_half_length, temperature, density, abundances="coronal") -> u.Quantity:
    r"""Combined cooling time :math:`(1/\tau_{rad} + 1/\tau_{cond})^{-1}` [s] (Cargill 1994, ApJ 422, 381)."""
    tc = conductive_cooling_time(temperature, density, loop_half_length)
    tr = radiative_cooling_time(temperature, density, abundances=abundances)
    return (1.0 / (1.0 / tc + 1.0 / tr)).to(u.s)


def recovery_time(method="refill", *, loop_half_length=None, temperature=None, density=None,
                  upflow_fraction: float = DEFAULT_UPFLOW_FRACTION, abundances="coronal") -> u.Quantity:
    """Recovery time constant of the dimming [s]: ``"refill"`` (default), ``"cooling"`` or a Quantity."""
    if isinstance(method, u.Quantity):
        return _pos_scalar("recovery_time", method, u.s, unit_label="s") * u.s
    if method == "refill":
        return refill_time(loop_half_length, temperature, upflow_fraction)
    if method == "cooling":
        return cooling_time(loop_half_length, temperature, density, abundances)
    raise InputError(f"recovery={method!r} must be 'refill', 'cooling' or a time Quantity")


def onset_time(source_size, speed) -> u.Quantity:
    """Time for the CME to clear its source region, source_size / speed [s]."""
    size = _pos_scalar("source_size", source_size, u.cm, unit_label="cm")
    v = _pos_scalar("speed", speed, u.cm / u.s, hi=3e10, unit_label="cm/s")
    return u.Quantity(size / v, u.s)


def dimming_profile(t, t0: float, onset: float, tau: float) -> np.ndarray:
    """p(t) on plain floats (seconds): ramp over ``onset`` from ``t0``, then exp(-(t - t0 - onset)/tau)."""
    s = np.asarray(t, dtype=float) - t0
    ramp = np.clip(s / onset, 0.0, 1.0) if onset > 0 else (s >= 0).astype(float)
    rec = np.exp(-np.maximum(s - onset, 0.0) / tau)
    return np.where(s < 0, 0.0, np.where(s < onset, ramp, rec))


def profile_integral(t, t0: float, onset: float, tau: float) -> np.ndarray:
    """P(t) = integral of p from -inf to t (plain floats, seconds)."""
    s = np.asarray(t, dtype=float) - t0
    a = onset
    if a > 0:
        ramp = np.clip(s, 0.0, a) ** 2 / (2.0 * a)
    else:
        ramp = np.zeros_like(s)
    rec = tau * (-np.expm1(-np.maximum(s - a, 0.0) / tau))
    return ramp + rec


def binned_profile(edges, t0: float, onset: float, tau: float) -> np.ndarray:
    """Bin-averaged p over bins with the given edges (seconds): (P(hi) - P(lo)) / width."""
    e = np.asarray(edges, dtype=float)
    c = profile_integral(e, t0, onset, tau)
    return np.diff(c, axis=-1) / np.diff(e, axis=-1)
