"""Figures of a forecast (synthcorona.plotting.forecast) for the small invented scenario tests/data/small_forecast.toml."""
import numpy as np
import pytest
from matplotlib.figure import Figure

from synthcorona.plotting.forecast import (
    forecast_figures,
    plot_forecast_detection_vs_mass,
    plot_forecast_light_curves,
    plot_forecast_responses,
)


def test_forecast_figures_names_and_captions(small_forecast):
    _, ds = small_forecast
    figs = forecast_figures(ds)
    assert list(figs) == ["light_curves", "detection_vs_mass", "temperature_responses"]
    for name, (fname, fig, caption) in figs.items():
        assert fname == f"{name}.png" and isinstance(fig, Figure) and caption.endswith(".")


def test_light_curves_one_panel_per_band_with_both_expectations(small_forecast):
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
    np.testing.assert_allclose(lines["realisations (without CME)"].get_ydata(),
                               ds["counts_without_cme"].values[0, 0] / ds.attrs["bin_width_s"])
    assert "realisations (with CME)" in lines
    assert ax.get_ylabel() == "sc-fe9 [ct/s]" and ax.get_xlabel() == "time [h]"


def test_detection_against_mass(small_forecast):
    _, ds = small_forecast
    ax = plot_forecast_detection_vs_mass(ds).axes[0]
    assert ax.get_xscale() == "log" and ax.get_xlabel() == "CME mass [g]" and ax.get_ylabel() == "P(detect)"
    (curve,) = ax.containers                            # one error-bar curve: one band
    np.testing.assert_allclose(curve.lines[0].get_xdata(), ds["mass"].values)
    np.testing.assert_allclose(curve.lines[0].get_ydata(), ds["probability_vs_mass"].values[:, 0])
    hlines = [ln.get_ydata()[0] for ln in ax.get_lines() if len(set(ln.get_ydata())) == 1 and len(ln.get_ydata()) == 2]
    assert ds.attrs["target_probability"] in hlines and ds.attrs["false_alarm"] in hlines
    assert ax.get_title() == "200 realisations, seed 3"


def test_temperature_responses_with_em_and_source_temperature(small_forecast):
    _, ds = small_forecast
    fig = plot_forecast_responses(ds)
    ax, ax2 = fig.axes
    resp = ax.get_lines()[0]
    np.testing.assert_allclose(resp.get_xdata(), 10 ** ds["logT"].values)
    y = ds["temperature_response"].values[0]
    np.testing.assert_allclose(resp.get_ydata(), np.where(y > 0, y, np.nan))
    assert ax.get_lines()[1].get_xdata()[0] == pytest.approx(2e6)      # the CME source temperature, 2 MK
    w = ds["dem_em_weights"].values
    np.testing.assert_allclose(ax2.get_lines()[0].get_ydata(), np.where(w > 0, w, np.nan))
    assert ax.get_xscale() == ax.get_yscale() == ax2.get_yscale() == "log"
