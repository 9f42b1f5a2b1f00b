"""Tests of synthcorona.abundances: named sets, user sets, files, FIP bias, derived ratios."""
import json
import math

import astropy.units as u
import numpy as np
import pytest

from synthcorona.abundances import (
    ELEMENTS,
    AbundanceSet,
    available_sets,
    electron_hydrogen_ratio,
    fip_bias,
    first_ionization_potential,
    mean_mass_per_hydrogen,
    resolve_abundances,
    scale_metallicity,
)
from synthcorona.errors import InputError


def lin(log_eps):
    """log eps (H = 12) -> n_X / n_H."""
    return 10.0 ** (log_eps - 12.0)


# ----------------------------------------------------------------------------- named sets
@pytest.mark.parametrize(
    "name, symbol, log_eps",
    [
        ("photospheric", "Fe", 7.46),    # Asplund, Amarsi & Grevesse 2021, A&A 653, A141, Table 2
        ("photospheric", "O", 8.69),     # Asplund et al. 2021, A&A 653, A141, Table 2
        ("photospheric", "He", 10.914),  # Asplund et al. 2021, A&A 653, A141, Table 2 (helioseismic He)
        ("photospheric", "Ne", 8.06),    # Asplund et al. 2021, A&A 653, A141, Table 2
        ("coronal", "Fe", 7.96),         # CHIANTI 10.1 coronal set (Del Zanna 2023): Asplund 2021 Fe 7.46 + 0.5 dex
        ("coronal", "O", 8.69),          # CHIANTI 10.1 coronal set: O (high FIP) left at Asplund 2021 value
        ("coronal", "He", 10.914),       # CHIANTI 10.1 coronal set: He left at Asplund 2021 value
        ("coronal_feldman1992", "Fe", 8.10),  # Feldman et al. 1992, ApJS 81, 387 (as transcribed in CHIANTI archive)
        ("coronal_feldman1992", "O", 8.89),   # Feldman et al. 1992, ApJS 81, 387
        ("coronal_feldman1992", "He", 10.90),  # Feldman et al. 1992, ApJS 81, 387
    ],
)
def test_named_set_values_match_publications(name, symbol, log_eps):
    a = resolve_abundances(name)
    assert a[symbol] == pytest.approx(lin(log_eps), rel=1e-12)
    assert a["H"] == 1.0


def test_photospheric_set_is_complete_h_to_zn():
    a = resolve_abundances("photospheric")
    assert a.elements == ELEMENTS  # Asplund et al. 2021 Table 2 gives every element H..Zn
    assert a.note == ""


def test_aliases_and_case_insensitive_names():
    assert dict(resolve_abundances("solar_photospheric").values) == dict(resolve_abundances("photospheric").values)
    assert dict(resolve_abundances("Solar_Coronal").values) == dict(resolve_abundances("coronal").values)


def test_available_sets_cite_their_sources():
    sets = available_sets()
    assert set(sets) == {"photospheric", "coronal", "coronal_feldman1992"}
    assert "Asplund" in sets["photospheric"] and "A&A 653, A141" in sets["photospheric"]
    assert "ApJS 81, 387" in sets["coronal_feldman1992"]


def test_feldman1992_absent_elements_are_zero_and_noted():
    a = resolve_abundances("coronal_feldman1992")
    # Feldman et al. 1992 give 15 elements; Ti, for one, is not among them.
    assert len(a.elements) == 15
    assert a["Ti"] == 0.0
    assert "Ti" in a.note and "zero" in a.note


def test_coronal_set_equals_photospheric_with_fip_bias_of_half_a_dex():
    # CHIANTI 10.1 coronal set = Asplund 2021 with low-FIP elements + 0.5 dex, except Li, Be, B
    # (which that compilation leaves at photospheric values; file comment of sun_coronal_2021_chianti).
    phot, cor = resolve_abundances("photospheric"), resolve_abundances("coronal")
    biased = fip_bias(phot, 10**0.5)
    for s in ELEMENTS:
        expected = phot[s] if s in ("Li", "Be", "B") else biased[s]
        assert cor[s] == pytest.approx(expected, rel=1e-9), s


