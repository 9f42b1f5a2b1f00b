"""``synthcorona forecast`` on the example scenarios, against the Python API."""
import pathlib
import warnings

import astropy.units as u
import numpy as np
import pytest
import xarray as xr
from astropy.table import QTable

import synthcorona.products.forecast as forecast_product
from synthcorona.cli import main

EXAMPLES = pathlib.Path(__file__).parent.parent.parent / "examples" / "scenarios"
SCENARIOS = ["young_star_softx", "m_dwarf_flare_euv", "sun_as_a_star_euv"]
SEED = 7
N_REAL = 1000   # the fewest realisations that calibrate a 1 % false-alarm threshold (10 null exceedances)


@pytest.fixture(scope="module", params=SCENARIOS)
def run(request, tmp_path_factory):
    """Run the forecast command once per example, keeping the scenario it built for API comparisons."""
    name = request.param
    out = tmp_path_factory.mktemp(name)
    built = {}
    real_run = forecast_product.run_forecast

    def capture(inputs, **k):
        built["inputs"] = inputs
        return real_run(inputs, **k)

    mp = pytest.MonkeyPatch()
    mp.setattr(forecast_product, "run_forecast", capture)
    extra = ["--report", "both"] if name == "young_star_softx" else ["--no-figures", "--report", "md"]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            rc = main(["forecast", str(EXAMPLES / f"{name}.toml"), "--out", str(out), "--realisations", str(N_REAL),
                       "--seed", str(SEED)] + extra)
    finally:
        mp.undo()
    return {"name": name, "rc": rc, "out": out, "inputs": built["inputs"], "sc": built["inputs"].scenario}


def test_forecast_files_equal_the_api(run):
    assert run["rc"] == 0
    out, sc, inputs = run["out"], run["sc"], run["inputs"]
    bands = QTable.read(out / "bands.ecsv")
    assert list(bands["band"]) == sc.labels
    d = sc.depth()
    np.testing.assert_allclose(bands["depth"], d["depth"].values, rtol=1e-12)
    np.testing.assert_allclose(bands["quiescent_rate"].to_value(u.ct / u.s), d["quiescent_rate"].values, rtol=1e-12)
    np.testing.assert_allclose(bands["recovery_time"].to_value(u.s), sc.recovery_time, rtol=1e-12)
    # same seed and realisations -> the same Monte Carlo numbers
    det = sc.detection_probability(N_REAL, statistic=inputs.montecarlo.statistic, seed=SEED)
    np.testing.assert_array_equal(bands["probability"], det["probability"].values)
    vs = QTable.read(out / "detection_vs_mass.ecsv")
    m = vs["mass"].to_value(u.g)
    k = len(m) // 2
    r = sc.detection_probability(N_REAL, statistic=inputs.montecarlo.statistic, seed=SEED, mass=m[k] * u.g)
    np.testing.assert_array_equal(vs["probability"][vs["mass"].to_value(u.g) == m[k]], r["probability"].values)
    # minimum detectable mass of the best band, same bracket and seed
    best = sc.best_band()
    i = sc.labels.index(best)
    ds = xr.open_dataset(out / "forecast.nc", engine="h5netcdf")
    lo, hi = (float(x) for x in ds.attrs["min_mass_bracket_g"].split())
    mm = sc.minimum_detectable_mass(inputs.target_probability, bracket=(lo * u.g, hi * u.g), band=best,
                                    n_realisations=N_REAL, seed=SEED)
    assert bands["minimum_detectable_mass"][i].to_value(u.g) == pytest.approx(float(mm["mass"]), rel=1e-9)
    # netCDF: units and provenance
    assert ds["depth"].attrs["units"] == "1" and ds["quiescent_rate"].attrs["units"] == "ct / s"
    assert ds.attrs["chianti_version"] == "10.1"
    from synthcorona import load_emissivity

    assert ds.attrs["table_content_hash"] == load_emissivity().provenance["content_hash"]
    assert ds.attrs["seed"] == SEED and ds.attrs["n_realisations"] == N_REAL
    assert "[cme]" in ds.attrs["scenario_toml"]
    np.testing.assert_allclose(ds["depth"].values, d["depth"].values, rtol=1e-12)
    ds.close()
    assert (out / "bands.csv").read_text().startswith("band,")
    assert (out / "report.md").stat().st_size > 1000


