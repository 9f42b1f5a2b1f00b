r"""Activity-cycle comparison: what a star's corona looks like, and what can be detected, phase by phase.

A cycle is a list of :class:`CyclePhase` objects, each giving the corona at one phase of the
activity cycle in one of three ways:

* a DEM model of :mod:`synthcorona.dem` (``dem=``);
* a list of components (``dem=[comp1, comp2, ...]``, summed into a
  :class:`~synthcorona.dem.MultiComponentDEM`: the usual 2T/3T fits of stellar coronae);
* a measured band flux plus a temperature (``flux=``, ``band=``, ``temperature=``, optionally
  ``width_dex=``): an isothermal DEM (or a Gaussian in log T of that width) whose emission
  measure is solved so that its unabsorbed energy flux in ``band`` at the star's distance equals
  ``flux``. The flux is linear in the EM, so the solution is exact:
  :math:`EM = F_{meas} / F_1` with :math:`F_1` the band flux of the same shape with EM = 1 cm-3
  (:func:`solve_emission_measure`).

:func:`compare_cycle` computes for every phase

* energy fluxes at the observer and luminosities in energy bands
  (:func:`synthcorona.synthesis.band_flux`, :func:`synthcorona.synthesis.luminosity`; unabsorbed);
* count rates in instrument bands, with interstellar absorption
  (:meth:`synthcorona.instruments.Instrument.count_rates`);
* hardness ratios :math:`HR = (H - S)/(H + S)` of count rates and the plain ratio :math:`H/S`
  (the usual X-ray colour definitions, e.g. Park et al. 2006, ApJ 652, 610, section 1, who
  write the ratio as S/H);
* the cycle amplitude of every flux and count rate: :math:`A = \max/\min` over the phases and
  :math:`\log_{10} A`;
* counts-to-flux conversion between two instruments for the DEM of each phase
  (:func:`convert_count_rate`, built on
  :func:`synthcorona.instruments.observables.counts_to_flux`);
* optionally, the detectability of a reference CME dimming at each phase: the reference
  :class:`~synthcorona.dimming.DimmingScenario` with its corona DEM replaced by the phase's
  (``dataclasses.replace``) and the cycle's star; its depth per band, detection probability with a
  fixed seed (common random numbers across phases) and, on request, the minimum detectable mass.

The result is an :class:`xarray.Dataset` with a ``phase`` dimension; :func:`cycle_tables` turns it
into astropy tables (ECSV/CSV), :mod:`synthcorona.plotting.cycle` into figures.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any, NamedTuple, Sequence

import astropy.units as u
import numpy as np
import xarray as xr

from ..dem import DEM, GaussianDEM, IsothermalDEM, MultiComponentDEM
from ..errors import InputError
from ..validation import as_quantity, as_scalar, check_range

__all__ = ["CyclePhase", "CountConversion", "ConversionResult", "solve_emission_measure",
           "convert_count_rate", "compare_cycle", "cycle_tables", "FLUX_UNIT", "PHASE_SOURCES"]

#: Unit of every energy flux (erg s-1 cm-2).
FLUX_UNIT = u.erg / (u.s * u.cm ** 2)
#: Unit of the counts-to-flux factors (erg cm-2 per count).
FACTOR_UNIT = u.erg / (u.cm ** 2 * u.ct)
#: How a phase's corona was given.
PHASE_SOURCES = ("dem", "components", "flux")


def _band_pair(name: str, band) -> u.Quantity:
    """A band as a (2,) Quantity of energies or wavelengths (validated, order as given)."""
    if isinstance(band, tuple) and len(band) == 2 and all(isinstance(b, u.Quantity) for b in band):
        band = u.Quantity([band[0], band[1].to(band[0].unit, equivalencies=u.spectral())])
    if not isinstance(band, u.Quantity) or band.shape != (2,):
        raise InputError(f"{name}={band!r} must be two energies or wavelengths, e.g. [0.1, 2.4] * u.keV")
    if band.unit.physical_type not in ("energy", "length"):
        raise InputError(f"{name}={band!r} must be in energy or wavelength units")
    e = band.to_value(u.keV, equivalencies=u.spectral())
    if not np.all(np.isfinite(e)) or np.any(e <= 0) or e[0] == e[1]:
        raise InputError(f"{name}={band!r} must hold two different positive limits")
    return band


def _band_label(band: u.Quantity) -> str:
    return f"{band[0].value:g}-{band[1].value:g} {band.unit.to_string()}"


@dataclass(frozen=True)
class CyclePhase:
    """One phase of an activity cycle.

    Parameters
    ----------
    label : str
        Short name ("minimum", "rise", ...), unique within a cycle.
    phase : float or Quantity [time]
        Cycle phase: a fraction in [0, 1), or a time since the reference epoch (e.g. ``3 * u.yr``).
        All phases of a cycle must use the same kind.
    dem : DEM or sequence of DEMs, optional
        The corona (a volume DEM, cm-3). A sequence is summed (multi-component corona).
    flux : Quantity [erg s-1 cm-2], optional
        Instead of ``dem``: a measured unabsorbed energy flux at the observer in ``band``.
    band : Quantity pair, optional
        Energy or wavelength limits of ``flux``.
    temperature : Quantity [K], optional
        Temperature of the isothermal DEM (or peak of the Gaussian DEM) solved from ``flux``.
    width_dex : float, optional
        With ``flux``: Gaussian DEM of this width in log10 T (dex, (0, 3]) instead of isothermal.
    """

    label: str
    phase: Any
    dem: Any = None
    flux: u.Quantity | None = None
    band: Any = None
    temperature: u.Quantity | None = None
    width_dex: float | None = None

    def __post_init__(self):
        if not isinstance(self.label, str) or not self.label.strip():
            raise InputError(f"label={self.label!r} must be a non-empty string")
        if isinstance(self.phase, u.Quantity):
            as_scalar(f"phase of '{self.label}'", self.phase, u.yr, lo=-1e4, hi=1e4, unit_label="yr")
        elif isinstance(self.phase, (int, float, np.floating, np.integer)) and not isinstance(self.phase, bool):
            v = float(self.phase)
            if not (0.0 <= v < 1.0):
                raise InputError(f"phase of '{self.label}' = {v:g} is outside the valid range [0, 1) of a cycle "
                                 "fraction; give a time (e.g. 3 * u.yr) for phases in years")
        else:
            raise InputError(f"phase of '{self.label}' = {self.phase!r} must be a fraction in [0, 1) or a time")
        by_dem = self.dem is not None
        by_flux = any(x is not None for x in (self.flux, self.band, self.temperature))
        if by_dem == by_flux:
            raise InputError(f"phase '{self.label}': give either dem= (a DEM or a list of components) or "
                             "flux=, band= and temperature=, not both and not neither")
        if by_dem:
            if isinstance(self.dem, (list, tuple)):
                if not self.dem or not all(isinstance(d, DEM) for d in self.dem):
                    raise InputError(f"phase '{self.label}': dem must be a DEM or a non-empty list of DEMs")
            elif not isinstance(self.dem, DEM):
                raise InputError(f"phase '{self.label}': dem={self.dem!r} is not a DEM model")
            if self.width_dex is not None:
                raise InputError(f"phase '{self.label}': width_dex applies only to a phase given by flux")
        else:
            missing = [k for k in ("flux", "band", "temperature") if getattr(self, k) is None]
            if missing:
                raise InputError(f"phase '{self.label}': a phase given by flux also needs {', '.join(missing)}")
            as_scalar(f"flux of '{self.label}'", self.flux, FLUX_UNIT, lo=0.0, unit_label="erg s-1 cm-2",
                      inclusive=False)
            _band_pair(f"band of '{self.label}'", self.band)
            as_scalar(f"temperature of '{self.label}'", self.temperature, u.K, lo=1e4, hi=1e9, unit_label="K")
            if self.width_dex is not None:
                check_range(f"width_dex of '{self.label}'", float(self.width_dex), lo=0.0, hi=3.0, unit_label="dex",
                            inclusive=True)
                if float(self.width_dex) == 0.0:
                    raise InputError(f"width_dex of '{self.label}' = 0: omit it for an isothermal DEM "
                                     "(valid range (0, 3] dex)")

    @property
    def source(self) -> str:
        """"dem", "components" or "flux": how the corona was given."""
        if self.dem is None:
            return "flux"
        if isinstance(self.dem, (list, tuple)) or isinstance(self.dem, MultiComponentDEM):
            return "components"
        return "dem"

    @property
    def phase_value(self) -> float:
        """The phase as a float: the cycle fraction, or the time in years."""
        if isinstance(self.phase, u.Quantity):
            return float(self.phase.to_value(u.yr))
        return float(self.phase)

    def resolve(self, distance, abundances="coronal", density=None, table=None) -> DEM:
        """The phase's volume DEM (cm-3); a flux phase is solved with :func:`solve_emission_measure`."""
        if self.dem is not None:
            d = MultiComponentDEM(list(self.dem)) if isinstance(self.dem, (list, tuple)) else self.dem
            if d.batch_shape != ():
                raise InputError(f"phase '{self.label}': the DEM must be a single DEM, not a batch of shape "
                                 f"{d.batch_shape}")
            if not d.em_unit.is_equivalent(u.cm ** -3):
                raise InputError(f"phase '{self.label}': the DEM has units {d.em_unit}; a volume DEM (cm-3) is "
                                 "needed for fluxes and count rates of a star")
            return d
        return solve_emission_measure(self.flux, self.band, self.temperature, distance, width_dex=self.width_dex,
                                      abundances=abundances, density=density, table=table)