# ----------------------------------------------------------------------------- FIP
def test_first_ionization_potentials():
    # NIST ASD ionization energies: Fe 7.9025 eV, O 13.6181 eV, H 13.5984 eV (from memory of NIST ASD)
    fip = first_ionization_potential(["Fe", "O", "H"])
    assert fip.unit == u.eV
    np.testing.assert_allclose(fip.value, [7.9025, 13.6181, 13.5984], atol=2e-3)
    assert first_ionization_potential("ne").to_value(u.eV) == pytest.approx(21.5645, abs=2e-3)  # NIST ASD, from memory


def test_fip_bias_scales_low_fip_only():
    phot = resolve_abundances("photospheric")
    b = fip_bias(phot, 4.0)
    assert b["Fe"] == pytest.approx(4.0 * phot["Fe"], rel=1e-12)  # FIP(Fe) = 7.90 eV < 10 eV
    assert b["Mg"] == pytest.approx(4.0 * phot["Mg"], rel=1e-12)  # FIP(Mg) = 7.65 eV
    assert b["O"] == phot["O"]  # FIP(O) = 13.62 eV > 10 eV
    assert b["Ne"] == phot["Ne"]
    assert b["S"] == phot["S"]  # FIP(S) = 10.36 eV, just above the threshold
    assert b["H"] == 1.0
    assert "multiplied by 4" in b.source and "Asplund" in b.source


def test_inverse_fip_effect():
    # factor < 1: inverse-FIP pattern of active M dwarfs (Laming 2015, Living Rev. Sol. Phys. 12, 2)
    phot = resolve_abundances("photospheric")
    b = fip_bias(phot, 0.25)
    assert b["Fe"] / phot["Fe"] == pytest.approx(0.25, rel=1e-12)
    assert b["Ne"] / phot["Ne"] == 1.0
    assert b["Fe"] / b["Ne"] == pytest.approx(0.25 * lin(7.46) / lin(8.06), rel=1e-9)  # Asplund 2021 Table 2


def test_fip_threshold_argument():
    phot = resolve_abundances("photospheric")
    b = fip_bias(phot, 2.0, threshold=11.5 * u.eV)  # now C (FIP 11.26 eV) is "low FIP"
    assert b["C"] == pytest.approx(2.0 * phot["C"], rel=1e-12)
    assert b["O"] == phot["O"]
    b2 = fip_bias(phot, 2.0, threshold=11000 * u.meV)  # 11 eV in other units: C not scaled
    assert b2["C"] == phot["C"] and b2["Fe"] == pytest.approx(2.0 * phot["Fe"])


def test_fip_bias_never_scales_hydrogen():
    b = fip_bias("photospheric", 3.0, threshold=30 * u.eV)  # every element below 30 eV, H included
    assert b["H"] == 1.0
    assert b["He"] == pytest.approx(3.0 * lin(10.914), rel=1e-12)  # FIP(He) = 24.6 eV


def test_scale_metallicity():
    phot = resolve_abundances("photospheric")
    m = scale_metallicity("photospheric", 0.1)
    assert m["Fe"] == pytest.approx(0.1 * phot["Fe"], rel=1e-12)
    assert m["O"] == pytest.approx(0.1 * phot["O"], rel=1e-12)
    assert m["Li"] == pytest.approx(0.1 * phot["Li"], rel=1e-12)
    assert m["He"] == phot["He"]
    assert m["H"] == 1.0


# ----------------------------------------------------------------------------- user sets
def test_dict_with_missing_elements():
    a = resolve_abundances({"Fe": 3e-5, "he": 0.085}, elements=["H", "He", "O", "Fe"])
    assert a["Fe"] == 3e-5 and a["He"] == 0.085 and a["H"] == 1.0
    assert a["O"] == 0.0
    assert "O" in a.note and "zero" in a.note
    assert "Fe" not in a.note.split(":")[-1]
    np.testing.assert_array_equal(a.as_array(["H", "O", "Fe"]), [1.0, 0.0, 3e-5])


def test_abundance_set_passthrough_updates_note():
    a = resolve_abundances("photospheric")
    assert resolve_abundances(a) is a  # nothing missing: same object
    f = resolve_abundances("coronal_feldman1992", elements=["Fe", "Ti"])
    assert f.note.endswith("Ti")


