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
                               Corona(GaussianDEM(np.log10(2e6), 0.2, 1e51 * u.cm ** -3), density=2e9 * u.cm ** -3),
                               CME(3e17 * u.g, source_temperature=2 * u.MK), Flare(1e31 * u.erg), "sc-fe9",
                               Observation(8 * u.h, 300 * u.s, 2 * u.h, false_alarm=0.05))


UNITS = {"depth": "1", "depth_energy_flux": "1", "net_depth": "1", "quiescent_rate": "ct / s",
         "quiescent_energy_flux": "erg / (s cm2)", "background": "ct / s", "rate_decrement": "ct / s",
         "flare_peak_excess": "ct / s", "flare_counts_post_window": "ct", "flare_to_dimming": "1", "probability": "1",
         "threshold": "sigma", "probability_vs_mass": "1", "depth_vs_mass": "1", "minimum_detectable_mass": "g",
         "expected": "ct / s", "temperature_response": "ct cm3 / s", "dem_em_weights": "cm-3", "onset_time": "s",
         "recovery_time": "s", "fwhm_duration": "s", "cme_mass": "g", "max_removable_mass": "g", "counts": "ct",
         "counts_without_cme": "ct"}


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
        inputs = read_forecast_file(text, name="tiny.toml")
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
