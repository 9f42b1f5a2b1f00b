"""The forecast report: one A4 page for a proposal, details in an appendix (Markdown or self-contained HTML).

:func:`forecast_report` renders the Dataset of :func:`synthcorona.products.forecast.run_forecast` and
the scenario's :class:`~synthcorona.io.forecast_file.ForecastInputs`.

The first page holds what a proposal needs: the result in one paragraph; the star, corona, CME,
flare, instrument (design or file and its peak effective area), observation and Monte Carlo
settings; per band the energy and wavelength limits, the quiescent flux at the observer and
luminosity, source and background rates and the expected counts per bin; the depth of the
dimming, its photon-noise S/N, P(detect) with its statistical error and the minimum detectable
mass; and the model in plain words. The appendix (after a page break) holds the inputs in full,
P(detect) against mass with errors, the figures (effective area, light curves, P(detect) against
mass, temperature responses), the definitions, the assumptions and limitations with their
references, and the atomic-data provenance. Markdown links the PNG figures by file name; HTML
embeds them (:mod:`synthcorona.io.report_render`).
"""
from __future__ import annotations

import pathlib

import astropy.units as u
import numpy as np

from ..constants import HC_KEV_ANGSTROM
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

__all__ = ["forecast_report", "assumptions", "FIGURE_WIDTH_MM"]

#: Printed width [mm] of each figure of the appendix.
FIGURE_WIDTH_MM = {"effective_area": 150, "light_curves": 165, "detection_vs_mass": 150,
                   "temperature_responses": 150}
#: Appendix section of each figure (others go to "Other figures").
_FIGURE_SECTION = {"effective_area": "instrument", "detection_vs_mass": "mass", "light_curves": "curves",
                   "temperature_responses": "curves"}

_WINDOW_TEST = (
    "Detection (window test): the counts before the CME are compared with the counts in the post-event window, "
    "from the end of the onset to one recovery time later, with the exact conditional binomial test of two Poisson "
    "counts (Przyborowski & Wilenski 1940, Biometrika 31, 313). The threshold is set on simulations without the "
    "CME so that it is exceeded with the stated false-alarm probability. A flare that brightens the post-event "
    "window fills in the dimming in such a before/after comparison.")
_LIKELIHOOD_TEST = (
    "Detection (likelihood ratio): the Poisson likelihood (Cash 1979, ApJ 228, 939) of a dimming template is "
    "compared with that of the light curve without the CME (flare included and assumed known). The threshold is "
    "set on simulations without the CME at the stated false-alarm probability. A flare whose shape is not known "
    "in advance would weaken this test.")