def _shape_dem(temperature, width_dex, em) -> DEM:
    t = as_quantity("temperature", temperature, u.K)
    if width_dex is None:
        return IsothermalDEM(temperature=t, total_em=em)
    return GaussianDEM(peak_logT=float(np.log10(t.to_value(u.K))), width_logT=float(width_dex), total_em=em)


def solve_emission_measure(flux, band, temperature, distance, width_dex=None, abundances="coronal", density=None,
                           table=None) -> DEM:
    """The isothermal (or Gaussian, ``width_dex``) DEM whose band flux equals a measured flux.

    The unabsorbed band flux of a DEM of fixed shape is linear in its total emission measure,
    :math:`F = EM\\,F_1` with :math:`F_1` the flux for EM = 1 cm-3
    (:func:`synthcorona.synthesis.band_flux`), so :math:`EM = F_{meas}/F_1` exactly.

    Parameters
    ----------
    flux : Quantity [erg s-1 cm-2]
        Measured unabsorbed energy flux at the observer, > 0.
    band : Quantity pair
        Energy or wavelength limits of the flux.
    temperature : Quantity [K]
        Temperature of the isothermal plasma (peak temperature of the Gaussian DEM).
    distance : Quantity [length]
        Distance of the star.
    width_dex : float, optional
        Gaussian width in log10 T (dex); None: isothermal.
    abundances, density, table
        As for :func:`synthcorona.synthesis.band_flux`.

    Returns
    -------
    IsothermalDEM or GaussianDEM with the solved ``total_em`` (cm-3).
    """
    from ..synthesis import band_flux

    f = as_scalar("flux", flux, FLUX_UNIT, lo=0.0, unit_label="erg s-1 cm-2", inclusive=False)
    band = _band_pair("band", band)
    unit_dem = _shape_dem(temperature, width_dex, 1.0 * u.cm ** -3)
    f1 = float(band_flux(unit_dem, band, distance, table=table, abundances=abundances,
                         density=density).to_value(FLUX_UNIT))
    if not f1 > 0:
        raise InputError(f"band={_band_label(band)}: plasma at temperature={temperature} emits nothing in this band "
                         "(no lines or continuum of the table), so no emission measure can give flux="
                         f"{f:g} erg s-1 cm-2")
    return _shape_dem(temperature, width_dex, (f / f1) * u.cm ** -3)


