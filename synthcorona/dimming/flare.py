r"""Zero-dimensional (coronal-average) model of a flaring coronal loop.

The loop is a semicircular flux tube of half-length :math:`L` (coronal base to apex) and
constant cross-section :math:`A`; its coronal part (both legs) has volume :math:`V = 2 L A`.
The state is the coronal-average pressure :math:`p` and electron density :math:`n`; the
temperature follows from the ideal-gas law of a fully ionised hydrogen plasma,

.. math:: p = 2 n k_B T \qquad (n_e = n_H = n;\ \text{helium and metals are not counted}).

Equations
---------
Integrating the one-dimensional energy and mass equations over the corona and over a thin
transition region (TR) that is always in energy balance, Klimchuk, Patsourakos & Cargill
(2008, ApJ 682, 1351; hereafter KPC08) obtained, with the improvements of Cargill, Bradshaw
& Klimchuk (2012, ApJ 752, 161; hereafter CBK12):

.. math::

    \frac{dp}{dt} &= \frac{2}{3}\left[Q(t) - (1 + c_1)\, n^2 \Lambda(T)\right] \\
    \frac{dn}{dt} &= -\frac{c_2}{5 c_3 k_B T L}\left(F_0 + c_1 n^2 \Lambda(T) L\right) \\
    F_0 &= -\frac{2}{7}\,\kappa_0 \frac{T_a^{7/2}}{L}, \qquad T_a = T / c_2 .

The TR balance :math:`\tfrac52 p v_0 + F_0 + R_{TR} = 0` with
:math:`R_{TR} = c_1 n^2 \Lambda L` (TR radiation per unit area of one leg) gives the enthalpy
flux :math:`\tfrac52 p v_0 = -(F_0 + R_{TR})` through the coronal base: evaporation
(:math:`v_0 > 0`) when the downward conductive flux exceeds what the TR can radiate,
draining otherwise. The conductive flux does not appear in :math:`dp/dt`: whatever
conduction carries into the TR and the TR cannot radiate comes back as enthalpy. The mass
equation is :math:`L\,dn/dt = n_0 v_0` with the base temperature :math:`T_0 = c_3 T_a`.

Constants (CBK12): :math:`c_2 = T/T_a = 0.9`, :math:`c_3 = T_0/T_a = 0.6`,
:math:`\kappa_0 = 10^{-6}` erg s\ :sup:`-1` cm\ :sup:`-1` K\ :sup:`-7/2` (Spitzer conductivity,
the value used by KPC08). The ratio :math:`c_1 = R_{TR}/R_C` follows CBK12 (their section 2):
:math:`c_{1,eq} = 2.0` in static equilibrium and :math:`c_{1,rad} = 0.6` in the radiatively
cooling, draining phase, joined through the equilibrium density for the current temperature,

.. math::

    n_{eq}^2 = \frac{2}{7}\,\frac{\kappa_0 (T/c_2)^{7/2}}{c_{1,eq}\, L^2\, \Lambda(T)}, \qquad
    c_1 = \begin{cases} c_{1,eq} & n \le n_{eq} \\
    \dfrac{2 c_{1,eq} + c_{1,rad}\,(n^2/n_{eq}^2 - 1)}{1 + n^2/n_{eq}^2} & n > n_{eq}.\end{cases}

With ``gravity=True`` both :math:`c_{1,eq}` and :math:`c_{1,rad}` are multiplied by
:math:`\exp[4 \sin(\pi/5)\, L / (\pi \lambda)]` with the hydrostatic scale height
:math:`\lambda = 2 k_B T / (m_p g)` (CBK12's correction for a semicircular loop; ``g`` is the
stellar surface gravity, solar by default). Gravity enters nowhere else.

Optional saturated conduction (``saturation=True``): the free-streaming limit of Cowie &
McKee (1977, ApJ 211, 135, their eq. 8, from memory), :math:`F_{sat} = 0.4\,(2 k_B T_a / \pi m_e)^{1/2}\,
n k_B T_a`, is combined with the classical flux as
:math:`F = F_{cl} F_{sat} / (F_{cl}^2 + F_{sat}^2)^{1/2}` (the smooth combination of KPC08,
from memory); :math:`n_{eq}` keeps the classical flux.

Radiative losses
----------------
:math:`\Lambda(T)` [erg cm\ :sup:`3` s\ :sup:`-1`, per :math:`n_e n_H`] is by default the
embedded CHIANTI table (:func:`synthcorona.synthesis.radiative_loss`) evaluated once, on the
table's temperature nodes, at the initial density (clipped to the table's density range) and
interpolated linearly in log Λ–log T (exactly what ``radiative_loss`` does between nodes).
Λ depends only weakly on density (≲ 10 % between 10\ :sup:`9` and 10\ :sup:`11` cm\ :sup:`-3`
for the embedded table at coronal temperatures), so it is not re-evaluated as the density
changes during a run. The model cannot
leave the table's temperature range (10\ :sup:`4.5`–10\ :sup:`8.5` K): a run that reaches
either end stops there with a warning and ``attrs["termination"]`` says so.
``radiative_loss="analytic"`` selects the piecewise power law of KPC08 (their eq. 3),
valid over 10\ :sup:`4`–10\ :sup:`9` K (coefficients from memory, checked by their continuity to
0.1 % at every break point); a callable ``f(T: Quantity) -> Quantity`` is sampled
once on a 0.01-dex grid over 10\ :sup:`4.5`–10\ :sup:`8.5` K.

Heating
-------
:math:`Q(t) = Q_{bg} + E_{flare}\, g(t) / V` [erg cm\ :sup:`-3` s\ :sup:`-1`] with
:math:`\int_0^\infty g\,dt = 1`: ``profile="triangular"`` (base width ``duration``, apex at
``peak_time``) or ``"gaussian"`` (FWHM ``duration``). A profile that would begin before
:math:`t = 0` is truncated there and renormalised, so the whole ``flare_energy`` is always
deposited at :math:`t \ge 0`. The background :math:`Q_{bg}` is, by default, the heating of
the static equilibrium of *these* equations (:math:`dp/dt = dn/dt = 0`) at the given initial
temperature, density or pressure: :math:`c_{1,eq} n^2 \Lambda L = -F_0` fixes the missing
variable and :math:`Q_{bg} = (1 + c_{1,eq}) n^2 \Lambda(T)`. This is the 0D analogue of the
scaling laws of Rosner, Tucker & Vaiana (1978, ApJ 220, 643), :math:`T_{max} \approx
1400\,(pL)^{1/3}`; the equilibrium apex temperature lies 11–20 % above that law for
the KPC08 loss function and pL = 1e9–2e11 dyn cm-1 (see ``tests/test_flare.py``). No conversion from a GOES class to an
energy is offered: flare energies vs. class have a scatter of an order of magnitude
(e.g. Emslie et al. 2012, ApJ 759, 71), so the energy is an explicit input.

Cooling times (Cargill 1994, ApJ 422, 381; Cargill, Mariska & Antiochos 1995, ApJ 439, 1034):
:math:`\tau_c = 3 n k_B L^2 / (\kappa_0 T^{5/2})` and :math:`\tau_r = 3 k_B T / (n \Lambda(T))`
(thermal energy :math:`3 n k_B T` over the conductive or radiative loss rate).

Limits used by the tests
------------------------
With no heating the initial logarithmic cooling rate follows from the equations: conduction
dominated, :math:`d\ln T/dt = -(6/35)\, c_2^{-5/2} / (c_3 \tau_c)` (T e-folds in
:math:`2.69\,\tau_c`); radiation dominated, :math:`d\ln T/dt = -[1 + c_1(1 - 3c_2/5c_3)]/\tau_r`
and :math:`d\ln T / d\ln n = (1 + 0.1 c_1)/(0.9 c_1) \approx 1.96` for :math:`c_1 = 0.6`,
the :math:`T \propto n^2` of the draining phase that CBK12 built :math:`c_{1,rad}` to reproduce.

Energy bookkeeping
------------------
The system is the coronal part of the loop. Energy enters as heating :math:`Q V`; it leaves
as coronal radiation :math:`n^2 \Lambda V` and as the net flux through the two coronal
bases, conduction plus enthalpy, :math:`-(F_0 + \tfrac52 p v_0)\, 2A = c_1 n^2 \Lambda V`,
which the thin TR radiates. The thermal energy is :math:`\tfrac32 p V`.
:func:`energy_budget` integrates these from a run's output.
"""
from __future__ import annotations

