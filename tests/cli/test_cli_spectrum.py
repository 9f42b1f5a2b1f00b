"""``synthcorona spectrum`` on the example scenarios, against the Python API."""
import pathlib

import astropy.units as u
import pytest
from astropy.table import QTable

from synthcorona.cli import main
from synthcorona.io.forecast_file import read_forecast_file

EXAMPLES = pathlib.Path(__file__).parent.parent.parent / "examples" / "scenarios"
SCENARIOS = ["young_star_softx", "m_dwarf_flare_euv", "sun_as_a_star_euv"]


@pytest.mark.parametrize("name", SCENARIOS)
def test_spectrum_equals_the_api(name, tmp_path, capsys):
    from synthcorona import band_flux
    from synthcorona.products.spectrum import emission_density

    rc = main(["spectrum", str(EXAMPLES / f"{name}.toml"), "--out", str(tmp_path), "--no-figures"])
    assert rc == 0
    fi = read_forecast_file(EXAMPLES / f"{name}.toml", build=False)
    n_e, _ = emission_density(fi)
    fl = QTable.read(tmp_path / "band_fluxes.ecsv")
    b = fi.output["flux_bands"][0]
    f = band_flux(fi.corona.dem, band=b, distance=fi.star.distance, abundances=fi.corona.abundances, density=n_e)
    assert fl["flux"][0].to_value(u.erg / u.s / u.cm ** 2) == pytest.approx(f.to_value(u.erg / u.s / u.cm ** 2),
                                                                               rel=1e-12)
    cr = QTable.read(tmp_path / "count_rates.ecsv")
    e = fi.instruments[0]
    r = e.instrument.count_rate(fi.corona.dem, distance=fi.star.distance, nh=fi.star.nh, band=e.bands[0],
                                abundances=fi.corona.abundances, density=n_e)
    assert cr["count_rate"][0].to_value(u.ct / u.s) == pytest.approx(float(r.to_value(u.ct / u.s)), rel=1e-12)
    assert (tmp_path / "spectrum.nc").stat().st_size > 1000
    assert (tmp_path / "count_rates.csv").read_text().splitlines()[0] == "label,instrument,band,count_rate [ct / s]"
    assert "ct/s" in capsys.readouterr().out


def test_bad_scenario_exits_2_with_one_line(tmp_path, capsys):
    src = (EXAMPLES / "young_star_softx.toml").read_text()
    bad = tmp_path / "bad.toml"
    bad.write_text(src.replace('mass = "1e18 g"', 'mass = "-1 g"'))
    rc = main(["spectrum", str(bad), "--out", str(tmp_path / "o")])
    assert rc == 2
    err = capsys.readouterr().err.strip()
    assert "[cme] mass" in err and "\n" not in err and "Traceback" not in err