# ----------------------------------------------------------------------------- instruments
from ..instruments.channels import resolve_channels  # noqa: E402  (re-exported: part of this module's API)


def _one_channel(name: str, spec):
    ch = resolve_channels(spec)
    if len(ch) != 1:
        raise InputError(f"{name}={spec!r} names {len(ch)} instrument bands ({', '.join(c[0] for c in ch)}); "
                         "name exactly one, e.g. 'sc-softx:broad'")
    return ch[0]


@dataclass(frozen=True)
class CountConversion:
    """Convert a count rate in one instrument band into flux in another instrument's band.

    ``source`` and ``target``: one instrument band each (``"sc-softx:broad"``, ``"sc-fe9"``,
    ``(Instrument, "band")``). ``rate``: optional measured count rate in ``source`` (ct/s).
    ``flux_band``: energy band of the flux (default: the limits of the target band; for a band
    "total", the target instrument's response range). ``absorbed``: flux arriving at the telescope
    (True) or unabsorbed source flux (False, default).
    """

    source: Any
    target: Any
    rate: u.Quantity | None = None
    flux_band: Any = None
    absorbed: bool = False

    def __post_init__(self):
        if self.rate is not None:
            as_scalar("rate", self.rate, u.ct / u.s, lo=0.0, unit_label="ct s-1")
        if self.flux_band is not None:
            _band_pair("flux_band", self.flux_band)


class ConversionResult(NamedTuple):
    """Result of :func:`convert_count_rate` (all Quantities)."""

    flux: u.Quantity            #: flux in the flux band implied by the source rate [erg s-1 cm-2]
    rate: u.Quantity            #: expected count rate in the target band [ct s-1]
    source_factor: u.Quantity   #: flux per count s-1 in the source band [erg cm-2 ct-1]
    target_factor: u.Quantity   #: flux per count s-1 in the target band [erg cm-2 ct-1]


def _c2f(channel, dem, flux_band, nh, absorbed, abundances, density, table) -> float:
    from ..instruments.observables import counts_to_flux

    _, ins, band = channel
    c = counts_to_flux(ins, band=band, flux_band=flux_band, nh=nh, absorbed=absorbed, dem=dem, table=table,
                       abundances=abundances, density=density)
    return float(c.values)


def _default_flux_band(channel) -> u.Quantity:
    _, ins, band = channel
    if band == "total":
        return ins.energy_range
    return ins.bands[band]


