r"""A flare that matches its class: heating energy and emitting volume from the soft-X-ray class, and back.

The flare is an *arcade* of :math:`N` identical strands, each the 0-D loop of
:class:`~synthcorona.dimming.flare.LoopFlareModel` (half-length :math:`L`, cross-section
:math:`A`, the given initial temperature and heating profile) heated by :math:`E_s`; the heating
energy is :math:`E = N E_s`. :math:`N` need not be a whole number: :math:`N` strands of
cross-section :math:`A` are one loop of cross-section :math:`N A` (the 0-D equations depend on
the energy per volume only), which is how the arcade is run.

The class of the flare is its peak reported 1-8 Angstrom flux at 1 AU,
:math:`F_p = \max_t [EM(t)\, R(T(t)) - EM(0)\, R(T(0))]`, with :math:`R` the response of the long
channel of the standard solar soft-X-ray monitor
(:func:`~synthcorona.instruments.soft_xray_monitor.monitor_temperature_response`, true scale)
at the loop's coronal-average temperature, and the excess over the pre-flare arcade.

The rule
--------
Two numbers, :math:`E_s` and :math:`N`, are fixed by two conditions:

1. the peak temperature :math:`T_p = \max_t T` and peak emission measure :math:`EM_p = \max_t EM`
   lie on the flare EM-T relation :math:`EM_p = C\, T_p^{4.7}`. The slope 4.7 is that of solar and
   stellar flares together (Aschwanden, Stern & Güdel 2008, ApJ 672, 659; stellar flares lie at
   about 250 times higher EM at the same temperature: ``em_t_relation="stellar"`` multiplies
   :math:`C` by :data:`STELLAR_EM_FACTOR`). The normalisation :math:`C` is not taken from a
   published fit (the coefficients of Feldman et al. 1996 could not be verified): it is anchored
   on the peak temperatures of small solar flares, 8 ± 2 MK for classes B5-C2 of the old flux
   scale (Phillips & Feldman 1995, A&A 304, 563, from He-like sulphur spectra, similar to the
   temperatures from the ratio of the monitor's two channels). At the geometric middle of that
   range, old-scale C1 = true-scale 1.43e-6 W m-2, an isothermal 8 MK plasma gives that flux for
   :math:`EM_0 = F / R(8\,\mathrm{MK})`, and :math:`C = EM_0 / (8\,\mathrm{MK})^{4.7}`
   (:data:`ANCHOR_TEMPERATURE`, :data:`ANCHOR_FLUX`); :math:`R` is the monitor response of the
   scenario's abundances, so :math:`C` follows them.
2. a class: :math:`N\,F_{p,s}(E_s) = F_{class}` (:math:`F_{p,s}` the peak flux of one strand);
   or an energy: :math:`N E_s = E`.

Along condition 1, :math:`N(E_s) = C\,T_p(E_s)^{4.7} / EM_{p,s}(E_s)` (:math:`T_p` of a strand is
that of the arcade), so class and energy are both functions of :math:`E_s` alone, each found by
Brent's method on :math:`\log E_s`, one loop run per evaluation. The same rule gives a class an
energy and an energy its class (:func:`class_rule`, :meth:`ClassRule.for_class`,
:meth:`ClassRule.for_energy`). With ``n_strands`` given, condition 1 is dropped: a class then
fixes :math:`E_s` by condition 2 alone, an energy is shared by the :math:`N` strands.

The heating energy is the energy deposited in the coronal loops (the thermal part of the flare
in this model); the flare's non-thermal and bolometric budgets are not modelled. In the model
the whole heating is eventually radiated (corona and transition region), so the 1-8 Angstrom
share of the heating energy is the model's 1-8 Angstrom share of its radiated energy; observed
flares radiate of order 1 % of their total radiated energy in 1-8 Angstrom (the total exceeds the
soft-X-ray emission by about two orders of magnitude: Kretzschmar et al. 2010, Nat. Phys. 6, 690,
as quoted in ``/work/shared/LITERATURE.md``; a loose check, see the tests).

Limitations: the relation is a population trend with scatter; the heating profile (shape and
duration) is the user's, not scaled with the class; the temperature is the loop's coronal
average (no DEM), and the transition region adds nothing to the 1-8 Angstrom flux.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
import xarray as xr
from scipy.integrate import trapezoid
from scipy.optimize import brentq

from ..constants import AU_CM
from ..errors import InputError
from ..instruments.soft_xray_monitor import LEGACY_SCALE, class_flux, class_name, monitor_temperature_response
from .flare import LoopFlareModel

__all__ = ["EM_T_SLOPE", "STELLAR_EM_FACTOR", "ANCHOR_TEMPERATURE", "ANCHOR_FLUX", "RELATIONS", "StrandSpec",
           "StrandPeaks", "ArcadeSetup", "ClassRule", "class_rule", "peaks_of", "flare_summary", "SUMMARY_VARIABLES"]

#: Slope of the flare EM-T relation EM_p ~ T_p^4.7 (Aschwanden, Stern & Güdel 2008, ApJ 672, 659).
EM_T_SLOPE = 4.7
#: Stellar flares: EM about 250 times the solar one at the same peak temperature (same source).
STELLAR_EM_FACTOR = 250.0
#: Peak temperature [K] of the anchor: small solar flares, 8 +- 2 MK (Phillips & Feldman 1995, A&A 304, 563).
ANCHOR_TEMPERATURE = 8e6
#: True-scale flux [W m-2] of the anchor: old-scale C1 (middle of B5-C2), / 0.7.
ANCHOR_FLUX = 1e-6 / LEGACY_SCALE
#: The EM-T relations: solar, or stellar (x STELLAR_EM_FACTOR).
RELATIONS = ("solar", "stellar")
#: Variables of :func:`flare_summary` (and of the forecast Dataset).
SUMMARY_VARIABLES = ("peak_flux_1_8A", "implied_class", "peak_temperature", "peak_emission_measure",
                     "heating_energy", "radiated_energy_1_8A")

_W_M2_TO_CGS = 1e3                 # erg s-1 cm-2 per W m-2
_LOG_E_RANGE = (22.0, 36.0)        # log10 strand energy [erg] searched
_RULE_CACHE: dict = {}


@dataclass(frozen=True)
class StrandSpec:
    """One strand of the arcade: half-length [cm], cross-section [cm2], initial temperature [K] of its static
    equilibrium, heating duration [s] (base of the triangular profile)."""

    half_length: float
    cross_section: float
    initial_temperature: float
    duration: float

    def model(self, n_strands: float, strand_energy: float, loss, peak_time: float) -> LoopFlareModel:
        """The arcade as one loop of cross-section n_strands x A heated by n_strands x strand_energy."""
        return LoopFlareModel(self.half_length * u.cm, n_strands * self.cross_section * u.cm ** 2,
                              initial_temperature=self.initial_temperature * u.K,
                              flare_energy=n_strands * strand_energy * u.erg, peak_time=peak_time * u.s,
                              duration=self.duration * u.s, radiative_loss=loss)


@dataclass(frozen=True)
class StrandPeaks:
    """Peak values of one strand heated by ``strand_energy`` [erg]: ``peak_temperature`` [K] (max of the
    coronal-average T), ``peak_emission_measure`` [cm-3], ``peak_flux`` [W m-2, excess over the pre-flare
    strand], ``radiated_1_8`` [erg, 4 pi (1 AU)^2 x time integral of the excess flux]."""

    strand_energy: float
    peak_temperature: float
    peak_emission_measure: float
    peak_flux: float
    radiated_1_8: float


@dataclass(frozen=True)
class ArcadeSetup:
    """The arcade a flare is run as: ``n_strands`` strands each heated by ``strand_energy`` [erg]; ``rule``
    says how they were found; ``predicted`` the solver's peaks of one strand (the scenario's own run is
    the reference: :func:`flare_summary`)."""

    n_strands: float
    strand_energy: float
    rule: str
    relation: str
    predicted: StrandPeaks = field(repr=False)

    @property
    def heating_energy(self) -> float:
        """Total heating energy N E_s [erg]."""
        return self.n_strands * self.strand_energy


class ClassRule:
    """The class <-> (energy, strands) rule for one strand, radiative loss and monitor response (module docstring).

    Parameters
    ----------
    spec : StrandSpec
    loss : callable
        Λ(T) of the loop runs (Quantity K -> Quantity erg cm3 s-1; see LoopFlareModel ``radiative_loss``).
    response : xarray.DataArray
        Monitor response per unit EM over ``logT`` (:func:`monitor_temperature_response`).
    relation : {"solar", "stellar"}
    """

    def __init__(self, spec: StrandSpec, loss, response: xr.DataArray, relation: str = "solar"):
        if relation not in RELATIONS:
            raise InputError(f"em_t_relation={relation!r} must be one of {RELATIONS}", argument="em_t_relation")
        self.spec, self.loss, self.response, self.relation = spec, loss, response, relation
        em0 = ANCHOR_FLUX / self.flux_per_em(ANCHOR_TEMPERATURE)
        factor = STELLAR_EM_FACTOR if relation == "stellar" else 1.0
        #: C of EM = C T^4.7 [cm-3 K^-4.7].
        self.em_t_norm = factor * em0 / ANCHOR_TEMPERATURE ** EM_T_SLOPE
        self._peaks: dict = {}
        self._setups: dict = {}

    # ------------------------------------------------------------------ physics
    def flux_per_em(self, temperature):
        """Reported flux [W m-2 at 1 AU] per cm-3 of EM at temperatures [K] (plain floats), linear in log T."""
        r = self.response
        lt = np.clip(np.log10(temperature), float(r.logT[0]), float(r.logT[-1]))
        return np.interp(lt, r.logT.values, r.values)

    def relation_em(self, temperature) -> np.ndarray:
        """EM [cm-3] of the EM-T relation at peak temperatures [K] (plain floats)."""
        return self.em_t_norm * np.asarray(temperature, dtype=float) ** EM_T_SLOPE

    def excess_flux(self, result: xr.Dataset) -> np.ndarray:
        """Reported flux [W m-2 at 1 AU] of a run over its pre-flare value, per output time."""
        em, temp = result["emission_measure"].values, result["temperature"].values
        f = em * self.flux_per_em(temp)
        return f - f[0]

    def run(self, n_strands: float, strand_energy: float, t_end: float, peak_time: float | None = None,
            n_output: int = 3001, rtol: float = 1e-8) -> tuple[xr.Dataset, tuple]:
        """Run the arcade from t = 0 to ``t_end`` [s], heating peak at ``peak_time`` [s] (default half the
        duration); the warnings of the run are returned as texts, not raised."""
        pt = 0.5 * self.spec.duration if peak_time is None else peak_time
        model = self.spec.model(n_strands, strand_energy, self.loss, pt)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = model.run(t_end * u.s, n_output=n_output, rtol=rtol)
        return res, tuple(str(w.message) for w in caught)

    def peaks(self, strand_energy: float) -> StrandPeaks:
        """Peak values of one strand heated by ``strand_energy`` [erg] (cached).

        The solver's run: to twice the heating duration plus 30 min (past the EM peak, which follows the
        end of the heating by minutes), relative tolerance 1e-6 (peaks within ~1e-5 of a 1e-8 run).
        """
        key = float(strand_energy)
        hit = self._peaks.get(key)
        if hit is None:
            t_end = 2.0 * self.spec.duration + 1800.0
            res, _ = self.run(1.0, key, t_end, n_output=401, rtol=1e-6)
            hit = peaks_of(res, self.excess_flux(res), key)
            self._peaks[key] = hit
        return hit

    def strands_on_relation(self, strand_energy: float) -> float:
        """N that puts the arcade of strands heated by ``strand_energy`` on the EM-T relation."""
        p = self.peaks(strand_energy)
        return float(self.relation_em(p.peak_temperature)) / p.peak_emission_measure

    # ------------------------------------------------------------------ solving
    def _solve(self, residual, what: str, value: str) -> float:
        """log10 E_s where ``residual(log10 E_s)`` (increasing) changes sign, by Brent's method."""
        lo, hi = _LOG_E_RANGE
        x, step = 30.0, 1.0
        r = residual(x)
        direction = -1.0 if r > 0 else 1.0
        while True:
            x2 = x + direction * step
            if not lo <= x2 <= hi:
                raise InputError(f"{what}={value} is outside the range this rule covers (strand energies "
                                 f"1e{lo:.0f}-1e{hi:.0f} erg for a strand of half-length "
                                 f"{self.spec.half_length:.3g} cm)", argument=what)
            r2 = residual(x2)
            if np.sign(r2) != np.sign(r):
                a, b = sorted((x, x2))
                return brentq(residual, a, b, xtol=1e-4)
            x, r = x2, r2

    def _checked(self, log_es: float, n: float, rule: str, what: str, value: str) -> ArcadeSetup:
        p = self.peaks(10 ** log_es)
        t_max = self.loss_t_max()
        if p.peak_temperature >= 0.98 * t_max:
            raise InputError(f"{what}={value} needs a peak temperature at the top of the radiative-loss table "
                             f"({t_max:.3g} K): outside the range this rule covers", argument=what)
        return ArcadeSetup(n_strands=float(n), strand_energy=float(10 ** log_es), rule=rule, relation=self.relation,
                           predicted=p)

    def loss_t_max(self) -> float:
        """Top of the temperature range [K] of the loop runs."""
        return float(self.spec.model(1.0, 0.0, self.loss, 0.0).loss.t_max)

    def for_class(self, flare_class: str, n_strands: float | None = None) -> ArcadeSetup:
        """The arcade of a class: on the EM-T relation, or with ``n_strands`` fixed (cached)."""
        key = ("class", flare_class, n_strands)
        if key not in self._setups:
            self._setups[key] = self._for_class(flare_class, n_strands)
        return self._setups[key]

    def _for_class(self, flare_class: str, n_strands: float | None) -> ArcadeSetup:
        target = math.log10(class_flux(flare_class).to_value(u.W / u.m ** 2))
        if n_strands is None:
            def res(x):
                e = 10 ** x
                return _log(self.strands_on_relation(e) * self.peaks(e).peak_flux) - target
        else:
            def res(x):
                return _log(n_strands * self.peaks(10 ** x).peak_flux) - target
        x = self._solve(res, "class", repr(flare_class))
        n = self.strands_on_relation(10 ** x) if n_strands is None else n_strands
        return self._checked(x, n, self._rule_text(n_strands), "class", repr(flare_class))

    def for_energy(self, energy: float, n_strands: float | None = None) -> ArcadeSetup:
        """The arcade of a heating energy [erg]: on the EM-T relation, or shared by ``n_strands`` strands (cached)."""
        key = ("energy", float(energy), n_strands)
        if key not in self._setups:
            self._setups[key] = self._for_energy(float(energy), n_strands)
        return self._setups[key]

    def _for_energy(self, e: float, n_strands: float | None) -> ArcadeSetup:
        if n_strands is not None:
            x = math.log10(e / n_strands)
            return self._checked(x, n_strands, self._rule_text(n_strands), "energy", f"{e:.4g} erg")
        target = math.log10(e)

        def res(x):
            return math.log10(self.strands_on_relation(10 ** x)) + x - target

        x = self._solve(res, "energy", f"{e:.4g} erg")
        # N from the energy itself, so that N E_s = E exactly (N is on the relation to the solver's tolerance)
        return self._checked(x, e / 10 ** x, self._rule_text(None), "energy", f"{e:.4g} erg")

    def implied_class(self, energy: float, n_strands: float | None = None) -> str:
        """The class the rule gives a heating energy [erg] (from the solver's strand run)."""
        s = self.for_energy(energy, n_strands)
        return class_name(s.n_strands * s.predicted.peak_flux * u.W / u.m ** 2)

    def _rule_text(self, n_strands) -> str:
        if n_strands is not None:
            return f"fixed number of strands ({n_strands:g})"
        return (f"EM-T relation EM_p = C T_p^{EM_T_SLOPE:g} ({self.relation}; C = {self.em_t_norm:.4g} cm-3 K^-4.7, "
                f"anchored at {ANCHOR_TEMPERATURE / 1e6:g} MK for {ANCHOR_FLUX:.3g} W m-2)")