import math
import warnings
from typing import Callable, NamedTuple

import astropy.constants as const
import astropy.units as u
import numpy as np
import xarray as xr
from scipy.integrate import solve_ivp, trapezoid
from scipy.optimize import brentq
from scipy.special import erf

from ..constants import K_B_CGS as K_B
from ..constants import M_E_G as M_E
from ..constants import M_P_G as M_P
from ..errors import InputError
from ..validation import as_quantity, check_finite, check_positive, check_range

__all__ = [
    "LoopFlareModel", "conductive_cooling_time", "radiative_cooling_time", "energy_budget",
    "flare_em_temperature", "analytic_radiative_loss", "CoolingTimes", "EnergyBudget", "FlareEMTemperature",
    "KAPPA0", "C1_EQUILIBRIUM", "C1_RADIATIVE", "C2", "C3",
]

#: Spitzer parallel conductivity coefficient [erg s-1 cm-1 K-7/2] (KPC08).
KAPPA0 = 1.0e-6
#: Ratio of average to apex temperature (CBK12).
C2 = 0.9
#: Ratio of coronal-base to apex temperature (CBK12).
C3 = 0.6
#: TR-to-coronal radiation ratio in static equilibrium (CBK12, no gravity).
C1_EQUILIBRIUM = 2.0
#: TR-to-coronal radiation ratio in the radiative cooling phase (CBK12, no gravity).
C1_RADIATIVE = 0.6
#: Solar surface gravity GM_sun / R_sun^2 [cm s-2].
SOLAR_GRAVITY = float((const.G * const.M_sun / const.R_sun ** 2).cgs.value)

_HEAT_UNIT = u.erg / u.cm ** 3 / u.s
_LAMBDA_UNIT = u.erg * u.cm ** 3 / u.s
_FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))

# KPC08 eq. 3: Λ = chi T^alpha on [10^lo, 10^hi) (log10 chi given); continuous to 0.1 %.
_KPC08_LOG_T = np.array([4.0, 4.97, 5.67, 6.18, 6.55, 6.90, 7.63, 9.0])
_KPC08_CHI = np.array([1.09e-31, 8.87e-17, 1.90e-22, 3.53e-13, 3.46e-25, 5.49e-16, 1.96e-27])
_KPC08_ALPHA = np.array([2.0, -1.0, 0.0, -1.5, 1.0 / 3.0, -1.0, 0.5])


# ----------------------------------------------------------------------------- radiative loss

class _Loss:
    """Λ(T) on plain floats [K → erg cm3 s-1], with its valid temperature range and a label."""

    def __init__(self, log_t: np.ndarray, log_lam: np.ndarray, label: str):
        self.log_t = np.asarray(log_t, dtype=float)
        self.log_lam = np.asarray(log_lam, dtype=float)
        self.t_min = float(10 ** self.log_t[0])
        self.t_max = float(10 ** self.log_t[-1])
        self.label = label

    def __call__(self, temperature):
        return 10.0 ** np.interp(np.log10(temperature), self.log_t, self.log_lam)


