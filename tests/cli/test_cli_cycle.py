"""``synthcorona cycle`` and ``synthcorona list`` end to end, against the Python API."""
import pathlib

import astropy.units as u
import pytest

from synthcorona.cli import main
from synthcorona.dem import GaussianDEM
from synthcorona.errors import ScenarioError
from synthcorona.instruments import load_generic
from synthcorona.instruments.conversion import convert_count_rate
from synthcorona.io.cycle_file import read_cycle_file
from synthcorona.synthesis import band_flux

EXAMPLE = pathlib.Path(__file__).parent.parent.parent / "examples" / "cycle" / "corvanne_cycle.toml"
MINIMAL = (pathlib.Path(__file__).parent.parent / "data" / "minimal_cycle.toml").read_text()
FLUX = u.erg / u.s / u.cm ** 2


def test_cli_end_to_end_matches_api(tmp_path, capsys):
    import xarray as xr
    from astropy.table import QTable

    from synthcorona.products.cycle import phase_scenario

    out = tmp_path / "out"
    assert main(["cycle", str(EXAMPLE), "--out", str(out), "--realisations", "1000"]) == 0
    text = capsys.readouterr().out
    assert "Corvanne" in text and "P(detect)" in text
    for name in ("cycle.nc", "cycle_phases.ecsv", "cycle_phases.csv", "cycle_amplitudes.ecsv", "cycle_fluxes.png",
                 "cycle_count_rates.png", "cycle_hardness.png", "cycle_conversion.png", "cycle_dimming.png",
                 "cycle_report.md", "cycle_report.html"):
        assert (out / name).stat().st_size > 0, name
    ds = xr.load_dataset(out / "cycle.nc", engine="h5netcdf")
    per = QTable.read(out / "cycle_phases.ecsv")
    inputs = read_cycle_file(EXAMPLE)
    star, dens = inputs.star, inputs.density
    assert ds.sizes["phase"] == 6 and list(ds["label"].values) == [p.label for p in inputs.phases]
    # Independent numbers for the first phase (a Gaussian DEM in the file).
    dem0 = GaussianDEM(6.2041, 0.2, 6e50 * u.cm ** -3)   # peak_logT = 6.2041 (1.6 MK) in the file
    f0 = band_flux(dem0, [0.1, 2.4] * u.keV, 3 * u.pc, density=2e9 * u.cm ** -3).to_value(FLUX)
    assert ds["flux"].sel(band="0.1-2.4 keV").values[0] == pytest.approx(f0, rel=1e-9)
    assert per["flux[0.1-2.4 keV]"][0].to_value(FLUX) == pytest.approx(f0, rel=1e-9)
    softx = load_generic("sc-softx")
    r0 = softx.count_rate(dem0, distance=3 * u.pc, nh=3e17 * u.cm ** -2, band="broad", density=2e9 * u.cm ** -3).value
    assert ds["count_rate"].sel(channel="sc-softx:broad").values[0] == pytest.approx(r0, rel=1e-9)
    assert per["count_rate[sc-softx:broad]"][0].to_value(u.ct / u.s) == pytest.approx(r0, rel=1e-9)
    # The 'early rise' phase is a measured flux: reproduced.
    assert ds["flux"].sel(band="0.1-2.4 keV").values[1] == pytest.approx(2.0e-11, rel=1e-6)
    # Conversion: 1.5 ct/s in sc-softx:broad -> sc-fe12, as convert_count_rate gives for that phase's DEM.
    dems = [p.resolve(star.distance, abundances=inputs.abundances, density=dens) for p in inputs.phases]
    conv = convert_count_rate(1.5 * u.ct / u.s, dems[3], "sc-softx:broad", "sc-fe12", nh=star.nh, density=dens)
    assert ds["converted_rate"].values[3] == pytest.approx(conv.rate.value, rel=1e-9)
    assert per["converted_flux"][3].to_value(FLUX) == pytest.approx(conv.flux.to_value(FLUX), rel=1e-9)
    # Dimming at the first phase: the reference scenario with the phase DEM, same seed.
    scen = phase_scenario(inputs.reference, dems[0], star)
    det = scen.detection_probability(n_realisations=1000, seed=inputs.seed)
    assert ds["detection_probability"].values[0, 0] == pytest.approx(float(det["probability"].values[0]), abs=0)
    assert ds["dimming_depth"].values[0, 0] == pytest.approx(float(scen.depth()["depth"].values[0]), rel=1e-12)
    assert ds.attrs["table_content_hash"] and ds.attrs["table_chianti_version"]
    amp = QTable.read(out / "cycle_amplitudes.ecsv")
    row = [r for r in amp if r["quantity"] == "flux" and r["item"] == "0.1-2.4 keV"][0]
    assert row["amplitude"] == pytest.approx(float(ds["flux_amplitude"].sel(band="0.1-2.4 keV")), rel=1e-12)


@pytest.mark.parametrize("change, key", [
    (("[star]\n", "[star]\ncolour = \"yellow\"\n"), "colour"),                     # unknown key
    (("distance = \"5 pc\"\n", ""), "distance"),                                    # missing key
    (("temperature = \"3 MK\"", "temperature = \"3 pc\""), "temperature"),          # bad unit
    (("flux = \"1e-12 erg s-1 cm-2\"", "flux = \"1e-12 W\""), "flux"),               # bad unit
    (("phase = 0.5", "phase = 1.5"), "phase"),                                      # out of range
    (("label = \"b\"", "label = \"a\""), "label"),                                  # duplicate
])
def test_malformed_cycle_files_name_the_key(tmp_path, capsys, change, key):
    text = MINIMAL.replace(*change, 1)
    assert text != MINIMAL
    with pytest.raises(ScenarioError, match=key):
        read_cycle_file(text=text, name="bad.toml")
    f = tmp_path / "bad.toml"
    f.write_text(text)
    assert main(["cycle", str(f), "--out", str(tmp_path / "o"), "--no-figures"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and key in err and "bad.toml" in err and "Traceback" not in err


def test_phase_outside_the_table_names_file_and_phase(tmp_path, capsys):
    f = tmp_path / "hot.toml"
    f.write_text(MINIMAL.replace('temperature = "3 MK"', 'temperature = "5e8 K"'))
    assert main(["cycle", str(f), "--out", str(tmp_path / "o"), "--no-figures"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "hot.toml" in err and "phase 'b'" in err and "temperature" in err


def test_realisations_override_is_checked_before_any_computation(tmp_path, capsys, monkeypatch):
    from synthcorona.io.cycle_file import CycleInputs

    def no_run(*a, **k):
        raise AssertionError("the comparison ran before --realisations was checked")

    monkeypatch.setattr(CycleInputs, "run", no_run)
    # the reference scenario has false_alarm = 0.01: 10 expected false alarms need 1000 realisations
    assert main(["cycle", str(EXAMPLE), "--out", str(tmp_path / "o"), "--realisations", "999"]) == 2
    err = capsys.readouterr().err.strip()
    assert "--realisations=999" in err and "1000" in err and "Traceback" not in err
    assert not (tmp_path / "o").exists()


def test_list_command_runs(capsys):
    assert main(["list"]) == 0
    text = capsys.readouterr().out
    for word in ("sc-softx:hard", "sc-fe9", "coronal", "gaussian", "CHIANTI", "content_hash"):
        assert word in text, word
    assert main(["list", "abundances"]) == 0
    assert "sc-softx" not in capsys.readouterr().out