def convert_count_rate(rate, dem, source, target, *, nh=None, flux_band=None, absorbed=False, abundances="coronal",
                       density=None, table=None) -> ConversionResult:
    """Flux and target-band count rate implied by a count rate in a source instrument band, for a DEM.

    With :math:`C_X = F_{band}/R_X` the counts-to-flux factor of instrument band X for the DEM
    (:func:`synthcorona.instruments.observables.counts_to_flux`; the DEM's shape matters, its EM
    and the distance cancel), a source rate :math:`R_s` gives the flux :math:`F = R_s C_s` and the
    target rate :math:`R_t = R_s C_s / C_t`. Converting back (swap ``source`` and ``target``)
    returns the input.

    Parameters
    ----------
    rate : Quantity [ct s-1]
        Count rate measured in ``source`` (>= 0; any shape).
    dem : DEM
        The corona (one volume DEM).
    source, target : str or (Instrument, band)
        One instrument band each (e.g. ``"sc-softx:broad"``, ``"sc-fe9"``).
    nh : Quantity [cm-2], optional
        Interstellar column (included in both count rates).
    flux_band : Quantity pair, optional
        Band of the flux; default the target band's limits.
    absorbed : bool
        Flux at the telescope (True) or unabsorbed (False).
    abundances, density, table
        As for :meth:`Instrument.count_rate`.
    """
    r = as_quantity("rate", rate, u.ct / u.s)
    if np.any(~np.isfinite(r.value)) or np.any(r.value < 0):
        raise InputError(f"rate={rate} must be finite and >= 0 ct s-1")
    src = _one_channel("source", source)
    tgt = _one_channel("target", target)
    fb = _default_flux_band(tgt) if flux_band is None else _band_pair("flux_band", flux_band)
    cs = _c2f(src, dem, fb, nh, absorbed, abundances, density, table)
    ct = _c2f(tgt, dem, fb, nh, absorbed, abundances, density, table)
    if not (np.isfinite(cs) and np.isfinite(ct)) or ct == 0:
        raise InputError(f"source={src[0]} or target={tgt[0]} records no counts from this DEM: no conversion")
    return ConversionResult(flux=(r.value * cs) * FLUX_UNIT, rate=(r.value * cs / ct) * u.ct / u.s,
                            source_factor=cs * FACTOR_UNIT, target_factor=ct * FACTOR_UNIT)


