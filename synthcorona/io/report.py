"""One-page forecast report in Markdown or self-contained HTML, for pasting into a proposal.

:func:`forecast_report` renders the Dataset of :func:`synthcorona.products.forecast.run_forecast` and the
scenario's :class:`~synthcorona.io.forecast_file.ForecastInputs`: inputs, the depth / duration /
flare-contamination table per band, detection probability, minimum detectable mass, figures,
"Assumptions and limitations" (from the method descriptions of
:mod:`synthcorona.dimming.scenario` and ``docs/dimming.md``) and the atomic-data provenance.
Markdown links the PNG figures by file name; HTML embeds them as base64 PNG (one file, no
external resources).
"""
from __future__ import annotations

import base64
import html
import math

import astropy.units as u
import numpy as np

__all__ = ["forecast_report", "ASSUMPTIONS"]

_WINDOW_TEXT = (
    "Detection: the window test compares counts before the CME with counts in [onset, onset + recovery time] "
    "(exact conditional binomial test, Przyborowski & Wilenski 1940, Biometrika 31, 313); thresholds are calibrated "
    "on simulations without the CME at the stated false-alarm probability. A flare that brightens the post-event "
    "window can hide a dimming in such a before/after comparison (see the flare/dimming column).")
_LIKELIHOOD_TEXT = (
    "Detection: Poisson likelihood ratio (Cash 1979, ApJ 228, 939) of a dimming template against the baseline "
    "light curve (flare included, assumed known); thresholds are calibrated on simulations without the CME at the "
    "stated false-alarm probability. A flare whose shape is not known in advance would weaken this test.")

#: Assumptions and limitations of the forecast (from synthcorona/dimming/scenario.py and docs/dimming.md).
ASSUMPTIONS = [
    "Mass-loss dimming only: the CME removes Delta EM = n_e f_esc M / (mu_H m_H) from the corona (Harrison & Lyons "
    "2000, A&A 358, 1097, read backwards), spread over the temperatures within +-0.15 dex of the source temperature "
    "in proportion to the quiescent DEM (unless the file says otherwise). The depth is linear in the CME mass up to "
    "the largest mass the corona can supply at those temperatures.",
    "The source plasma has one density and one temperature; the quiescent DEM does not change otherwise. The density, "
    "if not given, follows the Rosner, Tucker & Vaiana (1978, ApJ 220, 643) loop scaling law.",
    "Time profile: a linear onset over source size / CME speed, then exponential recovery with the refilling time "
    "L / (f c_s) of the evacuated loops (f = 0.05 of the sound speed by default). Observed solar EUV dimmings last "
    "hours to about a day.",
    "The flare is a zero-dimensional loop model (Klimchuk, Patsourakos & Cargill 2008, ApJ 682, 1351; Cargill, "
    "Bradshaw & Klimchuk 2012, ApJ 752, 161), taken as isothermal at its coronal-average temperature at each time; "
    "after the model run stops (temperature outside the radiative-loss table) the flare excess is set to zero.",
    "Noise is Poisson photon noise of source and constant background only: no stellar variability, no instrument "
    "systematics, pointing or calibration drifts. For very bright sources (the Sun at 1 AU) the photon-noise-limited "
    "detectable masses are far below what such systematics allow in practice.",
    _WINDOW_TEXT,
    "The energy-flux depth uses the band's energy limits, not its effective area. The generic instruments "
    "(sc-...) are generic designs of synthcorona, not the calibration of any real instrument.",
    "At fixed corona the model gives depth proportional to mass; the empirical Sun-as-a-star relation of Mason et "
    "al. (2016, ApJ 830, 20) is steeper (depth ~ M^2, from memory) because source regions differ between events "
    "(docs/dimming.md, section 7).",
]


def _fmt(x, digits=3):
    """Number as text: scientific for very large/small values, '-' for NaN."""
    try:
        v = float(x)
    except (TypeError, ValueError):
        return str(x)
    if math.isnan(v):
        return "-"
    if math.isinf(v):
        return "inf" if v > 0 else "-inf"
    if v != 0 and (abs(v) >= 1e4 or abs(v) < 1e-2):
        return f"{v:.{digits - 1}e}"
    return f"{v:.{digits}g}"


def _hours(s):
    return f"{float(s) / 3600.0:.3g} h"


