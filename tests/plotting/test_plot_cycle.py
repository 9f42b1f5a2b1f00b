"""Figures of an activity-cycle comparison (synthcorona.plotting.cycle) for a small invented cycle."""
import astropy.units as u
import numpy as np
import pytest
import xarray as xr

from synthcorona.dem import GaussianDEM, IsothermalDEM
from synthcorona.dimming import Star
from synthcorona.instruments.conversion import CountConversion
from synthcorona.plotting.cycle import (
    cycle_captions,
    cycle_figures,
    plot_cycle_count_rates,
    plot_cycle_dimming,
    plot_cycle_fluxes,
    save_cycle_figures,
)
from synthcorona.products.cycle import compare_cycle
from synthcorona.products.cycle_phase import CyclePhase

# N_H and density of the example cycle file: tests using them share its cached instrument responses.
NH, DENSITY = 3e17 * u.cm ** -2, 2e9 * u.cm ** -3


@pytest.fixture(scope="module")
def ds():
    phases = [CyclePhase("low", 0.0, dem=GaussianDEM(6.2, 0.2, 5e50 * u.cm ** -3)),
              CyclePhase("high", 0.5, dem=IsothermalDEM(4 * u.MK, 2e51 * u.cm ** -3)),
              CyclePhase("mid", 0.25, dem=GaussianDEM(6.3, 0.2, 1e51 * u.cm ** -3))]
    return compare_cycle(phases, Star(distance=4 * u.pc, nh=NH), instruments=["sc-softx"], density=DENSITY,
                         conversion=CountConversion("sc-softx:broad", "sc-fe12"), name="Pellwyn")


def test_figures_for_what_the_dataset_holds(ds):
    assert list(cycle_figures(ds)) == ["cycle_fluxes.png", "cycle_count_rates.png", "cycle_hardness.png",
                                       "cycle_conversion.png"]


def test_fluxes_one_line_per_band_in_phase_order(ds):
    fig = plot_cycle_fluxes(ds)
    ax = fig.axes[0]
    lines = ax.get_lines()
    assert [ln.get_label() for ln in lines] == list(ds["band"].values)
    order = np.argsort(ds["phase"].values)
    for j, ln in enumerate(lines):
        np.testing.assert_array_equal(ln.get_xdata(), ds["phase"].values[order])   # 0, 0.25, 0.5
        np.testing.assert_array_equal(ln.get_ydata(), ds["flux"].values[order, j])
    assert ax.get_yscale() == "log" and ax.get_xlabel() == "cycle phase"
    assert ax.get_title() == "Pellwyn: band fluxes at 4 pc over the cycle"
    assert [t.get_text() for t in ax.texts] == ["low", "mid", "high"]


def test_hardness_and_conversion_panels(ds):
    figs = cycle_figures(ds)
    a1, a2 = figs["cycle_hardness.png"].axes
    np.testing.assert_array_equal(a1.get_lines()[0].get_ydata(), ds["hardness_ratio"].values[[0, 2, 1], 0])
    np.testing.assert_array_equal(a2.get_lines()[0].get_ydata(), ds["band_ratio"].values[[0, 2, 1], 0])
    c1, c2 = figs["cycle_conversion.png"].axes
    assert [ln.get_label() for ln in c1.get_lines()] == ["per ct/s in sc-softx:broad", "per ct/s in sc-fe12"]
    # the flux band is sc-fe12's whole response, 0.02-3.70664 keV: 3 significant digits, "a to b", its origin
    assert c1.get_title() == ("Pellwyn: counts in sc-softx:broad converted to sc-fe12\nflux in 0.02 to 3.71 keV "
                              "(3.34 to 620 Å), the whole response of sc-fe12")
    np.testing.assert_array_equal(c2.get_lines()[0].get_ydata(), ds["rate_conversion"].values[[0, 2, 1]])
    assert c2.get_ylabel() == "rate(sc-fe12) / rate(sc-softx:broad)"


def test_dimming_panels():
    ds = xr.Dataset({"dimming_depth": (("phase", "dimming_band"), [[0.02], [0.01]]),
                     "detection_probability": (("phase", "dimming_band"), [[0.9], [0.4]]),
                     "detection_probability_error": (("phase", "dimming_band"), [[0.01], [0.02]])},
                    coords={"phase": ("phase", [2.0, 1.0], {"units": "yr"}), "label": ("phase", ["b", "a"]),
                            "dimming_band": ["sc-fe12"]},
                    attrs={"dimming_false_alarm": 0.01, "dimming_reference_cme_mass_g": 1e17, "star": ""})
    a1, a2 = plot_cycle_dimming(ds).axes
    np.testing.assert_array_equal(a1.get_lines()[0].get_ydata(), [1.0, 2.0])     # per cent, phases sorted
    np.testing.assert_array_equal(a2.containers[0].lines[0].get_ydata(), [0.4, 0.9])
    assert a1.get_xlabel() == "time since reference epoch [yr]" and a2.get_ylim() == (-0.02, 1.02)
    assert a1.get_title() == "reference CME of 1 × 10¹⁷ g"
    legend = [t.get_text() for t in a1.figure.legends[0].get_texts()]
    assert legend == ["sc-fe12", "false-alarm probability 0.01"] and a2.get_legend() is None


def test_save_cycle_figures_writes_png(ds, tmp_path):
    paths = save_cycle_figures(ds, tmp_path / "figs")
    assert [p.name for p in paths] == list(cycle_figures(ds))
    assert all(p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" for p in paths)


def test_overlapping_count_rates_stay_distinguishable(ds):
    """sc-softx:broad (0.2-2.4 keV) and sc-softx:full (0.2-10 keV) nearly coincide for a 1-4 MK corona: every curve
    has its own marker and line style, with open markers of decreasing size, and the legend is off the axes."""
    fig = plot_cycle_count_rates(ds)
    ax = fig.axes[0]
    lines = ax.get_lines()
    assert len({ln.get_marker() for ln in lines}) == len(lines)
    assert len({(ln.get_marker(), str(ln.get_linestyle())) for ln in lines}) == len(lines)
    sizes = [ln.get_markersize() for ln in lines]
    assert sizes == sorted(sizes, reverse=True) and all(ln.get_markerfacecolor() == "none" for ln in lines)
    assert ax.get_legend() is None and len(fig.legends) == 1
    assert ax.get_title() == "Pellwyn: count rates, N$_H$ = 3 × 10¹⁷ cm$^{-2}$"


def test_captions_for_every_figure(ds):
    caps = cycle_captions(ds)
    assert list(caps) == list(cycle_figures(ds)) and all(c.endswith(".") for c in caps.values())
