"""Tests of synthcorona.instruments.area_files (area tables in ECSV or text, CHIANTI ``.area`` files).

File-format references: CHIANTI ancillary_data/README (wavelength in Angstrom, area in cm^2) and
this package's own ``# units:`` convention for text tables.  Expected numbers are analytic
integrals computed here with numpy, or values copied from the files written in the test.
"""
import os

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

from synthcorona.constants import HC_KEV_ANGSTROM
from synthcorona.errors import InstrumentFileError
from synthcorona.instruments.area_files import chianti_area_names, read_area_table, read_chianti_area
from synthcorona.instruments.readers import load_instrument

PH = u.ph / (u.s * u.cm**2)


# ---------------------------------------------------------------- area tables
def test_ecsv_wavelength_m2(tmp_path):
    t = QTable()
    t["wavelength"] = [10.0, 20.0, 30.0] * u.AA
    t["area"] = [1e-4, 3e-4, 2e-4] * u.m**2
    p = tmp_path / "a.ecsv"
    t.write(p)
    inst = read_area_table(p)
    # 1 m^2 = 1e4 cm^2: samples 1, 3, 2 cm^2; linear in wavelength: 15 A -> 2 cm^2
    np.testing.assert_allclose(inst.effective_area([10.0, 15.0, 30.0] * u.AA).to_value(u.cm**2), [1.0, 2.0, 2.0],
                               rtol=1e-12)
    assert inst.name == "a" and inst.provenance["files"][0]["sha256"]


def test_ecsv_energy(tmp_path):
    t = QTable()
    t["E"] = [1.0, 2.0, 3.0] * u.keV
    t["A"] = [0.0, 10.0, 10.0] * u.cm**2
    p = tmp_path / "e.ecsv"
    t.write(p)
    inst = load_instrument(p, bands={"b": [1.0, 3.0] * u.keV})
    e = np.linspace(1.0, 3.0, 11)
    # analytic integral of the piecewise-linear curve: 5 + 10 = 15 counts/s for 1 ph/s/cm2/keV
    np.testing.assert_allclose(inst.count_rate_from_spectrum(np.diff(e) * PH, e * u.keV, band="b").value, 15.0,
                               rtol=1e-12)


def test_text_table_with_units_header(tmp_path):
    p = tmp_path / "t.txt"
    p.write_text("# my filter\n# units: keV cm2\n1.0 5.0\n2.0 5.0\n")
    inst = read_area_table(p)
    np.testing.assert_allclose(inst.effective_area(1.5 * u.keV).value, 5.0)
    q = tmp_path / "t.dat"
    q.write_text("1.0 5.0\n2.0 5.0\n")
    with pytest.raises(InstrumentFileError, match=r"t.dat' has no units: add a header line '# units:"):
        read_area_table(q)
    inst2 = read_area_table(q, units=("keV", "m2"))
    np.testing.assert_allclose(inst2.effective_area(1.5 * u.keV).value, 5e4)


@pytest.mark.parametrize("text,match", [
    ("# units: keV keV\n1 1\n2 1\n", "second column 'col2' has units 'keV', which is not an area"),
    ("# units: s cm2\n1 1\n2 1\n", "first column 'col1' has units 's'"),
    ("# units: keV cm2\n1 1\n3 1\n2 1\n", r"not sorted: row 3 \(2 keV\) follows row 2"),
    ("# units: keV cm2\n1 1\n2 -1\n", "negative effective area -1 cm"),
    ("# units: keV cm2\n1 1 1\n2 1 1\n", "has 3 columns; expected 2"),
    ("# units: keV cm2\n1 1\n2 x\n", "cannot read two numeric columns"),
    ("# units: keV\n1 1\n2 1\n", "must name exactly two units"),
])
def test_malformed_text_tables(tmp_path, text, match):
    p = tmp_path / "bad.txt"
    p.write_text(text)
    with pytest.raises(InstrumentFileError, match=match) as exc:
        read_area_table(p)
    assert "bad.txt" in str(exc.value)


def test_ecsv_without_units(tmp_path):
    t = QTable()
    t["E"] = [1.0, 2.0]
    t["A"] = [1.0, 1.0] * u.cm**2
    t.write(tmp_path / "nu.ecsv")
    with pytest.raises(InstrumentFileError, match=r"nu.ecsv': column 'E' has no units"):
        read_area_table(tmp_path / "nu.ecsv")


