"""The one band type, :class:`synthcorona.spectral.Band`."""
import astropy.units as u
import pytest

from synthcorona.errors import InputError
from synthcorona.spectral import Band, band_to_energy

#: hc = 12.398419843320026 keV Angstrom (CODATA 2018, NIST reference on constants).
HC = 12.398419843320026


@pytest.mark.parametrize("text, label, lo, hi", [
    ("0.1-2.4 keV", "0.1-2.4 keV", 0.1, 2.4),
    ("soft: 0.1-2.4 keV", "soft", 0.1, 2.4),
    ("1e-3-2e-2 keV", "0.001-0.02 keV", 1e-3, 2e-2),
    ("0.5 to 2 keV", "0.5-2 keV", 0.5, 2.0),
    ("170-175 Angstrom", "170-175 Angstrom", HC / 175, HC / 170),   # E = hc / lambda
])
def test_parse_forms(text, label, lo, hi):
    b = Band.parse(text)
    assert b.label == label
    assert b.energy_kev == pytest.approx((lo, hi), rel=1e-12)


def test_coerce_forms_agree():
    ref = Band(0.1 * u.keV, 2.4 * u.keV)
    for v in ([0.1, 2.4] * u.keV, (0.1 * u.keV, 2400 * u.eV), "0.1-2.4 keV", ref):
        assert Band.coerce(v).energy_kev == pytest.approx(ref.energy_kev, rel=1e-12)
    assert band_to_energy("band", [171, 175] * u.AA) == pytest.approx((HC / 175, HC / 171), rel=1e-12)


@pytest.mark.parametrize("bad, match", [
    ("2.4-0.1 keV", "not below the upper limit"),       # reversed: an error, never swapped
    ("1-1 keV", "not below the upper limit"),
    ("175-170 Angstrom", "not below the upper limit"),
    ("one to two keV", "cannot read a band"),
    ("1-2 furlong", "unknown unit"),
])
def test_bad_bands_name_the_problem(bad, match):
    with pytest.raises(InputError, match=match):
        Band.parse(bad)


def test_mixed_or_wrong_units():
    with pytest.raises(InputError, match="mix a wavelength and an energy"):
        Band(1 * u.keV, 20 * u.AA)
    with pytest.raises(u.UnitsError, match="expected an energy or a wavelength"):
        Band(1 * u.s, 2 * u.s)
    with pytest.raises(InputError, match="exactly two limits"):
        Band.coerce([1, 2, 3] * u.keV)