def _log(x: float) -> float:
    return math.log10(x) if x > 0 else -300.0


def peaks_of(result: xr.Dataset, excess: np.ndarray, strand_energy: float = float("nan")) -> StrandPeaks:
    """Peak values of a run and its excess reported flux [W m-2] (one value per output time)."""
    t = result["time"].values
    radiated = 4.0 * np.pi * AU_CM ** 2 * _W_M2_TO_CGS * float(trapezoid(excess, t))
    return StrandPeaks(strand_energy=float(strand_energy), peak_temperature=float(result["temperature"].max()),
                       peak_emission_measure=float(result["emission_measure"].max()),
                       peak_flux=float(np.max(excess)), radiated_1_8=radiated)


def class_rule(spec: StrandSpec, table, abundances, density_cm3: float, relation: str = "solar") -> ClassRule:
    """The :class:`ClassRule` of a strand with the radiative loss and monitor response of ``table`` at
    ``abundances`` and ``density_cm3`` (cached per strand, table content, abundances, density and relation)."""
    from .. import synthesis

    dens = density_cm3 * u.cm ** -3
    prep = synthesis.prepare(table, abundances, dens)
    key = (spec, id(table), prep.key, relation)      # this table object: its loss function is the one run
    rule = _RULE_CACHE.get(key)
    if rule is None:
        def table_loss_at_source_density(temperature):
            return synthesis.radiative_loss(temperature, table=table, abundances=abundances, density=dens)

        response = monitor_temperature_response(table, abundances, dens)
        if len(_RULE_CACHE) > 32:
            _RULE_CACHE.clear()
        rule = ClassRule(spec, table_loss_at_source_density, response, relation)
        _RULE_CACHE[key] = rule
    return rule


