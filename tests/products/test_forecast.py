"""The forecast products (synthcorona.products.forecast), computed directly rather than through the command line.

The scenario is tests/data/small_forecast.toml (an invented star); the expected numbers are those of the
already-tested DimmingScenario API for the same inputs, and the profile identity FWHM = a/2 + tau ln 2 of
the linear-rise / exponential-recovery profile (synthcorona.dimming.profile).
"""
import hashlib
import math
import pathlib
import warnings

import astropy.units as u
import numpy as np
import pytest

from synthcorona.dem import GaussianDEM
from synthcorona.dimming import CME, Corona, DimmingScenario, Flare, Observation, Star
from synthcorona.errors import InputError
from synthcorona.io.forecast_file import read_forecast_file
from synthcorona.products.forecast import check_realisations, forecast_tables, run_forecast, table_provenance

DATA = pathlib.Path(__file__).parent.parent / "data"


@pytest.fixture(scope="module")
def same_scenario():
    """tests/data/small_forecast.toml built directly with the API."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return DimmingScenario(Star(2 * u.pc, nh=1e18 * u.cm ** -2),
                               Corona(GaussianDEM(6.301, 0.2, 1e51 * u.cm ** -3), density=2e9 * u.cm ** -3),
                               CME(3e17 * u.g, source_temperature=2 * u.MK), Flare(1e31 * u.erg), "sc-fe9",
                               Observation(8 * u.h, 300 * u.s, 2 * u.h, false_alarm=0.05))


UNITS = {"depth": "1", "depth_energy_flux": "1", "net_depth": "1", "quiescent_rate": "ct / s",
         "quiescent_energy_flux": "erg / (s cm2)", "background": "ct / s", "rate_decrement": "ct / s",
         "flare_peak_excess": "ct / s", "flare_counts_post_window": "ct", "flare_to_dimming": "1", "probability": "1",
         "threshold": "sigma", "probability_vs_mass": "1", "depth_vs_mass": "1", "minimum_detectable_mass": "g",
         "expected": "ct / s", "temperature_response": "ct cm3 / s", "dem_em_weights": "cm-3", "onset_time": "s",
         "recovery_time": "s", "fwhm_duration": "s", "cme_mass": "g", "max_removable_mass": "g", "counts": "ct",
         "counts_without_cme": "ct", "quiescent_luminosity": "erg / s", "counts_post_window": "ct",
         "dimming_snr": "1", "probability_lower": "1", "probability_upper": "1", "probability_vs_mass_lower": "1"}


@pytest.mark.parametrize("name, unit", UNITS.items())
def test_every_variable_has_its_unit(small_forecast, name, unit):
    _, ds = small_forecast
    assert ds[name].attrs["units"] == unit


def test_dimensions_and_provenance(small_forecast, table):
    inputs, ds = small_forecast
    assert dict(ds.sizes) == {"band": 1, "mass": 2, "time": 96, "logT": table.logT.size, "realisation": 1}
    text = (DATA / "small_forecast.toml").read_text()
    assert ds.attrs["scenario_toml"] == text
    assert ds.attrs["scenario_sha256"] == hashlib.sha256(text.encode("utf-8")).hexdigest()
    assert ds.attrs["title"] == "small test star" and ds.attrs["star_name"] == "Pellwyn"
    assert (ds.attrs["n_realisations"], ds.attrs["seed"], ds.attrs["false_alarm"]) == (200, 3, 0.05)
    assert ds.attrs["chianti_version"] == table.provenance["chianti_version"]
    assert ds.attrs["table_content_hash"] == table.provenance["content_hash"]
    assert ds.attrs["best_band"] == "sc-fe9" and ds.attrs["flare_energy_erg"] == pytest.approx(1e31, rel=1e-15)
    # the grid's 1e18 g exceeds what the corona holds: left out and said so
    np.testing.assert_allclose(ds["mass"].values, [1e17, np.sqrt(1e17 * 1e18)], rtol=1e-12)
    assert "1e+18 g exceed the largest removable mass" in ds.attrs["mass_grid_note"]


def test_numbers_equal_the_scenario_api(small_forecast, same_scenario):
    _, ds = small_forecast
    sc = same_scenario
    d = sc.depth()
    np.testing.assert_allclose(ds["depth"].values, d["depth"].values, rtol=1e-12)
    np.testing.assert_allclose(ds["depth_energy_flux"].values, d["depth_energy_flux"].values, rtol=1e-12)
    np.testing.assert_allclose(ds["quiescent_rate"].values, d["quiescent_rate"].values, rtol=1e-12)
    assert float(ds["recovery_time"]) == pytest.approx(sc.recovery_time, rel=1e-12)
    assert float(ds["fwhm_duration"]) == pytest.approx(0.5 * sc.onset + sc.recovery_time * math.log(2), rel=1e-12)
    np.testing.assert_allclose(ds["depth_vs_mass"].values, sc.depths_for(ds["mass"].values), rtol=1e-12)
    # same seed and realisations -> the same Monte Carlo numbers (common random numbers)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        det = sc.detection_probability(200, seed=3)
    np.testing.assert_array_equal(ds["probability"].values, det["probability"].values)
    lo, hi = (float(x) for x in ds.attrs["min_mass_bracket_g"].split())
    mm = sc.minimum_detectable_mass(0.5, bracket=(lo * u.g, hi * u.g), band="sc-fe9", n_realisations=200, seed=3)
    assert float(ds["minimum_detectable_mass"].values[0]) == pytest.approx(float(mm["mass"]), rel=1e-9)


def test_report_numbers_equal_the_scenario_api(small_forecast, same_scenario):
    """What the report needs and the Dataset did not hold: luminosity, post-event counts and S/N, Wilson bounds,
    the instrument of each band."""
    from synthcorona.constants import PARSEC_CM
    from synthcorona.synthesis import band_flux

    _, ds = small_forecast
    sc = same_scenario
    # unabsorbed luminosity in the band limits = 4 pi d^2 x the unabsorbed band flux (synthesis.band_flux)
    lo, hi = float(ds["band_lo"].values[0]), float(ds["band_hi"].values[0])
    f = band_flux(sc.corona.dem, [lo, hi] * u.keV, 2 * u.pc, table=sc.table, density=2e9 * u.cm ** -3)
    lum = 4 * np.pi * (2 * PARSEC_CM) ** 2 * f.to_value(u.erg / u.s / u.cm ** 2)
    assert float(ds["quiescent_luminosity"].values[0]) == pytest.approx(lum, rel=1e-9)
    # absorption by N_H = 1e18 cm-2 only lowers the flux at the observer
    assert float(ds["quiescent_energy_flux"].values[0]) < f.to_value(u.erg / u.s / u.cm ** 2)
    # expected counts (source, flare, background) in the post-event window, summed bin by bin
    lc = sc.light_curve()
    (w0, w1) = (x.to_value(u.s) for x in sc.detection_windows()[1])
    edges = sc.edges
    inside = np.clip(np.minimum(edges[1:], w1) - np.maximum(edges[:-1], w0), 0, None)
    counts = float(((lc["expected"].values[0] + lc["background"].values[0]) * inside).sum())
    deficit = float((lc["dimming_decrement"].values[0] * inside).sum())
    assert float(ds["counts_post_window"].values[0]) == pytest.approx(counts, rel=1e-12)
    assert float(ds["dimming_snr"].values[0]) == pytest.approx(deficit / np.sqrt(counts), rel=1e-12)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        det = sc.detection_probability(200, seed=3)
    np.testing.assert_array_equal(ds["probability_lower"].values, det["probability_lower"].values)
    np.testing.assert_array_equal(ds["probability_upper"].values, det["probability_upper"].values)
    assert list(ds["instrument"].values) == ["sc-fe9"]


def test_dimming_snr_is_deficit_over_root_counts():
    from synthcorona.products.forecast import dimming_snr

    np.testing.assert_allclose(dimming_snr([30.0, 5.0, 1.0], [900.0, 25.0, 0.0]), [1.0, 1.0, np.nan])


def test_flare_summary_is_in_the_forecast(small_forecast, same_scenario, tmp_path):
    """The forecast carries DimmingScenario.flare_summary() (same numbers) with units, also through netCDF."""
    import xarray as xr

    from synthcorona.io.writers import write_netcdf

    _, ds = small_forecast
    fs = same_scenario.flare_summary()
    units = {"peak_flux_1_8A": "W m-2", "implied_class": "", "peak_temperature": "K", "peak_emission_measure": "cm-3",
             "heating_energy": "erg", "radiated_energy_1_8A": "erg", "n_strands": "1"}
    for name, unit in units.items():
        assert ds[name].attrs["units"] == unit and ds[name].ndim == 0
        if name == "implied_class":
            assert str(ds[name].values) == str(fs[name].values) and str(ds[name].values)[0] in "ABCMX"
        else:
            assert float(ds[name]) == pytest.approx(float(fs[name]), rel=1e-12), name
    # the scenario file's 1e31 erg is the heating energy (the class follows from it by the same rule)
    assert float(ds["heating_energy"]) == pytest.approx(1e31, rel=1e-12)
    assert "EM-T relation" in ds.attrs["flare_rule"]
    path = tmp_path / "f.nc"
    write_netcdf(ds[list(units)], path)
    with xr.open_dataset(path) as back:
        assert str(back["implied_class"].values) == str(ds["implied_class"].values)
        assert float(back["peak_flux_1_8A"]) == pytest.approx(float(ds["peak_flux_1_8A"]), rel=1e-12)


def test_onset_is_recorded_and_known_onset_is_an_option(small_forecast, same_scenario):
    """The forecast says how the onset was treated; onset="known" gives the scenario API's known-onset numbers
    (exact threshold of the window test, no calibration error)."""
    inputs, ds = small_forecast
    assert ds.attrs["onset"] == "scan" and ds.attrs["threshold_method"] == "calibrated" and ds.attrs["n_trials"] > 1
    assert np.all(ds["probability_error"].values >= ds["probability_error_calibration"].values)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        known = run_forecast(inputs, onset="known", show_realisations=0)
        det = same_scenario.detection_probability(200, seed=3, onset="known")
    assert known.attrs["onset"] == "known" and known.attrs["threshold_method"] == "exact"
    np.testing.assert_array_equal(known["probability"].values, det["probability"].values)
    assert np.all(known["probability_error_calibration"].values == 0.0)
    with pytest.raises(InputError, match="onset='later' must be 'scan' or 'known'"):
        run_forecast(inputs, onset="later", show_realisations=0)


def test_unbracketed_minimum_mass_is_a_note_with_the_probabilities(tmp_path):
    # a grid of tiny masses: the bracket [1e10/100, 1e11*100] g never reaches P = 0.5
    text = (DATA / "small_forecast.toml").read_text().replace(
        'mass_grid = { min = "1e17 g", max = "1e18 g", points = 3 }', 'mass_grid = ["1e10 g", "1e11 g"]')
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        inputs = read_forecast_file(text=text, name="tiny.toml")
        ds = run_forecast(inputs, show_realisations=0)
    note = str(ds["minimum_detectable_mass_note"].values[0])
    assert note.startswith("not bracketed in [1e+08, 1e+13] g: P(detect) = ")
    assert "at the lower end and" in note and note.endswith("at the upper end")
    assert np.isnan(ds["minimum_detectable_mass"].values[0]) and "counts" not in ds


def test_forecast_tables_have_units(small_forecast):
    _, ds = small_forecast
    bands, vs_mass = forecast_tables(ds)
    assert list(bands["band"]) == ["sc-fe9"]
    assert bands["quiescent_rate"].unit == u.ct / u.s and bands["minimum_detectable_mass"].unit == u.g
    assert bands["depth"][0] == pytest.approx(float(ds["depth"].values[0]), rel=1e-15)
    assert len(vs_mass) == 2 and vs_mass["mass"].unit == u.g
    np.testing.assert_array_equal(vs_mass["probability"], ds["probability_vs_mass"].values.ravel())
    assert bands.meta["seed"] == 3 and bands.meta["cme_mass_g"] == pytest.approx(3e17, rel=1e-15)


@pytest.mark.parametrize("n, false_alarm, text", [
    (99, None, r"realisations=99 is outside the valid range \[100, 1000000\]"),
    (1_000_001, None, "outside the valid range"),
    (999, 0.01, "give at least 1000"),
    (199, 0.05, "give at least 200"),
])
def test_check_realisations(n, false_alarm, text):
    with pytest.raises(InputError, match=text) as exc:
        check_realisations(n, false_alarm)
    assert exc.value.argument == "realisations"


def test_too_few_realisations_refused_before_computing(small_forecast):
    inputs, _ = small_forecast
    with pytest.raises(InputError, match="give at least 200"):
        run_forecast(inputs, realisations=150)


def test_table_argument_is_used_and_recorded(small_forecast, tmp_path, table):
    import shutil

    inputs, ds = small_forecast
    copy = tmp_path / "copy.nc"
    shutil.copyfile(table.path, copy)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        other = run_forecast(inputs, table=copy, show_realisations=0)
    assert other.attrs["table_file"] == str(copy.resolve()) and ds.attrs["table_file"] == str(table.path)
    np.testing.assert_array_equal(other["depth"].values, ds["depth"].values)   # same content, same numbers
    assert table_provenance(copy)["table_content_hash"] == table.provenance["content_hash"]


def test_variability_table_reaches_the_forecast():
    # the same file with and without a [variability] table (damped random walk, Kelly, Bechtold & Siemiginowska
    # 2009): the variability raises the calibrated threshold and lowers P(detect); the forecast records it
    text = (DATA / "small_forecast.toml").read_text()
    n = 1000
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        plain = run_forecast(read_forecast_file(text=text, name="plain.toml"), realisations=n)
        varied = run_forecast(read_forecast_file(text=text + '\n[variability]\namplitude = 0.1\ntimescale = "1 h"\n',
                                                 name="varied.toml"), realisations=n)
    a, b = float(plain["probability"].values[0]), float(varied["probability"].values[0])
    assert b < a - 3 * math.sqrt(a * (1 - a) / n + b * (1 - b) / n), (a, b)
    assert float(varied["threshold"].values[0]) > float(plain["threshold"].values[0])
    assert np.all(varied["probability_vs_mass"].values <= plain["probability_vs_mass"].values)
    assert varied.attrs["red_noise"] == "damped random walk, amplitude 0.1, timescale 3600 s"
    assert plain.attrs["red_noise"] == "none"