def _inputs_rows(ds, inputs) -> list[tuple[str, str]]:
    """(item, value) rows describing the scenario's inputs."""
    star, cor, cme, obs = inputs.star, inputs.corona, inputs.cme, inputs.observation
    dist = star.distance
    dist_s = f"{dist.to_value(u.AU):.3g} AU" if dist.to_value(u.pc) < 1e-3 else f"{dist.to_value(u.pc):.4g} pc"
    rows = [("Star", (inputs.star_name or "-") + f", distance {dist_s}, N_H "
             + (f"{star.nh.to_value(u.cm ** -2):.3g} cm-2" if star.nh is not None else "0")),
            ("Corona DEM", repr(cor.dem)),
            ("Abundances", str(getattr(cor.abundances, "name", cor.abundances))),
            ("Source density", f"{ds.attrs['source_density_cm-3']:.3g} cm-3 ({ds.attrs['source_density_from']})"),
            ("CME", f"mass {cme.mass.to_value(u.g):.3g} g from {cme.source_temperature.to_value(u.MK):.3g} MK plasma, "
                    f"speed {cme.speed.to_value(u.km / u.s):.4g} km/s, escape fraction {cme.escape_fraction:g}")]
    if inputs.flare is not None:
        e = inputs.flare.energy.to_value(u.erg)
        cls = f" (class {inputs.flare_class}: E = 1e32 erg x peak 1-8 A flux / 1e-4 W m-2, order of Emslie et al. " \
              "2012, ApJ 759, 71; from memory)" if inputs.flare_class else ""
        rows.append(("Flare", f"{e:.3g} erg{cls}, loop half-length "
                              f"{inputs.flare.loop_half_length.to_value(u.cm):.3g} cm"))
    else:
        rows.append(("Flare", "none"))
    rows.append(("Instruments", "; ".join(f"{e.instrument.name} ({e.source}; bands {', '.join(e.bands)})"
                                          for e in inputs.instruments)))
    rows.append(("Observation", f"{_hours(obs.exposure.to_value(u.s))} in {obs.bin_width.to_value(u.s):g} s bins, "
                                f"CME at {_hours(obs.pre_event.to_value(u.s))}, false-alarm probability "
                                f"{obs.false_alarm:g}"))
    rows.append(("Monte Carlo", f"{ds.attrs['n_realisations']} realisations per probability, seed {ds.attrs['seed']}, "
                                f"{ds.attrs['statistic']} statistic"))
    return rows


def _band_rows(ds) -> tuple[list[str], list[list[str]]]:
    head = ["Band", "Quiescent rate [ct/s]", "Depth", "Net depth (with flare)", "Flare/dimming (post window)",
            "P(detect)", f"Min. mass, P={ds.attrs['target_probability']:g} [g]"]
    rows = []
    for b in ds["band"].values:
        s = ds.sel(band=b)
        mm = float(s["minimum_detectable_mass"])
        mm_s = f"{_fmt(mm)} +- {_fmt(float(s['minimum_detectable_mass_error']), 2)}" if np.isfinite(mm) else \
            f"- ({s['minimum_detectable_mass_note'].item()})"
        rows.append([str(b), _fmt(s["quiescent_rate"]), _fmt(s["depth"]), _fmt(s["net_depth"]),
                     _fmt(s["flare_to_dimming"]),
                     f"{float(s['probability']):.3f} +- {float(s['probability_error']):.3f}", mm_s])
    return head, rows


def _blocks(ds, inputs, figures):
    """The report as a list of (kind, content) blocks rendered by both formats."""
    b = [("h1", inputs.title)]
    if inputs.description:
        b.append(("p", inputs.description))
    dur = (f"Onset {float(ds['onset_time']):.4g} s, recovery e-folding time {_hours(ds['recovery_time'])}, "
           f"time above half depth {_hours(ds['fwhm_duration'])} (same profile in every band).")
    m = float(ds["cme_mass"])
    best = ds.attrs["best_band"]
    pb = ds.sel(band=best)
    summary = (f"A CME of {m:.3g} g dims the band {best} by {float(pb['depth']) * 100:.3g} % "
               f"(net {float(pb['net_depth']) * 100:.3g} % with the flare); P(detect) = "
               f"{float(pb['probability']):.2f} at false-alarm probability {ds.attrs['false_alarm']:g}. ")
    mmb = float(pb["minimum_detectable_mass"])
    summary += (f"Minimum detectable mass (P = {ds.attrs['target_probability']:g}) in {best}: {mmb:.3g} g."
                if np.isfinite(mmb) else f"Minimum detectable mass in {best}: "
                                         f"{pb['minimum_detectable_mass_note'].item()}.")
    b.append(("p", "**Result.** " + summary))
    b.append(("h2", "Inputs"))
    b.append(("table", (["Item", "Value"], [list(r) for r in _inputs_rows(ds, inputs)])))
    b.append(("h2", "Dimming depth, duration and detection per band"))
    b.append(("p", dur))
    b.append(("table", _band_rows(ds)))
    b.append(("p", "Depth: full fractional drop of the count rate. Net depth: largest drop of the expected light curve "
                   "with the flare. Flare/dimming: flare excess counts over dimming deficit counts in the post-event "
                   "window of the detection test (> 1: the flare more than fills in the dimming there)."))
    if ds.sizes.get("mass", 0):
        head = ["CME mass [g]"] + [str(x) for x in ds["band"].values]
        rows = [[_fmt(mv)] + [f"{float(p):.3f}" for p in ds["probability_vs_mass"].values[k]]
                for k, mv in enumerate(ds["mass"].values)]
        b.append(("h2", "P(detect) against CME mass"))
        b.append(("table", (head, rows)))
        if ds.attrs.get("mass_grid_note", "all masses of the grid used") != "all masses of the grid used":
            b.append(("p", ds.attrs["mass_grid_note"] + "."))
    if figures:
        b.append(("h2", "Figures"))
        for path, png, caption in figures.values():
            b.append(("figure", (path, png, caption)))
    b.append(("h2", "Assumptions and limitations"))
    stat_text = _LIKELIHOOD_TEXT if ds.attrs.get("statistic") == "likelihood" else _WINDOW_TEXT
    b.append(("list", [stat_text if a is _WINDOW_TEXT else a for a in ASSUMPTIONS]))
    b.append(("h2", "Atomic data and provenance"))
    b.append(("list", [
        f"Emissivities: CHIANTI {ds.attrs['chianti_version']} composite (ions whose v{ds.attrs['chianti_version']} "
        f"files were missing are filled in from older CHIANTI releases; {ds.attrs['chianti_substituted_ion_count']} of "
        "this table's ions, listed in the netCDF attribute chianti_substituted_ions), embedded table content hash "
        f"{ds.attrs['table_content_hash'][:16]}...",
        f"Scenario file {ds.attrs['scenario_file']} (SHA-256 {ds.attrs['scenario_sha256'][:16]}...), synthcorona "
        f"{ds.attrs['synthcorona_version']}, created {ds.attrs['created']}.",
    ]))
    return b