class _AnalyticLoss(_Loss):
    """KPC08 piecewise power law, evaluated exactly on each segment."""

    def __init__(self):
        self.t_min = float(10 ** _KPC08_LOG_T[0])
        self.t_max = float(10 ** _KPC08_LOG_T[-1])
        self.label = "analytic piecewise power law (Klimchuk, Patsourakos & Cargill 2008, ApJ 682, 1351, eq. 3)"

    def __call__(self, temperature):
        t = np.clip(temperature, self.t_min, self.t_max)
        k = np.clip(np.searchsorted(_KPC08_LOG_T, np.log10(t), side="right") - 1, 0, _KPC08_CHI.size - 1)
        return _KPC08_CHI[k] * t ** _KPC08_ALPHA[k]


def analytic_radiative_loss(temperature) -> u.Quantity:
    r"""Piecewise power-law radiative loss function of Klimchuk, Patsourakos & Cargill (2008, ApJ 682, 1351, eq. 3).

    :math:`\Lambda = 1.09\times10^{-31} T^2` (T ≤ 10^4.97 K), :math:`8.87\times10^{-17} T^{-1}`
    (≤ 10^5.67), :math:`1.90\times10^{-22}` (≤ 10^6.18), :math:`3.53\times10^{-13} T^{-3/2}`
    (≤ 10^6.55), :math:`3.46\times10^{-25} T^{1/3}` (≤ 10^6.90), :math:`5.49\times10^{-16} T^{-1}`
    (≤ 10^7.63), :math:`1.96\times10^{-27} T^{1/2}` above; erg cm3 s-1, for 10^4–10^9 K.
    """
    t = as_quantity("temperature", temperature, u.K)
    check_range("temperature", t.value, lo=1e4, hi=1e9, unit_label="K")
    return u.Quantity(_AnalyticLoss()(t.value), _LAMBDA_UNIT)


def _table_loss(density_cm3: float, abundances) -> _Loss:
    from ..emissivity import load_emissivity
    from ..synthesis import radiative_loss

    table = load_emissivity()
    lo, hi = 10 ** table.log_density[0], 10 ** table.log_density[-1]
    n_eval = float(np.clip(density_cm3, lo, hi))
    lam = radiative_loss(10 ** table.logT * u.K, table=table, abundances=abundances,
                         density=n_eval * u.cm ** -3).to_value(_LAMBDA_UNIT)
    label = (f"embedded CHIANTI table ({table.provenance.get('chianti_version', '?')}), abundances "
             f"{abundances!r}, evaluated at n_e = {n_eval:.4g} cm-3, log-log interpolation in T")
    return _Loss(table.logT, np.log10(np.maximum(lam, 1e-300)), label)


def _callable_loss(func: Callable) -> _Loss:
    log_t = np.round(np.arange(4.5, 8.5 + 1e-9, 0.01), 6)
    try:
        lam = func(10 ** log_t * u.K)
        lam = as_quantity("radiative_loss(T)", lam, _LAMBDA_UNIT).value
    except InputError:
        raise
    except u.UnitsError:
        raise
    except Exception as exc:  # the user's function failed: say where
        raise InputError(f"radiative_loss: calling the function on T = 10^4.5-10^8.5 K failed: {exc!r}") from exc
    lam = np.broadcast_to(np.asarray(lam, dtype=float), log_t.shape)
    if not np.all(np.isfinite(lam)) or np.any(lam <= 0):
        raise InputError("radiative_loss: the function must return finite values > 0 erg cm3 s-1 on 10^4.5-10^8.5 K")
    name = getattr(func, "__name__", type(func).__name__)
    return _Loss(log_t, np.log10(lam), f"user function {name} sampled every 0.01 dex on 10^4.5-10^8.5 K")


def _resolve_loss(spec, density_cm3: float, abundances) -> _Loss:
    if spec is None or (isinstance(spec, str) and spec == "table"):
        return _table_loss(density_cm3, abundances)
    if isinstance(spec, str) and spec == "analytic":
        return _AnalyticLoss()
    if callable(spec):
        return _callable_loss(spec)
    raise InputError(f"radiative_loss={spec!r}: give None or 'table' (embedded CHIANTI table), 'analytic' "
                     "(KPC08 power law) or a function T [Quantity] -> Lambda [erg cm3 s-1]")


# ----------------------------------------------------------------------------- cooling times

class CoolingTimes(NamedTuple):
    """Conductive and radiative cooling times [s] (Cargill 1994)."""

    conductive: u.Quantity
    radiative: u.Quantity


def _scalar_or_array(name, value, unit):
    q = as_quantity(name, value, unit)
    check_finite(name, q)
    return q


def conductive_cooling_time(temperature, density, half_length) -> u.Quantity:
    r"""Conductive cooling time :math:`\tau_c = 3 n k_B L^2 / (\kappa_0 T^{5/2})` [s].

    Cargill (1994, ApJ 422, 381) and Cargill, Mariska & Antiochos (1995, ApJ 439, 1034):
    the thermal energy :math:`3 n k_B T` divided by the conductive loss rate
    :math:`\kappa_0 T^{7/2} / L^2`, with :math:`\kappa_0 = 10^{-6}` cgs; numerically
    :math:`\approx 4.1\times10^{-10}\, n L^2 T^{-5/2}` s (the factor 3 as remembered from those
    papers: thermal energy of electrons plus protons). Arguments broadcast.
    """
    t = _scalar_or_array("temperature", temperature, u.K)
    n = _scalar_or_array("density", density, u.cm ** -3)
    length = _scalar_or_array("half_length", half_length, u.cm)
    check_positive("temperature", t.value, "K")
    check_positive("density", n.value, "cm-3")
    check_positive("half_length", length.value, "cm")
    return u.Quantity(3.0 * n.value * K_B * length.value ** 2 / (KAPPA0 * t.value ** 2.5), u.s)


