r"""The prepared state of a dimming scenario: everything :class:`~synthcorona.dimming.scenario.DimmingScenario`
computes once from its inputs.

:func:`prepare_scenario` turns the inputs (star, corona, CME, flare, resolved bands, observation,
recovery model, emissivity table) into a :class:`PreparedScenario` of five frozen parts:

* :class:`SourcePlasma` -- the CME source plasma on the table's temperature grid and the
  mass -> emission-measure conversion,
* :class:`BandKernels` -- the temperature responses of the bands,
* :class:`BandRates` -- the quiescent rates, background and depth per gram of each band,
* :class:`TimeProfile` -- onset, recovery and the light curve's bins,
* :class:`FlareExcess` -- the flare's excess count rate, as a running time integral per band.

Every field is documented with its unit and shape (``n_T`` temperature nodes of the table,
``n_b`` bands, ``n_t`` flare output times). The arrays are shared, not copied: treat them as
read-only.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass

import astropy.units as u
import numpy as np
import xarray as xr
from scipy.integrate import cumulative_trapezoid

from ..abundances import mean_mass_per_hydrogen
from ..constants import M_H_G, PARSEC_CM
from ..errors import InputError
from ..validation import as_scalar
from . import mass_removal as mr
from . import profile as prof
from .flare_class import ArcadeSetup, ClassRule, StrandSpec, class_rule, flare_summary

__all__ = ["MIN_QUIESCENT_RATE", "SourcePlasma", "BandKernels", "BandRates", "TimeProfile", "FlareExcess",
           "PreparedScenario", "prepare_scenario", "prepare_source", "prepare_kernels", "prepare_rates",
           "prepare_timing", "prepare_flare"]

#: A band with a quiescent rate below this (one count in ~30,000 years) is refused as having no counts.
MIN_QUIESCENT_RATE = 1e-12


@dataclass(frozen=True)
class SourcePlasma:
    """The CME source plasma and the mass -> emission-measure conversion, on the table's temperature grid."""

    #: (n_T,) log10(K): temperature nodes of the emissivity table.
    logT: np.ndarray
    #: cm-3: electron density of the CME source plasma (used for the mass -> EM conversion).
    density: float
    #: Where ``density`` came from: "user" or the Rosner, Tucker & Vaiana (1978) scaling law.
    density_source: str
    #: cm-3: density of the emissivities, ``density`` clipped to the table's density range.
    emissivity_density: float
    #: (n_T,) cm-3: quiescent emission measure per temperature node.
    quiescent_weights: np.ndarray
    #: (n_T,) 1: temperature distribution of the removed emission measure (sums to 1).
    removal_weights: np.ndarray
    #: (n_T,) cm-3: emission-measure change of the expansion dimming (zeros without expansion).
    expansion_change: np.ndarray
    #: 1: mean mass per hydrogen atom in units of m_H, of the corona's abundances.
    mu_h: float
    #: 1: fraction of the CME mass that escapes.
    escape_fraction: float
    #: cm-3 g-1: removed emission measure per gram of CME mass, n_e f_esc / (mu_H m_H).
    em_per_gram: float
    #: g (Quantity): the largest CME mass the corona can supply at the source temperatures.
    max_mass: u.Quantity

    def check_mass(self, mass_g) -> None:
        """Refuse masses [g] (plain floats) above :attr:`max_mass`, naming the valid range."""
        mmax = float(self.max_mass.value)
        m = np.asarray(mass_g, dtype=float)
        if np.any(m > mmax * (1 + 1e-12)):
            raise InputError(
                f"mass={m.max():.4g} g needs more emission measure than the corona holds at the source temperatures: "
                f"the largest removable mass at density={self.density:.4g} cm-3 is {mmax:.4g} g (valid range of "
                f"mass: [0, {mmax:.4g}] g)", argument="mass")


