"""``synthcorona emission`` end to end, against the Python API."""
import astropy.units as u
import numpy as np
import pytest
import xarray as xr
from astropy.table import QTable

import synthcorona as sc
from synthcorona.cli import main


def test_emission_writes_files_matching_the_api(tmp_path, table, capsys):
    rc = main(["emission", "--out", str(tmp_path), "--band", "0.1-2.4 keV", "--band", "171-175 Angstrom",
               "--peak-logT", "6.4", "--width-logT", "0.2", "--total-em", "2e51 cm-3", "--distance", "5 pc",
               "--wavelength-range", "100", "200", "--wavelength-bin", "0.05 Angstrom"])
    assert rc == 0
    qt = QTable.read(tmp_path / "band_fluxes.ecsv")
    dem = sc.GaussianDEM(peak_logT=6.4, width_logT=0.2, total_em=2e51 * u.cm ** -3)
    for row, band in zip(qt, [(0.1, 2.4) * u.keV, (171, 175) * u.AA]):
        f = sc.band_flux(dem, band=band, distance=5 * u.pc, table=table)
        np.testing.assert_allclose(row["flux"].to_value(u.erg / u.s / u.cm ** 2), f.value, rtol=1e-12)
    # the spectrum is synthesize() on 100-200 Angstrom in 0.05 Angstrom bins
    spec = xr.load_dataarray(tmp_path / "spectrum.nc", engine="h5netcdf")
    ref = sc.synthesize(dem, wavelength=np.arange(100.0, 200.0, 0.05) * u.AA, table=table, density=1e10 * u.cm ** -3,
                        distance=5 * u.pc)
    np.testing.assert_allclose(spec.values, ref.values, rtol=1e-12)
    assert spec.attrs["table_content_hash"] == table.provenance["content_hash"]
    assert (tmp_path / "spectrum.png").stat().st_size > 1000
    assert "flux" in capsys.readouterr().out
    # the CSV the user guide promises, next to the ECSV, with the same numbers
    csv = QTable.read(tmp_path / "band_fluxes.csv", format="ascii.csv")
    np.testing.assert_allclose(np.asarray(csv[csv.colnames[1]], dtype=float), qt["flux"].value, rtol=1e-12)


def test_without_distance_only_luminosities_are_written(tmp_path, table, capsys):
    rc = main(["emission", "--out", str(tmp_path), "--band", "0.1-2.4 keV", "--temperature", "4 MK",
               "--total-em", "1e51 cm-3", "--wavelength-range", "100", "110", "--wavelength-bin", "0.5 Angstrom"])
    assert rc == 0
    qt = QTable.read(tmp_path / "band_fluxes.ecsv")
    assert "flux" not in qt.colnames
    dem = sc.IsothermalDEM(4 * u.MK, 1e51 * u.cm ** -3)
    lum = sc.luminosity(dem, band=(0.1, 2.4) * u.keV, table=table, density=1e10 * u.cm ** -3)
    assert qt["luminosity"][0].to_value(u.erg / u.s) == pytest.approx(lum.to_value(u.erg / u.s), rel=1e-12)
    spec = xr.load_dataarray(tmp_path / "spectrum.nc", engine="h5netcdf")
    # the spectrum is a luminosity density: synthesize() without a distance
    ref = sc.synthesize(dem, wavelength=np.arange(100.0, 110.0, 0.5) * u.AA, table=table,
                        density=1e10 * u.cm ** -3)
    np.testing.assert_allclose(spec.values, ref.values, rtol=1e-12)
    assert u.Unit(spec.attrs["units"]).is_equivalent(u.erg / u.s / u.AA)
    assert "luminosities only" in capsys.readouterr().out


def test_former_em_option_is_an_error_naming_the_new_one(tmp_path, capsys):
    with pytest.raises(SystemExit) as exc:
        main(["emission", "--out", str(tmp_path), "--em", "1e51 cm-3"])
    assert exc.value.code == 2
    assert "--em was renamed --total-em" in capsys.readouterr().err


@pytest.mark.parametrize("limits", [
    ["--wavelength-range", "10 Angstrom", "40 Angstrom"],
    ["--wavelength-range", "1", "4", "--wavelength-unit", "nm"],
    # 10 and 40 Angstrom as photon energies: E [keV] = 12.398419843320026 / lambda [Angstrom] (CODATA 2018 hc)
    ["--wavelength-range", f"{12.398419843320026 / 40} keV", f"{12.398419843320026 / 10} keV"],
])
def test_wavelength_range_forms_give_the_same_spectrum(tmp_path, limits):
    base = ["emission", "--temperature", "5 MK", "--band", "0.1-2.4 keV", "--wavelength-bin", "0.5 Angstrom"]
    assert main(base + ["--out", str(tmp_path / "ref"), "--wavelength-range", "10", "40"]) == 0
    assert main(base + ["--out", str(tmp_path / "alt")] + limits) == 0
    ref = xr.load_dataarray(tmp_path / "ref" / "spectrum.nc", engine="h5netcdf")
    alt = xr.load_dataarray(tmp_path / "alt" / "spectrum.nc", engine="h5netcdf")
    assert ref.sizes["wavelength"] == 60          # 10-40 Angstrom in 0.5 Angstrom bins
    np.testing.assert_allclose(alt["wavelength"].values, ref["wavelength"].values, rtol=1e-9)
    np.testing.assert_allclose(alt.values, ref.values, rtol=1e-9)


@pytest.mark.parametrize("args, text", [
    (["--distance", "10 g"], "--distance"),
    (["--total-em", "lots"], "--total-em"),
    (["--band", "0.1 2.4 keV"], "--band"),
    (["--band", "2.4-0.1 keV"], "--band"),
    (["--density", "1e20 cm-3"], "density"),
    (["--wavelength-range", "40", "10"], "--wavelength-range"),
    (["--wavelength-range", "10 kg", "40 kg"], "--wavelength-range"),
    (["--wavelength-range", "ten", "40"], "--wavelength-range"),
    (["--wavelength-range", "10", "40", "--wavelength-unit", "parsnip"], "--wavelength-unit"),
    (["--table", "absent.nc"], "--table"),
])
def test_emission_bad_input_exits_2_with_one_line(tmp_path, capsys, args, text):
    rc = main(["emission", "--out", str(tmp_path)] + args)
    assert rc == 2
    err = capsys.readouterr().err.strip()
    assert text in err and "\n" not in err and "Traceback" not in err