def test_to_attrs_round_trip():
    a = fip_bias("photospheric", 2.0)
    attrs = a.to_attrs()
    assert attrs["abundance_name"] == a.name
    assert "Asplund" in attrs["abundance_source"]
    assert all(isinstance(v, str) for v in attrs.values())
    back = json.loads(attrs["abundance_values"])
    assert back["Fe"] == a["Fe"] and back["H"] == 1.0


@pytest.mark.parametrize("suffix", [".txt", ".csv", ".json", ".ecsv"])
@pytest.mark.parametrize("scale", ["linear", "log12"])
def test_file_round_trip(tmp_path, suffix, scale):
    a = fip_bias("coronal_feldman1992", 0.5)
    path = a.write(tmp_path / f"ab{suffix}", scale=scale)
    b = resolve_abundances(path)
    assert b.elements == a.elements
    for s in a.elements:
        assert b[s] == pytest.approx(a[s], rel=1e-12), s
    assert b.name == a.name
    c = resolve_abundances(str(path))  # a str path works too
    assert c["Fe"] == pytest.approx(a["Fe"], rel=1e-12)


def test_hand_written_log12_file(tmp_path):
    p = tmp_path / "star.txt"
    p.write_text("# my star\n# scale: log12\nH 12.0\nHe 10.914\nFe 7.46\n\nO 8.69\n")
    a = resolve_abundances(p)
    assert a["Fe"] == pytest.approx(lin(7.46), rel=1e-12)  # log eps 7.46 -> 2.884e-5 (Asplund 2021 Fe)
    assert a["Fe"] == pytest.approx(2.884e-5, rel=1e-3)
    assert a["Ne"] == 0.0


# ----------------------------------------------------------------------------- derived ratios
def test_mean_mass_per_hydrogen_photospheric():
    # mu_H = 1/X; Asplund et al. 2021 (A&A 653, A141) present-day photosphere X = 0.7438 (from memory)
    assert mean_mass_per_hydrogen("photospheric") == pytest.approx(1.0 / 0.7438, rel=1e-3)
    # He/H = 0.1: 1 + 0.1 * 4.0026 / 1.0078 = 1.3972 ("mu_H ~ 1.4", common practice, no source)
    assert mean_mass_per_hydrogen({"He": 0.1}) == pytest.approx(1.0 + 0.1 * 4.0026 / 1.0078, rel=1e-6)


def test_electron_hydrogen_ratio():
    assert electron_hydrogen_ratio({"He": 0.1}) == pytest.approx(1.2, rel=1e-12)  # 1 + 2 * 0.1, arithmetic
    # Dominant contributors Z * A from Asplund et al. 2021 Table 2; the rest add < 3e-4.
    major = {1: 12.0, 2: 10.914, 6: 8.46, 7: 7.83, 8: 8.69, 10: 8.06, 12: 7.55, 14: 7.51, 16: 7.12, 26: 7.46}
    expected = sum(z * lin(le) for z, le in major.items())  # = 1.1731
    assert electron_hydrogen_ratio("photospheric") == pytest.approx(expected, rel=1e-3)
    assert electron_hydrogen_ratio("photospheric") == pytest.approx(1.173, abs=1e-3)


# ----------------------------------------------------------------------------- errors
def test_unknown_set_lists_known_sets():
    with pytest.raises(InputError, match=r"abundances='sollar'.*photospheric.*coronal_feldman1992"):
        resolve_abundances("sollar")


def test_unknown_element_in_dict():
    with pytest.raises(InputError, match=r"element='Xx'.*H\.\.Zn"):
        resolve_abundances({"Xx": 1e-5})
    with pytest.raises(InputError, match=r"element='U'"):  # beyond Zn
        resolve_abundances({"U": 1e-12})


def test_unknown_element_in_elements_and_getitem():
    with pytest.raises(InputError, match=r"elements='Qq'"):
        resolve_abundances("photospheric", elements=["Fe", "Qq"])
    with pytest.raises(InputError, match=r"symbol='Xx'"):
        resolve_abundances("photospheric")["Xx"]
    with pytest.raises(InputError, match=r"symbol='Kr'"):
        first_ionization_potential("Kr")