@dataclass(frozen=True)
class BandKernels:
    """Temperature responses of the scenario's bands on the table's temperature grid."""

    #: (n_b,) band labels, in the scenario's order.
    labels: tuple
    #: (n_b, 2) keV: band limits (for a band "total", the instrument's whole response range).
    band_limits: np.ndarray
    #: (n_b, n_T) ct s-1 cm3: count-rate response per unit emission measure at 1 pc, ISM absorption included.
    kernel: np.ndarray
    #: (n_b, n_T) erg s-1 cm3: absorbed energy emissivity within the band limits, over 4 pi sr.
    flux_kernel: np.ndarray
    #: 1: (1 pc / distance)^2, the dilution of the 1 pc responses.
    scale: float

    def at_log_temperature(self, logT, logt) -> np.ndarray:
        """(n_b, n) responses [ct s-1 cm3 at 1 pc] at log10 temperatures ``logt`` (n,), linear in log T on the
        grid ``logT`` (clipped to its ends)."""
        x = logT
        lt = np.clip(logt, x[0], x[-1])  # the flare run never leaves the table range (it stops there)
        i = np.clip(np.searchsorted(x, lt) - 1, 0, x.size - 2)
        f = (lt - x[i]) / (x[i + 1] - x[i])
        return self.kernel[:, i] * (1 - f) + self.kernel[:, i + 1] * f


@dataclass(frozen=True)
class BandRates:
    """Count rates and depths per band at the observer."""

    #: (n_b,) ct/s: quiescent source count rate.
    quiescent_rate: np.ndarray
    #: (n_b,) erg s-1 cm-2: quiescent energy flux within the band limits.
    quiescent_flux: np.ndarray
    #: (n_b,) ct/s: background rate of each band.
    background: np.ndarray
    #: (n_b,) g-1: fractional count-rate depth per gram of CME mass.
    depth_per_gram: np.ndarray
    #: (n_b,) 1: fractional count-rate depth of the expansion dimming (zeros without expansion).
    expansion_depth: np.ndarray
    #: (n_b,) g-1: fractional energy-flux depth per gram of CME mass.
    flux_depth_per_gram: np.ndarray
    #: (n_b,) 1: fractional energy-flux depth of the expansion dimming.
    flux_expansion_depth: np.ndarray


@dataclass(frozen=True)
class TimeProfile:
    """The dimming's time profile and the light curve's bins (times in s on the light curve's clock)."""

    #: s: duration of the dimming's linear onset.
    onset: float
    #: s: e-folding recovery time.
    recovery_time: float
    #: s: time of the CME onset (the observation's pre-event duration).
    t0: float
    #: s: width of a bin.
    bin_width: float
    #: Number of bins of the observation.
    n_bins: int
    #: (n_bins + 1,) s: bin edges, the first at 0.
    edges: np.ndarray


@dataclass(frozen=True)
class FlareExcess:
    """The flare's excess count rate per band, as a running time integral on the flare model's output times."""

    #: How the flare run ended ("no flare", "reached t_end" or where and why it stopped).
    termination: str
    #: (n_t,) s: output times of the flare run, from its start at the CME onset.
    times: np.ndarray
    #: (n_b, n_t) ct: running time integral of the excess count rate over the pre-flare loop.
    cumulative: np.ndarray
    #: The run of :meth:`~synthcorona.dimming.flare.LoopFlareModel.run` (None without a flare).
    result: xr.Dataset | None = None
    #: Texts of the warnings of the flare run.
    warnings: tuple = ()
    #: The arcade the flare was run as (:class:`~synthcorona.dimming.flare_class.ArcadeSetup`; None without a flare).
    setup: ArcadeSetup | None = None
    #: (n_t,) W m-2: reported 1-8 Angstrom flux at 1 AU over the pre-flare arcade (true scale; None without a flare).
    monitor_excess: np.ndarray | None = None
    #: The class rule of the flare (:class:`~synthcorona.dimming.flare_class.ClassRule`; None without a flare).
    rule: ClassRule | None = None

    def summary(self, attrs: dict | None = None) -> xr.Dataset:
        """Peak 1-8 Angstrom flux, implied class, peak T and EM, heating and radiated 1-8 Angstrom energy
        (:func:`~synthcorona.dimming.flare_class.flare_summary`)."""
        return flare_summary(self.result, self.monitor_excess, self.setup, self.rule, attrs)

    def binned(self, edges, t0) -> np.ndarray:
        """Bin-averaged excess rates (n_b, n_bins) [ct/s] for bin edges [s] and CME onset ``t0`` [s]."""
        e = np.asarray(edges, dtype=float) - t0
        tf = self.times
        if self.result is None:
            return np.zeros((self.cumulative.shape[0], e.size - 1))
        ec = np.clip(e, tf[0], tf[-1])
        j = np.clip(np.searchsorted(tf, ec) - 1, 0, tf.size - 2)
        f = (ec - tf[j]) / (tf[j + 1] - tf[j])
        c = self.cumulative[:, j] * (1 - f) + self.cumulative[:, j + 1] * f
        return np.diff(c, axis=1) / np.diff(e)


