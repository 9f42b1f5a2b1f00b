"""Figures of a forecast (synthcorona.plotting.forecast) for the small invented scenario tests/data/small_forecast.toml.

Expected values are the Dataset's own numbers; the responses at the star's distance are the stored 1 pc
responses times (1 pc / 2 pc)^2, and the EM per dex is the EM per node over the node's share of the log T
grid (numpy.gradient of log T).
"""
import matplotlib.colors as mcolors
import numpy as np
import pytest
import xarray as xr
from matplotlib.figure import Figure

from synthcorona.plotting.forecast import (
    MASS_OFFSET_DEX,
    forecast_figures,
    plot_forecast_detection_vs_mass,
    plot_forecast_effective_areas,
    plot_forecast_light_curves,
    plot_forecast_responses,
)

PC_PER_AU = 4.84813681109536e-06          # 1 AU / 1 pc (IAU 2012 and 2015 definitions)


def test_forecast_figures_names_and_captions(small_forecast):
    inputs, ds = small_forecast
    figs = forecast_figures(ds, inputs)
    assert list(figs) == ["effective_area", "light_curves", "detection_vs_mass", "temperature_responses"]
    for name, (fname, fig, caption) in figs.items():
        assert fname == f"{name}.png" and isinstance(fig, Figure) and caption.endswith(".")
    assert list(forecast_figures(ds)) == ["light_curves", "detection_vs_mass", "temperature_responses"]
    caption = figs["temperature_responses"][2]
    assert "1 pc" not in caption and "2 pc behind N_H = 1 × 10¹⁸ cm⁻²" in caption
    # the caption names the colours the figure uses
    assert "with the CME (red) and without it (blue)" in figs["light_curves"][2]
    assert "light red with the CME, light blue without" in figs["light_curves"][2]


def test_light_curves_colours_legend_and_realisations(small_forecast):
    _, ds = small_forecast
    fig = plot_forecast_light_curves(ds)
    (ax,) = fig.axes                                   # one band
    t_h = ds["time"].values / 3600.0
    lines = {ln.get_label(): ln for ln in ax.get_lines()}
    bg = float(ds["background"].values[0])
    np.testing.assert_allclose(lines["expected with CME"].get_xdata(), t_h)
    np.testing.assert_allclose(lines["expected with CME"].get_ydata(), ds["expected"].values[0] + bg)
    np.testing.assert_allclose(lines["expected without CME"].get_ydata(), ds["expected_without_cme"].values[0] + bg)
    # one Poisson realisation with and one without the CME, as count rates
    np.testing.assert_allclose(lines["realisation 1 without CME"].get_ydata(),
                               ds["counts_without_cme"].values[0, 0] / ds.attrs["bin_width_s"])
    np.testing.assert_allclose(lines["realisation 1 with CME"].get_ydata(),
                               ds["counts"].values[0, 0] / ds.attrs["bin_width_s"])
    # colours as the caption says: red / blue, the realisations light red / light blue, all distinct
    red, blue = (mcolors.to_rgb(lines[k].get_color()) for k in ("expected with CME", "expected without CME"))
    lred, lblue = (mcolors.to_rgb(lines[k].get_color()) for k in ("realisation 1 with CME",
                                                                  "realisation 1 without CME"))
    assert red[0] > red[2] and lred[0] > lred[2] and blue[2] > blue[0] and lblue[2] > lblue[0]
    assert len({red, blue, lred, lblue}) == 4
    # the legend belongs to the figure, outside the axes, never over the data
    assert ax.get_legend() is None and len(fig.legends) == 1
    assert fig.get_suptitle() == "CME of 3 × 10¹⁷ g, Pellwyn at 2 pc"
    assert ax.get_ylabel() == "sc-fe9 [ct/s]" and ax.get_xlabel() == "time [h]"


def _sun_like(ds):
    """The small Dataset moved to 1 AU with rates near 2e10 ct/s (as the Sun as a star gives) and two
    realisations."""
    sun = ds.copy()
    f = 2e10 / float(ds["quiescent_rate"].values[0])
    for k in ("expected", "expected_without_cme", "quiescent_rate"):
        sun[k] = ds[k] * f
    counts = np.concatenate([ds["counts"].values, ds["counts"].values[::-1]]) * f
    sun = sun.drop_vars(["counts", "counts_without_cme"])
    sun["counts"] = (("realisation", "band", "time"), counts)
    sun["counts_without_cme"] = (("realisation", "band", "time"), counts)
    sun.attrs.update(star_distance_pc=PC_PER_AU, star_name="Sun (as a star)")
    return sun