def assumptions(ds, inputs) -> list[str]:
    """The assumptions and limitations of the forecast, with their references, in plain words."""
    cme = inputs.cme
    if isinstance(cme.distribution, str) and cme.distribution == "window":
        spread = (f"spread over the temperatures within {number(cme.window)} dex of the source temperature in "
                  "proportion to the quiescent DEM")
    elif isinstance(cme.distribution, str) and cme.distribution == "gaussian":
        spread = f"spread over a Gaussian in log T of {number(cme.width)} dex around the source temperature"
    else:
        spread = "spread over the temperatures with the weights given in the scenario"
    density = ("given in the scenario" if ds.attrs.get("source_density_from") == "user" else
               "from the loop scaling law of Rosner, Tucker & Vaiana (1978, ApJ 220, 643)")
    items = [
        "Mass-loss dimming only: the CME removes the emission measure ΔEM = n_e f_esc M / (μ_H m_H) from the "
        "corona (the mass–emission-measure relation with which Harrison & Lyons 2000, A&A 358, 1097, compared "
        f"a dimming's mass loss with the CME mass, used here in reverse), {spread}. The depth grows in proportion "
        "to the CME mass up to the largest mass the corona holds at those temperatures "
        f"({number(float(ds['max_removable_mass']))} g here). No heating, cooling or expansion of the remaining "
        "corona.",
        f"The source plasma has one electron density ({number(ds.attrs['source_density_cm-3'])} cm⁻³, {density}); "
        "the rest of the quiescent DEM does not change.",
        f"Time profile: a linear onset over source size / CME speed ({number(float(ds['onset_time']))} s), then "
        "an exponential recovery with the refilling time L / (f c_s) of the evacuated loops (loop half-length L, "
        f"sound speed c_s, f = {number(inputs.upflow_fraction)}): {number(float(ds['recovery_time']) / 3600)} h. "
        "For comparison, the main evacuation phase of solar dimmings lasts about 50 min on average (Dissauer et "
        "al. 2018, ApJ 863, 169), and the dimmings of one well-studied event recovered within 48 h (Attrill et "
        "al. 2008, Sol. Phys. 252, 349).",
        "Noise: Poisson photon noise of the source and of a constant background only; no stellar variability, no "
        "instrument drifts, pointing or calibration errors. For very bright sources (the Sun at 1 AU) the "
        "photon-noise-limited masses are far below what such systematic errors allow in practice.",
        _LIKELIHOOD_TEST if ds.attrs.get("statistic") == "likelihood" else _WINDOW_TEST,
        "Every probability is the fraction of Monte Carlo realisations detected; its error is the binomial "
        "standard error √(P(1 − P)/N) and, at P = 0 or 1, the 68 % score bound of Wilson (1927, JASA 22, 209). "
        "The minimum detectable mass is found by Brent's method on log M with the same random numbers at every "
        "mass; its error is the Monte Carlo error.",
        "The S/N of the dimming is the photon-noise ratio ΔN/√N of the counts the dimming removes from the "
        "post-event window to the counts expected there: the on/off significance of Li & Ma (1983, ApJ 272, "
        "317, eq. 5) when the quiescent level is known exactly. The noise of the pre-event counts lowers it in "
        "a real before/after comparison.",
        "The generic instruments (names starting with sc-) are generic designs of synthcorona, not the "
        "calibration of any real instrument.",
        "At fixed corona the depth is proportional to the CME mass. For solar events, Mason et al. (2016, ApJ 830, "
        "20) found the CME mass to grow with the square root of the Sun-as-a-star dimming depth (depth ∝ M²): the "
        "source regions differ from event to event, which a single scenario does not describe.",
    ]
    if inputs.flare is not None:
        items.insert(4, "The flare is a zero-dimensional loop model (Klimchuk, Patsourakos & Cargill 2008, ApJ "
                        "682, 1351; Cargill, Bradshaw & Klimchuk 2012, ApJ 752, 161), taken as isothermal at its "
                        "coronal-average temperature at each time; after the model run stops (temperature outside "
                        "the radiative-loss table) its excess emission is set to zero.")
    return items


# ----------------------------------------------------------------------------- first page
def _nh_text(nh_cm2: float) -> str:
    return (f"N_H = {number(nh_cm2)} cm⁻²" if nh_cm2 > 0 else "no interstellar absorption (N_H = 0 cm⁻²)")


def _flare_text(ds, inputs) -> str:
    f = inputs.flare
    if f is None and not inputs.flare_class:
        return "none"
    text = ""
    if "heating_energy" in ds:
        text = f"heating energy {number(float(ds['heating_energy']))} erg"
        if "implied_class" in ds:
            text += f", class {str(ds['implied_class'].values)}"
        if "peak_flux_1_8A" in ds:
            text += f" (own peak 1–8 Å flux {number(float(ds['peak_flux_1_8A']))} W m⁻² at 1 AU"
            if "n_strands" in ds:
                text += f"; an arcade of {number(float(ds['n_strands']))} strands on the flare EM–T relation"
            text += ")"
    elif f is not None and f.energy is not None:
        text = f"energy {number(f.energy.to_value(u.erg))} erg"
    if inputs.flare_class:
        text += f"; given as class {inputs.flare_class}"
    if f is not None:
        text += (f"; strand half-length {number(f.loop_half_length.to_value(u.cm))} cm, heating over "
                 f"{number(f.duration.to_value(u.s))} s")
    return text


def _peak_area_text(inst) -> str:
    area = inst.area.to_value(u.cm ** 2)
    k = int(np.argmax(area))
    e = 0.5 * (inst.energy_lo.to_value(u.keV)[k] + inst.energy_hi.to_value(u.keV)[k])
    return (f"peak effective area {number(area[k])} cm² at {number(e)} keV ({number(HC_KEV_ANGSTROM / e)} Å)")


def _instrument_rows(inputs) -> list[list[str]]:
    rows = []
    for e in inputs.instruments:
        bands = ", ".join("whole response" if b == "total" else b for b in e.bands)
        rows.append([f"Instrument {e.instrument.name}", f"{e.source}; {_peak_area_text(e.instrument)}; "
                                                        f"bands used: {bands}"])
    return rows