@dataclass(frozen=True)
class PreparedScenario:
    """Everything a :class:`~synthcorona.dimming.scenario.DimmingScenario` computes once from its inputs."""

    #: The CME source plasma and the mass -> EM conversion.
    source: SourcePlasma
    #: The bands' temperature responses.
    kernels: BandKernels
    #: Rates and depths per band.
    rates: BandRates
    #: Onset, recovery and bins.
    timing: TimeProfile
    #: The flare's excess rates.
    flare: FlareExcess


def prepare_scenario(star, corona, cme, flare, channels, observation, *, recovery, upflow_fraction,
                     table) -> PreparedScenario:
    """The :class:`PreparedScenario` of the scenario inputs.

    ``channels``: the resolved (label, Instrument, band name) list; ``table`` a resolved
    EmissivityTable; the rest as for :class:`~synthcorona.dimming.scenario.DimmingScenario`.
    """
    source = prepare_source(corona, cme, table)
    source.check_mass(cme.mass.to_value(u.g))
    kernels = prepare_kernels(channels, star, corona, source, table)
    rates = prepare_rates(kernels, source, star, observation)
    timing = prepare_timing(cme, corona, source, observation, recovery, upflow_fraction)
    excess = prepare_flare(flare, kernels, source, timing, corona, table)
    return PreparedScenario(source, kernels, rates, timing, excess)


def prepare_source(corona, cme, table) -> SourcePlasma:
    """The CME source plasma: density (given or from the RTV law), weights and mass -> EM conversion.

    Warns when the source density is outside the table's density range (the emissivities are
    then taken at the nearest density the table holds).
    """
    logT = np.asarray(table.logT, dtype=float)
    t_src = cme.source_temperature.to(u.K)
    if corona.density is None:
        n_src = float(mr.rtv_density(t_src, corona.loop_half_length).value)
        mr.check_density("density (from the RTV scaling law)", n_src * u.cm ** -3)
        density_source = "Rosner, Tucker & Vaiana (1978) scaling law"
    else:
        n_src = float(corona.density.to_value(u.cm ** -3))
        density_source = "user"
    lo, hi = 10 ** table.log_density[0], 10 ** table.log_density[-1]
    emissivity_density = float(np.clip(n_src, lo, hi))
    if emissivity_density != n_src:
        # The mass -> EM conversion uses n_src itself; only the emissivities (weakly density-dependent
        # through metastable levels) are taken at the nearest density the table holds. Said, not silent.
        warnings.warn(f"CME source density {n_src:.3g} cm-3 is outside the emissivity table's density range "
                      f"[{lo:.3g}, {hi:.3g}] cm-3; emissivities are taken at {emissivity_density:.3g} cm-3 "
                      "(attrs 'emissivity_density_cm-3')", UserWarning, stacklevel=4)
    quiescent = corona.dem.em_weights(logT).to_value(u.cm ** -3)
    removal = mr.removal_weights(logT, quiescent, distribution=cme.distribution, source_temperature=t_src,
                                 window=cme.window, width=cme.width)
    mu_h = mean_mass_per_hydrogen(corona.abundances)
    escape = mr.check_escape_fraction(cme.escape_fraction)
    xf = float(cme.expansion_factor)
    if xf > 1.0 and cme.expanding_fraction > 0:
        expansion = mr.expansion_emission_measure_change(logT, quiescent, t_src, xf, cme.expanding_fraction,
                                                         cme.window)
        in_win = np.abs(logT - np.log10(t_src.value)) <= cme.window + 1e-9
        available = np.where(in_win, 1.0 - float(cme.expanding_fraction), 1.0) * quiescent
    else:
        expansion = np.zeros_like(quiescent)
        available = quiescent
    max_mass = mr.max_removable_mass(available, removal, n_src * u.cm ** -3, corona.abundances, escape)
    return SourcePlasma(logT=logT, density=n_src, density_source=density_source,
                        emissivity_density=emissivity_density, quiescent_weights=quiescent, removal_weights=removal,
                        expansion_change=expansion, mu_h=mu_h, escape_fraction=escape,
                        em_per_gram=n_src * escape / (mu_h * M_H_G), max_mass=max_mass)


