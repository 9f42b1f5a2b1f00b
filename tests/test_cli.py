"""The command line, end to end, against the Python API."""
import pathlib

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

import synthcorona as sc
from synthcorona.cli import main


def test_emission_writes_files_matching_the_api(tmp_path, table, capsys):
    rc = main(["emission", "--out", str(tmp_path), "--band", "0.1-2.4 keV", "--band", "171-175 Angstrom",
               "--peak-logT", "6.4", "--width-logT", "0.2", "--em", "2e51 cm-3", "--distance", "5 pc",
               "--wmin", "100", "--wmax", "200", "--wstep", "0.05"])
    assert rc == 0
    qt = QTable.read(tmp_path / "band_fluxes.ecsv")
    dem = sc.GaussianDEM(peak_logT=6.4, width_logT=0.2, total_em=2e51 * u.cm ** -3)
    for row, band in zip(qt, [(0.1, 2.4) * u.keV, (171, 175) * u.AA]):
        f = sc.band_flux(dem, band=band, distance=5 * u.pc, table=table)
        np.testing.assert_allclose(row["flux"].to_value(u.erg / u.s / u.cm ** 2), f.value, rtol=1e-12)
    assert (tmp_path / "spectrum.png").stat().st_size > 1000
    assert "flux" in capsys.readouterr().out


@pytest.mark.parametrize("args, text", [
    (["--distance", "10 g"], "--distance"),
    (["--em", "lots"], "--em"),
    (["--band", "0.1 to 2.4 keV"], "--band"),
    (["--density", "1e20 cm-3"], "density"),
])
def test_emission_bad_input_exits_2_with_one_line(tmp_path, capsys, args, text):
    rc = main(["emission", "--out", str(tmp_path)] + args)
    assert rc == 2
    err = capsys.readouterr().err.strip()
    assert text in err and "\n" not in err and "Traceback" not in err


def test_table_option_and_environment_select_the_emissivity_table(tmp_path, monkeypatch, capsys):
    import shutil

    from synthcorona.emissivity import load_emissivity
    from synthcorona.settings import TABLE_ENV

    embedded = load_emissivity()
    copy = tmp_path / "my_table.nc"
    shutil.copyfile(embedded.path, copy)
    monkeypatch.setenv(TABLE_ENV, str(copy))
    assert load_emissivity().path.resolve() == copy.resolve()
    monkeypatch.setenv(TABLE_ENV, str(tmp_path / "absent.nc"))
    with pytest.raises(Exception, match="SYNTHCORONA_TABLE=.*absent.nc: no such emissivity table file"):
        load_emissivity()
    monkeypatch.delenv(TABLE_ENV)
    scen = str(pathlib.Path(__file__).parent.parent / "examples" / "scenarios" / "sun_as_a_star_euv.toml")
    rc = main(["spectrum", scen, "--table", str(tmp_path / "absent.nc"), "--out", str(tmp_path / "o")])
    err = capsys.readouterr().err
    assert rc == 2 and "--table" in err and "absent.nc" in err and "Traceback" not in err
    assert main(["spectrum", scen, "--table", str(copy), "--out", str(tmp_path / "o"), "--no-figures"]) == 0
    written = QTable.read(tmp_path / "o" / "band_fluxes.ecsv")
    assert written.meta["table"] == str(copy.resolve())      # the run used the given table ...
    assert TABLE_ENV not in __import__("os").environ           # ... and left the environment as it was
