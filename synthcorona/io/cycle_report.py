"""The activity-cycle report: one A4 page, details in an appendix (Markdown or self-contained HTML).

:func:`cycle_report` renders the Dataset of :func:`synthcorona.products.cycle.compare_cycle` (through
:meth:`synthcorona.io.cycle_file.CycleInputs.run`) and the cycle file's
:class:`~synthcorona.io.cycle_file.CycleInputs`, like the forecast report of
:mod:`synthcorona.io.report`: the first page gives the result, the star and settings, the phases,
the band fluxes (with their cycle amplitude), the count rates and the reference CME's detectability
phase by phase, and the model in plain words; the appendix (after a page break) holds the phases'
coronae in full, the luminosities, the hardness and count-conversion numbers, the figures, the
assumptions with their references and the provenance (:mod:`synthcorona.io.report_render`).
"""
from __future__ import annotations

import pathlib

import astropy.units as u
import numpy as np

from .report_render import (
    describe_dem,
    distance_text,
    energy_range_text,
    number,
    plus_minus,
    probability_text,
    render,
    temperature_text,
    tidy_numbers,
    wavelength_range_text,
)

__all__ = ["cycle_report"]

#: Printed width [mm] of the cycle figures in the appendix.
FIGURE_WIDTH_MM = 150


def _phase_text(ds, k: int) -> str:
    v = float(ds["phase"].values[k])
    return f"{number(v)} yr" if ds["phase"].attrs.get("units") == "yr" else number(v)


def _order(ds) -> np.ndarray:
    return np.argsort(ds["phase"].values, kind="stable")


def _given_text(phase) -> str:
    """How a phase's corona was given, in words."""
    if phase.dem is None:
        from ..spectral import Band

        band = Band.coerce(phase.band, "band")
        lo, hi = band.energy_kev
        shape = "isothermal" if phase.width_logT is None else f"Gaussian of {number(phase.width_logT)} dex"
        return (f"measured flux {number(phase.flux.to_value(u.erg / u.s / u.cm ** 2))} erg s⁻¹ cm⁻² in "
                f"{energy_range_text(lo, hi)}; {shape} at {temperature_text(phase.temperature.to_value(u.K))}, "
                "emission measure solved from the flux")
    from ..dem import MultiComponentDEM

    dem = MultiComponentDEM(list(phase.dem)) if isinstance(phase.dem, (list, tuple)) else phase.dem
    return describe_dem(dem)


def _range(values, unit: str, digits: int = 3) -> str:
    v = np.asarray(values, dtype=float)
    return f"{number(np.nanmin(v), digits)} to {number(np.nanmax(v), digits)}{(' ' + unit) if unit else ''}"


# ----------------------------------------------------------------------------- first page
def _result_text(ds) -> str:
    parts = []
    if ds.sizes.get("band", 0):
        b = str(ds["band"].values[0])
        f = ds["flux"].values[:, 0]
        parts.append(f"Over the cycle the flux in {b} ranges from {_range(f, 'erg s⁻¹ cm⁻²')}, a factor "
                     f"{number(float(ds['flux_amplitude'].values[0]))} "
                     f"({number(float(ds['flux_log_amplitude'].values[0]), 2)} dex)")
    if "count_rate" in ds:
        j = int(np.nanargmax(ds["count_rate_amplitude"].values))
        parts.append(f"the count rate in {ds['channel'].values[j]} varies most, by a factor "
                     f"{number(float(ds['count_rate_amplitude'].values[j]))}")
    text = "**Result.** " + "; ".join(parts) + "." if parts else "**Result.**"
    if "detection_probability" in ds:
        b = str(ds["dimming_band"].values[0])
        p = ds["detection_probability"].values[:, 0]
        lo, hi = int(np.nanargmin(p)), int(np.nanargmax(p))
        e = ds["detection_probability_error"].values[:, 0]
        n = int(ds.attrs.get("dimming_n_realisations", 0))
        text += (f" The reference CME of {number(ds.attrs['dimming_reference_cme_mass_g'])} g is detected in {b} "
                 f"with P = {probability_text(p[lo], e[lo], n=n)} at {ds['label'].values[lo]} and "
                 f"{probability_text(p[hi], e[hi], n=n)} at {ds['label'].values[hi]} (false-alarm probability "
                 f"{number(ds.attrs['dimming_false_alarm'])}, {n} realisations).")
    if "rate_conversion" in ds:
        text += (f" 1 ct s⁻¹ in {ds.attrs['conversion_source']} corresponds to {_range(ds['rate_conversion'].values, '')}"
                 f" ct s⁻¹ in {ds.attrs['conversion_target']}, depending on the phase.")
    return text