def prepare_kernels(channels, star, corona, source: SourcePlasma, table) -> BandKernels:
    """Temperature responses of the bands (grouped per instrument), at the source's emissivity density."""
    from ..instruments.observables import absorbed_band_kernel, nh_value
    from ..synthesis import prepare

    nh = star.nh
    density = source.emissivity_density * u.cm ** -3
    rows, eflux, limits = [], [], []
    prep = prepare(table, corona.abundances, density)
    nhv = nh_value(nh)
    for _, ins, band in channels:
        K = ins.temperature_response(abundances=corona.abundances, density=density, bands=band, nh=nh)
        rows.append(np.asarray(K.values[0], dtype=float))
        blo, bhi = float(K.band_lo.values[0]), float(K.band_hi.values[0])
        limits.append((blo, bhi))
        eflux.append(absorbed_band_kernel(np.array([[blo, bhi]]), prep, nhv)[0])
    d_cm = float(star.distance.to_value(u.cm))
    return BandKernels(labels=tuple(b[0] for b in channels), band_limits=np.array(limits), kernel=np.array(rows),
                       flux_kernel=np.array(eflux), scale=(PARSEC_CM / d_cm) ** 2)


def prepare_rates(kernels: BandKernels, source: SourcePlasma, star, observation) -> BandRates:
    """Quiescent rates and fluxes, background and depths per band; refuses bands without quiescent counts."""
    labels = list(kernels.labels)
    kernel, flux_kernel = kernels.kernel, kernels.flux_kernel
    q, x = source.quiescent_weights, source.expansion_change
    base = kernel @ q
    mr.band_depths(source.removal_weights, q, kernel, labels)  # checks counts
    quiescent_rate = base * kernels.scale                       # ct/s
    dead = quiescent_rate < MIN_QUIESCENT_RATE
    if np.any(dead):
        bad = {labels[i]: f"{quiescent_rate[i]:.3g} ct/s" for i in np.flatnonzero(dead)}
        raise InputError(f"band {bad} has no counts from the quiescent corona (rate below "
                         f"{MIN_QUIESCENT_RATE:g} ct/s): its dimming depth is undefined; choose a band where the "
                         "corona emits", argument="band")
    d_cm = float(star.distance.to_value(u.cm))
    with np.errstate(invalid="ignore", divide="ignore"):
        fbase = flux_kernel @ q
        flux_depth_per_gram = source.em_per_gram * (flux_kernel @ source.removal_weights) / fbase
        flux_expansion_depth = -(flux_kernel @ x) / fbase
    return BandRates(quiescent_rate=quiescent_rate, quiescent_flux=(flux_kernel @ q) / (4 * np.pi * d_cm ** 2),
                     background=band_backgrounds(observation.background, labels),
                     depth_per_gram=source.em_per_gram * (kernel @ source.removal_weights) / base,
                     expansion_depth=-(kernel @ x) / base, flux_depth_per_gram=flux_depth_per_gram,
                     flux_expansion_depth=flux_expansion_depth)


def band_backgrounds(background, labels) -> np.ndarray:
    """(n_b,) background rates [ct/s] from ``Observation.background`` (one Quantity, or dict band -> Quantity)."""
    if isinstance(background, dict):
        unknown = set(background) - set(labels)
        if unknown:
            raise InputError(f"background has bands {sorted(unknown)} not in the scenario's bands {labels}",
                             argument="background")
        vals = [background.get(lab, 0 * u.ct / u.s) for lab in labels]
    else:
        vals = [background] * len(labels)
    return np.array([as_scalar(f"background[{lab}]", v, u.ct / u.s, lo=0.0, unit_label="ct/s")
                     for lab, v in zip(labels, vals)])


