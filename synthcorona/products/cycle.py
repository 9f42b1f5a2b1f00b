r"""Activity-cycle comparison: what a star's corona looks like, and what can be detected, phase by phase.

A cycle is a list of :class:`~synthcorona.products.cycle_phase.CyclePhase` objects, each giving the
corona at one phase (a DEM, DEM components, or a measured band flux plus a temperature; see
:mod:`synthcorona.products.cycle_phase`). :func:`compare_cycle` computes for every phase

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
  (:class:`~synthcorona.instruments.conversion.CountConversion`, built on
  :func:`synthcorona.instruments.observables.counts_to_flux`);
* optionally, the detectability of a reference CME dimming at each phase: the reference
  :class:`~synthcorona.dimming.DimmingScenario` with its corona DEM replaced by the phase's
  (``dataclasses.replace``) and the cycle's star (:func:`phase_scenario`); its depth per band,
  detection probability with a fixed seed (common random numbers across phases) and, on request,
  the minimum detectable mass.

The result is an :class:`xarray.Dataset` with a ``phase`` dimension; :func:`cycle_tables` turns it
into astropy tables (ECSV/CSV), :mod:`synthcorona.plotting.cycle` into figures.
"""
from __future__ import annotations

import dataclasses
from typing import Sequence

import astropy.units as u
import numpy as np
import xarray as xr

from ..dem import DEM
from ..errors import InputError
from ..instruments.channels import resolve_channels
from ..instruments.conversion import (
    FACTOR_UNIT,
    FLUX_UNIT,
    CountConversion,
    counts_to_flux_factor,
    default_flux_band,
    one_channel,
)
from ..spectral import Band
from ..validation import as_quantity, as_scalar
from .cycle_phase import CyclePhase, coincident_phases

__all__ = ["compare_cycle", "cycle_tables", "hardness_pairs", "phase_scenario", "DEFAULT_BANDS"]

#: Bands of the fluxes and luminosities when none are given.
DEFAULT_BANDS = {b.label: b for b in (Band.parse("0.1-2.4 keV"), Band.parse("100-400 Angstrom"))}


