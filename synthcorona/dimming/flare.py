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
:math:`\Lambda(T)` (:mod:`synthcorona.dimming.flare_loss`) is by default the emissivity table's at
the initial density, not re-evaluated as the density changes. A run whose temperature reaches
either end of the Λ range (10\ :sup:`4.5`–10\ :sup:`8.5` K for the embedded table) stops there
with a warning, and ``attrs["termination"]`` says so.

Heating
-------
:math:`Q(t) = Q_{bg} + E_{flare}\, g(t) / V` [erg cm\ :sup:`-3` s\ :sup:`-1`] with
:math:`\int_0^\infty g\,dt = 1`: ``profile="triangular"`` (base width ``duration``, apex at
``peak_time``) or ``"gaussian"`` (FWHM ``duration``), see
:class:`~synthcorona.dimming.flare_energy.HeatingProfile`; the whole ``flare_energy`` is
deposited at :math:`t \ge 0`. The background :math:`Q_{bg}` is, by default, the heating of
the static equilibrium of *these* equations (:math:`dp/dt = dn/dt = 0`) at the given initial
temperature, density or pressure: :math:`c_{1,eq} n^2 \Lambda L = -F_0` fixes the missing
variable and :math:`Q_{bg} = (1 + c_{1,eq}) n^2 \Lambda(T)`. This is the 0D analogue of the
scaling laws of Rosner, Tucker & Vaiana (1978, ApJ 220, 643), :math:`T_{max} \approx
1400\,(pL)^{1/3}`; the equilibrium apex temperature lies 11–20 % above that law for
the KPC08 loss function and pL = 1e9–2e11 dyn cm-1 (see ``tests/dimming/test_flare.py``). The
flare energy is an explicit input: flare energies vs. soft-X-ray class have a scatter of an
order of magnitude (e.g. Emslie et al. 2012, ApJ 759, 71). A scenario's flare is an arcade of
these loops set up so that its own peak 1-8 Angstrom flux matches its class
(:mod:`synthcorona.dimming.flare_class`).

Cooling times are in :mod:`synthcorona.dimming.flare_cooling`, the energy bookkeeping of a run in
:mod:`synthcorona.dimming.flare_energy`.