def prepare_timing(cme, corona, source: SourcePlasma, observation, recovery, upflow_fraction) -> TimeProfile:
    """Onset and recovery times of the dimming and the observation's bins."""
    onset = (float(cme.onset.to_value(u.s)) if cme.onset is not None
             else float(prof.onset_time(cme.source_size, cme.speed).value))
    recovery_time = float(prof.recovery_time(
        recovery, loop_half_length=corona.loop_half_length, temperature=cme.source_temperature.to(u.K),
        density=source.density * u.cm ** -3, upflow_fraction=upflow_fraction,
        abundances=corona.abundances).to_value(u.s))
    bin_width = float(observation.bin_width.to_value(u.s))
    n_bins = observation.n_bins
    t0 = float(observation.pre_event.to_value(u.s))
    after = n_bins * bin_width - t0
    if onset >= after:
        raise InputError(f"the dimming's onset time {onset:.4g} s is not shorter than the observation after the CME "
                         f"({after:.4g} s = exposure - pre_event): the dimming would not reach its depth before the "
                         f"observation ends; valid range of the CME onset: (0, {after:.4g}) s (or a longer exposure)",
                         argument="onset")
    return TimeProfile(onset=onset, recovery_time=recovery_time, t0=float(observation.pre_event.to_value(u.s)),
                       bin_width=bin_width, n_bins=n_bins, edges=np.arange(n_bins + 1) * bin_width)


def prepare_flare(flare, kernels: BandKernels, source: SourcePlasma, timing: TimeProfile, corona,
                  table) -> FlareExcess:
    """The flare's excess rates per band on the loop model's output times, and their running integral.

    The arcade (strand count and energy) comes from the flare's class or energy by the rule of
    :mod:`synthcorona.dimming.flare_class`; the loops' radiative loss is the table's Λ at the
    source's emissivity density, and so is the 1-8 Angstrom monitor response of the class.
    """
    n_b = len(kernels.labels)
    if flare is None:
        return FlareExcess("no flare", np.array([0.0, 1.0]), np.zeros((n_b, 2)))
    dur = float(flare.duration.to_value(u.s))
    delay = float(flare.delay.to_value(u.s))
    t_end = float(timing.edges[-1]) + dur + delay
    spec = StrandSpec(float(flare.loop_half_length.to_value(u.cm)), float(flare.loop_cross_section.to_value(u.cm ** 2)),
                      float(flare.initial_temperature.to_value(u.K)), dur)
    rule = class_rule(spec, table, corona.abundances, source.emissivity_density, flare.em_t_relation)
    n = None if flare.n_strands is None else float(flare.n_strands)
    if flare.flare_class is not None:
        setup = rule.for_class(flare.flare_class, n)
    else:
        setup = rule.for_energy(float(flare.energy.to_value(u.erg)), n)
    res, caught = rule.run(setup.n_strands, setup.strand_energy, t_end, peak_time=delay + 0.5 * dur, n_output=3001)
    term = str(res.attrs["termination"])
    if res.attrs.get("stopped_at") == "upper":
        # the strands got hotter than the emissivity table reaches: no emission to fold, so no silent zero
        raise InputError(f"the flare ({setup.n_strands:.3g} strands of {setup.strand_energy:.3g} erg) heats its "
                         f"strands above the table's {10 ** float(source.logT[-1]):.3g} K ({term}); its emission "
                         "there is outside the model: give a smaller energy or class, or more strands "
                         "([flare] n_strands)", argument="energy")
    t = res["time"].values
    em = res["emission_measure"].values
    k_t = kernels.at_log_temperature(source.logT, np.log10(res["temperature"].values))   # (n_b, n_t)
    excess = kernels.scale * (em[None, :] * k_t - em[0] * k_t[:, :1])
    cum = cumulative_trapezoid(excess, t, axis=1, initial=0.0)
    if term != "reached t_end":
        term = term + "; flare excess taken as zero after the stop"
    return FlareExcess(term, t, cum, res, caught, setup=setup, monitor_excess=rule.excess_flux(res), rule=rule)
