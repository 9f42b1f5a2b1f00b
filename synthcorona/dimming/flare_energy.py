r"""Flare energy: the heating time profile, the energy bookkeeping of a loop run and the class -> energy rule.

Heating profile
---------------
:class:`HeatingProfile` is the normalised time profile :math:`g(t)` [s\ :sup:`-1`] of the flare
heating of :class:`~synthcorona.dimming.flare.LoopFlareModel`, :math:`\int_0^\infty g\,dt = 1`:
triangular (base width ``duration``, apex at ``peak``) or Gaussian (FWHM ``duration``). A
profile that would begin before :math:`t = 0` is truncated there and renormalised, so the whole
flare energy is deposited at :math:`t \ge 0`.

Energy bookkeeping
------------------
The system is the coronal part of the loop. Energy enters as heating :math:`Q V`; it leaves
as coronal radiation :math:`n^2 \Lambda V` and as the net flux through the two coronal
bases, conduction plus enthalpy, :math:`-(F_0 + \tfrac52 p v_0)\, 2A = c_1 n^2 \Lambda V`,
which the thin transition region radiates. The thermal energy is :math:`\tfrac32 p V`.
:func:`energy_budget` integrates these from a run's output; :func:`flare_em_temperature` gives
the run's emission measure and temperature histories for folding through instrument responses.

Flare class -> energy
---------------------
:func:`flare_energy_from_class` gives the heating energy of a soft-X-ray class (the peak 1-8
Angstrom flux at 1 AU, true scale) by the rule of :mod:`synthcorona.dimming.flare_class`: the
arcade of default strands whose own peak 1-8 Angstrom flux equals the class flux, on the flare
EM-T relation. Flare energies vs. class scatter by about an order of magnitude between events
(e.g. Emslie et al. 2012, ApJ 759, 71); the loop model itself takes the energy as an explicit input.
"""
from __future__ import annotations

import math
from typing import NamedTuple

import astropy.units as u
import numpy as np
import xarray as xr
from scipy.integrate import trapezoid
from scipy.special import erf

from ..errors import InputError
from ..instruments.soft_xray_monitor import CLASS_LETTER_FLUX

__all__ = ["HeatingProfile", "EnergyBudget", "energy_budget", "FlareEMTemperature", "flare_em_temperature",
           "FLARE_CLASS_FLUX", "flare_energy_from_class"]

_FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))
#: Peak 1-8 Angstrom flux (W m-2, true scale) at 1 AU of class letter 1.0
#: (:data:`synthcorona.instruments.soft_xray_monitor.CLASS_LETTER_FLUX`).
FLARE_CLASS_FLUX = CLASS_LETTER_FLUX


# ----------------------------------------------------------------------------- heating profile

class HeatingProfile:
    """Normalised flare heating profile g(t) [s-1] with ∫_0^∞ g dt = 1 and its cumulative integral.

    ``kind``: "triangular" (base width ``duration``) or "gaussian" (FWHM ``duration``), peaking at
    ``peak``; times in plain seconds. ``start`` and ``end`` bound the heating (the Gaussian at
    +-6 sigma); ``norm`` is the part of the untruncated profile after t = 0.
    """

    def __init__(self, kind: str, peak: float, duration: float):
        self.kind, self.peak, self.duration = kind, peak, duration
        if kind == "triangular":
            self.half = 0.5 * duration
            self.start, self.end = peak - self.half, peak + self.half
        else:
            self.sigma = duration / _FWHM_PER_SIGMA
            self.start, self.end = peak - 6.0 * self.sigma, peak + 6.0 * self.sigma
        self.norm = 1.0 - self._cum_raw(0.0)

    def _cum_raw(self, t):
        t = np.asarray(t, dtype=float)
        if self.kind == "triangular":
            h, p = self.half, self.peak
            rise = (t - (p - h)) ** 2 / (2 * h * h)
            fall = 1.0 - ((p + h) - t) ** 2 / (2 * h * h)
            return np.where(t <= p - h, 0.0, np.where(t <= p, rise, np.where(t < p + h, fall, 1.0)))
        return 0.5 * (1.0 + erf((t - self.peak) / (math.sqrt(2.0) * self.sigma)))

    def rate(self, t):
        """g(t) [s-1] at plain seconds ``t`` (zero before t = 0)."""
        t = np.asarray(t, dtype=float)
        if self.kind == "triangular":
            g = np.maximum(0.0, 1.0 - np.abs(t - self.peak) / self.half) / self.half
        else:
            g = np.exp(-0.5 * ((t - self.peak) / self.sigma) ** 2) / (self.sigma * math.sqrt(2 * math.pi))
        return np.where(t >= 0, g / self.norm, 0.0)

    def cumulative(self, t):
        """∫_0^t g dt'."""
        t = np.maximum(np.asarray(t, dtype=float), 0.0)
        return (self._cum_raw(t) - self._cum_raw(0.0)) / self.norm


# ----------------------------------------------------------------------------- result helpers