def _amplitude(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """max/min over axis 0 and its log10 (inf where the minimum is 0; NaN where all are 0)."""
    mx, mn = np.nanmax(x, axis=0), np.nanmin(x, axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(mn > 0, mx / np.where(mn > 0, mn, 1.0), np.where(mx > 0, np.inf, np.nan))
        return a, np.log10(a)


def hardness_pairs(hardness, labels: list[str]) -> list[tuple[str, str]]:
    """The (hard, soft) instrument-band label pairs of the hardness ratios.

    ``hardness``: None (every instrument among ``labels`` with bands "hard" and "soft"), or a list
    of ``"hard/soft"`` strings or (hard, soft) pairs, each band one of ``labels``.
    """
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
                raise InputError(f"hardness[{k}]={pair!r} must be 'hard band/soft band', e.g. "
                                 "'sc-softx:hard/sc-softx:soft'", argument="hardness")
            pair = (h.strip(), s.strip())
        if not isinstance(pair, (tuple, list)) or len(pair) != 2:
            raise InputError(f"hardness[{k}]={pair!r} must be a (hard, soft) pair of instrument band labels",
                             argument="hardness")
        for x in pair:
            if x not in labels:
                raise InputError(f"hardness[{k}]: band '{x}' is not among the reported instrument bands "
                                 f"({', '.join(labels) or 'none'})", argument="hardness")
        out.append((pair[0], pair[1]))
    return out


def _reference_scenario(reference):
    """A DimmingScenario, or forecast-file inputs (anything with ``build_scenario`` and ``corona``)."""
    from ..dimming.scenario import DimmingScenario

    if isinstance(reference, DimmingScenario) or (hasattr(reference, "build_scenario")
                                                  and hasattr(reference, "corona")):
        return reference
    raise InputError(f"reference={reference!r} must be a DimmingScenario or forecast-file inputs "
                     "(synthcorona.io.forecast_file.read_forecast_file)", argument="reference")


def phase_scenario(ref, dem: DEM, star, table=None):
    """The reference scenario ``ref`` with the corona's DEM swapped for ``dem`` (``dataclasses.replace``)
    and the cycle's ``star``.

    ``ref``: a :class:`~synthcorona.dimming.DimmingScenario` or forecast-file inputs
    (:class:`~synthcorona.io.forecast_file.ForecastInputs`). ``table``: emissivity table of the new
    scenario (default: the reference scenario's own, or for forecast-file inputs the default table).
    """
    from ..dimming.scenario import DimmingScenario

    corona = dataclasses.replace(ref.corona, dem=dem)
    if not isinstance(ref, DimmingScenario):          # forecast-file inputs
        return ref.build_scenario(star=star, corona=corona, table=table)
    return DimmingScenario(star, corona, ref.cme, ref.flare, {lab: (ins, b) for lab, ins, b in ref.channels},
                           ref.observation, recovery=ref.recovery, upflow_fraction=ref.upflow_fraction,
                           table=ref.table if table is None else table)


# ----------------------------------------------------------------------------- checks
def _check_phases(phases, star, period) -> tuple[list, bool]:
    """The phases as a list (at least two, CyclePhase, unique labels, one kind) and whether they are times."""
    from ..dimming.scenario import Star

    phases = list(phases)
    if len(phases) < 2:
        raise InputError(f"phases: a cycle needs at least two phases; got {len(phases)}", argument="phases")
    for k, p in enumerate(phases):
        if not isinstance(p, CyclePhase):
            raise InputError(f"phases[{k}]={p!r} is not a CyclePhase", argument="phases")
    labels = [p.label for p in phases]
    dup = sorted({x for x in labels if labels.count(x) > 1})
    if dup:
        raise InputError(f"phase labels must be unique; repeated: {dup}", argument="phases")
    kinds = {isinstance(p.phase, u.Quantity) for p in phases}
    if len(kinds) > 1:
        raise InputError("phases mix cycle fractions and times: give every phase as a fraction in [0, 1) or every "
                         "phase as a time (e.g. '3 yr')", argument="phases")
    in_years = kinds == {True}
    same = coincident_phases(phases)
    if same is not None:
        a, b = phases[same[0]], phases[same[1]]
        when = f"{a.phase_value:g} yr" if in_years else f"cycle fraction {a.phase_value:g}"
        raise InputError(f"phases '{a.label}' and '{b.label}' are both at {when}; every phase needs its own time "
                         "(phases index the results)", argument="phases")
    if not isinstance(star, Star):
        raise InputError(f"star={star!r} must be a synthcorona.dimming.Star", argument="star")
    if period is not None:
        as_scalar("period", period, u.yr, lo=0.0, unit_label="yr", inclusive=False)
        if not in_years:
            raise InputError("period applies to phases given as times; these phases are cycle fractions",
                             argument="period")
    return phases, in_years


def _check_realisations(n_realisations, reference):
    """(n, reference scenario or None); with a reference, ``n`` must calibrate its false-alarm threshold."""
    from ..dimming.sizes import MIN_EXCEEDANCES, minimum_realisations

    n_real = int(n_realisations)
    if n_real < 1:
        raise InputError(f"n_realisations={n_realisations} must be >= 1", argument="n_realisations")
    if reference is None:
        return n_real, None
    ref = _reference_scenario(reference)
    fa = float(ref.observation.false_alarm)
    need = minimum_realisations(fa)
    if n_real < need:
        raise InputError(f"n_realisations={n_real}: with the reference scenario's false_alarm={fa:g} the "
                         f"detection threshold needs at least {MIN_EXCEEDANCES} expected false alarms; valid range "
                         f">= {need}", argument="n_realisations")
    return n_real, ref


def _resolve_bands(bands) -> dict[str, Band]:
    """label -> :class:`~synthcorona.spectral.Band` of the fluxes (default :data:`DEFAULT_BANDS`)."""
    if bands is None:
        return dict(DEFAULT_BANDS)
    if isinstance(bands, (list, tuple)):
        bands = {Band.coerce(b, f"bands[{k}]").label: b for k, b in enumerate(bands)}
    elif not isinstance(bands, dict):
        raise InputError(f"bands={bands!r} must be a dict label -> band or a list of bands", argument="bands")
    if not bands:
        raise InputError("bands is empty: give at least one energy or wavelength band", argument="bands")
    return {str(k): Band.coerce(v, f"bands[{k!r}]", label=str(k)) for k, v in bands.items()}


# ----------------------------------------------------------------------------- per-phase observables
def _phase_dems(phases, dist, abundances, density, table) -> list:
    """The volume DEM of every phase (flux phases solved); errors name the phase."""
    dems = []
    for p in phases:
        try:
            dems.append(p.resolve(dist, abundances=abundances, density=density, table=table))
        except InputError as exc:
            raise InputError(f"phase '{p.label}': {exc}", argument=exc.argument) from None
    return dems


def _observables(phases, dems, bands: dict, channels, star, table, abundances, density) -> dict:
    """Fluxes, luminosities, count rates, total EM and mean log T of every phase (arrays over phase)."""
    from ..synthesis import band_flux, luminosity

    n_p, n_b = len(dems), len(bands)
    out = {"flux": np.empty((n_p, n_b)), "luminosity": np.empty((n_p, n_b)),
           "count_rate": np.full((n_p, len(channels)), np.nan), "total_em": np.empty(n_p),
           "mean_logT": np.empty(n_p)}
    x = np.asarray(table.logT, dtype=float)
    dist, nh = star.distance, star.nh
    for i, d in enumerate(dems):
        try:
            out["flux"][i] = band_flux(d, bands, dist, table=table, abundances=abundances,
                                       density=density).to_value(FLUX_UNIT)
            out["luminosity"][i] = luminosity(d, bands, table=table, abundances=abundances,
                                              density=density).to_value(u.erg / u.s)
            w = d.em_weights(x).to_value(u.cm ** -3)
            out["total_em"][i] = float(w.sum())
            out["mean_logT"][i] = float((w @ x) / w.sum()) if w.sum() > 0 else np.nan
            for j, (_, ins, b) in enumerate(channels):
                out["count_rate"][i, j] = float(ins.count_rate(d, distance=dist, nh=nh, band=b, table=table,
                                                               abundances=abundances,
                                                               density=density).to_value(u.ct / u.s))
        except InputError as exc:
            raise InputError(f"phase '{phases[i].label}': {exc}", argument=exc.argument) from None
    return out


def _flux_products(obs, phases, dems, bands, in_years, period) -> tuple[dict, dict]:
    """(data, coords) of the fluxes, luminosities, EMs and their amplitudes."""
    data: dict = {
        "flux": (("phase", "band"), obs["flux"], {"units": FLUX_UNIT.to_string(),
                                                  "long_name": "unabsorbed energy flux at the observer"}),
        "luminosity": (("phase", "band"), obs["luminosity"], {"units": "erg / s",
                                                              "long_name": "band luminosity into 4 pi"}),
        "total_emission_measure": (("phase",), obs["total_em"], {"units": "cm-3",
                                                                 "long_name": "emission measure on the table grid"}),
        "mean_logT": (("phase",), obs["mean_logT"], {"units": "dex (log10 K)",
                                                     "long_name": "emission-measure-weighted mean log10 T"}),
    }
    fa, fla = _amplitude(obs["flux"])
    data["flux_amplitude"] = (("band",), fa, {"units": "1", "long_name": "max/min of the flux over the phases"})
    data["flux_log_amplitude"] = (("band",), fla, {"units": "dex", "long_name": "log10(max/min) of the flux"})
    band_kev = np.array([b.energy_kev for b in bands.values()])
    coords: dict = {
        "phase": ("phase", np.array([p.phase_value for p in phases]),
                  {"units": "yr" if in_years else "1",
                   "long_name": "time since the reference epoch" if in_years else "cycle phase (fraction)"}),
        "label": ("phase", np.array([p.label for p in phases], dtype=object)),
        "phase_source": ("phase", np.array([p.source for p in phases], dtype=object)),
        "dem": ("phase", np.array([repr(d) for d in dems], dtype=object)),
        "band": ("band", np.array(list(bands), dtype=object)),
        "band_lo": ("band", band_kev[:, 0], {"units": "keV"}),
        "band_hi": ("band", band_kev[:, 1], {"units": "keV"}),
    }
    if in_years and period is not None:
        P = float(as_quantity("period", period, u.yr).value)
        coords["cycle_fraction"] = ("phase", np.mod(coords["phase"][1], P) / P, {"units": "1"})
    return data, coords


def _rate_products(data, coords, rates, channels, pairs) -> None:
    """Count rates, their amplitudes and the hardness ratios (in place)."""
    ch_labels = [c[0] for c in channels]
    if channels:
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


def _attrs(name, star, prep, abundances, in_years, period) -> dict:
    """Provenance of the comparison: star, abundances, density, method, table."""
    from .. import __version__

    nh = star.nh
    attrs = {
        "title": f"activity-cycle comparison{(' of ' + name) if name else ''}",
        "star": name,
        "star_distance_pc": float(star.distance.to_value(u.pc)),
        "nh_cm-2": float(nh.to_value(u.cm ** -2)) if nh is not None else 0.0,
        "abundances": str(getattr(prep.abund, "name", abundances)),
        "density_model": str(prep.density_label),
        "phase_units": "yr" if in_years else "cycle fraction",
        "synthcorona_version": __version__,
        "method": ("per phase: DEM -> band fluxes (unabsorbed) and luminosities (synthcorona.synthesis), count "
                   "rates with ISM absorption (Instrument.count_rate); amplitude = max/min over the phases; "
                   "flux phases: EM solved exactly from the linear band flux (synthcorona.products.cycle_phase)"),
        "hardness_definition": "HR = (H - S)/(H + S) and ratio H/S of count rates (Park et al. 2006, ApJ 652, 610)",
    }
    if period is not None:
        attrs["period_yr"] = float(as_quantity("period", period, u.yr).value)
    for k, v in prep.attrs().items():
        attrs[k] = v if isinstance(v, (str, int, float)) else str(v)
    return attrs


def _conversion(data, attrs, conversion, dems, nh, abundances, density, table) -> None:
    """Counts-to-flux factors, rate ratio and converted rate of ``conversion`` at every phase (in place)."""
    if not isinstance(conversion, CountConversion):
        raise InputError(f"conversion={conversion!r} must be a CountConversion", argument="conversion")
    src = one_channel("conversion source", conversion.source)
    tgt = one_channel("conversion target", conversion.target)
    fb = default_flux_band(tgt) if conversion.flux_band is None else Band.coerce(conversion.flux_band, "flux_band")
    n_p = len(dems)
    cs, ct = np.empty(n_p), np.empty(n_p)
    for i, d in enumerate(dems):
        cs[i] = counts_to_flux_factor(src, d, fb, nh, conversion.absorbed, abundances, density, table)
        ct[i] = counts_to_flux_factor(tgt, d, fb, nh, conversion.absorbed, abundances, density, table)
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
    lo_k, hi_k = fb.energy_kev
    origin = ("given" if conversion.flux_band is not None else
              f"the whole response of {tgt[1].name}" if tgt[2] == "total" else f"the limits of {tgt[0]}")
    attrs.update({"conversion_source": src[0], "conversion_target": tgt[0],
                  "conversion_flux_band_kev": f"{lo_k:.6g}-{hi_k:.6g}", "conversion_flux_band_origin": origin,
                  "conversion_flux": "absorbed" if conversion.absorbed else "unabsorbed",
                  "conversion_method": "counts_to_flux factors C = F/R per phase DEM "
                                       "(synthcorona.instruments.observables.counts_to_flux)"})


# ----------------------------------------------------------------------------- the comparison
def compare_cycle(phases: Sequence[CyclePhase], star, *, bands=None, instruments=None, hardness=None,
                  conversion: CountConversion | None = None, reference=None, n_realisations: int = 1000,
                  seed: int = 0, minimum_mass: bool = False, abundances="coronal", density=None, table=None,
                  period=None, name: str = "") -> xr.Dataset:
    """Fluxes, count rates, hardness, amplitudes, conversions and dimming detectability over a cycle.

    Parameters
    ----------
    phases : sequence of :class:`~synthcorona.products.cycle_phase.CyclePhase`
        At least two, unique labels, all phases fractions or all times.
    star : :class:`synthcorona.dimming.Star`
        Distance and interstellar column ``nh`` (count rates include absorption; fluxes do not).
    bands : dict label -> band, or list of bands, optional
        Energy/wavelength bands of the fluxes and luminosities (:class:`~synthcorona.spectral.Band`,
        text or Quantity pair; default :data:`DEFAULT_BANDS`: 0.1-2.4 keV and 100-400 Angstrom).
    instruments : see :func:`~synthcorona.instruments.channels.resolve_channels`, optional
        Instrument bands whose count rates are reported (default: none).
    hardness : list of (hard, soft) label pairs or "hard/soft" strings, optional
        Default: every reported instrument with bands "hard" and "soft" (:func:`hardness_pairs`).
    conversion : :class:`~synthcorona.instruments.conversion.CountConversion`, optional
        Counts-to-flux conversion to report per phase.
    reference : :class:`~synthcorona.dimming.DimmingScenario` or forecast-file inputs, optional
        Reference CME scenario whose detectability is followed across the cycle (the result of
        :func:`synthcorona.io.forecast_file.read_forecast_file` is accepted too).
    n_realisations : int
        Monte Carlo realisations of the detection probability
        (:func:`synthcorona.dimming.sizes.minimum_realisations` of the reference's false-alarm probability or more).
    seed : int
        Seed of the Monte Carlo, the same for every phase (common random numbers).
    minimum_mass : bool
        Also find the CME mass detected with probability 0.5 in the best band (slower).
    abundances, density
        As for :func:`synthcorona.synthesis.band_flux`.
    table : EmissivityTable or path, optional
        Emissivity table of every flux, rate and reference scenario (default: see
        :func:`synthcorona.emissivity.resolve_table`).
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
    from ..emissivity import resolve_table
    from ..synthesis import prepare

    phases, in_years = _check_phases(phases, star, period)
    n_real, ref = _check_realisations(n_realisations, reference)
    table = resolve_table(table)
    band_q = _resolve_bands(bands)
    channels = resolve_channels(instruments) if instruments else []
    pairs = hardness_pairs(hardness, [c[0] for c in channels])

    dems = _phase_dems(phases, star.distance, abundances, density, table)
    prep = prepare(table, abundances, density)
    obs = _observables(phases, dems, band_q, channels, star, table, abundances, density)
    data, coords = _flux_products(obs, phases, dems, band_q, in_years, period)
    _rate_products(data, coords, obs["count_rate"], channels, pairs)
    attrs = _attrs(name, star, prep, abundances, in_years, period)
    if conversion is not None:
        _conversion(data, attrs, conversion, dems, star.nh, abundances, density, table)
    if ref is not None:
        _dimming(data, coords, attrs, ref, dems, star, n_real, seed, minimum_mass, table)
    return xr.Dataset(data, coords=coords, attrs=attrs)


# ----------------------------------------------------------------------------- dimming
def _dimming(data, coords, attrs, ref, dems, star, n_real, seed, minimum_mass, table):
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
            scen = phase_scenario(ref, d, star, table)
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
