"""The forecast report (synthcorona.io.report) of the small invented scenario tests/data/small_forecast.toml.

Expected values: the numbers of the forecast Dataset itself (the report prints them to 3 significant
digits), read back from the Markdown tables; the counts per bin are (source + background rate) x bin
width, the S/N deficit / sqrt(counts) of the Dataset's post-event window counts.
"""
import base64
import dataclasses
import re
import warnings

import numpy as np
import pytest
from report_checks import PAGE_BREAK_MD, md_rows, no_raw_text, pdf_pages, report_number, split_pm

from synthcorona.errors import InputError
from synthcorona.io.report import assumptions, forecast_report


@pytest.fixture(scope="module")
def no_flare(small_forecast):
    """The small scenario without its flare and without interstellar absorption (N_H not given)."""
    from synthcorona.io.forecast_file import read_forecast_file
    from synthcorona.products.forecast import run_forecast

    text = (small_forecast[0].raw_text.replace('[flare]\nenergy = "1e31 erg"\n', "")
            .replace('nh = "1e18 cm-2"\n', ""))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        inputs = read_forecast_file(text=text, name="no_flare.toml")
        return inputs, run_forecast(inputs, show_realisations=0)


def test_band_table_holds_limits_fluxes_rates_and_counts_per_bin(small_forecast):
    inputs, ds = small_forecast
    md = forecast_report(ds, inputs, fmt="md")
    (row,) = md_rows(md, "Band | Energy")
    s = ds.sel(band="sc-fe9")
    assert row[0] == "sc-fe9"
    lo, hi = float(s["band_lo"]), float(s["band_hi"])
    assert row[1] == f"{lo:.3g} to {hi:.3g} keV"                   # 0.02 to 3.75 keV: the whole response
    assert row[2] == f"{12.398419843320026 / hi:.3g} to {12.398419843320026 / lo:.0f} Å"
    for cell, value in zip(row[3:7], (s["quiescent_energy_flux"], s["quiescent_luminosity"], s["quiescent_rate"],
                                      s["background"])):
        assert report_number(cell) == pytest.approx(float(value), rel=5e-3, abs=1e-12)
    counts = (float(s["quiescent_rate"]) + float(s["background"])) * 300.0     # 300 s bins
    assert report_number(row[7]) == pytest.approx(counts, rel=5e-3)
    assert "Counts per 300 s bin" in md


def test_dimming_table_holds_depth_snr_probability_and_minimum_mass(small_forecast):
    inputs, ds = small_forecast
    (row,) = md_rows(forecast_report(ds, inputs, fmt="md"), "Band | Depth")
    s = ds.sel(band="sc-fe9")
    assert report_number(row[1]) == pytest.approx(100 * float(s["depth"]), rel=5e-3)
    assert report_number(row[2]) == pytest.approx(100 * float(s["net_depth"]), rel=5e-3)       # flare given
    assert report_number(row[3]) == pytest.approx(float(s["flare_to_dimming"]), rel=5e-3)
    deficit, counts = (report_number(x) for x in row[4].split(" / "))
    assert deficit == pytest.approx(float(s["dimming_counts_post_window"]), rel=5e-3)
    assert counts == pytest.approx(float(s["counts_post_window"]), rel=5e-3)
    assert report_number(row[5]) == pytest.approx(deficit / np.sqrt(counts), rel=1e-2)        # S/N = dN / sqrt(N)
    p, p_err = split_pm(row[6])
    assert p == pytest.approx(float(s["probability"]), abs=5e-4)
    assert p_err == pytest.approx(float(s["probability_error"]), abs=5e-4)
    m, m_err = split_pm(row[7])
    assert m == pytest.approx(float(s["minimum_detectable_mass"]), rel=5e-3)
    assert m_err == pytest.approx(float(s["minimum_detectable_mass_error"]), rel=2e-2)


def test_probability_against_mass_with_errors(small_forecast):
    inputs, ds = small_forecast
    rows = md_rows(forecast_report(ds, inputs, fmt="md"), "CME mass [g]")
    np.testing.assert_allclose([report_number(r[0]) for r in rows], ds["mass"].values, rtol=5e-3)
    pe = [split_pm(r[1]) for r in rows]
    np.testing.assert_allclose([p for p, _ in pe], ds["probability_vs_mass"].values[:, 0], atol=5e-4)
    np.testing.assert_allclose([e for _, e in pe], ds["probability_vs_mass_error"].values[:, 0], atol=5e-4)