def radiative_cooling_time(temperature, density, radiative_loss=None, abundances="coronal") -> u.Quantity:
    r"""Radiative cooling time :math:`\tau_r = 3 k_B T / (n \Lambda(T))` [s].

    Cargill (1994, ApJ 422, 381); Cargill, Mariska & Antiochos (1995, ApJ 439, 1034).
    ``radiative_loss`` is Λ itself (a Quantity in erg cm3 s-1 broadcasting with ``temperature``),
    a function T → Λ, ``"analytic"`` (KPC08 eq. 3) or None / ``"table"`` (the embedded CHIANTI
    table at each given density, clipped to the table's density range).
    """
    t = _scalar_or_array("temperature", temperature, u.K)
    n = _scalar_or_array("density", density, u.cm ** -3)
    check_positive("temperature", t.value, "K")
    check_positive("density", n.value, "cm-3")
    if isinstance(radiative_loss, u.Quantity):
        lam = as_quantity("radiative_loss", radiative_loss, _LAMBDA_UNIT).value
        check_positive("radiative_loss", lam, "erg cm3 s-1")
    elif isinstance(radiative_loss, str) and radiative_loss == "analytic":
        lam = analytic_radiative_loss(t).value
    elif callable(radiative_loss):
        lam = as_quantity("radiative_loss(T)", radiative_loss(t), _LAMBDA_UNIT).value
    elif radiative_loss is None or radiative_loss == "table":
        from ..synthesis import radiative_loss as table_loss

        tv, nv = np.broadcast_arrays(t.value, n.value)
        lam = np.empty(tv.shape)
        for dens in np.unique(nv):
            sel = nv == dens
            lam[sel] = table_loss(tv[sel] * u.K, abundances=abundances,
                                  density=_loss_density(dens) * u.cm ** -3).to_value(_LAMBDA_UNIT)
    else:
        raise InputError(f"radiative_loss={radiative_loss!r}: give a Quantity (erg cm3 s-1), a function, "
                         "'analytic', 'table' or None")
    return u.Quantity(3.0 * K_B * t.value / (n.value * lam), u.s)


def _loss_density(density_cm3: float) -> float:
    """Density [cm-3] at which the embedded table's Λ is evaluated: ``density`` clipped to the table range."""
    from ..emissivity import load_emissivity

    table = load_emissivity()
    return float(np.clip(density_cm3, 10 ** table.log_density[0], 10 ** table.log_density[-1]))


# ----------------------------------------------------------------------------- heating profile

class _Profile:
    """Normalised flare heating profile g(t) [s-1] with ∫_0^∞ g dt = 1 and its cumulative integral."""

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


# ----------------------------------------------------------------------------- the model