def flare_summary(result: xr.Dataset | None, excess: np.ndarray | None, setup: ArcadeSetup | None,
                  rule: ClassRule | None = None, attrs: dict | None = None) -> xr.Dataset:
    """The flare's summary Dataset from its run and excess reported flux (no flare: zeros and an empty class).

    Variables: ``peak_flux_1_8A`` [W m-2 at 1 AU, true scale], ``implied_class``, ``peak_temperature``
    [K], ``peak_emission_measure`` [cm-3], ``heating_energy`` [erg], ``radiated_energy_1_8A`` [erg]; and
    ``n_strands``, ``strand_energy`` [erg], ``peak_flux_1_8A_legacy`` [W m-2, old scale].
    """
    if result is None:
        vals = dict(peak_flux_1_8A=0.0, implied_class="", peak_temperature=float("nan"),
                    peak_emission_measure=float("nan"), heating_energy=0.0, radiated_energy_1_8A=0.0,
                    n_strands=0.0, strand_energy=0.0)
        rule_text = "no flare"
    else:
        p = peaks_of(result, excess)
        vals = dict(peak_flux_1_8A=p.peak_flux, implied_class=class_name(p.peak_flux) if p.peak_flux > 0 else "",
                    peak_temperature=p.peak_temperature, peak_emission_measure=p.peak_emission_measure,
                    heating_energy=setup.heating_energy, radiated_energy_1_8A=p.radiated_1_8,
                    n_strands=setup.n_strands, strand_energy=setup.strand_energy)
        rule_text = setup.rule
    units = dict(peak_flux_1_8A="W m-2", implied_class="", peak_temperature="K", peak_emission_measure="cm-3",
                 heating_energy="erg", radiated_energy_1_8A="erg", n_strands="1", strand_energy="erg")
    names = dict(
        peak_flux_1_8A="peak reported 1-8 Angstrom flux at 1 AU of the flare (true scale; excess over the pre-flare "
                       "arcade)",
        implied_class="soft-X-ray class of peak_flux_1_8A (true scale)",
        peak_temperature="maximum coronal-average temperature of the flare loops",
        peak_emission_measure="maximum emission measure of the flare loops",
        heating_energy="energy deposited in the flare loops", radiated_energy_1_8A="4 pi (1 AU)^2 x time integral of "
                                                                                   "the excess reported 1-8 A flux",
        n_strands="strands of the arcade", strand_energy="heating energy of one strand")
    data = {k: ((), v, {"units": units[k], "long_name": names[k]}) for k, v in vals.items()}
    data["peak_flux_1_8A_legacy"] = ((), LEGACY_SCALE * vals["peak_flux_1_8A"],
                                     {"units": "W m-2", "long_name": "peak_flux_1_8A on the old (legacy) scale, "
                                                                     f"{LEGACY_SCALE:g} x true"})
    out = dict(attrs or {})
    out.update({"flare_rule": rule_text,
                "flare_class_flux_convention": "reported long-channel flux of the standard solar soft-X-ray monitor "
                                               "(synthcorona.instruments.soft_xray_monitor), flat 1-8 Angstrom "
                                               "reference spectrum, true scale (legacy = 0.7 x true)"})
    if rule is not None:
        out["em_t_norm_cm-3_K-4.7"] = rule.em_t_norm
        out["em_t_relation"] = rule.relation
    return xr.Dataset(data, attrs=out)