def _setting_rows(ds, inputs) -> list[list[str]]:
    """(item, value) rows of the first page: star, corona, CME, flare, instruments, observation, Monte Carlo."""
    star, cme = inputs.star, inputs.cme
    name = inputs.star_name or "the star"
    radius = f", radius {number(star.radius.to_value(u.R_sun))} R☉" if star.radius is not None else ""
    bg = np.asarray(ds["background"].values, dtype=float)
    bg_text = (f"{number(bg[0])} ct s⁻¹ per band" if np.all(bg == bg[0]) else
               ", ".join(f"{b}: {number(x)} ct s⁻¹" for b, x in zip(ds["band"].values, bg)))
    rows = [["Star", f"{name} at {distance_text(ds.attrs['star_distance_pc'])}{radius}; "
                     f"{_nh_text(ds.attrs['nh_cm-2'])}"],
            ["Corona", f"{describe_dem(inputs.corona.dem)}; {_abundance_name(inputs)} abundances"],
            ["CME", f"mass {number(cme.mass.to_value(u.g))} g from {temperature_text(cme.source_temperature.to_value(u.K))}"
                    f" plasma of {number(ds.attrs['source_density_cm-3'])} cm⁻³, speed "
                    f"{number(cme.speed.to_value(u.km / u.s))} km s⁻¹, escaping fraction {number(cme.escape_fraction)}"],
            ["Flare", _flare_text(ds, inputs)]]
    rows += _instrument_rows(inputs)
    rows.append(["Observation", f"{_hours(ds.attrs['exposure_s'])} in {number(ds.attrs['bin_width_s'])} s bins, CME "
                                f"{_hours(ds.attrs['cme_onset_time_s'])} after the start; background {bg_text}; "
                                f"false-alarm probability {number(ds.attrs['false_alarm'])}"])
    rows.append(["Monte Carlo", f"{ds.attrs['n_realisations']} realisations per probability, seed {ds.attrs['seed']}, "
                                f"{'likelihood-ratio' if ds.attrs['statistic'] == 'likelihood' else 'window'} test"])
    return rows


def _abundance_name(inputs) -> str:
    ab = inputs.corona.abundances
    return str(getattr(ab, "name", ab))


def _abundance_source(inputs) -> str:
    """The abundance set's name and published source."""
    from ..abundances import resolve_abundances

    ab = resolve_abundances(inputs.corona.abundances)
    return f"{ab.name}: {ab.source}" if ab.source else ab.name


def _hours(seconds) -> str:
    return f"{number(float(seconds) / 3600.0)} h"


def _band_rows(ds) -> tuple[list[str], list[list[str]]]:
    """What each band receives from the quiescent star."""
    head = ["Band", "Energy", "Wavelength", "Flux at observer [erg s⁻¹ cm⁻²]", "Luminosity [erg s⁻¹]",
            "Source rate [ct s⁻¹]", "Background [ct s⁻¹]", f"Counts per {number(ds.attrs['bin_width_s'])} s bin"]
    rows = []
    for b in ds["band"].values:
        s = ds.sel(band=b)
        lo, hi = float(s["band_lo"]), float(s["band_hi"])
        q, bg = float(s["quiescent_rate"]), float(s["background"])
        rows.append([str(b), energy_range_text(lo, hi), wavelength_range_text(lo, hi),
                     number(float(s["quiescent_energy_flux"])), number(float(s["quiescent_luminosity"])),
                     number(q), number(bg), number((q + bg) * ds.attrs["bin_width_s"])])
    return head, rows


def _with_flare(ds) -> bool:
    return float(ds.attrs.get("flare_energy_erg", 0.0)) > 0


