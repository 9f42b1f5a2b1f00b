"""Tests of synthcorona.instruments.readers: load_instrument, the one entry point for generic
instruments and response files (the file formats themselves are tested in test_ogip.py and
test_area_files.py).
"""
import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

from synthcorona.errors import InputError, InstrumentFileError
from synthcorona.instruments import load_generic, load_instrument

PH = u.ph / (u.s * u.cm**2)


def test_load_instrument_accepts_generic_names_and_files(tmp_path):
    assert load_instrument("sc-fe12") is load_generic("sc-fe12")
    with_band = load_instrument("sc-softx", bands={"oxygen": [0.5, 0.7] * u.keV})
    assert "oxygen" in with_band.bands and "oxygen" not in load_generic("sc-softx").bands
    t = QTable()
    t["E"] = [1.0, 2.0, 3.0] * u.keV
    t["A"] = [0.0, 10.0, 10.0] * u.cm**2
    t.write(tmp_path / "e.ecsv")
    inst = load_instrument(tmp_path / "e.ecsv")
    e = np.linspace(1.0, 3.0, 11)
    # analytic integral of the piecewise-linear curve: 5 + 10 = 15 counts/s for 1 ph/s/cm2/keV
    np.testing.assert_allclose(inst.count_rate_from_spectrum(np.diff(e) * PH, e * u.keV).value, 15.0, rtol=1e-12)
    with pytest.raises(InputError, match="'nowhere.arf' is neither an existing response file nor a generic "
                                         "instrument name; generic instruments: sc-softx, sc-fe9"):
        load_instrument("nowhere.arf")
    with pytest.raises(InputError, match="rmf= cannot be combined"):
        load_instrument("sc-softx", rmf="x.rmf")


def test_load_instrument_refuses_what_it_cannot_read(tmp_path):
    missing = tmp_path / "nothing.arf"
    with pytest.raises(InstrumentFileError, match="does not exist") as exc:
        load_instrument(missing)
    assert "nothing.arf" in str(exc.value) and "sc-softx" in str(exc.value)   # names the file and the generic names
    text = tmp_path / "t.txt"
    text.write_text("# units: keV cm2\n1 1\n2 1\n")
    with pytest.raises(InstrumentFileError, match="rmf= can only be combined with an OGIP ARF"):
        load_instrument(text, rmf=text)