def test_net_depth_only_with_a_flare(small_forecast, no_flare):
    inputs, ds = small_forecast
    md = forecast_report(ds, inputs, fmt="md")
    assert "Net depth with flare" in md and "Flare / dimming" in md
    inputs, ds = no_flare
    md0 = forecast_report(ds, inputs, fmt="md")
    assert "Net depth" not in md0 and "Flare / dimming" not in md0 and "| Flare | none |" in md0
    (row,) = md_rows(md0, "Band | Depth")
    assert len(row) == 6 and report_number(row[1]) == pytest.approx(100 * float(ds["depth"].values[0]), rel=5e-3)
    assert "no interstellar absorption (N_H = 0 cm⁻²)" in md0


def test_first_page_states_what_a_proposal_needs(small_forecast):
    inputs, ds = small_forecast
    md = forecast_report(ds, inputs, fmt="md")
    first = md.split(PAGE_BREAK_MD)[0]
    for text in ("**Result.**", "Pellwyn at 2 pc; N_H = 1 × 10¹⁸ cm⁻²",
                 "Gaussian in log T peaking at 2 MK (log T = 6.30), 0.2 dex wide; total EM 1 × 10⁵¹ cm⁻³",
                 "| Instrument sc-fe9 | generic design sc-fe9; peak effective area ", "cm² at ",
                 "background 0 ct s⁻¹ per band", "| Monte Carlo | 200 realisations per probability, seed 3, window test |",
                 "## The model in plain words", "S/N of the dimming", "P(detect)"):
        assert text in first, text
    # one appendix after one page break, holding the details
    assert md.count(PAGE_BREAK_MD) == 1
    appendix = md.split(PAGE_BREAK_MD)[1]
    for heading in ("# Appendix", "## Inputs in full", "## Instruments and bands", "## P(detect) against CME mass",
                    "## Definitions", "## Assumptions and limitations", "## Atomic data and provenance"):
        assert heading in appendix, heading
    assert f"CHIANTI {ds.attrs['chianti_version']}" in md and ds.attrs["table_content_hash"][:16] in appendix
    assert ds.attrs["scenario_sha256"][:16] in appendix
    assert all(a in appendix for a in assumptions(ds, inputs))


def test_no_raw_reprs_paths_or_unverified_claims(small_forecast, no_flare):
    for inputs, ds in (small_forecast, no_flare):
        for fmt in ("md", "html"):
            no_raw_text(forecast_report(ds, inputs, fmt=fmt))


def test_figures_linked_in_markdown_and_embedded_in_html(small_forecast):
    inputs, ds = small_forecast
    png = b"\x89PNG\r\n\x1a\nnot really a figure"
    figures = {"light_curves": ("light_curves.png", png, "Light curves.")}
    md = forecast_report(ds, inputs, figures, fmt="md")
    assert "![Light curves.](light_curves.png)" in md and md.index("light_curves.png") > md.index(PAGE_BREAK_MD)
    html = forecast_report(ds, inputs, figures, fmt="html")
    assert html.count("data:image/png;base64,") == 1 and base64.b64encode(png).decode("ascii") in html
    assert "<td>sc-fe9</td>" in html and "http://" not in html and "https://" not in html
    assert "@page { size: A4" in html and "break-before: page" in html


def test_unknown_format_is_refused(small_forecast):
    inputs, ds = small_forecast
    with pytest.raises(InputError, match="fmt='pdf'"):
        forecast_report(ds, inputs, fmt="pdf")


def test_printed_html_is_one_page_plus_appendix(small_forecast, tmp_path):
    """The HTML report with its four figures, printed to PDF: the first page holds the whole summary, the
    appendix starts on page 2."""
    from synthcorona.io.writers import figure_png
    from synthcorona.plotting.forecast import forecast_figures

    inputs, ds = small_forecast
    figures = {k: (f, figure_png(fig, dpi=110), c) for k, (f, fig, c) in forecast_figures(ds, inputs).items()}
    pages = pdf_pages(forecast_report(ds, inputs, figures, fmt="html"), tmp_path / "report.pdf")
    first = re.sub(r"\s+", " ", pages[0])
    assert "small test star" in first and "The model in plain words" in first and "Appendix" not in first
    assert "created" in first                                    # the provenance line closes page 1
    assert pages[1].lstrip().startswith("Appendix")
    assert 2 <= len(pages) <= 5
    assert not any("Appendix" in p for p in pages[2:])            # one appendix, after one page break


def test_long_description_still_fits_one_page(small_forecast, tmp_path):
    """A four-sentence description and a two-component corona (more text on page 1) still leave the first page
    whole: the appendix starts on page 2."""
    inputs, ds = small_forecast
    longer = dataclasses.replace(inputs, description=" ".join([inputs.description.capitalize() + "."] * 12))
    pages = pdf_pages(forecast_report(ds, longer, fmt="html"), tmp_path / "long.pdf")
    assert pages[1].lstrip().startswith("Appendix") and "Appendix" not in pages[0]