class EnergyBudget(NamedTuple):
    """Time-integrated energies [erg] of a run (see :func:`energy_budget`)."""

    heating: u.Quantity
    thermal_energy_change: u.Quantity
    coronal_radiation: u.Quantity
    through_base: u.Quantity
    conducted_through_base: u.Quantity
    enthalpy_through_base: u.Quantity
    transition_region_radiation: u.Quantity
    residual: u.Quantity
    relative_residual: float


def _check_result(result):
    need = ("temperature", "density", "pressure", "heating_rate", "coronal_radiative_loss_rate",
            "conductive_flux", "enthalpy_flux", "transition_region_radiative_loss_rate")
    if not isinstance(result, xr.Dataset) or any(k not in result for k in need) or "volume_cm3" not in result.attrs:
        raise InputError("result must be the xarray.Dataset returned by LoopFlareModel.run")
    if result.sizes.get("time", 0) < 2:
        raise InputError("result must hold at least two output times")


def energy_budget(result: xr.Dataset) -> EnergyBudget:
    r"""Energy bookkeeping of a run, by trapezoidal integration of its output over time.

    System: the coronal part of the loop, volume V = 2 L A. Then

    .. math:: \int Q V dt = \Delta(\tfrac32 p V) + \int n^2\Lambda V dt
              + \int -(F_0 + \tfrac52 p v_0)\, 2A\, dt ,

    the last term being the net energy (conduction plus enthalpy) leaving through the two coronal
    bases, which the thin transition region radiates (it equals :math:`\int c_1 n^2 \Lambda V dt`,
    returned as ``transition_region_radiation`` for comparison). ``residual`` is the left side minus
    the right side; ``relative_residual`` divides it by the heating input.
    """
    _check_result(result)
    t = result["time"].values
    vol = float(result.attrs["volume_cm3"])
    area2 = vol / float(result.attrs["half_length_cm"])  # two footpoints, 2 A
    p = result["pressure"].values

    def integral(values):
        return float(trapezoid(values, t))

    heat = integral(result["heating_rate"].values) * vol
    d_thermal = 1.5 * (p[-1] - p[0]) * vol
    rad_c = integral(result["coronal_radiative_loss_rate"].values) * vol
    cond = integral(-result["conductive_flux"].values) * area2
    enth = integral(result["enthalpy_flux"].values) * area2
    through = cond - enth
    rad_tr = integral(result["transition_region_radiative_loss_rate"].values) * vol
    residual = heat - (d_thermal + rad_c + through)

    def q(x):
        return x * u.erg

    return EnergyBudget(q(heat), q(d_thermal), q(rad_c), q(through), q(cond), q(-enth), q(rad_tr), q(residual),
                        residual / heat if heat != 0 else float("nan"))


class FlareEMTemperature(NamedTuple):
    """Emission measure and temperature histories of a run, as Quantities."""

    time: u.Quantity
    emission_measure: u.Quantity
    temperature: u.Quantity


def flare_em_temperature(result: xr.Dataset) -> FlareEMTemperature:
    """Time [s], volume emission measure EM(t) = n^2 V [cm-3] and coronal-average T(t) [K] of a run.

    Folding through an instrument temperature response K_b(T) gives the count rate
    ``rate_b(t) = EM(t) K_b(T(t))`` of an isothermal loop at each time.
    """
    _check_result(result)
    return FlareEMTemperature(result["time"].values * u.s, result["emission_measure"].values * u.cm ** -3,
                              result["temperature"].values * u.K)


# ----------------------------------------------------------------------------- flare class

def flare_energy_from_class(flare_class: str, *, table=None, abundances="coronal", density=1e9 * u.cm ** -3,
                            **strand) -> u.Quantity:
    """Heating energy [erg] that makes a flare of the default strands reach its soft-X-ray class.

    The rule of :mod:`synthcorona.dimming.flare_class` (an arcade on the flare EM-T relation whose own
    peak 1-8 Angstrom flux at 1 AU, true scale, is the class flux) for strands of the defaults of
    :class:`~synthcorona.dimming.scenario.Flare` (half-length 2e9 cm, cross-section 1e18 cm2, 2 MK,
    600 s), or of the ``strand`` keywords given (``loop_half_length``, ``loop_cross_section``,
    ``initial_temperature``, ``duration``), with the emission of ``table`` (default the embedded
    one) at ``abundances`` and ``density``. For a star, the class is the flux the flare would have
    at 1 AU from the star.
    """
    from ..emissivity import resolve_table
    from .flare_class import StrandSpec, class_rule
    from .scenario import Flare

    f = Flare(flare_class=flare_class, **strand)
    spec = StrandSpec(float(f.loop_half_length.to_value(u.cm)), float(f.loop_cross_section.to_value(u.cm ** 2)),
                      float(f.initial_temperature.to_value(u.K)), float(f.duration.to_value(u.s)))
    dens = float(u.Quantity(density, u.cm ** -3).value)
    rule = class_rule(spec, resolve_table(table), abundances, dens, f.em_t_relation)
    return rule.for_class(flare_class).heating_energy * u.erg
