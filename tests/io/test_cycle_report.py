"""The activity-cycle report (synthcorona.io.cycle_report) of the invented example examples/cycle/corvanne_cycle.toml
and of the minimal cycle tests/data/minimal_cycle.toml.

Expected values: the numbers of the cycle Dataset itself (printed to 3 significant digits), read back from the
Markdown tables.
"""
import pathlib
import re
import warnings

import numpy as np
import pytest
from report_checks import PAGE_BREAK_MD, md_rows, no_raw_text, pdf_pages, report_number, split_pm

from synthcorona.io.cycle_file import read_cycle_file
from synthcorona.io.cycle_report import cycle_report

ROOT = pathlib.Path(__file__).parent.parent.parent
EXAMPLE = ROOT / "examples" / "cycle" / "corvanne_cycle.toml"
MINIMAL = ROOT / "tests" / "data" / "minimal_cycle.toml"


@pytest.fixture(scope="module")
def corvanne(tmp_path_factory):
    """(inputs, dataset, figures) of the example cycle: six phases, three instruments, a conversion and the
    reference CME, whose false-alarm probability is raised to 5 % here so that 200 realisations calibrate it."""
    from synthcorona.io.writers import figure_png
    from synthcorona.plotting.cycle import cycle_captions, cycle_figures

    where = tmp_path_factory.mktemp("corvanne")
    ref = (EXAMPLE.parent / "reference_cme.toml").read_text().replace('pre_event = "3 h"\n',
                                                                      'pre_event = "3 h"\nfalse_alarm = 0.05\n')
    (where / "reference_cme.toml").write_text(ref)
    (where / EXAMPLE.name).write_text(EXAMPLE.read_text().replace("realisations = 1000", "realisations = 200"))
    inputs = read_cycle_file(where / EXAMPLE.name)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ds = inputs.run()
    caps = cycle_captions(ds)
    figures = {k: (k, figure_png(fig, dpi=100), caps[k]) for k, fig in cycle_figures(ds).items()}
    return inputs, ds, figures


def test_flux_and_rate_tables_phase_by_phase_with_amplitudes(corvanne):
    inputs, ds, _ = corvanne
    md = cycle_report(ds, inputs, fmt="md")
    rows = md_rows(md, "Phase | Label | 0.1-2.4 keV")
    order = np.argsort(ds["phase"].values)
    assert [r[1] for r in rows[:-1]] == list(ds["label"].values[order])
    for j in range(ds.sizes["band"]):
        np.testing.assert_allclose([report_number(r[2 + j]) for r in rows[:-1]], ds["flux"].values[order, j],
                                   rtol=5e-3)
    amp = rows[-1]
    assert amp[1] == "max / min"
    a, dex = re.fullmatch(r"(.+) \((.+) dex\)", amp[2]).groups()
    assert report_number(a) == pytest.approx(float(ds["flux_amplitude"].values[0]), rel=5e-3)
    assert report_number(dex) == pytest.approx(float(ds["flux_log_amplitude"].values[0]), abs=5e-3)
    rates = md_rows(md, "Phase | Label | sc-softx:soft")
    np.testing.assert_allclose([report_number(r[3]) for r in rates[:-1]], ds["count_rate"].values[order, 1],
                               rtol=5e-3)
    assert report_number(rates[-1][3]) == pytest.approx(float(ds["count_rate_amplitude"].values[1]), rel=5e-3)


def test_reference_cme_table_with_errors(corvanne):
    inputs, ds, _ = corvanne
    rows = md_rows(cycle_report(ds, inputs, fmt="md"), "Phase | Label | Depth in sc-fe12")
    order = np.argsort(ds["phase"].values)
    np.testing.assert_allclose([report_number(r[2]) for r in rows], 100 * ds["dimming_depth"].values[order, 0],
                               rtol=5e-3)
    np.testing.assert_allclose([report_number(r[3]) for r in rows], ds["dimming_snr_expected"].values[order, 0],
                               rtol=5e-3)
    for r, k in zip(rows, order):
        p = float(ds["detection_probability"].values[k, 0])
        if 0 < p < 1:
            value, err = split_pm(r[4])
            assert value == pytest.approx(p, abs=5e-4)
            assert err == pytest.approx(float(ds["detection_probability_error"].values[k, 0]), abs=5e-4)


def test_first_page_appendix_and_plain_text(corvanne):
    inputs, ds, figures = corvanne
    md = cycle_report(ds, inputs, figures, fmt="md")
    first, appendix = md.split(PAGE_BREAK_MD)
    for text in ("# Corvanne activity cycle (invented)", "**Result.**", "Corvanne (invented) at 3 pc",
                 "N_H = 3 × 10¹⁷ cm⁻²", "0.1-2.4 keV: 0.1 to 2.4 keV (5.17 to 124 Å)", "## The model in plain words",
                 "The reference CME of 1 × 10¹⁷ g"):
        assert text in first, text
    for text in ("# Appendix", "power law, dEM/dlog T ∝ T^1.5 from 0.3 MK to 2 MK",
                 "emission measure solved from the flux", "## Band luminosity", "## Hardness", "## Count conversion",
                 "the whole response of sc-fe12", "## Assumptions and limitations", "Li & Ma (1983, ApJ 272, 317",
                 "![", "cycle_conversion.png"):
        assert text in appendix, text
    for fmt in ("md", "html"):
        no_raw_text(cycle_report(ds, inputs, figures, fmt=fmt))


def test_minimal_cycle_without_instruments_or_reference(tmp_path):
    inputs = read_cycle_file(MINIMAL)
    ds = inputs.run()
    md = cycle_report(ds, inputs, fmt="md")
    assert "## Count rate" not in md and "reference CME" not in md
    assert "no interstellar absorption (N_H = 0 cm⁻²)" in md
    assert "isothermal at 2 MK, EM 1 × 10⁵⁰ cm⁻³" in md
    no_raw_text(md)


def test_printed_html_is_one_page_plus_appendix(corvanne, tmp_path):
    inputs, ds, figures = corvanne
    pages = pdf_pages(cycle_report(ds, inputs, figures, fmt="html"), tmp_path / "cycle.pdf")
    first = re.sub(r"\s+", " ", pages[0])
    assert "Corvanne activity cycle" in first and "The model in plain words" in first and "Appendix" not in first
    assert "cycle file corvanne_cycle.toml" in first                  # the provenance line closes page 1
    assert pages[1].lstrip().startswith("Appendix") and not any("Appendix" in p for p in pages[2:])
    assert len(pages) <= 6