def _dimming_rows(ds) -> tuple[list[str], list[list[str]]]:
    """Depth, S/N, P(detect) and the minimum detectable mass per band."""
    flare = _with_flare(ds)
    n = int(ds.attrs["n_realisations"])
    head = ["Band", "Depth [%]"] + (["Net depth with flare [%]", "Flare / dimming counts"] if flare else [])
    head += ["Deficit [ct] / counts [ct] after onset", "S/N of the dimming", "P(detect)",
             f"Minimum mass, P = {number(ds.attrs['target_probability'])} [g]"]
    rows = []
    for b in ds["band"].values:
        s = ds.sel(band=b)
        mm = float(s["minimum_detectable_mass"])
        mm_s = (plus_minus(mm, float(s["minimum_detectable_mass_error"])) if np.isfinite(mm) else
                "not reached (appendix)")
        row = [str(b), number(100 * float(s["depth"]))]
        if flare:
            row += [number(100 * float(s["net_depth"])), number(float(s["flare_to_dimming"]))]
        row += [f"{number(float(s['dimming_counts_post_window']))} / {number(float(s['counts_post_window']))}",
                number(float(s["dimming_snr"])),
                probability_text(s["probability"], s["probability_error"], s["probability_lower"],
                                 s["probability_upper"], n), mm_s]
        rows.append(row)
    return head, rows


def _result_text(ds) -> str:
    b = ds.attrs["best_band"]
    s = ds.sel(band=b)
    text = (f"**Result.** A CME of {number(float(ds['cme_mass']))} g dims band {b} by "
            f"{number(100 * float(s['depth']))} %")
    if _with_flare(ds):
        text += f" ({number(100 * float(s['net_depth']))} % net of the flare)"
    p = probability_text(s["probability"], s["probability_error"], s["probability_lower"], s["probability_upper"],
                         int(ds.attrs["n_realisations"]))
    text += (f"; the expected photon-noise S/N of the dimming is {number(float(s['dimming_snr']))} and "
             f"P(detect) = {p} at a false-alarm probability of {number(ds.attrs['false_alarm'])} "
             f"({ds.attrs['n_realisations']} realisations). ")
    mm = float(s["minimum_detectable_mass"])
    target = number(ds.attrs["target_probability"])
    if np.isfinite(mm):
        text += f"The mass detected with P = {target} in {b} is {plus_minus(mm, float(s['minimum_detectable_mass_error']))} g."
    else:
        text += f"P = {target} is not reached in {b} ({tidy_numbers(s['minimum_detectable_mass_note'].item())})."
    return text


def _plain_words(ds, inputs) -> list[str]:
    """The model in a few plain sentences (the appendix has the details and references)."""
    words = [
        "The CME carries away coronal plasma near its source temperature "
        f"({temperature_text(ds.attrs['source_temperature_K'])}); the star's emission from that plasma drops in "
        "proportion to the mass removed.",
        f"The dimming sets in over {number(float(ds['onset_time']))} s and recovers exponentially with an e-folding "
        f"time of {_hours(ds['recovery_time'])} as the loops refill; it stays above half its depth for "
        f"{_hours(ds['fwhm_duration'])}.",
        ("Only photon noise counts: no stellar variability, no instrument drifts." if
         str(ds.attrs.get("red_noise", "none")) in ("none", "") else
         f"Noise: photon counts and stellar variability ({ds.attrs['red_noise']}); no instrument drifts."),
        ("Detection compares the counts before the CME with those after it" if ds.attrs.get("statistic") != "likelihood"
         else "Detection fits a dimming template to the light curve (Poisson likelihood ratio)")
        + ("; the time of the CME is not assumed known: the test is repeated at every trial onset over the "
           "observation, and the threshold gives the stated false-alarm probability per observation in simulations "
           "without a CME." if ds.attrs.get("onset", "scan") == "scan" else
           "; the time of the CME is taken as known (a triggered observation); the threshold gives the stated "
           "false-alarm probability in simulations without a CME."),
    ]
    if inputs.flare is not None:
        words.insert(2, "The flare is one heated coronal loop whose extra emission adds to the light curve.")
    return words


def _first_page(ds, inputs) -> list:
    b = [("h1", inputs.title)]
    if inputs.description:
        b.append(("p", inputs.description))
    b.append(("p", _result_text(ds)))
    b.append(("h2", "Star, instrument and observation"))
    b.append(("table", (["Item", "Value"], _setting_rows(ds, inputs))))
    b.append(("h2", "What each band receives from the quiescent star"))
    b.append(("table", _band_rows(ds)))
    b.append(("note", "Flux at the observer after interstellar absorption; luminosity of the corona in the band "
                      "before absorption (into 4π sr). Counts per bin: source and background."))
    b.append(("h2", "The dimming and its detection"))
    b.append(("table", _dimming_rows(ds)))
    w0, w1 = (float(x) / 3600.0 for x in ds.attrs["post_event_window_s"].split())
    b.append(("note", f"Counts after onset: the post-event window, {number(w0)} to {number(w1)} h after the start. "
                      "S/N = deficit / √counts (photon noise). P(detect) ± binomial standard error; at 0 or 1 the "
                      "68 % bound. Definitions and references: appendix."))
    b.append(("h2", "The model in plain words"))
    b.append(("list", _plain_words(ds, inputs)))
    b.append(("note", f"synthcorona {ds.attrs['synthcorona_version']}; CHIANTI {ds.attrs['chianti_version']} "
                      f"emissivity table {ds.attrs['table_content_hash'][:12]}; scenario "
                      f"{pathlib.Path(ds.attrs['scenario_file']).name} (SHA-256 {ds.attrs['scenario_sha256'][:12]}); "
                      f"created {ds.attrs['created']}."))
    return b