@pytest.mark.parametrize("bad", [-1e-5, float("nan"), float("inf"), "abc"])
def test_bad_abundance_values(bad):
    with pytest.raises(InputError, match=r"abundances\['Fe'\]"):
        resolve_abundances({"Fe": bad})


def test_hydrogen_must_be_one():
    with pytest.raises(InputError, match=r"abundances\['H'\]=2.0.*relative to hydrogen"):
        resolve_abundances({"H": 2.0, "Fe": 1e-5})


@pytest.mark.parametrize("factor", [0.0, -2.0, float("nan"), float("inf"), "x"])
def test_bad_factor(factor):
    with pytest.raises(InputError, match=r"factor=.*\(0, inf\)"):
        fip_bias("photospheric", factor)
    with pytest.raises(InputError, match=r"factor="):
        scale_metallicity("photospheric", factor)


def test_threshold_needs_energy_units():
    with pytest.raises(u.UnitsError, match="threshold"):
        fip_bias("photospheric", 2.0, threshold=10)
    with pytest.raises(u.UnitsError, match="threshold"):
        fip_bias("photospheric", 2.0, threshold=10 * u.K)


def test_wrong_type():
    with pytest.raises(InputError, match=r"abundances=42 \(type int\)"):
        resolve_abundances(42)


def test_bad_files(tmp_path):
    with pytest.raises(InputError, match=r"abundances=.*nope\.txt.*not found"):
        resolve_abundances(tmp_path / "nope.txt")
    p = tmp_path / "noscale.txt"
    p.write_text("H 1\nFe 3e-5\n")
    with pytest.raises(InputError, match=r"noscale\.txt.*scale"):
        resolve_abundances(p)
    p = tmp_path / "badscale.txt"
    p.write_text("# scale: dex\nFe 7.5\n")
    with pytest.raises(InputError, match=r"scale='dex'"):
        resolve_abundances(p)
    p = tmp_path / "badline.csv"
    p.write_text("# scale: linear\nFe,3e-5,7\n")
    with pytest.raises(InputError, match=r"badline\.csv.*line 2"):
        resolve_abundances(p)
    p = tmp_path / "badnum.txt"
    p.write_text("# scale: linear\nFe three\n")
    with pytest.raises(InputError, match=r"line 2.*'three'"):
        resolve_abundances(p)
    p = tmp_path / "neg.txt"
    p.write_text("# scale: linear\nFe -3e-5\n")
    with pytest.raises(InputError, match=r"neg\.txt.*Fe=-3e-05.*\[0, inf\)"):
        resolve_abundances(p)
    p = tmp_path / "elem.txt"
    p.write_text("# scale: log12\nZz 7.5\n")
    with pytest.raises(InputError, match=r"elem\.txt.*'Zz'"):
        resolve_abundances(p)
    p = tmp_path / "hlog.txt"
    p.write_text("# scale: log12\nH 11\n")
    with pytest.raises(InputError, match=r"H=11.0 in the log12 scale must be 12"):
        resolve_abundances(p)
    p = tmp_path / "bad.json"
    p.write_text("{not json")
    with pytest.raises(InputError, match=r"bad\.json.*could not be read"):
        resolve_abundances(p)
    p = tmp_path / "noscale.json"
    p.write_text(json.dumps({"abundances": {"Fe": 3e-5}}))
    with pytest.raises(InputError, match=r"noscale\.json.*scale"):
        resolve_abundances(p)
    p = tmp_path / "empty.txt"
    p.write_text("# scale: linear\n")
    with pytest.raises(InputError, match=r"empty\.txt.*no abundances"):
        resolve_abundances(p)


def test_abundance_set_is_read_only_and_validated():
    a = resolve_abundances("photospheric")
    with pytest.raises(TypeError):
        a.values["Fe"] = 1.0  # type: ignore[index]
    with pytest.raises(InputError, match=r"values\['O'\]"):
        AbundanceSet("x", {"O": -1.0})
    assert math.isclose(AbundanceSet("x", {"O": 5e-4})["H"], 1.0)
    # equal sets hash equally (usable as cache keys)
    assert hash(resolve_abundances("coronal")) == hash(resolve_abundances("solar_coronal"))
    assert resolve_abundances("coronal") == resolve_abundances("solar_coronal")