def test_light_curves_of_the_sun_say_1_au_and_have_no_offset_label(small_forecast):
    fig = plot_forecast_light_curves(_sun_like(small_forecast[1]))
    fig.canvas.draw()
    (ax,) = fig.axes
    assert fig.get_suptitle() == "CME of 3 × 10¹⁷ g, Sun (as a star) at 1 AU"
    assert ax.yaxis.get_offset_text().get_text() == ""               # no "1e10" or "+1.99e10" above the axis
    assert ax.get_ylabel() == "sc-fe9 [10$^{10}$ ct/s]"
    lines = {ln.get_label(): ln for ln in ax.get_lines()}
    assert lines["expected without CME"].get_ydata()[0] == pytest.approx(2.0, rel=1e-12)   # 2e10 ct/s, no background
    styles = {k: ln.get_linestyle() for k, ln in lines.items()}
    assert styles["realisation 1 with CME"] != styles["realisation 2 with CME"]      # realisations told apart


def test_detection_against_mass_title_legend_and_lines(small_forecast):
    _, ds = small_forecast
    fig = plot_forecast_detection_vs_mass(ds)
    ax = fig.axes[0]
    assert ax.get_xscale() == "log" and ax.get_xlabel() == "CME mass [g]" and ax.get_ylabel() == "P(detect)"
    (curve,) = ax.containers                            # one error-bar curve: one band
    np.testing.assert_allclose(curve.lines[0].get_xdata(), ds["mass"].values)
    np.testing.assert_allclose(curve.lines[0].get_ydata(), ds["probability_vs_mass"].values[:, 0])
    hlines = [ln.get_ydata()[0] for ln in ax.get_lines() if len(set(ln.get_ydata())) == 1 and len(ln.get_ydata()) == 2]
    assert ds.attrs["target_probability"] in hlines and ds.attrs["false_alarm"] in hlines
    assert ax.get_title() == "Pellwyn at 2 pc; sc-fe9; 8 h exposure\n200 realisations per point, seed 3"
    (legend,) = fig.legends
    labels = [t.get_text() for t in legend.get_texts()]
    assert labels == ["sc-fe9", "target P = 0.5", "false-alarm probability 0.05", "scenario's mass 3 × 10¹⁷ g"]
    assert ax.get_legend() is None


def test_overlapping_bands_stay_visible(small_forecast):
    """Two bands with the same P(detect): shifted by MASS_OFFSET_DEX in log mass, with different markers and line
    styles."""
    _, ds = small_forecast
    two = xr.concat([ds, ds.assign_coords(band=["copy"], instrument=("band", ["sc-fe9"]))], dim="band",
                    data_vars="minimal", coords="minimal", compat="override")
    ax = plot_forecast_detection_vs_mass(two).axes[0]
    a, b = (c.lines[0] for c in ax.containers)
    np.testing.assert_allclose(np.log10(b.get_xdata() / a.get_xdata()), MASS_OFFSET_DEX, rtol=1e-12)
    np.testing.assert_array_equal(a.get_ydata(), b.get_ydata())
    assert a.get_marker() != b.get_marker() and a.get_linestyle() != b.get_linestyle()


def test_temperature_responses_at_the_star_with_em_per_dex(small_forecast):
    _, ds = small_forecast
    fig = plot_forecast_responses(ds)
    ax, ax2 = fig.axes
    resp = ax.get_lines()[0]
    t = 10 ** ds["logT"].values
    np.testing.assert_allclose(resp.get_xdata(), t)
    y = ds["temperature_response"].values[0] / 2.0 ** 2            # 1 pc -> 2 pc
    np.testing.assert_allclose(resp.get_ydata(), np.where(y > 0, y, np.nan))
    assert ax.get_lines()[1].get_xdata()[0] == pytest.approx(2e6)      # the CME source temperature, 2 MK
    w = ds["dem_em_weights"].values
    per_dex = w / np.gradient(ds["logT"].values)
    np.testing.assert_allclose(ax2.get_lines()[0].get_ydata(), np.where(per_dex > 0, per_dex, np.nan))
    # a Gaussian of 1e51 cm-3, 0.2 dex wide, peaks at 1e51 / (sqrt(2 pi) 0.2) per dex (its definition)
    assert np.nanmax(per_dex) == pytest.approx(1e51 / (np.sqrt(2 * np.pi) * 0.2), rel=2e-2)
    # the temperature axis starts and ends where a curve is drawn (the response spans the whole table here)
    lo, hi = ax.get_xlim()
    assert lo == pytest.approx(t[0]) and hi == pytest.approx(t[-1])
    assert ax.get_xscale() == ax.get_yscale() == ax2.get_yscale() == "log"
    assert "per unit log T" in ax2.get_ylabel() and "node" not in ax2.get_ylabel()
    assert ax.get_title() == "Pellwyn at 2 pc, N$_H$ = 1 × 10¹⁸ cm$^{-2}$"


def test_effective_area_with_the_bands_used(small_forecast):
    inputs, ds = small_forecast
    ax = plot_forecast_effective_areas(ds, inputs).axes[0]
    inst = inputs.instruments[0].instrument
    (line,) = [ln for ln in ax.get_lines() if ln.get_label() == inst.name]
    np.testing.assert_allclose(line.get_xdata(), 0.5 * (inst.energy_lo.value + inst.energy_hi.value))
    assert ax.get_xlabel() == "photon energy [keV]" and ax.get_ylabel() == "effective area [cm$^2$]"