def test_negative_area_zero_on_request(tmp_path):
    p = tmp_path / "n.txt"
    p.write_text("# units: Angstrom cm2\n4.0 -0.001\n5.0 2.0\n6.0 2.0\n")
    inst = read_area_table(p, negative_area="zero")
    np.testing.assert_allclose(inst.effective_area(4.0 * u.AA).value, 0.0)
    assert "set to 0" in inst.provenance["notes"][0]


# ---------------------------------------------------------------- CHIANTI ancillary areas
def _fake_chianti(root):
    """A CHIANTI-like tree with one made-up area file in the documented format (Angstrom, cm^2)."""
    d = root / "ancillary_data" / "instrument_responses"
    d.mkdir(parents=True)
    # a step at 10 A (edge): samples 5->10 cm^2 flat, then 2 cm^2 flat to 20 A
    (d / "toy_det_open.area").write_text("      5.00000      10.0000\n     10.0000      10.0000\n"
                                         "     10.0000      2.00000\n     20.0000      2.00000\n")
    (d / "toy_det_thin.area").write_text("  5.0  1.0\n  20.0  1.0\n")
    (root / "VERSION").write_text("99.9\n")
    return root


def test_chianti_area_by_name(tmp_path):
    root = _fake_chianti(tmp_path / "chianti")
    inst = read_chianti_area("toy_det_open", chianti_root=root)
    assert inst.provenance["chianti_version"] == "99.9"
    inst2 = read_chianti_area("toy_det_open.area", chianti_root=root)
    assert inst2.name == "toy_det_open"
    # flat 1 ph/s/cm2/keV: integral over energy = 10 cm^2 * (hc/5 - hc/10) + 2 cm^2 * (hc/10 - hc/20)
    # (analytic, hc = 12.398419843 keV A)
    expected = 10 * (HC_KEV_ANGSTROM / 5 - HC_KEV_ANGSTROM / 10) + 2 * (HC_KEV_ANGSTROM / 10 - HC_KEV_ANGSTROM / 20)
    e = np.geomspace(0.5, 3.0, 400)
    np.testing.assert_allclose(inst.count_rate_from_spectrum(np.diff(e) * PH, e * u.keV).value, expected, rtol=1e-12)
    assert chianti_area_names(root) == ["toy_det_open", "toy_det_thin"]


def test_chianti_errors(tmp_path, monkeypatch):
    root = _fake_chianti(tmp_path / "chianti")
    with pytest.raises(InstrumentFileError, match=r"no CHIANTI effective-area file 'toy_det.area'.*did you mean.*"
                                                  r"Available \(2\): toy_det_open, toy_det_thin"):
        read_chianti_area("toy_det", chianti_root=root)
    monkeypatch.delenv("SYNTHCORONA_CHIANTI", raising=False)
    with pytest.raises(InstrumentFileError, match="set the environment variable SYNTHCORONA_CHIANTI"):
        read_chianti_area("toy_det_open")
    monkeypatch.setenv("SYNTHCORONA_CHIANTI", str(tmp_path / "elsewhere"))
    with pytest.raises(InstrumentFileError, match=r"from \$SYNTHCORONA_CHIANTI\) has no directory"):
        read_chianti_area("toy_det_open")
    monkeypatch.setenv("SYNTHCORONA_CHIANTI", str(root))
    assert read_chianti_area("toy_det_thin").name == "toy_det_thin"


CHIANTI_ROOT = os.environ.get("SYNTHCORONA_CHIANTI")


@pytest.mark.chianti
@pytest.mark.skipif(not CHIANTI_ROOT, reason="set SYNTHCORONA_CHIANTI to a CHIANTI installation")
def test_real_chianti_area_files():
    inst = read_chianti_area("asca_gis_")
    # values of CHIANTI 10.1 ancillary_data/instrument_responses/asca_gis_.area, lines 1-2:
    #   1.03755 A  2.87120 cm^2 ; 1.04631 A  4.44390 cm^2
    np.testing.assert_allclose(inst.effective_area([1.03755, 1.04631] * u.AA).value, [2.87120, 4.44390], rtol=1e-12)
    assert len(inst.provenance["files"][0]["sha256"]) == 64
    # rosat_pspc_open.area line 1 holds -0.0005 cm^2 at 4.12506 A: raise unless asked
    with pytest.raises(InstrumentFileError, match=r"negative effective area -0.0005 cm\^2 at 4.12506 Angstrom"):
        read_chianti_area("rosat_pspc_open")
    pspc = read_chianti_area("rosat_pspc_open", negative_area="zero")
    assert pspc.effective_area(4.12506 * u.AA).value == 0.0
    assert "rosat_pspc_r1r2" in chianti_area_names()
