r"""A complete CME-dimming forecast: star, corona, CME, flare, instrument and observation.

:class:`DimmingScenario` ties together

* the mass-loss depth per band (:mod:`synthcorona.dimming.mass_removal`),
* its time profile (:mod:`synthcorona.dimming.profile`),
* the associated flare, from the 0D loop model :class:`~synthcorona.dimming.flare.LoopFlareModel`
  (an arcade of strands that reaches the flare's class or energy by the rule of
  :mod:`synthcorona.dimming.flare_class`; :meth:`DimmingScenario.flare_summary`) folded through
  each band's temperature response,
* Poisson realisations (:mod:`synthcorona.dimming.noise`), optionally with the red noise of
  ``Observation.red_noise`` (a damped random walk of the source rate), and detection probabilities
  (:mod:`synthcorona.dimming.detection`) whose thresholds are calibrated on event-free light curves
  with the same noise.

What the scenario computes once from its inputs is its prepared state, built by
:func:`~synthcorona.dimming.prepared.prepare_scenario` (:mod:`synthcorona.dimming.prepared`).

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
from dataclasses import dataclass, field, replace
from typing import Any

import astropy.units as u
import numpy as np
import xarray as xr

from ..constants import PARSEC_CM
from ..dem import DEM
from ..emissivity import resolve_table
from ..errors import InputError
from ..memory import check_allocation
from ..validation import as_quantity, as_scalar, check_range
from . import detection
from . import mass_removal as mr
from . import profile as prof
from .noise import WORK_ARRAYS, RedNoise, as_seed_sequence, poisson_counts
from .prepared import PreparedScenario, prepare_scenario

__all__ = ["Star", "Corona", "CME", "Flare", "Observation", "DimmingScenario"]

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
            raise InputError("mass must be a single value (pass arrays to DimmingScenario.depth(mass=...))",
                             argument="mass")
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
    """The flare accompanying the CME: an arcade of identical strands of the 0-D loop model
    (:class:`~synthcorona.dimming.flare.LoopFlareModel`), set up by :mod:`synthcorona.dimming.flare_class`.

    Give **either** ``energy`` (total heating energy, > 0 erg) **or** ``flare_class`` (e.g. ``"M2.5"``:
    the peak 1-8 Angstrom flux at 1 AU, true scale, that the flare is made to reach). The strands have
    half-length ``loop_half_length`` (default 2e9 cm), cross-section ``loop_cross_section`` (default
    1e18 cm2) and start in static equilibrium at ``initial_temperature`` (default 2 MK); the heating
    has a triangular profile of base ``duration`` (default 600 s) starting ``delay`` after the CME
    onset (default 0 s). ``n_strands``: None (default) puts the flare on the EM-T relation
    ``em_t_relation`` ("solar" or "stellar"); a number (> 0) fixes the arcade instead (1: all the
    energy in one loop).
    """

    energy: u.Quantity | None = None
    loop_half_length: u.Quantity = field(default_factory=lambda: 2e9 * u.cm)
    loop_cross_section: u.Quantity = field(default_factory=lambda: 1e18 * u.cm ** 2)
    initial_temperature: u.Quantity = field(default_factory=lambda: 2e6 * u.K)
    duration: u.Quantity = field(default_factory=lambda: 600 * u.s)
    delay: u.Quantity = field(default_factory=lambda: 0 * u.s)
    flare_class: str | None = None
    n_strands: float | None = None
    em_t_relation: str = "solar"

    def __post_init__(self):
        from ..instruments.soft_xray_monitor import class_flux
        from .flare_class import RELATIONS

        if (self.energy is None) == (self.flare_class is None):
            raise InputError("give the flare's energy or its flare_class (one of them), e.g. Flare(1e31 * u.erg) "
                             "or Flare(flare_class=\"M2.5\")", argument="energy")
        if self.energy is not None:
            _scalar("energy", self.energy, u.erg, lo=0.0, unit_label="erg", inclusive=False)
        else:
            class_flux(self.flare_class)
        if self.n_strands is not None:
            check_range("n_strands", self.n_strands, lo=0.0, hi=1e6, inclusive=False)
        if self.em_t_relation not in RELATIONS:
            raise InputError(f"em_t_relation={self.em_t_relation!r} must be one of {RELATIONS}",
                             argument="em_t_relation")
        _scalar("duration", self.duration, u.s, lo=0.0, unit_label="s", inclusive=False)
        _scalar("delay", self.delay, u.s, lo=0.0, unit_label="s")


@dataclass(frozen=True)
class Observation:
    """The observation: total ``exposure`` (light-curve length), ``bin_width``, ``pre_event``
    duration before the CME onset, ``background`` rate (a Quantity for every band or a dict band ->
    Quantity, ct/s), detection ``false_alarm`` probability (default 0.01) and the source's
    ``red_noise``: None (default, Poisson noise only) or a :class:`~synthcorona.dimming.noise.RedNoise`
    (or an ``(amplitude, timescale)`` pair), the multiplicative damped-random-walk variability of
    Kelly, Bechtold & Siemiginowska (2009, ApJ 698, 895) applied to the source rate of every
    simulated light curve, the event-free ones that calibrate the detection threshold included.
    """

    exposure: u.Quantity
    bin_width: u.Quantity
    pre_event: u.Quantity
    background: Any = field(default_factory=lambda: 0 * u.ct / u.s)
    false_alarm: float = 0.01
    red_noise: RedNoise | None = None

    def __post_init__(self):
        object.__setattr__(self, "red_noise", RedNoise.coerce(self.red_noise))
        exp = _scalar("exposure", self.exposure, u.s, lo=0.0, unit_label="s", inclusive=False)
        bw = _scalar("bin_width", self.bin_width, u.s, lo=0.0, unit_label="s", inclusive=False)
        if exp < bw:
            raise InputError(f"exposure={exp:g} s is shorter than a bin (bin_width={bw:g} s); valid range of "
                             f"exposure: [{bw:g} s, inf)")
        _scalar("pre_event", self.pre_event, u.s, lo=bw, hi=exp - bw, unit_label="s")
        check_range("false_alarm", self.false_alarm, lo=0.0, hi=0.5, inclusive=False)
        # light curves and the Monte Carlo's work arrays hold a few dozen float64 values per bin and band
        # (noise.WORK_ARRAYS per realisation row, a few rows at least): refuse before anything is allocated
        n = self.n_bins
        check_allocation(f"light curves of {n:,} bins", 8.0 * n * 4 * WORK_ARRAYS,
                         "exposure or bin_width (fewer bins)", argument="bin_width")

    @property
    def n_bins(self) -> int:
        return int(math.floor(self.exposure.to_value(u.s) / self.bin_width.to_value(u.s) + 1e-9))


class DimmingScenario:
    """A CME-dimming forecast for one star, corona, CME, flare, instrument set and observation.

    Everything computed once from the inputs is held in :attr:`prepared`, a
    :class:`~synthcorona.dimming.prepared.PreparedScenario` (source plasma, band kernels, band
    rates, time profile, flare excess; every field documented with unit and shape); the most used
    of its values are also properties of the scenario.

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
        from ..instruments.channels import resolve_channels

        for name, val, cls in (("star", star, Star), ("corona", corona, Corona), ("cme", cme, CME),
                               ("observation", observation, Observation)):
            if not isinstance(val, cls):
                raise InputError(f"{name}={val!r} must be a {cls.__name__}")
        if flare is not None and not isinstance(flare, Flare):
            raise InputError(f"flare={flare!r} must be a Flare or None")
        self.star, self.corona, self.cme, self.flare, self.observation = star, corona, cme, flare, observation
        #: The resolved bands: list of (label, Instrument, band name).
        self.channels = resolve_channels(instrument)
        self.recovery = recovery
        self.upflow_fraction = upflow_fraction
        self.table = resolve_table(table)
        #: The prepared state (:class:`~synthcorona.dimming.prepared.PreparedScenario`).
        self.prepared: PreparedScenario = prepare_scenario(star, corona, cme, flare, self.channels, observation,
                                                           recovery=recovery, upflow_fraction=upflow_fraction,
                                                           table=self.table)

    # ------------------------------------------------------------------ prepared values
    @property
    def labels(self) -> list:
        """Band labels, in order (a new list)."""
        return list(self.prepared.kernels.labels)

    @property
    def logT(self) -> np.ndarray:
        """(n_T,) log10(K): temperature nodes of the emissivity table."""
        return self.prepared.source.logT

    @property
    def max_mass(self) -> u.Quantity:
        """The largest CME mass [g] the corona can supply at the source temperatures."""
        return self.prepared.source.max_mass

    @property
    def onset(self) -> float:
        """Duration [s] of the dimming's linear onset."""
        return self.prepared.timing.onset

    @property
    def recovery_time(self) -> float:
        """E-folding recovery time [s] of the dimming."""
        return self.prepared.timing.recovery_time

    @property
    def t0(self) -> float:
        """Time [s] of the CME onset on the light curve's clock (the observation's pre-event duration)."""
        return self.prepared.timing.t0

    @property
    def bin_width(self) -> float:
        """Width [s] of a bin of the observation."""
        return self.prepared.timing.bin_width

    @property
    def edges(self) -> np.ndarray:
        """(n_bins + 1,) s: bin edges of the observation, the first at 0."""
        return self.prepared.timing.edges

    @property
    def n_bins(self) -> int:
        """Number of bins of the observation (``prepared.timing.n_bins``)."""
        return self.prepared.timing.n_bins

    @property
    def flare_termination(self) -> str:
        """How the flare run ended ("no flare", "reached t_end", or where and why it stopped)."""
        return self.prepared.flare.termination

    @property
    def resolved_flare(self) -> Flare | None:
        """The flare as run: a :class:`Flare` with its heating ``energy`` and ``n_strands`` explicit (a scenario
        built with it runs the same arcade); None without a flare."""
        setup = self.prepared.flare.setup
        if self.flare is None or setup is None:
            return None
        return replace(self.flare, energy=setup.heating_energy * u.erg, flare_class=None, n_strands=setup.n_strands)

    def flare_summary(self) -> xr.Dataset:
        """The flare against its class: ``peak_flux_1_8A`` [W m-2 at 1 AU, true scale], ``implied_class``,
        ``peak_temperature`` [K], ``peak_emission_measure`` [cm-3], ``heating_energy`` [erg],
        ``radiated_energy_1_8A`` [erg] (and ``n_strands``, ``strand_energy``, ``peak_flux_1_8A_legacy``), from
        the scenario's own flare run folded through the 1-8 Angstrom monitor response
        (:mod:`synthcorona.dimming.flare_class`); units in each variable's attrs. Without a flare: zero
        energies and fluxes, NaN temperature and EM, an empty class."""
        attrs = {"flare_termination": self.prepared.flare.termination}
        if self.flare is not None and self.flare.flare_class is not None:
            attrs["flare_class_requested"] = self.flare.flare_class
        return self.prepared.flare.summary(attrs)

    # ------------------------------------------------------------------ building blocks
    def _mass_g(self, mass):
        if mass is None:
            return float(self.cme.mass.to_value(u.g))
        return mr.check_mass("mass", mass)

    def depths_for(self, mass_g) -> np.ndarray:
        """Full fractional count-rate depths (..., n_bands) for masses in grams (plain floats)."""
        m = np.asarray(mass_g, dtype=float)
        self.prepared.source.check_mass(m)
        rates = self.prepared.rates
        return m[..., None] * rates.depth_per_gram + rates.expansion_depth

    def flare_binned(self, edges, t0) -> np.ndarray:
        """Bin-averaged flare excess rates (n_bands, n_bins) [ct/s] for bin edges [s] and onset t0 [s]."""
        return self.prepared.flare.binned(edges, t0)

    def _edges_for(self, times):
        if times is None:
            return self.edges
        if isinstance(times, (int, np.integer)):
            if times < 1:
                raise InputError(f"times={times} bins: give at least 1", argument="times")
            return np.arange(int(times) + 1) * self.bin_width
        t = as_quantity("times", times, u.s).value
        t = np.atleast_1d(np.asarray(t, dtype=float))
        if t.ndim != 1 or np.any(np.diff(t) <= 0):
            raise InputError("times must be strictly increasing bin centres (1-D time Quantity)", argument="times")
        return np.concatenate([t - 0.5 * self.bin_width, [t[-1] + 0.5 * self.bin_width]])

    def _components(self, edges, mass_g, t0=None, recovery_time=None, flare_scale=1.0):
        t0 = self.t0 if t0 is None else t0
        tau = self.recovery_time if recovery_time is None else recovery_time
        q = self.prepared.rates.quiescent_rate
        p = prof.binned_profile(edges, t0, self.onset, tau)                 # (n_t,)
        depth = self.depths_for(mass_g)                                     # (n_b,)
        quiet = np.broadcast_to(q[:, None], (q.size, p.size))
        decrement = (q * depth)[:, None] * p[None, :]
        flare = flare_scale * self.flare_binned(edges, t0)
        return quiet, flare, decrement

    def result_attrs(self) -> dict:
        """The provenance attributes every result of this scenario carries (a new dict)."""
        src, timing = self.prepared.source, self.prepared.timing
        return {
            "star_distance_pc": float(self.star.distance.to_value(u.pc)),
            "nh_cm-2": float(self.star.nh.to_value(u.cm ** -2)) if self.star.nh is not None else 0.0,
            "abundances": str(self.corona.abundances),
            "mu_H": src.mu_h,
            "source_density_cm-3": src.density,
            "source_density_from": src.density_source,
            "emissivity_density_cm-3": src.emissivity_density,
            "source_temperature_K": float(self.cme.source_temperature.to_value(u.K)),
            "escape_fraction": src.escape_fraction,
            "expansion_factor": float(self.cme.expansion_factor),
            "expanding_fraction": float(self.cme.expanding_fraction) if self.cme.expansion_factor > 1 else 0.0,
            "max_removable_mass_g": float(src.max_mass.value),
            "onset_s": timing.onset,
            "recovery_time_s": timing.recovery_time,
            "recovery_method": str(self.recovery),
            "cme_onset_time_s": timing.t0,
            "flare_termination": self.prepared.flare.termination,
            "instruments": ", ".join(f"{lab}={ins.name}/{b}" for lab, ins, b in self.channels),
            "red_noise": "none" if self.observation.red_noise is None else self.observation.red_noise.description,
            "method": ("mass-loss dimming: Delta EM = n_e f_esc M / (mu_H m_H) spread over the source temperatures; "
                       "depth = sum Delta EM K / sum EM K per band (synthcorona.dimming)"),
        }

    def detection_windows(self):
        """The pre- and post-event windows of the window statistic, ((start, stop), (start, stop)) in s (Quantities).

        Pre-event: [0, t0). Post-event: [t0 + onset, t0 + onset + recovery_time), cut at the end of
        the light curve and at least one bin long.
        """
        end = self.edges[-1]
        post_start = self.t0 + self.onset
        post_stop = min(post_start + max(self.recovery_time, self.bin_width), end)
        if post_stop - post_start < self.bin_width:
            post_start = max(self.t0, post_stop - self.bin_width)
        return ((0 * u.s, self.t0 * u.s), (post_start * u.s, post_stop * u.s))

    def band_index(self, band) -> int | None:
        """Index of the band label ``band`` (None for None); an unknown label is an error naming the valid ones."""
        if band is None:
            return None
        labels = self.labels
        if band not in labels:
            raise InputError(f"band={band!r} is not one of {labels}", argument="band")
        return labels.index(band)

    # ------------------------------------------------------------------ public API
    def depth(self, mass=None) -> xr.Dataset:
        """Full dimming depth per band (and per mass if ``mass`` is an array Quantity).

        Variables: ``depth`` (fraction of the quiescent count rate), ``depth_energy_flux``
        (fraction of the band's energy flux at the observer), ``quiescent_rate`` [ct/s],
        ``rate_decrement`` [ct/s], ``quiescent_energy_flux`` [erg s-1 cm-2],
        ``energy_flux_decrement`` [erg s-1 cm-2], ``removed_emission_measure`` [cm-3].
        """
        rates, limits = self.prepared.rates, self.prepared.kernels.band_limits
        m = np.atleast_1d(self._mass_g(mass))
        d = self.depths_for(m)                                              # (n_m, n_b)
        df = m[:, None] * rates.flux_depth_per_gram + rates.flux_expansion_depth
        dims = ("mass", "band")
        ds = xr.Dataset(
            {
                "depth": (dims, d, {"units": "1", "long_name": "fractional count-rate depth"}),
                "depth_energy_flux": (dims, df, {"units": "1", "long_name": "fractional energy-flux depth"}),
                "rate_decrement": (dims, d * rates.quiescent_rate, {"units": "ct / s"}),
                "energy_flux_decrement": (dims, df * rates.quiescent_flux, {"units": "erg / (s cm2)"}),
                "quiescent_rate": (("band",), rates.quiescent_rate, {"units": "ct / s"}),
                "quiescent_energy_flux": (("band",), rates.quiescent_flux, {"units": "erg / (s cm2)"}),
                "removed_emission_measure": (("mass",), m * self.prepared.source.em_per_gram, {"units": "cm-3"}),
            },
            coords={"mass": ("mass", m, {"units": "g"}), "band": self.labels,
                    "band_lo": ("band", limits[:, 0], {"units": "keV"}),
                    "band_hi": ("band", limits[:, 1], {"units": "keV"})},
            attrs=self.result_attrs())
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
        background = self.prepared.rates.background
        dims = ("band", "time")
        data = {
            "quiescent": (dims, np.array(quiet), {"units": "ct / s"}),
            "flare_excess": (dims, flare, {"units": "ct / s"}),
            "dimming_decrement": (dims, dec, {"units": "ct / s"}),
            "expected": (dims, total, {"units": "ct / s", "long_name": "expected source rate with CME and flare"}),
            "expected_without_cme": (dims, quiet + flare, {"units": "ct / s"}),
            "background": (("band",), background, {"units": "ct / s"}),
        }
        n = int(n_realisations)
        if n < 0:
            raise InputError(f"n_realisations={n_realisations} must be >= 0")
        if n > 0:
            seqs = as_seed_sequence(seed).spawn(len(background))
            widths = np.diff(edges) * u.s
            counts = np.stack([poisson_counts(total[b] * u.ct / u.s, widths, n, seqs[b],
                                              background=background[b] * u.ct / u.s,
                                              red_noise=self.observation.red_noise)
                               for b in range(len(background))], axis=1)
            data["counts"] = (("realisation", "band", "time"), counts, {"units": "ct"})
        attrs = self.result_attrs()
        attrs.update({"mass_g": m, "bin_width_s": self.bin_width, "seed": str(seed)})
        return xr.Dataset(data, coords={"band": self.labels, "time": ("time", centres, {"units": "s"})},
                          attrs=attrs)

    def detection_probability(self, n_realisations: int | None = None, statistic: str = "window", seed=None,
                              band=None, mass=None, onset: str = "scan", precision: float | None = None) -> xr.Dataset:
        """Detection probability per band (:func:`synthcorona.dimming.detection.detection_probability`).

        ``onset="scan"`` (default): the onset and recovery time are unknown and scanned, and the
        false-alarm probability holds per observation; ``"known"``: only the true onset is tested
        (a triggered observation). The window statistic's reference windows are the pre-event
        interval [0, t0) and [t0 + onset, t0 + onset + recovery_time) (cut at the end of the light
        curve; :meth:`detection_windows`). ``n_realisations`` defaults to the number giving a standard
        error ``precision`` (default 0.02) of P(detect)
        (:func:`synthcorona.dimming.sizes.realisations_for_precision`); give one or the other.
        """
        n = self._realisations(n_realisations, precision, statistic, onset)
        lc = self.light_curve(mass=mass)
        labels, background = self.labels, self.prepared.rates.background
        idx = range(len(labels)) if band is None else [self.band_index(band)]
        out = []
        for b in idx:
            ds = detection.detection_probability(
                lc["expected"].values[b] * u.ct / u.s, lc["expected_without_cme"].values[b] * u.ct / u.s,
                self.bin_width * u.s, false_alarm=self.observation.false_alarm, n_realisations=n,
                statistic=statistic, windows=self.detection_windows() if statistic == "window" else None, seed=seed,
                onset=onset, background=background[b] * u.ct / u.s, red_noise=self.observation.red_noise)
            out.append(ds.expand_dims(band=[labels[b]]))
        res = xr.concat(out, dim="band", combine_attrs="override")
        res.attrs.update(self.result_attrs())
        res.attrs["mass_g"] = float(lc.attrs["mass_g"])
        return res

    def _realisations(self, n_realisations, precision, statistic, onset) -> int:
        """Realisations per probability: ``n_realisations`` or the number for ``precision`` (default 0.02)."""
        from .sizes import DEFAULT_PRECISION, realisations_for_precision

        if n_realisations is not None:
            if precision is not None:
                raise InputError("give n_realisations or precision, not both", argument="precision")
            return n_realisations
        return realisations_for_precision(DEFAULT_PRECISION if precision is None else precision,
                                          self.observation.false_alarm,
                                          exact_threshold=detection.threshold_is_exact(statistic, onset))

    def best_band(self) -> str:
        """Band with the largest Gaussian-limit S/N of the full depth, delta q / sqrt(q + background)."""
        rates = self.prepared.rates
        snr = rates.depth_per_gram * rates.quiescent_rate / np.sqrt(rates.quiescent_rate + rates.background)
        return self.labels[int(np.argmax(snr))]

    def minimum_detectable_mass(self, target_probability: float = 0.5, bracket=(1e13 * u.g, 1e18 * u.g),
                                band=None, statistic: str = "window", n_realisations: int | None = None, seed=0,
                                xtol: float = 1e-2, onset: str = "scan", precision: float | None = None) -> xr.Dataset:
        """CME mass at which P(detect) = ``target_probability`` in ``band`` (default :meth:`best_band`).

        Uses :func:`synthcorona.dimming.detection.minimum_detectable`; ``onset``, ``n_realisations``
        and ``precision`` as in :meth:`detection_probability`. If the bracket's upper end
        exceeds the largest mass the corona can supply it is lowered to that mass, and
        ``attrs["bracket_note"]`` says so.
        """
        if self.prepared.source.escape_fraction == 0:
            raise InputError("escape_fraction=0 (confined eruption): no mass leaves, so no mass-loss dimming is "
                             "detectable; valid range for this calculation: (0, 1]", argument="escape_fraction")
        n = self._realisations(n_realisations, precision, statistic, onset)
        b = self.band_index(band if band is not None else self.best_band())
        lo_g, hi_g, note = self._mass_bracket(bracket)
        rates = self.prepared.rates
        edges = self.edges
        base = rates.quiescent_rate[b] + self.flare_binned(edges, self.t0)[b]
        p = prof.binned_profile(edges, self.t0, self.onset, self.recovery_time)
        q = rates.quiescent_rate[b] * rates.depth_per_gram[b]
        qx = rates.quiescent_rate[b] * rates.expansion_depth[b]

        def fn(mass):
            m = float(mass.to_value(u.g))
            return (base - (q * m + qx) * p) * u.ct / u.s, base * u.ct / u.s

        res = detection.minimum_detectable(
            fn, self.bin_width * u.s, bracket=(lo_g * u.g, hi_g * u.g), target_probability=target_probability,
            false_alarm=self.observation.false_alarm, n_realisations=n, statistic=statistic,
            windows=self.detection_windows() if statistic == "window" else None, seed=seed, xtol=xtol,
            onset=onset, background=rates.background[b] * u.ct / u.s, red_noise=self.observation.red_noise)
        res = res.rename({"parameter": "mass", "parameter_error": "mass_error"})
        res.attrs.update(self.result_attrs())
        res.attrs["band"] = self.labels[b]
        res.attrs["bracket_note"] = note or "bracket used as given"
        return res

    def _mass_bracket(self, bracket):
        """(lo, hi) masses [g] of ``bracket``, hi lowered to :attr:`max_mass` if above it, and the note saying so."""
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
        return lo_g, hi_g, note