def test_sanity_limits(run):
    bands = QTable.read(run["out"] / "bands.ecsv")
    depth = np.asarray(bands["depth"])
    assert np.all(depth >= 0) and np.all(depth <= 1)
    vs = QTable.read(run["out"] / "detection_vs_mass.ecsv")
    for b in set(vs["band"]):
        p = np.asarray(vs["probability"][vs["band"] == b])
        # common random numbers and an inversion sampler: P(detect) never falls as the mass grows
        assert np.all(np.diff(p) >= 0), (b, p)
    if run["name"] == "young_star_softx":
        # Plasma at 1-3 MK emits nothing at 6-10 keV (exp(-E/kT), kT ~ 0.2 keV; common knowledge): the band that
        # sees only the > 10 MK component does not dim when the CME removes 2.5 MK plasma.
        hot = float(bands["depth"][list(bands["band"]).index("sc-softx:hot")])
        soft = float(bands["depth"][list(bands["band"]).index("sc-softx:soft")])
        assert hot < 1e-6 and hot < 1e-4 * soft and soft > 1e-3
    if run["name"] == "sun_as_a_star_euv":
        # Sun-as-a-star EUV dimmings in Fe IX-XII lines are ~1-5 % (Mason et al. 2014, ApJ 789, 61; Mason et al.
        # 2016, ApJ 830, 20; from memory); we require the broad range 0.1-10 % for the 1e15 g CME.
        d171 = float(bands["depth"][list(bands["band"]).index("sc-fe9")])
        assert 1e-3 < d171 < 0.1
    if run["name"] == "m_dwarf_flare_euv":
        assert float(bands["flare_peak_excess"][0].to_value(u.ct / u.s)) > 0


def test_report_and_figures(run, capsys):
    if run["name"] != "young_star_softx":
        pytest.skip("figures and HTML are written for one example only (time)")
    out = run["out"]
    for f in ("effective_area.png", "light_curves.png", "detection_vs_mass.png", "temperature_responses.png"):
        assert (out / f).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    md = (out / "report.md").read_text()
    for text in ("## Assumptions and limitations", "CHIANTI 10.1", "light_curves.png", "Minimum detectable mass"):
        assert text in md
    html = (out / "report.html").read_text()
    assert html.count("data:image/png;base64,") == 4
    assert "http://" not in html and "https://" not in html   # self-contained


@pytest.mark.parametrize("argv, text", [
    (["forecast", "nowhere.toml"], "nowhere.toml"),
    (["forecast", "BAD", "--realisations", "10"], "--realisations"),
    (["forecast", "BAD"], "[cme] mass"),
    (["forecast", "UNKNOWN"], "[star] colour"),
])
def test_bad_input_exits_2_with_one_line(argv, text, tmp_path, capsys):
    src = (EXAMPLES / "young_star_softx.toml").read_text()
    bad = tmp_path / "bad.toml"
    bad.write_text(src.replace('mass = "1e18 g"', 'mass = "-1 g"'))
    unknown = tmp_path / "unknown.toml"
    unknown.write_text(src.replace('distance = "12 pc"', 'distance = "12 pc"\ncolour = "yellow"'))
    argv = [str(bad) if a == "BAD" else str(unknown) if a == "UNKNOWN" else a for a in argv]
    rc = main(argv + ["--out", str(tmp_path / "o")])
    assert rc == 2
    err = capsys.readouterr().err.strip()
    assert text in err and "\n" not in err and "Traceback" not in err


def test_realisations_override_is_checked_before_any_computation(tmp_path, capsys, monkeypatch):
    from synthcorona.io.forecast_file import ForecastInputs

    def no_scenario(*a, **k):
        raise AssertionError("the scenario was built before --realisations was checked")

    monkeypatch.setattr(ForecastInputs, "with_scenario", no_scenario)
    # young_star_softx has false_alarm = 0.01: 10 expected false alarms need 1000 realisations
    rc = main(["forecast", str(EXAMPLES / "young_star_softx.toml"), "--realisations", "999", "--out",
               str(tmp_path / "o")])
    err = capsys.readouterr().err.strip()
    assert rc == 2 and "--realisations=999" in err and "1000" in err and "Traceback" not in err
    assert not (tmp_path / "o").exists()