def _setting_rows(ds, inputs) -> list[list[str]]:
    nh = float(ds.attrs.get("nh_cm-2", 0.0))
    star = inputs.star_name or ds.attrs.get("star", "") or "the star"
    rows = [["Star", f"{star} at {distance_text(ds.attrs['star_distance_pc'])}; "
                     + (f"N_H = {number(nh)} cm⁻² (applied to the count rates)" if nh > 0 else
                        "no interstellar absorption (N_H = 0 cm⁻²)")],
            ["Corona", f"{ds.attrs.get('abundances', 'coronal')} abundances; {tidy_numbers(ds.attrs.get('density_model', ''))}"]]
    if inputs.period is not None:
        rows.append(["Cycle", f"period {number(inputs.period.to_value(u.yr))} yr, {ds.sizes['phase']} phases"])
    else:
        rows.append(["Cycle", f"{ds.sizes['phase']} phases (cycle fractions)"])
    bands = "; ".join(f"{b}: {energy_range_text(lo, hi)} ({wavelength_range_text(lo, hi)})"
                      for b, lo, hi in zip(ds["band"].values, ds["band_lo"].values, ds["band_hi"].values))
    rows.append(["Flux bands", bands])
    if "channel" in ds.coords:
        rows.append(["Instrument bands", ", ".join(str(c) for c in ds["channel"].values)])
    if inputs.reference is not None and "detection_probability" in ds:
        ref = inputs.reference
        obs = ref.observation
        rows.append(["Reference CME", f"{number(ref.cme.mass.to_value(u.g))} g from "
                                      f"{temperature_text(ref.cme.source_temperature.to_value(u.K))} plasma, seen in "
                                      f"{', '.join(str(b) for b in ds['dimming_band'].values)}; "
                                      f"{number(obs.exposure.to_value(u.h))} h in {number(obs.bin_width.to_value(u.s))} s "
                                      f"bins, false-alarm probability {number(obs.false_alarm)}; "
                                      f"{ds.attrs['dimming_n_realisations']} realisations, seed "
                                      f"{ds.attrs['dimming_seed']}"])
    return rows


def _table_by_phase(ds, var, items, fmt, extra_rows=()):
    """Rows phase by phase (in phase order) of ``var`` over ``items``, then ``extra_rows``."""
    head = ["Phase", "Label"] + [str(x) for x in items]
    rows = [[_phase_text(ds, k), str(ds["label"].values[k])] + [fmt(ds[var].values[k, j]) for j in range(len(items))]
            for k in _order(ds)]
    return head, rows + [list(r) for r in extra_rows]


def _dimming_rows(ds):
    n = int(ds.attrs.get("dimming_n_realisations", 0))
    head = ["Phase", "Label"]
    for b in ds["dimming_band"].values:
        head += [f"Depth in {b} [%]", f"S/N, {b}", f"P(detect), {b}"]
    if "minimum_detectable_mass" in ds:
        head.append("Minimum mass, P = 0.5 [g]")
    rows = []
    for k in _order(ds):
        row = [_phase_text(ds, k), str(ds["label"].values[k])]
        for j in range(ds.sizes["dimming_band"]):
            row += [number(100 * ds["dimming_depth"].values[k, j]), number(ds["dimming_snr_expected"].values[k, j]),
                    probability_text(ds["detection_probability"].values[k, j],
                                     ds["detection_probability_error"].values[k, j], n=n)]
        if "minimum_detectable_mass" in ds:
            m = float(ds["minimum_detectable_mass"].values[k])
            row.append(plus_minus(m, float(ds["minimum_detectable_mass_error"].values[k])) if np.isfinite(m) else "n/a")
        rows.append(row)
    return head, rows


def _plain_words(ds) -> list[str]:
    words = ["Each phase is one corona: a DEM, a sum of components, or an isothermal (or Gaussian) plasma whose "
             "emission measure reproduces a measured band flux.",
             "Fluxes and luminosities are those of the corona before interstellar absorption; count rates include "
             "the absorption of the star's hydrogen column."]
    if "detection_probability" in ds:
        words.append("The reference CME is the same at every phase; only the corona it dims changes. Detection "
                     "compares the counts before and after the CME with photon noise only.")
    return words