def _md_table(head, rows):
    esc = [[c.replace("|", "\\|") for c in r] for r in rows]
    out = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    out += ["| " + " | ".join(r) + " |" for r in esc]
    return "\n".join(out)


def _to_markdown(blocks) -> str:
    out = []
    for kind, c in blocks:
        if kind == "h1":
            out.append(f"# {c}")
        elif kind == "h2":
            out.append(f"## {c}")
        elif kind == "p":
            out.append(c)
        elif kind == "table":
            out.append(_md_table(*c))
        elif kind == "list":
            out.append("\n".join(f"- {x}" for x in c))
        elif kind == "figure":
            path, _, caption = c
            out.append(f"![{caption}]({path})\n\n*{caption}*")
    return "\n\n".join(out) + "\n"


def _inline(text: str) -> str:
    """Escape for HTML, turning **bold** into <strong>."""
    parts = html.escape(text).split("**")
    return "".join(f"<strong>{p}</strong>" if i % 2 else p for i, p in enumerate(parts))


_CSS = ("body{font-family:sans-serif;max-width:60em;margin:1em auto;font-size:11pt;line-height:1.35}"
        "table{border-collapse:collapse;margin:0.5em 0}td,th{border:1px solid #999;padding:2px 6px;text-align:left;"
        "font-size:10pt}th{background:#eee}figure{margin:0.5em 0}img{max-width:100%}figcaption{font-size:10pt}")


def _to_html(blocks) -> str:
    title = next((c for k, c in blocks if k == "h1"), "Forecast")
    out = ["<!DOCTYPE html>", "<html lang=\"en\"><head><meta charset=\"utf-8\">",
           f"<title>{html.escape(title)}</title><style>{_CSS}</style></head><body>"]
    for kind, c in blocks:
        if kind in ("h1", "h2"):
            out.append(f"<{kind}>{html.escape(c)}</{kind}>")
        elif kind == "p":
            out.append(f"<p>{_inline(c)}</p>")
        elif kind == "table":
            head, rows = c
            out.append("<table><tr>" + "".join(f"<th>{html.escape(h)}</th>" for h in head) + "</tr>")
            out += ["<tr>" + "".join(f"<td>{html.escape(x)}</td>" for x in r) + "</tr>" for r in rows]
            out.append("</table>")
        elif kind == "list":
            out.append("<ul>" + "".join(f"<li>{_inline(x)}</li>" for x in c) + "</ul>")
        elif kind == "figure":
            _, png, caption = c
            data = base64.b64encode(png).decode("ascii")
            out.append(f"<figure><img alt=\"{html.escape(caption)}\" src=\"data:image/png;base64,{data}\">"
                       f"<figcaption>{html.escape(caption)}</figcaption></figure>")
    out.append("</body></html>")
    return "\n".join(out) + "\n"


def forecast_report(ds, inputs, figures=None, fmt: str = "md") -> str:
    """The one-page report as text.

    Parameters
    ----------
    ds : xarray.Dataset
        From :func:`synthcorona.products.forecast.run_forecast`.
    inputs : ForecastInputs
        The scenario it was computed from.
    figures : dict, optional
        ``name -> (file name, PNG bytes, caption)``; Markdown links the file name, HTML embeds the
        bytes as base64.
    fmt : {"md", "html"}
    """
    from ..errors import InputError

    if fmt not in ("md", "html"):
        raise InputError(f"fmt={fmt!r} must be 'md' or 'html'")
    blocks = _blocks(ds, inputs, figures or {})
    return _to_markdown(blocks) if fmt == "md" else _to_html(blocks)