# ----------------------------------------------------------------------------- the comparison
def _amplitude(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """max/min over axis 0 and its log10 (inf where the minimum is 0; NaN where all are 0)."""
    mx, mn = np.nanmax(x, axis=0), np.nanmin(x, axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(mn > 0, mx / np.where(mn > 0, mn, 1.0), np.where(mx > 0, np.inf, np.nan))
        return a, np.log10(a)


def _hardness_pairs(hardness, labels: list[str]) -> list[tuple[str, str]]:
    if hardness is None:
        pairs = []
        for lab in labels:
            if lab.endswith(":hard"):
                soft = lab[:-len("hard")] + "soft"
                if soft in labels:
                    pairs.append((lab, soft))
        return pairs
    out = []
    for k, pair in enumerate(hardness):
        if isinstance(pair, str):
            h, sep, s = pair.partition("/")
            if not sep:
                raise InputError(f"hardness[{k}]={pair!r} must be 'hard band/soft band', e.g. 'sc-softx:hard/sc-softx:soft'")
            pair = (h.strip(), s.strip())
        if not isinstance(pair, (tuple, list)) or len(pair) != 2:
            raise InputError(f"hardness[{k}]={pair!r} must be a (hard, soft) pair of instrument band labels")
        for x in pair:
            if x not in labels:
                raise InputError(f"hardness[{k}]: band '{x}' is not among the reported instrument bands "
                                 f"({', '.join(labels) or 'none'})")
        out.append((pair[0], pair[1]))
    return out


def _reference_scenario(reference):
    """A DimmingScenario, or forecast-file inputs (anything with ``build_scenario`` and ``corona``)."""
    from ..dimming.scenario import DimmingScenario

    if isinstance(reference, DimmingScenario) or (hasattr(reference, "build_scenario")
                                                  and hasattr(reference, "corona")):
        return reference
    raise InputError(f"reference={reference!r} must be a DimmingScenario or forecast-file inputs "
                     "(synthcorona.io.forecast_file.read_forecast_file)")


def _phase_scenario(ref, dem: DEM, star):
    """The reference scenario with the corona's DEM swapped for ``dem`` (``dataclasses.replace``) and the
    cycle's star."""
    from ..dimming.scenario import DimmingScenario

    corona = dataclasses.replace(ref.corona, dem=dem)
    if not isinstance(ref, DimmingScenario):          # forecast-file inputs
        return ref.build_scenario(star=star, corona=corona)
    return DimmingScenario(star, corona, ref.cme, ref.flare, {lab: (ins, b) for lab, ins, b in ref.bands},
                           ref.observation, recovery=ref.recovery, upflow_fraction=ref.upflow_fraction)


def _phase_observables(i, d, bdict, channels, dist, nh, table, abundances, density, x, flux, lum, rates,
                       total_em, mean_logT):
    """Fill row ``i`` of the flux, luminosity, count-rate, EM and mean-log T arrays for DEM ``d`` (in place)."""
    from ..synthesis import band_flux, luminosity

    flux[i] = band_flux(d, bdict, dist, table=table, abundances=abundances, density=density).to_value(FLUX_UNIT)
    lum[i] = luminosity(d, bdict, table=table, abundances=abundances, density=density).to_value(u.erg / u.s)
    w = d.em_weights(x).to_value(u.cm ** -3)
    total_em[i] = float(w.sum())
    mean_logT[i] = float((w @ x) / w.sum()) if w.sum() > 0 else np.nan
    for j, (_, ins, b) in enumerate(channels):
        rates[i, j] = float(ins.count_rate(d, distance=dist, nh=nh, band=b, table=table, abundances=abundances,
                                           density=density).to_value(u.ct / u.s))


def compare_cycle(phases: Sequence[CyclePhase], star, *, bands=None, instruments=None, hardness=None,
                  conversion: CountConversion | None = None, reference=None, n_realisations: int = 1000,
                  seed: int = 0, minimum_mass: bool = False, abundances="coronal", density=None, table=None,
                  period=None, name: str = "") -> xr.Dataset:
    """Fluxes, count rates, hardness, amplitudes, conversions and dimming detectability over a cycle.

    Parameters
    ----------
    phases : sequence of :class:`CyclePhase`
        At least two, unique labels, all phases fractions or all times.
    star : :class:`synthcorona.dimming.Star`
        Distance and interstellar column ``nh`` (count rates include absorption; fluxes do not).
    bands : dict label -> Quantity pair, or list of pairs, optional
        Energy/wavelength bands of the fluxes and luminosities (default: 0.1-2.4 keV and
        100-400 Angstrom).
    instruments : see :func:`resolve_channels`, optional
        Instrument bands whose count rates are reported (default: none).
    hardness : list of (hard, soft) label pairs or "hard/soft" strings, optional
        Default: every reported instrument with bands "hard" and "soft".
    conversion : :class:`CountConversion`, optional
        Counts-to-flux conversion to report per phase.
    reference : :class:`~synthcorona.dimming.DimmingScenario` or forecast-file inputs, optional
        Reference CME scenario whose detectability is followed across the cycle (the result of
        :func:`synthcorona.io.forecast_file.read_forecast_file` is accepted too).
    n_realisations : int
        Monte Carlo realisations of the detection probability (``false_alarm * n >= 10``).
    seed : int
        Seed of the Monte Carlo, the same for every phase (common random numbers).
    minimum_mass : bool
        Also find the CME mass detected with probability 0.5 in the best band (slower).
    abundances, density, table
        As for :func:`synthcorona.synthesis.band_flux`.
    period : Quantity [time], optional
        Cycle period; with phases in years adds the coordinate ``cycle_fraction`` = (t mod P)/P.
    name : str
        Name of the star or cycle, for attrs and plot titles.

    Returns
    -------
    xarray.Dataset
        With dims ``phase``, ``band``, ``channel`` (instrument bands), ``pair`` (hardness
        pairs) and ``dimming_band``; units in each variable's attrs; provenance (table CHIANTI version
        and content hash, abundances, star, method) in ``attrs``.
    """
    from .. import __version__
    from ..dimming.scenario import Star
    from ..emissivity import load_emissivity
    from ..synthesis import prepare

    phases = list(phases)
    if len(phases) < 2:
        raise InputError(f"phases: a cycle needs at least two phases; got {len(phases)}")
    for k, p in enumerate(phases):
        if not isinstance(p, CyclePhase):
            raise InputError(f"phases[{k}]={p!r} is not a CyclePhase")
    labels = [p.label for p in phases]
    dup = sorted({x for x in labels if labels.count(x) > 1})
    if dup:
        raise InputError(f"phase labels must be unique; repeated: {dup}")
    kinds = {isinstance(p.phase, u.Quantity) for p in phases}
    if len(kinds) > 1:
        raise InputError("phases mix cycle fractions and times: give every phase as a fraction in [0, 1) or every "
                         "phase as a time (e.g. '3 yr')")
    in_years = kinds == {True}
    if not isinstance(star, Star):
        raise InputError(f"star={star!r} must be a synthcorona.dimming.Star")
    n_real = int(n_realisations)
    if n_real < 1:
        raise InputError(f"n_realisations={n_realisations} must be >= 1")
    ref = None
    if reference is not None:
        ref = _reference_scenario(reference)
        fa = float(ref.observation.false_alarm)
        need = math.ceil(10 / fa - 1e-9)   # the threshold calibration needs >= 10 expected false alarms
        if n_real < need:
            raise InputError(f"n_realisations={n_real}: with the reference scenario's false_alarm={fa:g} the "
                             f"detection threshold needs at least 10 expected false alarms; valid range "
                             f">= {need}")
    if period is not None:
        as_scalar("period", period, u.yr, lo=0.0, unit_label="yr", inclusive=False)
        if not in_years:
            raise InputError("period applies to phases given as times; these phases are cycle fractions")
    table = table if table is not None else load_emissivity()
    dist, nh = star.distance, star.nh

    if bands is None:
        bands = {"0.1-2.4 keV": [0.1, 2.4] * u.keV, "100-400 Angstrom": [100, 400] * u.AA}
    elif isinstance(bands, (list, tuple)):
        bands = {_band_label(_band_pair(f"bands[{k}]", b)): b for k, b in enumerate(bands)}
    elif not isinstance(bands, dict):
        raise InputError(f"bands={bands!r} must be a dict label -> band or a list of bands")
    if not bands:
        raise InputError("bands is empty: give at least one energy or wavelength band")
    band_q = {str(k): _band_pair(f"bands[{k!r}]", v) for k, v in bands.items()}
    band_labels = list(band_q)
    band_kev = np.array([np.sort(b.to_value(u.keV, equivalencies=u.spectral())) for b in band_q.values()])
    channels = resolve_channels(instruments) if instruments else []
    ch_labels = [c[0] for c in channels]
    pairs = _hardness_pairs(hardness, ch_labels)

    # DEMs of the phases
    dems = []
    for p in phases:
        try:
            dems.append(p.resolve(dist, abundances=abundances, density=density, table=table))
        except InputError as exc:
            raise InputError(f"phase '{p.label}': {exc}") from None
    prep = prepare(table, abundances, density)
    n_p, n_b, n_c = len(phases), len(band_labels), len(channels)

    flux = np.empty((n_p, n_b))
    lum = np.empty((n_p, n_b))
    rates = np.full((n_p, n_c), np.nan)
    total_em = np.empty(n_p)
    mean_logT = np.empty(n_p)
    x = np.asarray(table.logT, dtype=float)
    bdict = {lab: band_q[lab] for lab in band_labels}
    for i, d in enumerate(dems):
        try:
            _phase_observables(i, d, bdict, channels, dist, nh, table, abundances, density, x, flux, lum, rates,
                               total_em, mean_logT)
        except InputError as exc:
            raise InputError(f"phase '{phases[i].label}': {exc}") from None

    data: dict = {
        "flux": (("phase", "band"), flux, {"units": FLUX_UNIT.to_string(),
                                           "long_name": "unabsorbed energy flux at the observer"}),
        "luminosity": (("phase", "band"), lum, {"units": "erg / s", "long_name": "band luminosity into 4 pi"}),
        "total_emission_measure": (("phase",), total_em, {"units": "cm-3",
                                                          "long_name": "emission measure on the table grid"}),
        "mean_logT": (("phase",), mean_logT, {"units": "dex (log10 K)",
                                              "long_name": "emission-measure-weighted mean log10 T"}),
    }
    fa, fla = _amplitude(flux)
    data["flux_amplitude"] = (("band",), fa, {"units": "1", "long_name": "max/min of the flux over the phases"})
    data["flux_log_amplitude"] = (("band",), fla, {"units": "dex", "long_name": "log10(max/min) of the flux"})
    coords: dict = {
        "phase": ("phase", np.array([p.phase_value for p in phases]),
                  {"units": "yr" if in_years else "1",
                   "long_name": "time since the reference epoch" if in_years else "cycle phase (fraction)"}),
        "label": ("phase", np.array(labels, dtype=object)),
        "phase_source": ("phase", np.array([p.source for p in phases], dtype=object)),
        "dem": ("phase", np.array([repr(d) for d in dems], dtype=object)),
        "band": ("band", np.array(band_labels, dtype=object)),
        "band_lo": ("band", band_kev[:, 0], {"units": "keV"}),
        "band_hi": ("band", band_kev[:, 1], {"units": "keV"}),
    }
    if in_years and period is not None:
        P = float(as_quantity("period", period, u.yr).value)
        coords["cycle_fraction"] = ("phase", np.mod(coords["phase"][1], P) / P, {"units": "1"})
    if n_c:
        ra, rla = _amplitude(rates)
        data["count_rate"] = (("phase", "channel"), rates, {"units": "ct / s",
                                                            "long_name": "count rate with interstellar absorption"})
        data["count_rate_amplitude"] = (("channel",), ra, {"units": "1", "long_name": "max/min of the count rate"})
        data["count_rate_log_amplitude"] = (("channel",), rla, {"units": "dex"})
        coords["channel"] = ("channel", np.array(ch_labels, dtype=object))
        coords["instrument"] = ("channel", np.array([c[1].name for c in channels], dtype=object))
        coords["instrument_band"] = ("channel", np.array([c[2] for c in channels], dtype=object))
    if pairs:
        h = rates[:, [ch_labels.index(a) for a, _ in pairs]]
        s = rates[:, [ch_labels.index(b) for _, b in pairs]]
        with np.errstate(divide="ignore", invalid="ignore"):
            hr = np.where(h + s > 0, (h - s) / (h + s), np.nan)
            ratio = np.where(s > 0, h / s, np.nan)
        data["hardness_ratio"] = (("phase", "pair"), hr, {
            "units": "1", "long_name": "(H - S)/(H + S) of count rates (Park et al. 2006, ApJ 652, 610)"})
        data["band_ratio"] = (("phase", "pair"), ratio, {"units": "1", "long_name": "H/S of count rates"})
        coords["pair"] = ("pair", np.array([f"{a}/{b}" for a, b in pairs], dtype=object))
        coords["hard_band"] = ("pair", np.array([a for a, _ in pairs], dtype=object))
        coords["soft_band"] = ("pair", np.array([b for _, b in pairs], dtype=object))

    attrs = {
        "title": f"activity-cycle comparison{(' of ' + name) if name else ''}",
        "star": name,
        "star_distance_pc": float(dist.to_value(u.pc)),
        "nh_cm-2": float(nh.to_value(u.cm ** -2)) if nh is not None else 0.0,
        "abundances": str(getattr(prep.abund, "name", abundances)),
        "density_model": str(prep.density_label),
        "phase_units": "yr" if in_years else "cycle fraction",
        "synthcorona_version": __version__,
        "method": ("per phase: DEM -> band fluxes (unabsorbed) and luminosities (synthcorona.synthesis), count "
                   "rates with ISM absorption (Instrument.count_rate); amplitude = max/min over the phases; "
                   "flux phases: EM solved exactly from the linear band flux (synthcorona.products.cycle)"),
        "hardness_definition": "HR = (H - S)/(H + S) and ratio H/S of count rates (Park et al. 2006, ApJ 652, 610)",
    }
    if period is not None:
        attrs["period_yr"] = float(as_quantity("period", period, u.yr).value)
    for k, v in prep.attrs().items():
        attrs[k] = v if isinstance(v, (str, int, float)) else str(v)

    if conversion is not None:
        if not isinstance(conversion, CountConversion):
            raise InputError(f"conversion={conversion!r} must be a CountConversion")
        src = _one_channel("conversion source", conversion.source)
        tgt = _one_channel("conversion target", conversion.target)
        fb = _default_flux_band(tgt) if conversion.flux_band is None else _band_pair("flux_band", conversion.flux_band)
        cs, ct = np.empty(n_p), np.empty(n_p)
        for i, d in enumerate(dems):
            cs[i] = _c2f(src, d, fb, nh, conversion.absorbed, abundances, density, table)
            ct[i] = _c2f(tgt, d, fb, nh, conversion.absorbed, abundances, density, table)
        fu = FACTOR_UNIT.to_string()
        data["counts_to_flux_source"] = (("phase",), cs, {"units": fu, "long_name": f"flux per count s-1 in {src[0]}"})
        data["counts_to_flux_target"] = (("phase",), ct, {"units": fu, "long_name": f"flux per count s-1 in {tgt[0]}"})
        with np.errstate(divide="ignore", invalid="ignore"):
            data["rate_conversion"] = (("phase",), cs / ct, {
                "units": "1", "long_name": f"count rate in {tgt[0]} per count rate in {src[0]}"})
        if conversion.rate is not None:
            r = float(as_quantity("rate", conversion.rate, u.ct / u.s).value)
            data["converted_flux"] = (("phase",), r * cs, {"units": FLUX_UNIT.to_string(),
                                                           "long_name": f"flux implied by {r:g} ct/s in {src[0]}"})
            with np.errstate(divide="ignore", invalid="ignore"):
                data["converted_rate"] = (("phase",), r * cs / ct, {
                    "units": "ct / s", "long_name": f"rate in {tgt[0]} implied by {r:g} ct/s in {src[0]}"})
            attrs["conversion_rate_ct_s-1"] = r
        lo_k, hi_k = np.sort(fb.to_value(u.keV, equivalencies=u.spectral()))
        attrs.update({"conversion_source": src[0], "conversion_target": tgt[0],
                      "conversion_flux_band_kev": f"{lo_k:.6g}-{hi_k:.6g}",
                      "conversion_flux": "absorbed" if conversion.absorbed else "unabsorbed",
                      "conversion_method": "counts_to_flux factors C = F/R per phase DEM "
                                           "(synthcorona.instruments.observables.counts_to_flux)"})

    if reference is not None:
        _dimming(data, coords, attrs, ref, dems, phases, star, n_real, seed, minimum_mass)

    return xr.Dataset(data, coords=coords, attrs=attrs)


def _dimming(data, coords, attrs, ref, dems, phases, star, n_real, seed, minimum_mass):
    """Depth, detection probability (and minimum mass) of the reference CME at every phase (in place)."""
    labels = list(ref.labels) if hasattr(ref, "labels") else list(ref.instrument)
    n_p, n_b = len(dems), len(labels)
    depth = np.full((n_p, n_b), np.nan)
    quiet = np.full((n_p, n_b), np.nan)
    prob = np.full((n_p, n_b), np.nan)
    prob_err = np.full((n_p, n_b), np.nan)
    snr = np.full((n_p, n_b), np.nan)
    mmin = np.full(n_p, np.nan)
    mmin_err = np.full(n_p, np.nan)
    mmin_band = np.array([""] * n_p, dtype=object)
    notes = np.array([""] * n_p, dtype=object)
    for i, d in enumerate(dems):
        try:
            scen = _phase_scenario(ref, d, star)
            dd = scen.depth()
            depth[i] = dd["depth"].values
            quiet[i] = dd["quiescent_rate"].values
            det = scen.detection_probability(n_realisations=n_real, seed=seed)
            prob[i] = det["probability"].values
            prob_err[i] = det["probability_error"].values
            if "snr_expected" in det:
                snr[i] = det["snr_expected"].values
        except InputError as exc:   # e.g. the CME mass exceeds what this phase's corona holds
            notes[i] = "dimming: " + " ".join(str(exc).split())
            continue
        if minimum_mass:
            try:
                mm = scen.minimum_detectable_mass(n_realisations=n_real, seed=seed)
            except InputError as exc:  # e.g. P(detect) never reaches 0.5 below the largest removable mass
                notes[i] = "minimum_detectable_mass: " + " ".join(str(exc).split())
                continue
            mmin[i] = float(mm["mass"].values)
            mmin_err[i] = float(mm["mass_error"].values)
            mmin_band[i] = str(mm.attrs["band"])
    dims = ("phase", "dimming_band")
    data["dimming_depth"] = (dims, depth, {"units": "1", "long_name": "full fractional count-rate depth"})
    data["dimming_quiescent_rate"] = (dims, quiet, {"units": "ct / s"})
    data["detection_probability"] = (dims, prob, {"units": "1", "long_name": "P(detect) of the reference CME"})
    data["detection_probability_error"] = (dims, prob_err, {"units": "1", "long_name": "binomial standard error"})
    data["dimming_snr_expected"] = (dims, snr, {"units": "sigma", "long_name": "Gaussian-limit expected S/N"})
    if minimum_mass:
        data["minimum_detectable_mass"] = (("phase",), mmin, {"units": "g",
                                                              "long_name": "CME mass with P(detect) = 0.5"})
        data["minimum_detectable_mass_error"] = (("phase",), mmin_err, {"units": "g"})
        data["minimum_mass_band"] = (("phase",), mmin_band)
    data["dimming_note"] = (("phase",), notes, {"long_name": "why the dimming could not be computed (empty: fine)"})
    coords["dimming_band"] = ("dimming_band", np.array(labels, dtype=object))
    attrs.update({
        "dimming_reference_cme_mass_g": float(ref.cme.mass.to_value(u.g)),
        "dimming_reference_abundances": str(ref.corona.abundances),
        "dimming_star": "the cycle's star replaces the reference scenario's star",
        "dimming_n_realisations": int(n_real),
        "dimming_seed": int(seed),
        "dimming_false_alarm": float(ref.observation.false_alarm),
        "dimming_method": ("reference DimmingScenario with corona DEM replaced per phase (dataclasses.replace); "
                           "window statistic, same seed for every phase (synthcorona.dimming)"),
    })


# ----------------------------------------------------------------------------- tables
def cycle_tables(ds: xr.Dataset):
    """The comparison as two astropy ``QTable``: one row per phase, and one row per band/channel amplitude.

    Column names: ``flux[<band>]``, ``luminosity[<band>]``, ``count_rate[<channel>]``,
    ``hardness_ratio[<pair>]``, ``band_ratio[<pair>]``, ``dimming_depth[<band>]``, ... with units.
    """
    from astropy.table import QTable

    def unit_of(var):
        s = var.attrs.get("units", "")
        if s in ("", "1", "dex (log10 K)", "sigma", "dex"):
            return u.dimensionless_unscaled
        return u.Unit(s)

    per = QTable()
    per["label"] = [str(x) for x in ds["label"].values]
    per["phase"] = ds["phase"].values * (u.yr if ds["phase"].attrs.get("units") == "yr" else u.dimensionless_unscaled)
    if "cycle_fraction" in ds.coords:
        per["cycle_fraction"] = ds["cycle_fraction"].values
    per["phase_source"] = [str(x) for x in ds["phase_source"].values]
    per["dem"] = [str(x) for x in ds["dem"].values]
    amp = QTable(names=("quantity", "item", "amplitude", "log_amplitude"), dtype=(str, str, float, float))
    for name, var in ds.data_vars.items():
        if "phase" not in var.dims:
            continue
        if var.ndim == 1:
            per[name] = var.values * unit_of(var) if var.dtype != object else [str(x) for x in var.values]
            continue
        other = [d for d in var.dims if d != "phase"][0]
        for j, item in enumerate(ds[other].values):
            per[f"{name}[{item}]"] = var.values[:, j] * unit_of(var)
    for q, dim in (("flux", "band"), ("count_rate", "channel")):
        if f"{q}_amplitude" in ds:
            for j, item in enumerate(ds[dim].values):
                amp.add_row((q, str(item), float(ds[f"{q}_amplitude"].values[j]),
                             float(ds[f"{q}_log_amplitude"].values[j])))
    meta = {k: v for k, v in ds.attrs.items()}
    per.meta.update(meta)
    amp.meta.update(meta)
    return per, amp