def _first_page(ds, inputs) -> list:
    b = [("h1", inputs.title), ("p", _result_text(ds)), ("h2", "Star and settings"),
         ("table", (["Item", "Value"], _setting_rows(ds, inputs))),
         ("h2", "Unabsorbed band flux at the observer [erg s⁻¹ cm⁻²]"),
         ("table", _table_by_phase(ds, "flux", ds["band"].values, number, [
             ["", "max / min"] + [f"{number(a)} ({number(la, 2)} dex)" for a, la in
                                  zip(ds["flux_amplitude"].values, ds["flux_log_amplitude"].values)]]))]
    if "count_rate" in ds:
        b += [("h2", "Count rate [ct s⁻¹]"),
              ("table", _table_by_phase(ds, "count_rate", ds["channel"].values, number, [
                  ["", "max / min"] + [number(a) for a in ds["count_rate_amplitude"].values]]))]
    if "detection_probability" in ds:
        b += [("h2", f"The reference CME of {number(ds.attrs['dimming_reference_cme_mass_g'])} g"),
              ("table", _dimming_rows(ds)),
              ("note", "S/N: the window test's expected significance, Gaussian limit (appendix). P(detect) ± "
                       "binomial standard error.")]
    b += [("h2", "The model in plain words"), ("list", _plain_words(ds)),
          ("note", f"synthcorona {ds.attrs.get('synthcorona_version', '')}; CHIANTI "
                   f"{ds.attrs.get('table_chianti_version', '')} emissivity table "
                   f"{str(ds.attrs.get('table_content_hash', ''))[:12]}; cycle file "
                   f"{pathlib.Path(ds.attrs.get('cycle_file', '')).name}.")]
    return b


# ----------------------------------------------------------------------------- appendix
def _phase_rows(ds, inputs) -> list[list[str]]:
    by_label = {p.label: p for p in inputs.phases}
    rows = []
    for k in _order(ds):
        lab = str(ds["label"].values[k])
        given = _given_text(by_label[lab]) if lab in by_label else str(ds["phase_source"].values[k])
        rows.append([_phase_text(ds, k), lab, given, number(ds["total_emission_measure"].values[k]),
                     temperature_text(10 ** float(ds["mean_logT"].values[k]))])
    return rows


def _hardness_conversion(ds) -> list:
    b = []
    if "hardness_ratio" in ds:
        head = ["Phase", "Label"]
        for p in ds["pair"].values:
            head += [f"(H − S)/(H + S), {p}", f"H/S, {p}"]
        rows = [[_phase_text(ds, k), str(ds["label"].values[k])]
                + [x for j in range(ds.sizes["pair"]) for x in (number(ds["hardness_ratio"].values[k, j]),
                                                                 number(ds["band_ratio"].values[k, j]))]
                for k in _order(ds)]
        b += [("h2", "Hardness"), ("table", (head, rows))]
    if "rate_conversion" in ds:
        src, tgt = ds.attrs["conversion_source"], ds.attrs["conversion_target"]
        lo, hi = (float(v) for v in ds.attrs["conversion_flux_band_kev"].split("-"))
        head = ["Phase", "Label", f"Flux per count, {src} [erg cm⁻² ct⁻¹]", f"Flux per count, {tgt} [erg cm⁻² ct⁻¹]",
                f"Rate in {tgt} per ct s⁻¹ in {src}"]
        if "converted_rate" in ds:
            r = number(ds.attrs["conversion_rate_ct_s-1"])
            head += [f"Flux for {r} ct s⁻¹ [erg s⁻¹ cm⁻²]", f"Rate in {tgt} for {r} ct s⁻¹ [ct s⁻¹]"]
        rows = []
        for k in _order(ds):
            row = [_phase_text(ds, k), str(ds["label"].values[k]), number(ds["counts_to_flux_source"].values[k]),
                   number(ds["counts_to_flux_target"].values[k]), number(ds["rate_conversion"].values[k])]
            if "converted_rate" in ds:
                row += [number(ds["converted_flux"].values[k]), number(ds["converted_rate"].values[k])]
            rows.append(row)
        origin = ds.attrs.get("conversion_flux_band_origin", "")
        b += [("h2", "Count conversion"),
              ("p", f"{ds.attrs.get('conversion_flux', 'unabsorbed').capitalize()} flux in {energy_range_text(lo, hi)} "
                    f"({wavelength_range_text(lo, hi)}{', ' + origin if origin and origin != 'given' else ''})."),
              ("table", (head, rows))]
    return b