# ----------------------------------------------------------------------------- appendix
def _input_rows(ds, inputs) -> list[list[str]]:
    """Everything else the scenario sets."""
    cme, cor = inputs.cme, inputs.corona
    lo, hi = (float(x) for x in ds.attrs["min_mass_bracket_g"].split())
    rows = [["Corona abundances", _abundance_source(inputs)],
            ["CME source plasma", f"density {number(ds.attrs['source_density_cm-3'])} cm⁻³ "
                                  f"({'given' if ds.attrs.get('source_density_from') == 'user' else ds.attrs.get('source_density_from')}),"
                                  f" mean mass per H atom {number(ds.attrs['mu_H'])} m_H, source size "
                                  f"{number(cme.source_size.to_value(u.cm))} cm"],
            ["Refilling loops", f"half-length {number(cor.loop_half_length.to_value(u.cm))} cm, upflow "
                                f"{number(inputs.upflow_fraction)} of the sound speed"],
            ["Largest removable mass", f"{number(float(ds['max_removable_mass']))} g"],
            ["Dimming profile", f"onset {number(float(ds['onset_time']))} s, recovery e-folding time "
                                f"{_hours(ds['recovery_time'])}, above half depth {_hours(ds['fwhm_duration'])}"],
            ["Post-event window", " to ".join(_hours(x) for x in ds.attrs["post_event_window_s"].split())
             + " after the start"],
            ["Mass grid", ", ".join(f"{number(m)}" for m in ds["mass"].values) + " g" if ds.sizes.get("mass", 0)
             else "none"],
            ["Minimum-mass search", f"between {number(lo)} and {number(hi)} g, target P = "
                                    f"{number(ds.attrs['target_probability'])}"]]
    if inputs.flare is not None:
        f = inputs.flare
        rows.append(["Flare loop", f"cross-section {number(f.loop_cross_section.to_value(u.cm ** 2))} cm², initial "
                                   f"temperature {temperature_text(f.initial_temperature.to_value(u.K))}, delay "
                                   f"{number(f.delay.to_value(u.s))} s; {tidy_numbers(ds.attrs.get('flare_termination', ''))}"])
    return rows


def _instrument_blocks(ds, inputs) -> list:
    b = []
    for e in inputs.instruments:
        inst = e.instrument
        rows = []
        for lab, lo, hi, name in zip(ds["band"].values, ds["band_lo"].values, ds["band_hi"].values,
                                     ds["instrument"].values):
            if name == inst.name:
                rows.append([str(lab), energy_range_text(lo, hi), wavelength_range_text(lo, hi)])
        desc = tidy_numbers(inst.description.strip() or e.source)
        b.append(("p", f"**{inst.name}** ({e.source}): {desc}"))
        b.append(("table", (["Band", "Energy", "Wavelength"], rows)))
    return b


def _mass_blocks(ds) -> list:
    if not ds.sizes.get("mass", 0):
        return [("p", "No mass grid was computed.")]
    n = int(ds.attrs["n_realisations"])
    head = ["CME mass [g]"] + [f"P(detect), {b}" for b in ds["band"].values]
    rows = []
    for k, m in enumerate(ds["mass"].values):
        rows.append([number(m)] + [probability_text(ds["probability_vs_mass"].values[k, j],
                                                    ds["probability_vs_mass_error"].values[k, j],
                                                    ds["probability_vs_mass_lower"].values[k, j],
                                                    ds["probability_vs_mass_upper"].values[k, j], n)
                                   for j in range(ds.sizes["band"])])
    b = [("table", (head, rows))]
    note = ds.attrs.get("mass_grid_note", "all masses of the grid used")
    if note != "all masses of the grid used":
        b.append(("note", _mass_note_text(ds) + "."))
    for lab, txt in zip(ds["band"].values, ds["minimum_detectable_mass_note"].values):
        if str(txt):
            b.append(("note", f"Minimum mass in {lab}: {tidy_numbers(txt)}."))
    return b


