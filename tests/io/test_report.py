"""The one-page forecast report (synthcorona.io.report) of the small invented scenario tests/data/small_forecast.toml.

Expected values: the numbers of the forecast Dataset itself (the report prints them to 3 significant
digits), read back from the Markdown and HTML tables.
"""
import base64
import re

import numpy as np
import pytest

from synthcorona.errors import InputError
from synthcorona.io.report import ASSUMPTIONS, forecast_report


def _md_rows(md: str, header_start: str) -> list[list[str]]:
    """The body rows of the Markdown table whose header starts with ``header_start``."""
    lines = md.splitlines()
    i = next(k for k, ln in enumerate(lines) if ln.startswith(f"| {header_start}"))
    rows = []
    for ln in lines[i + 2:]:
        if not ln.startswith("|"):
            break
        rows.append([c.strip() for c in ln.strip("|").split(" | ")])
    return rows


def _pm(text: str) -> tuple[float, float]:
    value, error = text.split(" +- ")
    return float(value), float(error)


def test_markdown_band_table_holds_the_dataset_numbers(small_forecast):
    inputs, ds = small_forecast
    md = forecast_report(ds, inputs, fmt="md")
    (row,) = _md_rows(md, "Band")
    s = ds.sel(band="sc-fe9")
    assert row[0] == "sc-fe9"
    for cell, name in zip(row[1:5], ("quiescent_rate", "depth", "net_depth", "flare_to_dimming")):
        assert float(cell) == pytest.approx(float(s[name]), rel=5e-3), name
    p, p_err = _pm(row[5])
    assert p == pytest.approx(float(s["probability"]), abs=5e-4)
    assert p_err == pytest.approx(float(s["probability_error"]), abs=5e-4)
    m, m_err = _pm(row[6])
    assert m == pytest.approx(float(s["minimum_detectable_mass"]), rel=5e-3)
    assert m_err == pytest.approx(float(s["minimum_detectable_mass_error"]), rel=2e-2)


def test_markdown_probability_against_mass_table(small_forecast):
    inputs, ds = small_forecast
    rows = _md_rows(forecast_report(ds, inputs, fmt="md"), "CME mass [g]")
    masses = [float(r[0]) for r in rows]
    np.testing.assert_allclose(masses, ds["mass"].values, rtol=5e-3)
    np.testing.assert_allclose([float(r[1]) for r in rows], ds["probability_vs_mass"].values[:, 0], atol=5e-4)


def test_markdown_sections_and_provenance(small_forecast):
    inputs, ds = small_forecast
    md = forecast_report(ds, inputs)
    assert md.startswith("# small test star\n")
    for heading in ("## Inputs", "## Dimming depth, duration and detection per band", "## Assumptions and limitations",
                    "## Atomic data and provenance"):
        assert heading in md
    assert f"CHIANTI {ds.attrs['chianti_version']}" in md and ds.attrs["table_content_hash"][:16] in md
    assert ds.attrs["scenario_sha256"][:16] in md
    assert ds.attrs["mass_grid_note"] + "." in md
    assert all(a in md for a in ASSUMPTIONS[:5])
    assert re.search(r"\| Monte Carlo \| 200 realisations per probability, seed 3, window statistic \|", md)


def test_figures_linked_in_markdown_and_embedded_in_html(small_forecast):
    inputs, ds = small_forecast
    png = b"\x89PNG\r\n\x1a\nnot really a figure"
    figures = {"light_curves": ("light_curves.png", png, "Light curves.")}
    md = forecast_report(ds, inputs, figures, fmt="md")
    assert "![Light curves.](light_curves.png)" in md
    html = forecast_report(ds, inputs, figures, fmt="html")
    assert html.count("data:image/png;base64,") == 1 and base64.b64encode(png).decode("ascii") in html
    assert "<td>sc-fe9</td>" in html and "http://" not in html and "https://" not in html


def test_unknown_format_is_refused(small_forecast):
    inputs, ds = small_forecast
    with pytest.raises(InputError, match="fmt='pdf'"):
        forecast_report(ds, inputs, fmt="pdf")