def _assumptions(ds) -> list[str]:
    items = [
        "A phase given by a measured flux is an isothermal plasma (or a Gaussian in log T) at the given "
        "temperature; the band flux is linear in the emission measure, so the emission measure that reproduces "
        "the flux is exact for that shape. A different temperature structure would give other count rates.",
        "All phases share the abundances, the density and the star's distance and hydrogen column; the count "
        "rates use the instruments' effective areas and the interstellar absorption of that column.",
        "Hardness ratios are (H − S)/(H + S) of count rates, with the plain ratio H/S beside them (the usual "
        "X-ray colours, e.g. Park et al. 2006, ApJ 652, 610).",
    ]
    if "rate_conversion" in ds:
        items.append("Count conversion: the flux per count of each instrument band for each phase's corona; their "
                     "ratio converts a count rate in one band into the rate in the other. It depends on the "
                     "temperature structure, which is why it changes over the cycle.")
    if "detection_probability" in ds:
        items.append("The reference CME scenario keeps its CME, flare, instrument and observation; its corona DEM "
                     "is replaced by each phase's and its star by the cycle's. Every phase uses the same random "
                     "numbers, so differences between phases are not Monte Carlo noise. The S/N is the difference "
                     "of the expected count rates before and after the CME over its Poisson standard deviation, the "
                     "on/off significance of Li & Ma (1983, ApJ 272, 317, eq. 5) written with expected rates. "
                     "P(detect) errors are binomial standard errors √(P(1 − P)/N).")
        items.append("The assumptions of the forecast report apply to the reference CME: mass-loss dimming only, "
                     "photon noise only, no stellar variability or instrument drifts.")
    return items


def _appendix(ds, inputs, figures) -> list:
    b = [("appendix", None), ("h1", "Appendix"), ("h2", "The phases' coronae"),
         ("table", (["Phase", "Label", "Corona", "Total EM [cm⁻³]", "EM-weighted mean T"], _phase_rows(ds, inputs))),
         ("h2", "Band luminosity [erg s⁻¹]"),
         ("table", _table_by_phase(ds, "luminosity", ds["band"].values, number))]
    b += _hardness_conversion(ds)
    notes = [(str(lab), str(n)) for lab, n in zip(ds["label"].values, ds["dimming_note"].values) if str(n)] \
        if "dimming_note" in ds else []
    for lab, n in notes:
        b.append(("note", f"{lab}: {tidy_numbers(n)}."))
    if figures:
        b.append(("h2", "Figures"))
        for path, png, caption in figures.values():
            b.append(("figure", (path, png, caption, FIGURE_WIDTH_MM)))
    b += [("h2", "Assumptions and limitations"), ("list", _assumptions(ds)),
          ("h2", "Atomic data and provenance"),
          ("list", [f"Emissivities: CHIANTI {ds.attrs.get('table_chianti_version', '')} table, content hash "
                    f"{str(ds.attrs.get('table_content_hash', ''))[:16]}; abundances "
                    f"{ds.attrs.get('abundance_name', ds.attrs.get('abundances', ''))}.",
                    f"Cycle file {pathlib.Path(ds.attrs.get('cycle_file', '')).name}"
                    + (f", reference scenario {pathlib.Path(ds.attrs['reference_scenario_file']).name}"
                       if ds.attrs.get("reference_scenario_file") else "")
                    + f"; synthcorona {ds.attrs.get('synthcorona_version', '')}."])]
    return b


def cycle_report(ds, inputs, figures=None, fmt: str = "md") -> str:
    """The activity-cycle report as text: one page, then the appendix after a page break.

    Parameters
    ----------
    ds : xarray.Dataset
        From :meth:`synthcorona.io.cycle_file.CycleInputs.run` (:func:`synthcorona.products.cycle.compare_cycle`).
    inputs : CycleInputs
        The cycle file it was computed from.
    figures : dict, optional
        ``name -> (file name, PNG bytes, caption)``; Markdown links the file name, HTML embeds the bytes.
    fmt : {"md", "html"}
    """
    return render(_first_page(ds, inputs) + _appendix(ds, inputs, figures or {}), fmt)