def _mass_note_text(ds) -> str:
    """The dataset's note on left-out masses, with the numbers in report style."""
    grid_g = np.asarray(ds["mass"].values, dtype=float)
    mmax = float(ds["max_removable_mass"])
    return (f"Masses of the grid above the largest removable mass ({number(mmax)} g) were left out; the grid "
            f"used runs from {number(grid_g.min())} to {number(grid_g.max())} g")


def _figure_blocks(figures, section) -> list:
    out = []
    for name, (path, png, caption) in figures.items():
        if _FIGURE_SECTION.get(name, "other") == section:
            out.append(("figure", (path, png, caption, FIGURE_WIDTH_MM.get(name, 150))))
    return out


def _definitions(ds) -> list[str]:
    items = [
        "Depth: the full fractional drop of the quiescent count rate caused by the CME.",
        "Deficit: the counts the dimming removes from the post-event window; counts: all counts expected there "
        "(star, flare and background).",
        "S/N of the dimming: deficit / √counts.",
        "Minimum detectable mass (minimum mass): the CME mass detected with the target probability, with its "
        "Monte Carlo error.",
    ]
    if _with_flare(ds):
        items.insert(1, "Net depth with flare: the largest drop of the expected light curve below quiescence "
                        "with the flare included. Flare / dimming counts: flare excess over dimming deficit in the "
                        "post-event window (above 1 the flare more than fills in the dimming there).")
    return items


def _appendix(ds, inputs, figures) -> list:
    b = [("appendix", None), ("h1", "Appendix"), ("h2", "Inputs in full"),
         ("table", (["Item", "Value"], _input_rows(ds, inputs))),
         ("h2", "Instruments and bands")]
    b += _instrument_blocks(ds, inputs) + _figure_blocks(figures, "instrument")
    b += [("h2", "P(detect) against CME mass")] + _mass_blocks(ds) + _figure_blocks(figures, "mass")
    curves = _figure_blocks(figures, "curves")
    if curves:
        b += [("h2", "Light curves and temperature responses")] + curves
    other = _figure_blocks(figures, "other")
    if other:
        b += [("h2", "Other figures")] + other
    b += [("h2", "Definitions"), ("list", _definitions(ds)),
          ("h2", "Assumptions and limitations"), ("list", assumptions(ds, inputs)),
          ("h2", "Atomic data and provenance"),
          ("list", [
              f"Emissivities: CHIANTI {ds.attrs['chianti_version']} composite (ions whose "
              f"version-{ds.attrs['chianti_version']} files were missing are filled in from older CHIANTI releases: "
              f"{ds.attrs['chianti_substituted_ion_count']} of this table's ions, listed in the netCDF attribute "
              f"chianti_substituted_ions); table content hash {ds.attrs['table_content_hash'][:16]}.",
              f"Scenario file {pathlib.Path(ds.attrs['scenario_file']).name} (SHA-256 "
              f"{ds.attrs['scenario_sha256'][:16]}); synthcorona {ds.attrs['synthcorona_version']}; created "
              f"{ds.attrs['created']}.",
          ])]
    return b


def forecast_report(ds, inputs, figures=None, fmt: str = "md") -> str:
    """The forecast report as text: one page, then the appendix after a page break.

    Parameters
    ----------
    ds : xarray.Dataset
        From :func:`synthcorona.products.forecast.run_forecast`.
    inputs : ForecastInputs
        The scenario it was computed from.
    figures : dict, optional
        ``name -> (file name, PNG bytes, caption)`` (:func:`synthcorona.plotting.forecast.forecast_figures`);
        Markdown links the file name, HTML embeds the bytes as base64.
    fmt : {"md", "html"}
    """
    from ..errors import InputError

    if fmt not in ("md", "html"):
        raise InputError(f"fmt={fmt!r} must be 'md' or 'html'", argument="fmt")
    return render(_first_page(ds, inputs) + _appendix(ds, inputs, figures or {}), fmt)
