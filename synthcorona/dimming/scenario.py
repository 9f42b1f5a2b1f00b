r"""A complete CME-dimming forecast: star, corona, CME, flare, instrument and observation.

:class:`DimmingScenario` ties together

* the mass-loss depth per band (:mod:`synthcorona.dimming.mass_removal`),
* its time profile (:mod:`synthcorona.dimming.profile`),
* the associated flare, from the 0D loop model :class:`~synthcorona.dimming.flare.LoopFlareModel`
  folded through each band's temperature response,
* Poisson realisations (:mod:`synthcorona.dimming.noise`) and detection probabilities
  (:mod:`synthcorona.dimming.detection`).

Expected source count rate of band :math:`b` in a bin:

.. math:: r_b(t) = q_b\,[1 - \delta_b\, \bar p(t)] + \bar F_b(t),

with :math:`q_b` the quiescent rate, :math:`\delta_b` the full depth, :math:`\bar p` the
bin-averaged dimming profile and :math:`\bar F_b` the bin-averaged flare excess
:math:`(1\,\mathrm{pc}/d)^2\,[EM(t) K_b(T(t)) - EM(0) K_b(T(0))]` (the pre-flare loop is part of
the quiescent corona). :math:`K_b` is interpolated linearly in log T at the loop's coronal-average
temperature (the loop is treated as isothermal at each time). The flare heating starts at the CME
onset :math:`t_0` plus ``Flare.delay``. The loop's radiative loss Λ(T) is that of the scenario's
emissivity table at the emissivity density of the scenario (one table preparation shared with the
responses; Λ varies by ≲ 10 % between 1e9 and 1e11 cm-3, see :mod:`synthcorona.dimming.flare_loss`).

If the flare run stops early (its temperature leaves the radiative-loss table; see
``attrs["termination"]`` of :meth:`LoopFlareModel.run`) the excess after the stop is taken as
zero, and the light curve's ``attrs["flare_termination"]`` says so.

Times are on the light curve's clock: the first bin starts at 0, the CME onset is at
``Observation.pre_event``.

Optional expansion dimming (``CME(expansion_factor=..., expanding_fraction=...)``, see
:func:`synthcorona.dimming.mass_removal.expansion_emission_measure_change`) adds a mass-independent
term to :math:`\delta_b` with the same time profile.

Limitations: the source density and temperature are single values; the flare loop is treated as
isothermal at its coronal-average temperature; the energy-flux depth of a band uses the band's
energy limits (for a band "total" of an instrument, its whole response range), not its effective
area.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any

import astropy.units as u
import numpy as np
import xarray as xr
from scipy.integrate import cumulative_trapezoid

from ..abundances import mean_mass_per_hydrogen
from ..constants import PARSEC_CM
from ..dem import DEM
from ..emissivity import resolve_table
from ..errors import InputError
from ..validation import as_quantity, as_scalar, check_range
from . import detection
from . import mass_removal as mr
from . import profile as prof
from .flare import LoopFlareModel
from .noise import poisson_counts

__all__ = ["Star", "Corona", "CME", "Flare", "Observation", "DimmingScenario"]

#: A band with a quiescent rate below this (one count in ~30,000 years) is refused as having no counts.
MIN_QUIESCENT_RATE = 1e-12


_scalar = as_scalar


@dataclass(frozen=True)
class Star:
    """The star: ``distance`` (> 0, <= 1e4 pc; 1 AU allowed), interstellar column ``nh`` (cm-2, [0, 1e24]),
    ``radius`` (optional, informational)."""

    distance: u.Quantity
    nh: u.Quantity | None = None
    radius: u.Quantity | None = None

    def __post_init__(self):
        _scalar("distance", self.distance, u.cm, lo=0.0, hi=1e4 * PARSEC_CM, unit_label="cm", inclusive=False)
        if self.nh is not None:
            _scalar("nh", self.nh, u.cm ** -2, lo=0.0, hi=1e24, unit_label="cm-2")
        if self.radius is not None:
            _scalar("radius", self.radius, u.cm, lo=0.0, unit_label="cm", inclusive=False)


@dataclass(frozen=True)
class Corona:
    """The quiescent corona.

    ``dem``: a single volume DEM (cm-3). ``abundances``: for emissivities and mu_H.
    ``density``: electron density of the CME source plasma, [1e6, 1e13] cm-3; None: from the
    Rosner, Tucker & Vaiana (1978, ApJ 220, 643) scaling law at the CME source temperature for
    loops of half-length ``loop_half_length`` (default 1e10 cm), which is also the length of the
    loops refilled during recovery.
    """

    dem: DEM
    abundances: Any = "coronal"
    density: u.Quantity | None = None
    loop_half_length: u.Quantity = field(default_factory=lambda: 1e10 * u.cm)

    def __post_init__(self):
        if not isinstance(self.dem, DEM):
            raise InputError(f"dem={self.dem!r} is not a DEM model")
        if self.dem.batch_shape != ():
            raise InputError(f"dem must be a single DEM, got batch shape {self.dem.batch_shape}")
        if not self.dem.em_unit.is_equivalent(u.cm ** -3):
            raise InputError(f"dem has units {self.dem.em_unit}; a volume DEM (cm-3) is needed")
        if self.density is not None:
            mr.check_density("density", self.density)
        _scalar("loop_half_length", self.loop_half_length, u.cm, *mr.LOOP_LENGTH_RANGE, unit_label="cm")


@dataclass(frozen=True)
class CME:
    """The eruption.

    ``mass`` (>= 0 g), ``source_temperature`` (K, default 1.5 MK), ``escape_fraction`` in [0, 1]
    (0 = confined), ``speed`` (default 500 km/s) and ``source_size`` (default 1e10 cm): the onset
    lasts source_size / speed unless ``onset`` (a time) is given. ``distribution``: "window"
    (default, quiescent DEM shape within +-``window`` dex), "gaussian" (sigma ``width`` dex) or
    an array of weights on the table grid. ``expansion_factor`` s >= 1 (default 1: none) and
    ``expanding_fraction``: expansion dimming of that fraction of the window's EM
    (:func:`~synthcorona.dimming.mass_removal.expansion_emission_measure_change`); the mass is then
    taken from the remaining (1 - fraction) of the EM at each node.
    """

    mass: u.Quantity
    source_temperature: u.Quantity = field(default_factory=lambda: 1.5e6 * u.K)
    escape_fraction: float = 1.0
    speed: u.Quantity = field(default_factory=lambda: 500 * u.km / u.s)
    source_size: u.Quantity = field(default_factory=lambda: 1e10 * u.cm)
    onset: u.Quantity | None = None
    distribution: Any = "window"
    window: float = 0.15
    width: float | None = None
    expansion_factor: float = 1.0
    expanding_fraction: float = 1.0

    def __post_init__(self):
        m = mr.check_mass("mass", self.mass)
        if m.ndim != 0:
            raise InputError("mass must be a single value (pass arrays to DimmingScenario.depth(mass=...))")
        mr.check_escape_fraction(self.escape_fraction)
        check_range("expansion_factor", self.expansion_factor, lo=1.0, hi=1e3)
        check_range("expanding_fraction", self.expanding_fraction, lo=0.0, hi=1.0)
        _scalar("source_temperature", self.source_temperature, u.K, 1e5, 1e8, "K")
        if self.onset is None:
            prof.onset_time(self.source_size, self.speed)
        else:
            _scalar("onset", self.onset, u.s, lo=0.0, unit_label="s")


@dataclass(frozen=True)
class Flare:
    """The flare accompanying the CME, run with :class:`~synthcorona.dimming.flare.LoopFlareModel`.

    ``energy`` (> 0 erg), ``loop_half_length`` (default 2e9 cm), ``loop_cross_section``
    (default 1e18 cm2), ``initial_temperature`` of the loop's static equilibrium (default 2 MK),
    heating ``duration`` (base width of a triangular profile, default 600 s) starting ``delay``
    after the CME onset (default 0 s).
    """

    energy: u.Quantity
    loop_half_length: u.Quantity = field(default_factory=lambda: 2e9 * u.cm)
    loop_cross_section: u.Quantity = field(default_factory=lambda: 1e18 * u.cm ** 2)
    initial_temperature: u.Quantity = field(default_factory=lambda: 2e6 * u.K)
    duration: u.Quantity = field(default_factory=lambda: 600 * u.s)
    delay: u.Quantity = field(default_factory=lambda: 0 * u.s)

    def __post_init__(self):
        _scalar("energy", self.energy, u.erg, lo=0.0, unit_label="erg", inclusive=False)
        _scalar("duration", self.duration, u.s, lo=0.0, unit_label="s", inclusive=False)
        _scalar("delay", self.delay, u.s, lo=0.0, unit_label="s")


@dataclass(frozen=True)
class Observation:
    """The observation: total ``exposure`` (light-curve length), ``bin_width``, ``pre_event``
    duration before the CME onset, ``background`` rate (a Quantity for every band or a dict band ->
    Quantity, ct/s), detection ``false_alarm`` probability (default 0.01)."""

    exposure: u.Quantity
    bin_width: u.Quantity
    pre_event: u.Quantity
    background: Any = field(default_factory=lambda: 0 * u.ct / u.s)
    false_alarm: float = 0.01

    def __post_init__(self):
        exp = _scalar("exposure", self.exposure, u.s, lo=0.0, unit_label="s", inclusive=False)
        bw = _scalar("bin_width", self.bin_width, u.s, lo=0.0, unit_label="s", inclusive=False)
        if exp < bw:
            raise InputError(f"exposure={exp:g} s is shorter than a bin (bin_width={bw:g} s); valid range of "
                             f"exposure: [{bw:g} s, inf)")
        _scalar("pre_event", self.pre_event, u.s, lo=bw, hi=exp - bw, unit_label="s")
        check_range("false_alarm", self.false_alarm, lo=0.0, hi=0.5, inclusive=False)

    @property
    def n_bins(self) -> int:
        return int(math.floor(self.exposure.to_value(u.s) / self.bin_width.to_value(u.s) + 1e-9))


def _resolve_instruments(instrument):
    """-> list of (label, Instrument, band name); see :func:`synthcorona.instruments.channels.resolve_channels`."""
    from ..instruments.channels import resolve_channels

    return resolve_channels(instrument)


class DimmingScenario:
    """A CME-dimming forecast for one star, corona, CME, flare, instrument set and observation.

    Parameters
    ----------
    star, corona, cme : :class:`Star`, :class:`Corona`, :class:`CME`
    flare : :class:`Flare` or None
    instrument : Instrument, generic name, list of these, or dict label -> Instrument / name /
        (instrument, band name). Every named band of each instrument is used unless one is given.
    observation : :class:`Observation`
    recovery : "refill" (default), "cooling" or a time Quantity
        Recovery time constant (see :mod:`synthcorona.dimming.profile`).
    upflow_fraction : float
        f of the refilling time L / (f c_s) (default 0.05).
    table : EmissivityTable or path, optional
        Emissivity table of every band rate and of the flare's radiative loss (default: the
        embedded table, or ``$SYNTHCORONA_TABLE``; see :func:`synthcorona.emissivity.resolve_table`).
    """

    def __init__(self, star, corona, cme, flare=None, instrument="sc-fe9", observation=None, *,
                 recovery="refill", upflow_fraction=prof.DEFAULT_UPFLOW_FRACTION, table=None):
        for name, val, cls in (("star", star, Star), ("corona", corona, Corona), ("cme", cme, CME),
                               ("observation", observation, Observation)):
            if not isinstance(val, cls):
                raise InputError(f"{name}={val!r} must be a {cls.__name__}")
        if flare is not None and not isinstance(flare, Flare):
            raise InputError(f"flare={flare!r} must be a Flare or None")
        self.star, self.corona, self.cme, self.flare, self.observation = star, corona, cme, flare, observation
        self.bands = _resolve_instruments(instrument)
        self.recovery = recovery
        self.upflow_fraction = upflow_fraction
        self.table = resolve_table(table)
        self._setup()

    # ------------------------------------------------------------------ precomputation
    def _setup(self):
        from ..instruments.observables import absorbed_band_kernel, nh_value
        from ..synthesis import prepare

        table = self.table
        self.logT = np.asarray(table.logT, dtype=float)
        cor, cme = self.corona, self.cme
        t_src = cme.source_temperature.to(u.K)
        if cor.density is None:
            n_src = float(mr.rtv_density(t_src, cor.loop_half_length).value)
            mr.check_density("density (from the RTV scaling law)", n_src * u.cm ** -3)
            self.density_source = "Rosner, Tucker & Vaiana (1978) scaling law"
        else:
            n_src = float(cor.density.to_value(u.cm ** -3))
            self.density_source = "user"
        self.density = n_src
        lo, hi = 10 ** table.log_density[0], 10 ** table.log_density[-1]
        self.emissivity_density = float(np.clip(n_src, lo, hi))
        if self.emissivity_density != n_src:
            # The mass -> EM conversion uses n_src itself; only the emissivities (weakly density-dependent
            # through metastable levels) are taken at the nearest density the table holds. Said, not silent.
            warnings.warn(f"CME source density {n_src:.3g} cm-3 is outside the emissivity table's density range "
                          f"[{lo:.3g}, {hi:.3g}] cm-3; emissivities are taken at {self.emissivity_density:.3g} cm-3 "
                          "(attrs 'emissivity_density_cm-3')", UserWarning, stacklevel=3)
        self.quiescent_weights = cor.dem.em_weights(self.logT).to_value(u.cm ** -3)
        self.removal_weights = mr.removal_weights(self.logT, self.quiescent_weights, distribution=cme.distribution,
                                                  source_temperature=t_src, window=cme.window, width=cme.width)
        self.mu_h = mean_mass_per_hydrogen(cor.abundances)
        self.escape_fraction = mr.check_escape_fraction(cme.escape_fraction)
        self.em_per_gram = n_src * self.escape_fraction / (self.mu_h * mr.M_H)
        xf = float(cme.expansion_factor)
        if xf > 1.0 and cme.expanding_fraction > 0:
            self.expansion_change = mr.expansion_emission_measure_change(
                self.logT, self.quiescent_weights, t_src, xf, cme.expanding_fraction, cme.window)
            in_win = np.abs(self.logT - np.log10(t_src.value)) <= cme.window + 1e-9
            available = np.where(in_win, 1.0 - float(cme.expanding_fraction), 1.0) * self.quiescent_weights
        else:
            self.expansion_change = np.zeros_like(self.quiescent_weights)
            available = self.quiescent_weights
        self.max_mass = mr.max_removable_mass(available, self.removal_weights, n_src * u.cm ** -3,
                                              cor.abundances, self.escape_fraction)
        self._check_mass_limit(cme.mass.to_value(u.g))
        # temperature responses, grouped per instrument
        nh = self.star.nh
        rows, eflux, bnds = [], [], []
        prep = prepare(table, cor.abundances, self.emissivity_density * u.cm ** -3)
        nhv = nh_value(nh)
        for label, ins, band in self.bands:
            K = ins.temperature_response(abundances=cor.abundances, density=self.emissivity_density * u.cm ** -3,
                                         bands=band, nh=nh)
            rows.append(np.asarray(K.values[0], dtype=float))
            blo, bhi = float(K.band_lo.values[0]), float(K.band_hi.values[0])
            bnds.append((blo, bhi))
            eflux.append(absorbed_band_kernel(np.array([[blo, bhi]]), prep, nhv)[0])
        self.labels = [b[0] for b in self.bands]
        self.kernel = np.array(rows)                          # (n_b, n_T) ct s-1 cm3 at 1 pc
        self.flux_kernel = np.array(eflux)                    # (n_b, n_T) erg s-1 cm3 (4 pi)
        self.band_limits = np.array(bnds)
        d_cm = float(self.star.distance.to_value(u.cm))
        self.scale = (PARSEC_CM / d_cm) ** 2
        base = self.kernel @ self.quiescent_weights
        mr.band_depths(self.removal_weights, self.quiescent_weights, self.kernel, self.labels)  # checks counts
        self.quiescent_rate = base * self.scale               # ct/s
        dead = self.quiescent_rate < MIN_QUIESCENT_RATE
        if np.any(dead):
            bad = {self.labels[i]: f"{self.quiescent_rate[i]:.3g} ct/s" for i in np.flatnonzero(dead)}
            raise InputError(f"band {bad} has no counts from the quiescent corona (rate below "
                             f"{MIN_QUIESCENT_RATE:g} ct/s): its dimming depth is undefined; choose a band where the "
                             "corona emits")
        self.depth_per_gram = self.em_per_gram * (self.kernel @ self.removal_weights) / base
        self.expansion_depth = -(self.kernel @ self.expansion_change) / base
        self.quiescent_flux = (self.flux_kernel @ self.quiescent_weights) / (4 * np.pi * d_cm ** 2)
        with np.errstate(invalid="ignore", divide="ignore"):
            fbase = self.flux_kernel @ self.quiescent_weights
            self.flux_depth_per_gram = self.em_per_gram * (self.flux_kernel @ self.removal_weights) / fbase
            self.flux_expansion_depth = -(self.flux_kernel @ self.expansion_change) / fbase
        # time profile
        self.onset = (float(cme.onset.to_value(u.s)) if cme.onset is not None
                      else float(prof.onset_time(cme.source_size, cme.speed).value))
        self.recovery_time = float(prof.recovery_time(
            self.recovery, loop_half_length=cor.loop_half_length, temperature=t_src, density=n_src * u.cm ** -3,
            upflow_fraction=self.upflow_fraction, abundances=cor.abundances).to_value(u.s))
        # background per band
        bg = self.observation.background
        if isinstance(bg, dict):
            unknown = set(bg) - set(self.labels)
            if unknown:
                raise InputError(f"background has bands {sorted(unknown)} not in the scenario's bands {self.labels}")
            vals = [bg.get(lab, 0 * u.ct / u.s) for lab in self.labels]
        else:
            vals = [bg] * len(self.labels)
        self.background = np.array([_scalar(f"background[{lab}]", v, u.ct / u.s, lo=0.0, unit_label="ct/s")
                                    for lab, v in zip(self.labels, vals)])
        self.t0 = float(self.observation.pre_event.to_value(u.s))
        self.bin_width = float(self.observation.bin_width.to_value(u.s))
        self.n_bins = self.observation.n_bins
        self.edges = np.arange(self.n_bins + 1) * self.bin_width
        self._flare_setup()

    def _flare_setup(self):
        """Flare excess rates per band on the flare model's time grid, and their running integral."""
        self.flare_termination = "no flare"
        self.flare_time = np.array([0.0, 1.0])
        self.flare_cumulative = np.zeros((len(self.labels), 2))
        if self.flare is None:
            return
        fl = self.flare
        dur = float(fl.duration.to_value(u.s))
        delay = float(fl.delay.to_value(u.s))
        t_end = float(self.edges[-1]) + dur + delay
        from ..synthesis import radiative_loss

        dens = self.emissivity_density * u.cm ** -3
        abund = self.corona.abundances

        def table_loss_at_source_density(temperature):
            return radiative_loss(temperature, table=self.table, abundances=abund, density=dens)

        model = LoopFlareModel(fl.loop_half_length, fl.loop_cross_section, initial_temperature=fl.initial_temperature,
                               flare_energy=fl.energy, peak_time=(delay + 0.5 * dur) * u.s, duration=dur * u.s,
                               radiative_loss=table_loss_at_source_density)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            res = model.run(t_end * u.s, n_output=3001)
        self.flare_result = res
        term = str(res.attrs["termination"])
        t = res["time"].values
        em = res["emission_measure"].values
        lt = np.log10(res["temperature"].values)
        k_t = self._kernel_at(lt)                               # (n_b, n_t)
        excess = self.scale * (em[None, :] * k_t - em[0] * k_t[:, :1])
        cum = cumulative_trapezoid(excess, t, axis=1, initial=0.0)
        if term != "reached t_end":
            term = term + "; flare excess taken as zero after the stop"
        self.flare_termination = term
        self.flare_warnings = [str(w.message) for w in caught]
        self.flare_time = t
        self.flare_cumulative = cum

    def _kernel_at(self, logt):
        x = self.logT
        lt = np.clip(logt, x[0], x[-1])  # the flare run never leaves the table range (it stops there)
        i = np.clip(np.searchsorted(x, lt) - 1, 0, x.size - 2)
        f = (lt - x[i]) / (x[i + 1] - x[i])
        return self.kernel[:, i] * (1 - f) + self.kernel[:, i + 1] * f

    # ------------------------------------------------------------------ building blocks
    def _mass_g(self, mass):
        if mass is None:
            return float(self.cme.mass.to_value(u.g))
        return mr.check_mass("mass", mass)

    def _check_mass_limit(self, m):
        mmax = float(self.max_mass.value)
        m = np.asarray(m, dtype=float)
        if np.any(m > mmax * (1 + 1e-12)):
            raise InputError(
                f"mass={m.max():.4g} g needs more emission measure than the corona holds at the source temperatures: "
                f"the largest removable mass at density={self.density:.4g} cm-3 is {mmax:.4g} g (valid range of "
                f"mass: [0, {mmax:.4g}] g)")

    def depths_for(self, mass_g) -> np.ndarray:
        """Full fractional count-rate depths (..., n_bands) for masses in grams (plain floats)."""
        m = np.asarray(mass_g, dtype=float)
        self._check_mass_limit(m)
        return m[..., None] * self.depth_per_gram + self.expansion_depth

    def flare_binned(self, edges, t0) -> np.ndarray:
        """Bin-averaged flare excess rates (n_bands, n_bins) [ct/s] for bin edges [s] and onset t0 [s]."""
        e = np.asarray(edges, dtype=float) - t0
        tf = self.flare_time
        if self.flare is None:
            return np.zeros((len(self.labels), e.size - 1))
        ec = np.clip(e, tf[0], tf[-1])
        j = np.clip(np.searchsorted(tf, ec) - 1, 0, tf.size - 2)
        f = (ec - tf[j]) / (tf[j + 1] - tf[j])
        c = self.flare_cumulative[:, j] * (1 - f) + self.flare_cumulative[:, j + 1] * f
        return np.diff(c, axis=1) / np.diff(e)

    def _edges_for(self, times):
        if times is None:
            return self.edges
        if isinstance(times, (int, np.integer)):
            if times < 1:
                raise InputError(f"times={times} bins: give at least 1")
            return np.arange(int(times) + 1) * self.bin_width
        t = as_quantity("times", times, u.s).value
        t = np.atleast_1d(np.asarray(t, dtype=float))
        if t.ndim != 1 or np.any(np.diff(t) <= 0):
            raise InputError("times must be strictly increasing bin centres (1-D time Quantity)")
        return np.concatenate([t - 0.5 * self.bin_width, [t[-1] + 0.5 * self.bin_width]])

    def _components(self, edges, mass_g, t0=None, recovery_time=None, flare_scale=1.0):
        t0 = self.t0 if t0 is None else t0
        tau = self.recovery_time if recovery_time is None else recovery_time
        p = prof.binned_profile(edges, t0, self.onset, tau)                 # (n_t,)
        depth = self.depths_for(mass_g)                                     # (n_b,)
        quiet = np.broadcast_to(self.quiescent_rate[:, None], (len(self.labels), p.size))
        decrement = (self.quiescent_rate * depth)[:, None] * p[None, :]
        flare = flare_scale * self.flare_binned(edges, t0)
        return quiet, flare, decrement

    # ------------------------------------------------------------------ public API
    def _attrs(self) -> dict:
        return {
            "star_distance_pc": float(self.star.distance.to_value(u.pc)),
            "nh_cm-2": float(self.star.nh.to_value(u.cm ** -2)) if self.star.nh is not None else 0.0,
            "abundances": str(self.corona.abundances),
            "mu_H": self.mu_h,
            "source_density_cm-3": self.density,
            "source_density_from": self.density_source,
            "emissivity_density_cm-3": self.emissivity_density,
            "source_temperature_K": float(self.cme.source_temperature.to_value(u.K)),
            "escape_fraction": self.escape_fraction,
            "expansion_factor": float(self.cme.expansion_factor),
            "expanding_fraction": float(self.cme.expanding_fraction) if self.cme.expansion_factor > 1 else 0.0,
            "max_removable_mass_g": float(self.max_mass.value),
            "onset_s": self.onset,
            "recovery_time_s": self.recovery_time,
            "recovery_method": str(self.recovery),
            "cme_onset_time_s": self.t0,
            "flare_termination": self.flare_termination,
            "instruments": ", ".join(f"{lab}={ins.name}/{b}" for lab, ins, b in self.bands),
            "method": ("mass-loss dimming: Delta EM = n_e f_esc M / (mu_H m_H) spread over the source temperatures; "
                       "depth = sum Delta EM K / sum EM K per band (synthcorona.dimming)"),
        }

    def depth(self, mass=None) -> xr.Dataset:
        """Full dimming depth per band (and per mass if ``mass`` is an array Quantity).

        Variables: ``depth`` (fraction of the quiescent count rate), ``depth_energy_flux``
        (fraction of the band's energy flux at the observer), ``quiescent_rate`` [ct/s],
        ``rate_decrement`` [ct/s], ``quiescent_energy_flux`` [erg s-1 cm-2],
        ``energy_flux_decrement`` [erg s-1 cm-2], ``removed_emission_measure`` [cm-3].
        """
        m = np.atleast_1d(self._mass_g(mass))
        d = self.depths_for(m)                                              # (n_m, n_b)
        df = m[:, None] * self.flux_depth_per_gram + self.flux_expansion_depth
        dims = ("mass", "band")
        ds = xr.Dataset(
            {
                "depth": (dims, d, {"units": "1", "long_name": "fractional count-rate depth"}),
                "depth_energy_flux": (dims, df, {"units": "1", "long_name": "fractional energy-flux depth"}),
                "rate_decrement": (dims, d * self.quiescent_rate, {"units": "ct / s"}),
                "energy_flux_decrement": (dims, df * self.quiescent_flux, {"units": "erg / (s cm2)"}),
                "quiescent_rate": (("band",), self.quiescent_rate, {"units": "ct / s"}),
                "quiescent_energy_flux": (("band",), self.quiescent_flux, {"units": "erg / (s cm2)"}),
                "removed_emission_measure": (("mass",), m * self.em_per_gram, {"units": "cm-3"}),
            },
            coords={"mass": ("mass", m, {"units": "g"}), "band": self.labels,
                    "band_lo": ("band", self.band_limits[:, 0], {"units": "keV"}),
                    "band_hi": ("band", self.band_limits[:, 1], {"units": "keV"})},
            attrs=self._attrs())
        if mass is None or np.ndim(getattr(mass, "value", mass)) == 0:
            ds = ds.isel(mass=0)
        return ds

    def light_curve(self, times=None, seed=None, n_realisations: int = 0, mass=None) -> xr.Dataset:
        """Expected light curves per band and, optionally, Poisson realisations.

        ``times``: None (the observation's bins), a number of bins, or bin centres (Quantity;
        bins of the observation's width). Variables over (band, time): ``quiescent``,
        ``flare_excess``, ``dimming_decrement``, ``expected`` (= quiescent + flare - decrement),
        ``expected_without_cme`` (quiescent + flare), ``background`` (per band), all in ct/s; and
        ``counts`` (realisation, band, time) including the background when ``n_realisations`` > 0.
        """
        edges = self._edges_for(times)
        m = self._mass_g(mass)
        quiet, flare, dec = self._components(edges, m)
        total = quiet + flare - dec
        centres = 0.5 * (edges[1:] + edges[:-1])
        dims = ("band", "time")
        data = {
            "quiescent": (dims, np.array(quiet), {"units": "ct / s"}),
            "flare_excess": (dims, flare, {"units": "ct / s"}),
            "dimming_decrement": (dims, dec, {"units": "ct / s"}),
            "expected": (dims, total, {"units": "ct / s", "long_name": "expected source rate with CME and flare"}),
            "expected_without_cme": (dims, quiet + flare, {"units": "ct / s"}),
            "background": (("band",), self.background, {"units": "ct / s"}),
        }
        n = int(n_realisations)
        if n < 0:
            raise InputError(f"n_realisations={n_realisations} must be >= 0")
        if n > 0:
            from .noise import as_seed_sequence

            seqs = as_seed_sequence(seed).spawn(len(self.labels))
            widths = np.diff(edges) * u.s
            counts = np.stack([poisson_counts(total[b] * u.ct / u.s, widths, n, seqs[b],
                                              background=self.background[b] * u.ct / u.s)
                               for b in range(len(self.labels))], axis=1)
            data["counts"] = (("realisation", "band", "time"), counts, {"units": "ct"})
        attrs = self._attrs()
        attrs.update({"mass_g": m, "bin_width_s": self.bin_width, "seed": str(seed)})
        return xr.Dataset(data, coords={"band": self.labels, "time": ("time", centres, {"units": "s"})},
                          attrs=attrs)

    def _windows(self):
        end = self.edges[-1]
        post_start = self.t0 + self.onset
        post_stop = min(post_start + max(self.recovery_time, self.bin_width), end)
        if post_stop - post_start < self.bin_width:
            post_start = max(self.t0, post_stop - self.bin_width)
        return ((0 * u.s, self.t0 * u.s), (post_start * u.s, post_stop * u.s))

    def _band_index(self, band):
        if band is None:
            return None
        if band not in self.labels:
            raise InputError(f"band={band!r} is not one of {self.labels}")
        return self.labels.index(band)

    def detection_probability(self, n_realisations: int = 10_000, statistic: str = "window", seed=None,
                              band=None, mass=None) -> xr.Dataset:
        """Detection probability per band (:func:`synthcorona.dimming.detection.detection_probability`).

        The window statistic compares the pre-event interval [0, t0) with [t0 + onset,
        t0 + onset + recovery_time) (cut at the end of the light curve).
        """
        lc = self.light_curve(mass=mass)
        idx = range(len(self.labels)) if band is None else [self._band_index(band)]
        out = []
        for b in idx:
            ds = detection.detection_probability(lc["expected"].values[b] * u.ct / u.s,
                                        lc["expected_without_cme"].values[b] * u.ct / u.s,
                                        self.bin_width * u.s, false_alarm=self.observation.false_alarm,
                                        n_realisations=n_realisations, statistic=statistic,
                                        windows=self._windows() if statistic == "window" else None, seed=seed,
                                        background=self.background[b] * u.ct / u.s)
            out.append(ds.expand_dims(band=[self.labels[b]]))
        res = xr.concat(out, dim="band", combine_attrs="override")
        res.attrs.update(self._attrs())
        res.attrs["mass_g"] = float(lc.attrs["mass_g"])
        return res

    def best_band(self) -> str:
        """Band with the largest Gaussian-limit S/N of the full depth, delta q / sqrt(q + background)."""
        snr = self.depth_per_gram * self.quiescent_rate / np.sqrt(self.quiescent_rate + self.background)
        return self.labels[int(np.argmax(snr))]

    def minimum_detectable_mass(self, target_probability: float = 0.5, bracket=(1e13 * u.g, 1e18 * u.g),
                                band=None, statistic: str = "window", n_realisations: int = 10_000, seed=0,
                                xtol: float = 1e-2) -> xr.Dataset:
        """CME mass at which P(detect) = ``target_probability`` in ``band`` (default :meth:`best_band`).

        Uses :func:`synthcorona.dimming.detection.minimum_detectable`. If the bracket's upper end
        exceeds the largest mass the corona can supply it is lowered to that mass, and
        ``attrs["bracket_note"]`` says so.
        """
        if self.escape_fraction == 0:
            raise InputError("escape_fraction=0 (confined eruption): no mass leaves, so no mass-loss dimming is "
                             "detectable; valid range for this calculation: (0, 1]")
        b = self._band_index(band if band is not None else self.best_band())
        try:
            lo, hi = bracket
            lo_g = float(as_quantity("bracket", lo, u.g).value)
            hi_g = float(as_quantity("bracket", hi, u.g).value)
        except (TypeError, ValueError):
            raise InputError(f"bracket={bracket!r} must be a (lo, hi) pair of masses") from None
        note = ""
        mmax = float(self.max_mass.value)
        if hi_g > mmax:
            note = (f"upper end of the bracket lowered from {hi_g:.4g} g to the largest removable mass {mmax:.4g} g")
            hi_g = mmax
        if not lo_g < hi_g:
            raise InputError(f"bracket lower end {lo_g:.4g} g is not below the largest removable mass {mmax:.4g} g")
        edges = self.edges
        base = self.quiescent_rate[b] + self.flare_binned(edges, self.t0)[b]
        p = prof.binned_profile(edges, self.t0, self.onset, self.recovery_time)
        q = self.quiescent_rate[b] * self.depth_per_gram[b]
        qx = self.quiescent_rate[b] * self.expansion_depth[b]

        def fn(mass):
            m = float(mass.to_value(u.g))
            return (base - (q * m + qx) * p) * u.ct / u.s, base * u.ct / u.s

        res = detection.minimum_detectable(fn, self.bin_width * u.s, bracket=(lo_g * u.g, hi_g * u.g),
                                  target_probability=target_probability, false_alarm=self.observation.false_alarm,
                                  n_realisations=n_realisations, statistic=statistic,
                                  windows=self._windows() if statistic == "window" else None, seed=seed, xtol=xtol,
                                  background=self.background[b] * u.ct / u.s)
        res = res.rename({"parameter": "mass", "parameter_error": "mass_error"})
        res.attrs.update(self._attrs())
        res.attrs["band"] = self.labels[b]
        res.attrs["bracket_note"] = note or "bracket used as given"
        return res