class LoopFlareModel:
    r"""Coronal-average (0D) flare loop: T, n, p of a loop of half-length L under impulsive heating.

    Implements the equations of Klimchuk, Patsourakos & Cargill (2008, ApJ 682, 1351) with the
    improvements of Cargill, Bradshaw & Klimchuk (2012, ApJ 752, 161); see the module docstring
    for the equations, constants and their sources.

    Parameters
    ----------
    half_length : Quantity [length]
        Loop half-length L, coronal base to apex (> 0).
    loop_cross_section : Quantity [area]
        Cross-section A of the loop (> 0); the coronal volume is V = 2 L A.
    initial_temperature, initial_density, initial_pressure : Quantity, keyword-only
        The initial state. Give **one** of them for a static equilibrium of the model's equations
        (the other two and the background heating follow), or **two** for an arbitrary
        (non-equilibrium) start, in which case ``background_heating`` must be given.
        Temperature in K (inside the Λ range), density in cm-3, pressure in dyn cm-2.
    flare_energy : Quantity [energy]
        Total energy deposited by the flare heating (>= 0; default 0, no flare).
    peak_time, duration : Quantity [time]
        Time of peak heating (>= 0) and base width (triangular) or FWHM (Gaussian) (> 0);
        required when ``flare_energy > 0``.
    profile : {"triangular", "gaussian"}
        Time profile of the flare heating.
    radiative_loss : None, "table", "analytic" or callable
        Λ(T); see the module docstring.
    gravity : bool
        Apply CBK12's gravitational correction to c1.
    surface_gravity : Quantity [acceleration], optional
        Stellar surface gravity for ``gravity=True`` (default solar, 2.74e4 cm s-2).
    saturation : bool
        Limit the conductive flux by the saturated (free-streaming) flux.
    background_heating : Quantity [erg cm-3 s-1], optional
        Steady heating rate. Default: the equilibrium value (one initial variable given).
    abundances : str or dict
        Abundances of the table Λ (ignored for "analytic" or a callable).
    """

    def __init__(self, half_length, loop_cross_section, *, initial_temperature=None, initial_density=None,
                 initial_pressure=None, flare_energy=0.0 * u.erg, peak_time=None, duration=None,
                 profile: str = "triangular", radiative_loss=None, gravity: bool = False, surface_gravity=None,
                 saturation: bool = False, background_heating=None, abundances="coronal"):
        self.half_length = self._positive_scalar("half_length", half_length, u.cm)
        self.loop_cross_section = self._positive_scalar("loop_cross_section", loop_cross_section, u.cm ** 2)
        self._L = self.half_length.value
        self._A = self.loop_cross_section.value
        self._V = 2.0 * self._L * self._A
        self.gravity = bool(gravity)
        self.saturation = bool(saturation)
        if surface_gravity is None:
            self.surface_gravity = SOLAR_GRAVITY * u.cm / u.s ** 2
        else:
            self.surface_gravity = self._positive_scalar("surface_gravity", surface_gravity, u.cm / u.s ** 2)
        self._g = self.surface_gravity.value

        # ---- flare heating
        e = as_quantity("flare_energy", flare_energy, u.erg)
        if np.ndim(e) != 0:
            raise InputError(f"flare_energy={flare_energy} must be a single value")
        check_range("flare_energy", e.value, lo=0.0, unit_label="erg")
        self.flare_energy = e
        if not isinstance(profile, str) or profile not in ("triangular", "gaussian"):
            raise InputError(f"profile={profile!r} must be 'triangular' or 'gaussian'")
        self.profile = profile
        self.peak_time = None if peak_time is None else self._scalar("peak_time", peak_time, u.s, lo=0.0)
        if duration is not None:
            self.duration = self._positive_scalar("duration", duration, u.s)
        else:
            self.duration = None
        if e.value > 0 and (self.peak_time is None or self.duration is None):
            raise InputError(f"flare_energy={flare_energy} > 0 needs peak_time (>= 0 s) and duration (> 0 s)")
        self._profile = None
        if e.value > 0:
            self._profile = _Profile(profile, self.peak_time.value, self.duration.value)
        self._q_flare = e.value / self._V  # erg cm-3 (times g(t) [s-1])

        # ---- initial state and radiative losses
        given = {k: v for k, v in (("initial_temperature", initial_temperature), ("initial_density", initial_density),
                                   ("initial_pressure", initial_pressure)) if v is not None}
        if not 1 <= len(given) <= 2:
            raise InputError("give one of initial_temperature, initial_density, initial_pressure (static "
                             f"equilibrium) or two of them (arbitrary start); got {sorted(given) or 'none'}")
        t0 = n0 = p0 = None
        if "initial_temperature" in given:
            t0 = self._positive_scalar("initial_temperature", initial_temperature, u.K).value
        if "initial_density" in given:
            n0 = self._positive_scalar("initial_density", initial_density, u.cm ** -3).value
        if "initial_pressure" in given:
            p0 = self._positive_scalar("initial_pressure", initial_pressure, u.dyn / u.cm ** 2).value
        self._loss_spec, self._abundances = radiative_loss, abundances
        self.equilibrium_start = len(given) == 1
        if len(given) == 2:
            if t0 is None:
                t0 = p0 / (2.0 * n0 * K_B)
            elif n0 is None:
                n0 = p0 / (2.0 * t0 * K_B)
            self.loss = _resolve_loss(radiative_loss, n0, abundances)
            name = "initial_temperature" if "initial_temperature" in given else "initial_pressure"
            self._check_t(name, t0)
            if background_heating is None:
                raise InputError("background_heating is required when the initial state is given by two variables "
                                 "(it is not an equilibrium); use 0 erg cm-3 s-1 for none")
        else:
            t0, n0 = self._equilibrium(t0, n0, p0, given)
        self._T0, self._n0 = float(t0), float(n0)
        self._p0 = 2.0 * self._n0 * K_B * self._T0
        if background_heating is None:
            lam = self.loss(self._T0)
            self._q_bg = (1.0 + self._c1(self._T0, self._n0, lam)) * self._n0 ** 2 * lam
        else:
            q = as_quantity("background_heating", background_heating, _HEAT_UNIT)
            if np.ndim(q) != 0:
                raise InputError("background_heating must be a single value")
            check_range("background_heating", q.value, lo=0.0, unit_label="erg cm-3 s-1")
            self._q_bg = float(q.value)

    # ------------------------------------------------------------------ argument helpers
    @staticmethod
    def _scalar(name, value, unit, lo=None):
        q = as_quantity(name, value, unit)
        if np.ndim(q) != 0:
            raise InputError(f"{name}={value} must be a single value")
        check_range(name, q.value, lo=lo, unit_label=str(u.Unit(unit)))
        return q

    @classmethod
    def _positive_scalar(cls, name, value, unit):
        q = as_quantity(name, value, unit)
        if np.ndim(q) != 0:
            raise InputError(f"{name}={value} must be a single value")
        check_positive(name, q.value, unit_label=u.Unit(unit).to_string())
        return q

    def _check_t(self, name, temperature):
        lo, hi = self.loss.t_min, self.loss.t_max
        if not lo <= temperature <= hi:
            raise InputError(f"{name}: temperature {temperature:.4g} K is outside the valid range "
                             f"[{lo:.4g}, {hi:.4g}] K of the radiative loss function ({self.loss.label})")

    # ------------------------------------------------------------------ physics on plain floats / arrays
    @property
    def initial_state(self) -> dict:
        """Initial temperature, density and pressure as Quantities."""
        return {"temperature": self._T0 * u.K, "density": self._n0 * u.cm ** -3,
                "pressure": self._p0 * u.dyn / u.cm ** 2}

    @property
    def background_heating(self) -> u.Quantity:
        """Steady background heating rate [erg cm-3 s-1]."""
        return self._q_bg * _HEAT_UNIT

    @property
    def volume(self) -> u.Quantity:
        """Coronal volume V = 2 L A [cm3]."""
        return self._V * u.cm ** 3

    def _c1_bounds(self, temperature):
        """(c1_eq, c1_rad), with CBK12's gravity factor if enabled."""
        if not self.gravity:
            return C1_EQUILIBRIUM, C1_RADIATIVE
        scale_height = 2.0 * K_B * temperature / (M_P * self._g)
        f = np.exp(4.0 * math.sin(math.pi / 5.0) * self._L / (math.pi * scale_height))
        return C1_EQUILIBRIUM * f, C1_RADIATIVE * f

    def _c1(self, temperature, density, lam):
        c1_eq, c1_rad = self._c1_bounds(temperature)
        n_eq2 = (2.0 / 7.0) * KAPPA0 * (temperature / C2) ** 3.5 / (c1_eq * self._L ** 2 * lam)
        x = density * density / n_eq2
        return np.where(x <= 1.0, c1_eq, (2.0 * c1_eq + c1_rad * (x - 1.0)) / (1.0 + x))

    def _conductive_flux(self, temperature, density):
        """F_0 [erg cm-2 s-1] (negative: downward into the TR)."""
        t_apex = temperature / C2
        f_cl = (2.0 / 7.0) * KAPPA0 * t_apex ** 3.5 / self._L
        if self.saturation:
            f_sat = 0.4 * np.sqrt(2.0 * K_B * t_apex / (math.pi * M_E)) * density * K_B * t_apex
            f_cl = f_cl * f_sat / np.sqrt(f_cl * f_cl + f_sat * f_sat)
        return -f_cl

    def heating(self, t):
        """Total heating rate Q(t) [erg cm-3 s-1] on plain seconds (array or float)."""
        q = np.full(np.shape(t), self._q_bg, dtype=float)
        if self._profile is not None:
            q = q + self._q_flare * self._profile.rate(t)
        return q if np.ndim(t) else float(q)

    def _terms(self, t, p, n):
        """All right-hand-side terms (floats or arrays)."""
        temp = p / (2.0 * n * K_B)
        lam = self.loss(np.clip(temp, self.loss.t_min, self.loss.t_max))
        c1 = self._c1(temp, n, lam)
        rad = n * n * lam
        f0 = self._conductive_flux(temp, n)
        q = self.heating(t)
        enthalpy = -(f0 + c1 * rad * self._L)  # (5/2) p v0, erg cm-2 s-1, > 0 upward (evaporation)
        dp = (2.0 / 3.0) * (q - (1.0 + c1) * rad)
        dn = C2 * enthalpy / (5.0 * C3 * K_B * temp * self._L)
        return temp, lam, c1, rad, f0, q, enthalpy, dp, dn

    def _rhs(self, t, y):
        p, n = math.exp(y[0]), math.exp(y[1])
        *_, dp, dn = self._terms(t, p, n)
        return [dp / p, dn / n]

    def _equilibrium_residual(self, temperature, density):
        """log(-F_0) - log(c1 n^2 Λ L): zero in static equilibrium (dn/dt = 0)."""
        lam = self.loss(temperature)
        return (np.log(-self._conductive_flux(temperature, density))
                - np.log(self._c1(temperature, density, lam) * density ** 2 * lam * self._L))

    def _solve_equilibrium(self, t0, n0, p0, given):
        loss = self.loss
        if t0 is not None:
            self._check_t("initial_temperature", t0)
            # residual decreases monotonically with n (|F_0| grows at most linearly, c1 n^2 faster)
            f = lambda ln_n: self._equilibrium_residual(t0, math.exp(ln_n))
            lo, hi = math.log(1e-6), math.log(1e25)
            if not f(lo) > 0 > f(hi):
                raise InputError(f"initial_temperature={t0:.4g} K: no equilibrium density in [1e-6, 1e25] cm-3")
            return t0, math.exp(brentq(f, lo, hi, xtol=1e-12))
        name = "initial_density" if n0 is not None else "initial_pressure"

        def dens(temp):
            return n0 if n0 is not None else p0 / (2.0 * K_B * temp)

        log_t = np.linspace(math.log10(loss.t_min), math.log10(loss.t_max), 801)
        res = np.array([self._equilibrium_residual(10 ** lt, dens(10 ** lt)) for lt in log_t])
        change = np.nonzero(np.sign(res[:-1]) != np.sign(res[1:]))[0]
        if change.size == 0:
            value = n0 if n0 is not None else p0
            unit = "cm-3" if n0 is not None else "dyn cm-2"
            raise InputError(f"{name}={value:.4g} {unit}: no static equilibrium with the temperature inside "
                             f"[{loss.t_min:.4g}, {loss.t_max:.4g}] K (the range of the radiative loss function) "
                             f"for half_length={self._L:.4g} cm")
        k = change[-1]  # the hottest root is the coronal one
        g = lambda lt: self._equilibrium_residual(10 ** lt, dens(10 ** lt))
        lt = brentq(g, log_t[k], log_t[k + 1], xtol=1e-12)
        return 10 ** lt, dens(10 ** lt)

    def _equilibrium(self, t0, n0, p0, given):
        """Static equilibrium; the table Λ is re-evaluated at the equilibrium density until consistent."""
        guess = n0 if n0 is not None else 1e10
        self.loss = _resolve_loss(self._loss_spec, guess, self._abundances)
        table_based = self._loss_spec is None or self._loss_spec == "table"
        for _ in range(5):
            t_eq, n_eq = self._solve_equilibrium(t0, n0, p0, given)
            if not table_based or n0 is not None:
                break
            if abs(math.log10(_loss_density(n_eq) / _loss_density(guess))) < 0.02:
                break
            guess = n_eq
            self.loss = _resolve_loss(self._loss_spec, guess, self._abundances)
        self._check_t("initial_temperature" if t0 is not None else
                      ("initial_density" if n0 is not None else "initial_pressure"), t_eq)
        return t_eq, n_eq

    # ------------------------------------------------------------------ public helpers
    def cooling_times(self, temperature, density) -> CoolingTimes:
        """Conductive and radiative cooling times [s] of this loop (its L and Λ) at T, n (Cargill 1994)."""
        t = _scalar_or_array("temperature", temperature, u.K)
        n = _scalar_or_array("density", density, u.cm ** -3)
        check_range("temperature", t.value, lo=self.loss.t_min, hi=self.loss.t_max, unit_label="K")
        check_positive("density", n.value, "cm-3")
        tau_c = conductive_cooling_time(t, n, self.half_length)
        tau_r = radiative_cooling_time(t, n, radiative_loss=self.loss(t.value) * _LAMBDA_UNIT)
        return CoolingTimes(tau_c, tau_r)

    def c1(self, temperature, density) -> np.ndarray:
        """CBK12 ratio c1 of TR to coronal radiative losses at T, n (dimensionless)."""
        t = _scalar_or_array("temperature", temperature, u.K).value
        n = _scalar_or_array("density", density, u.cm ** -3).value
        check_range("temperature", t, lo=self.loss.t_min, hi=self.loss.t_max, unit_label="K")
        check_positive("density", n, "cm-3")
        return self._c1(t, n, self.loss(t))

    def derivatives(self, temperature, density, time=0 * u.s) -> dict:
        """Time derivatives dT/dt, dn/dt, dp/dt [per s] of the model equations at one state (for checks)."""
        t = self._scalar("temperature", temperature, u.K).value
        n = self._positive_scalar("density", density, u.cm ** -3).value
        self._check_t("temperature", t)
        tt = self._scalar("time", time, u.s, lo=0.0).value
        p = 2.0 * n * K_B * t
        *_, dp, dn = self._terms(tt, p, n)
        dt = t * (dp / p - dn / n)
        return {"temperature": dt * u.K / u.s, "density": dn * u.cm ** -3 / u.s,
                "pressure": dp * u.dyn / u.cm ** 2 / u.s}

    # ------------------------------------------------------------------ integration
    def _output_times(self, t_end, n_output, times):
        if times is not None:
            tq = as_quantity("times", times, u.s)
            tv = np.asarray(tq.value, dtype=float).ravel()
            check_range("times", tv, lo=0.0, hi=t_end, unit_label="s")
            out = np.unique(np.concatenate([[0.0], tv]))
            return out
        grid = [np.linspace(0.0, t_end, n_output)]
        if self._profile is not None:
            a, b = max(self._profile.start, 0.0), min(self._profile.end, t_end)
            if b > a:
                grid.append(np.linspace(a, b, max(n_output // 2, 3)))
            grid.append([pt for pt in (self._profile.start, self._profile.peak, self._profile.end) if 0 <= pt <= t_end])
        return np.unique(np.concatenate(grid))

    def run(self, t_end, max_step=None, n_output: int = 2001, times=None, rtol: float = 1e-8) -> xr.Dataset:
        """Integrate the loop equations from t = 0 to ``t_end``.

        Parameters
        ----------
        t_end : Quantity [time]
            End of the run (> 0).
        max_step : Quantity [time], optional
            Largest solver step. Default: unlimited, except duration/20 (triangular) or
            sigma/2 (Gaussian) while the flare heating is on.
        n_output : int
            Number of evenly spaced output times (>= 3); half as many more are added over the heating
            interval, plus its start, peak and end, so that time integrals of the output are accurate.
        times : Quantity [time], optional
            Explicit output times in [0, t_end] instead of the default grid (t = 0 is always included).
        rtol : float
            Relative tolerance of the implicit Radau solver (scipy.integrate.solve_ivp) on ln p and ln n.

        Returns
        -------
        xarray.Dataset
            Over coordinate ``time`` [s]: temperature [K], apex_temperature [K], density [cm-3],
            pressure [dyn cm-2], emission_measure n^2 V [cm-3], heating_rate,
            coronal_radiative_loss_rate (n^2 Λ), transition_region_radiative_loss_rate (c1 n^2 Λ),
            radiative_loss_rate (their sum), conductive_loss_rate (-F_0/L) [all erg cm-3 s-1],
            conductive_flux F_0 and enthalpy_flux (5/2) p v_0 [erg cm-2 s-1, positive upward],
            base_velocity v_0 [cm s-1], c1. ``attrs`` hold the parameters, equations and references;
            each variable's ``attrs["units"]`` its unit.
        """
        te = self._positive_scalar("t_end", t_end, u.s).value
        if not isinstance(n_output, (int, np.integer)) or n_output < 3:
            raise InputError(f"n_output={n_output!r} must be an integer >= 3")
        if not (isinstance(rtol, float) and 1e-13 <= rtol <= 1e-3):
            raise InputError(f"rtol={rtol!r} is outside the valid range [1e-13, 1e-3]")
        user_step = np.inf if max_step is None else self._positive_scalar("max_step", max_step, u.s).value
        out_t = self._output_times(te, n_output, times)

        edges = [0.0, te]
        heat_step = np.inf
        if self._profile is not None:
            pr = self._profile
            edges += [x for x in (pr.start, pr.peak, pr.end) if 0.0 < x < te]
            heat_step = pr.half / 10.0 if pr.kind == "triangular" else pr.sigma / 2.0
        edges = np.unique(edges)

        log_tmin, log_tmax = math.log(self.loss.t_min), math.log(self.loss.t_max)

        def ev_low(t, y):
            return (y[0] - y[1] - math.log(2 * K_B)) - log_tmin

        def ev_high(t, y):
            return log_tmax - (y[0] - y[1] - math.log(2 * K_B))

        for ev in (ev_low, ev_high):
            ev.terminal, ev.direction = True, -1

        y = np.array([math.log(self._p0), math.log(self._n0)])
        ts, ys = [], []
        termination = "reached t_end"
        for a, b in zip(edges[:-1], edges[1:]):
            heating_on = self._profile is not None and self._profile.start < b and a < self._profile.end
            step = min(user_step, heat_step if heating_on else np.inf, b - a)
            sol = solve_ivp(self._rhs, (a, b), y, method="Radau", rtol=rtol, atol=rtol * 1e-2,
                            max_step=step, dense_output=True, events=(ev_low, ev_high))
            if sol.status == -1:
                raise RuntimeError(f"loop integration failed at t = {sol.t[-1]:.6g} s: {sol.message}")
            t_stop = sol.t[-1]
            sel = (out_t >= a) & (out_t < t_stop) if t_stop < b or b < te else (out_t >= a) & (out_t <= b)
            if np.any(sel):
                ts.append(out_t[sel])
                ys.append(sol.sol(out_t[sel]))
            y = sol.y[:, -1]
            if sol.status == 1:
                which = "lower" if sol.t_events[0].size else "upper"
                termination = (f"stopped at t = {t_stop:.6g} s: the temperature reached the {which} end of the "
                               f"radiative loss range [{self.loss.t_min:.4g}, {self.loss.t_max:.4g}] K")
                ts.append(np.array([t_stop]))
                ys.append(y[:, None])
                warnings.warn(f"LoopFlareModel.run {termination}", RuntimeWarning, stacklevel=2)
                break
        t_all = np.concatenate(ts)
        y_all = np.concatenate(ys, axis=1)
        t_all, keep = np.unique(t_all, return_index=True)
        y_all = y_all[:, keep]
        return self._dataset(t_all, np.exp(y_all[0]), np.exp(y_all[1]), termination, rtol)

    def _dataset(self, t, p, n, termination, rtol) -> xr.Dataset:
        temp, lam, c1, rad, f0, q, enthalpy, _, _ = self._terms(t, p, n)
        heat = u.erg / u.cm ** 3 / u.s
        flux = u.erg / u.cm ** 2 / u.s

        def var(values, unit, long_name):
            unit_s = unit if isinstance(unit, str) else u.Unit(unit).to_string()
            return ("time", np.asarray(values, dtype=float), {"units": unit_s, "long_name": long_name})

        ds = xr.Dataset(
            {
                "temperature": var(temp, u.K, "coronal-average temperature T = p / (2 n k_B)"),
                "apex_temperature": var(temp / C2, u.K, "apex temperature T / c2"),
                "density": var(n, u.cm ** -3, "coronal-average electron density"),
                "pressure": var(p, u.dyn / u.cm ** 2, "coronal-average pressure"),
                "emission_measure": var(n * n * self._V, u.cm ** -3, "volume emission measure n^2 V (V = 2 L A)"),
                "heating_rate": var(q, heat, "volumetric heating rate Q(t)"),
                "coronal_radiative_loss_rate": var(rad, heat, "coronal radiative loss n^2 Lambda(T)"),
                "transition_region_radiative_loss_rate": var(
                    c1 * rad, heat, "TR radiative loss per coronal volume c1 n^2 Lambda(T)"),
                "radiative_loss_rate": var((1.0 + c1) * rad, heat, "total radiative loss (1 + c1) n^2 Lambda(T)"),
                "conductive_loss_rate": var(-f0 / self._L, heat, "conductive loss of the corona -F_0 / L"),
                "conductive_flux": var(f0, flux, "conductive flux F_0 at the coronal base (negative: downward)"),
                "enthalpy_flux": var(enthalpy, flux, "enthalpy flux (5/2) p v_0 at the base (positive: upflow)"),
                "base_velocity": var(enthalpy / (2.5 * p), u.cm / u.s, "velocity v_0 at the coronal base"),
                "c1": var(c1, "", "ratio c1 of TR to coronal radiative losses (CBK12)"),
            },
            coords={"time": ("time", t, {"units": "s", "long_name": "time since the start of the run"})},
        )
        ds.attrs.update({
            "model": "coronal-average (0D) loop model of synthcorona.dimming.flare",
            "references": ("Klimchuk, Patsourakos & Cargill 2008, ApJ 682, 1351; Cargill, Bradshaw & Klimchuk 2012, "
                           "ApJ 752, 161; Cargill 1994, ApJ 422, 381"),
            "half_length_cm": float(self._L),
            "loop_cross_section_cm2": float(self._A),
            "volume_cm3": float(self._V),
            "kappa0_cgs": KAPPA0,
            "c2": C2,
            "c3": C3,
            "c1_equilibrium": C1_EQUILIBRIUM,
            "c1_radiative": C1_RADIATIVE,
            "gravity": "yes" if self.gravity else "no",
            "surface_gravity_cm_s2": float(self._g),
            "saturated_conduction": "yes" if self.saturation else "no",
            "radiative_loss": self.loss.label,
            "background_heating_erg_cm3_s": float(self._q_bg),
            "flare_energy_erg": float(self.flare_energy.value),
            "flare_profile": self.profile if self._profile is not None else "none",
            "flare_peak_time_s": float(self.peak_time.value) if self.peak_time is not None else float("nan"),
            "flare_duration_s": float(self.duration.value) if self.duration is not None else float("nan"),
            "initial_state": "static equilibrium" if self.equilibrium_start else "user-given (non-equilibrium)",
            "termination": termination,
            "solver": f"scipy.integrate.solve_ivp Radau on (ln p, ln n), rtol={rtol:g}",
            "equation_of_state": "p = 2 n k_B T (fully ionised hydrogen)",
        })
        return ds


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
    q = lambda x: x * u.erg
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