Limits used by the tests
------------------------
With no heating the initial logarithmic cooling rate follows from the equations: conduction
dominated, :math:`d\ln T/dt = -(6/35)\, c_2^{-5/2} / (c_3 \tau_c)` (T e-folds in
:math:`2.69\,\tau_c`); radiation dominated, :math:`d\ln T/dt = -[1 + c_1(1 - 3c_2/5c_3)]/\tau_r`
and :math:`d\ln T / d\ln n = (1 + 0.1 c_1)/(0.9 c_1) \approx 1.96` for :math:`c_1 = 0.6`,
the :math:`T \propto n^2` of the draining phase that CBK12 built :math:`c_{1,rad}` to reproduce.
"""
from __future__ import annotations

import math
import warnings

import astropy.constants as const
import astropy.units as u
import numpy as np
import xarray as xr
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from ..constants import K_B_CGS as K_B
from ..constants import M_E_G as M_E
from ..constants import M_P_G as M_P
from ..errors import InputError
from ..validation import as_quantity, check_positive, check_range
from .flare_cooling import KAPPA0, CoolingTimes, conductive_cooling_time, finite_quantity, radiative_cooling_time
from .flare_energy import HeatingProfile
from .flare_loss import LAMBDA_UNIT, is_table_loss, loss_density, resolve_loss

__all__ = ["LoopFlareModel", "C1_EQUILIBRIUM", "C1_RADIATIVE", "C2", "C3", "SOLAR_GRAVITY"]

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
    table : EmissivityTable or path, optional
        Emissivity table of the table Λ (default: the embedded table, or ``$SYNTHCORONA_TABLE``;
        see :func:`synthcorona.emissivity.resolve_table`; ignored for "analytic" or a callable).
    """

    def __init__(self, half_length, loop_cross_section, *, initial_temperature=None, initial_density=None,
                 initial_pressure=None, flare_energy=0.0 * u.erg, peak_time=None, duration=None,
                 profile: str = "triangular", radiative_loss=None, gravity: bool = False, surface_gravity=None,
                 saturation: bool = False, background_heating=None, abundances="coronal", table=None):
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
        self._set_heating(flare_energy, peak_time, duration, profile)
        self._table = table  # of the table Λ, as given (resolved by flare_loss)
        self._set_initial_state(initial_temperature, initial_density, initial_pressure, radiative_loss, abundances,
                                background_heating)

    def _set_heating(self, flare_energy, peak_time, duration, profile):
        """Flare heating: energy, profile and its time parameters (checked)."""
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
            self._profile = HeatingProfile(profile, self.peak_time.value, self.duration.value)
        self._q_flare = e.value / self._V  # erg cm-3 (times g(t) [s-1])

    def _set_initial_state(self, initial_temperature, initial_density, initial_pressure, radiative_loss, abundances,
                           background_heating):
        """Initial state, radiative losses and background heating (checked)."""
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
            self.loss = resolve_loss(radiative_loss, n0, abundances, self._table)
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
            def f(ln_n):
                return self._equilibrium_residual(t0, math.exp(ln_n))

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

        def g(lt):
            return self._equilibrium_residual(10 ** lt, dens(10 ** lt))

        lt = brentq(g, log_t[k], log_t[k + 1], xtol=1e-12)
        return 10 ** lt, dens(10 ** lt)

    def _equilibrium(self, t0, n0, p0, given):
        """Static equilibrium; the table Λ is re-evaluated at the equilibrium density until consistent."""
        guess = n0 if n0 is not None else 1e10
        self.loss = resolve_loss(self._loss_spec, guess, self._abundances, self._table)
        table_based = is_table_loss(self._loss_spec)
        for _ in range(5):
            t_eq, n_eq = self._solve_equilibrium(t0, n0, p0, given)
            if not table_based or n0 is not None:
                break
            if abs(math.log10(loss_density(n_eq, self._table) / loss_density(guess, self._table))) < 0.02:
                break
            guess = n_eq
            self.loss = resolve_loss(self._loss_spec, guess, self._abundances, self._table)
        self._check_t("initial_temperature" if t0 is not None else
                      ("initial_density" if n0 is not None else "initial_pressure"), t_eq)
        return t_eq, n_eq

    # ------------------------------------------------------------------ public helpers
    def cooling_times(self, temperature, density) -> CoolingTimes:
        """Conductive and radiative cooling times [s] of this loop (its L and Λ) at T, n (Cargill 1994)."""
        t = finite_quantity("temperature", temperature, u.K)
        n = finite_quantity("density", density, u.cm ** -3)
        check_range("temperature", t.value, lo=self.loss.t_min, hi=self.loss.t_max, unit_label="K")
        check_positive("density", n.value, "cm-3")
        tau_c = conductive_cooling_time(t, n, self.half_length)
        tau_r = radiative_cooling_time(t, n, radiative_loss=self.loss(t.value) * LAMBDA_UNIT)
        return CoolingTimes(tau_c, tau_r)

    def c1(self, temperature, density) -> np.ndarray:
        """CBK12 ratio c1 of TR to coronal radiative losses at T, n (dimensionless)."""
        t = finite_quantity("temperature", temperature, u.K).value
        n = finite_quantity("density", density, u.cm ** -3).value
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
        t_all, y_all, termination = self._integrate(te, out_t, user_step, rtol)
        ds = self._dataset(t_all, np.exp(y_all[0]), np.exp(y_all[1]), termination, rtol)
        ds.attrs["stopped_at"] = self._stopped_at
        return ds

    def _segments(self, te):
        """Edges of the integration segments (the heating's start, peak and end inside (0, te)) and the largest
        solver step while the heating is on."""
        edges = [0.0, te]
        heat_step = np.inf
        if self._profile is not None:
            pr = self._profile
            edges += [x for x in (pr.start, pr.peak, pr.end) if 0.0 < x < te]
            heat_step = pr.half / 10.0 if pr.kind == "triangular" else pr.sigma / 2.0
        return np.unique(edges), heat_step

    def _integrate(self, te, out_t, user_step, rtol):
        """Solve (ln p, ln n) segment by segment, stopping where T leaves the Λ range.

        Returns (output times, (2, n) array of ln p and ln n at them, termination text).
        """
        edges, heat_step = self._segments(te)
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
        self._stopped_at = ""
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
                self._stopped_at = which
                termination = (f"stopped at t = {t_stop:.6g} s: the temperature reached the {which} end of the "
                               f"radiative loss range [{self.loss.t_min:.4g}, {self.loss.t_max:.4g}] K")
                ts.append(np.array([t_stop]))
                ys.append(y[:, None])
                warnings.warn(f"LoopFlareModel.run {termination}", RuntimeWarning, stacklevel=3)
                break
        t_all = np.concatenate(ts)
        y_all = np.concatenate(ys, axis=1)
        t_all, keep = np.unique(t_all, return_index=True)
        return t_all, y_all[:, keep], termination

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
