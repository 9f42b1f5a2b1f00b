"""TOML input reading (synthcorona.io.toml): typed keys, units, ranges, and errors naming file and key."""
import astropy.units as u
import numpy as np
import pytest

import synthcorona as sc
from synthcorona.errors import ScenarioError
from synthcorona.io.toml import abundances_from_key, dem_from_section, load_toml


def _dem(text):
    return dem_from_section(load_toml(text="[corona.dem]\n" + text, name="t.toml").section("corona").section("dem"))


def test_units_are_converted_by_astropy():
    s = load_toml(text='d = "3.26156 lyr"\nt = "1 keV"\n', name="t.toml")
    # 1 pc = 3.26156 light years (IAU 2015 Resolution B2, pc and lyr definitions)
    assert s.quantity("d", u.pc).value == pytest.approx(1.0, rel=1e-5)
    # k_B = 8.617333e-5 eV/K (CODATA 2018): 1 keV = 1.16045e7 K
    assert s.quantity("t", u.K).value == pytest.approx(1.16045e7, rel=1e-5)
    s.finish()


G = 'model = "gaussian"\npeak_logT = 6.5\nwidth_logT = 0.2\ntotal_em = "1e51 cm-3"\n'


@pytest.mark.parametrize("text, key, phrase", [
    (G.replace('"1e51 cm-3"', '"1e51"'), "total_em", "needs a unit"),
    (G.replace("6.5", '"3 MK"'), "peak_logT", "must be a number"),
    (G.replace("6.5", "9.5"), "peak_logT", "valid range [4, 9]"),
    (G.replace("0.2", '"wide"'), "width_logT", "must be a number"),
    (G.replace("0.2", "-0.1"), "width_logT", "valid range"),
    (G.replace("peak_logT = 6.5\n", ""), "peak_logT", "missing"),
    (G + "widht = 1\n", "widht", "unknown key; did you mean 'width_logT'?"),
    (G.replace("total_em", "total_emm"), "total_em", "required key is missing (found 'total_emm'"),
    ('model = "lorentzian"\n', "model", "must be one of"),
    ('model = "isothermal"\ntemperature = "2 MK"\ntotal_em = "-1e50 cm-3"\n', "total_em", "valid range"),
])
def test_bad_dem_keys_are_named(text, key, phrase):
    with pytest.raises(ScenarioError) as exc:
        _dem(text)
    msg = str(exc.value)
    assert msg.startswith("t.toml: [corona.dem]")
    assert key in msg and phrase in msg


@pytest.mark.parametrize("text, old, hint", [
    (G.replace("total_em", "emission_measure"), "emission_measure", 'write total_em = "1e51 cm-3"'),
    (G.replace("width_logT", "width_dex"), "width_dex", "write width_logT = 0.2"),
    # log10(2e6) = 6.30103 (plain arithmetic)
    (G.replace("peak_logT = 6.5", 'peak_temperature = "2 MK"'), "peak_temperature", "write peak_logT = 6.301"),
    ('model = "isothermal"\ntemperature = "2 MK"\nemission_measure = "1e50 cm-3"\n', "emission_measure",
     "write total_em"),
])
def test_former_dem_keys_are_errors_naming_the_new_key(text, old, hint):
    # the DEM keys of a file are the DEM classes' parameter names; the former spellings are never read
    with pytest.raises(ScenarioError) as exc:
        _dem(text)
    msg = str(exc.value)
    assert msg.startswith(f"t.toml: [corona.dem] {old} = ") and "renamed" in msg and hint in msg


def test_dem_keys_are_the_python_parameter_names():
    import inspect

    from synthcorona.io.toml import DEM_MODELS

    for model, cls in (("isothermal", sc.IsothermalDEM), ("gaussian", sc.GaussianDEM), ("power_law", sc.PowerLawDEM)):
        params = set(inspect.signature(cls).parameters)
        keys = {k.strip().split(" ")[0] for k in DEM_MODELS[model].split(",")}
        assert keys == params, model


def test_unknown_key_suggests_the_nearest_valid_key():
    s = load_toml(text='[observation]\nexposur = "1 h"\nbin_width = "60 s"\n', name="t.toml")
    o = s.section("observation")
    o.quantity("exposure", u.s)
    o.quantity("bin_width", u.s)
    o.number("false_alarm", default=0.01)
    with pytest.raises(ScenarioError) as exc:
        o.finish()
    assert str(exc.value) == "t.toml: [observation] exposur: unknown key; did you mean 'exposure'?"
    s2 = load_toml(text='[observation]\nzzz = 1\n', name="t.toml").section("observation")
    s2.quantity("exposure", u.s)
    with pytest.raises(ScenarioError, match=r"\[observation\] zzz: unknown key; valid keys here: exposure$"):
        s2.finish()


def test_gaussian_and_component_dems_match_the_api():
    d = _dem('model = "gaussian"\npeak_logT = 6.477\nwidth_logT = 0.2\ntotal_em = "1e51 cm-3"\n')
    ref = sc.GaussianDEM(peak_logT=6.477, width_logT=0.2, total_em=1e51 * u.cm ** -3)
    logT = np.arange(5.0, 8.0, 0.05)
    np.testing.assert_allclose(d.em_weights(logT).value, ref.em_weights(logT).value, rtol=1e-12)
    m = _dem('model = "components"\n[[corona.dem.component]]\nmodel = "isothermal"\ntemperature = "2 MK"\n'
             'total_em = "1e50 cm-3"\n[[corona.dem.component]]\nmodel = "gaussian"\n'
             'peak_logT = 6.9\nwidth_logT = 0.1\ntotal_em = "3e50 cm-3"\n')
    # total EM of a sum of components is the sum of their EMs
    assert m.em_weights(logT).sum().to_value(u.cm ** -3) == pytest.approx(4e50, rel=1e-3)


def test_tabulated_dem_inline():
    d = _dem('model = "tabulated"\ntemperature = ["1 MK", "2 MK", "4 MK"]\n'
             'dem = ["1e44 cm-3 K-1", "1e44 cm-3 K-1", "1e44 cm-3 K-1"]\n')
    # a flat DEM of 1e44 per K from 1 to 4 MK holds 3e6 K x 1e44 = 3e50 cm-3 (trapezoid of a constant is exact)
    assert d.total_em.to_value(u.cm ** -3) == pytest.approx(3e50, rel=1e-9)


def test_abundances_by_name_or_table():
    s = load_toml(text='a = "photospheric"\n[b]\nset = "photospheric"\nfip_bias = 4.0\n[c]\nset = "nonsense"\n',
                  name="t.toml")
    a = abundances_from_key(s, "a")
    b = abundances_from_key(s, "b")
    # Fe is a low-FIP element (FIP 7.90 eV, CRC Handbook) and O is high-FIP (13.62 eV)
    assert b.values["Fe"] / a.values["Fe"] == pytest.approx(4.0)
    assert b.values["O"] == pytest.approx(a.values["O"])
    with pytest.raises(ScenarioError, match=r"\[c\] set = \"nonsense\": unknown abundance set"):
        abundances_from_key(s, "c")


def test_toml_syntax_error_names_file(tmp_path):
    p = tmp_path / "broken.toml"
    p.write_text("[star\ndistance = 1\n")
    with pytest.raises(ScenarioError, match="broken.toml: not valid TOML"):
        load_toml(p)
    with pytest.raises(ScenarioError, match="missing.toml: file not found"):
        load_toml(tmp_path / "missing.toml")


@pytest.mark.parametrize("value, expected", [
    ('"0.1-2.4 keV"', [0.1, 2.4] * u.keV),
    ('"165-180 Angstrom"', [165.0, 180.0] * u.AA),
    ('"0.1 to 2.4 keV"', [0.1, 2.4] * u.keV),
    ('["16.5 nm", "180 Angstrom"]', [16.5, 18.0] * u.nm),
])
def test_bands_are_read_with_their_unit(value, expected):
    q = load_toml(text=f"b = {value}\n", name="t.toml").band("b")
    assert q.unit == expected.unit
    np.testing.assert_allclose(q.value, expected.value, rtol=1e-12)


@pytest.mark.parametrize("value, phrase", [
    ('"2.4-0.1 keV"', "is not below the upper limit"),
    ('"0.1-2.4"', "energies or wavelengths"),        # no unit
    ('"soft band"', "cannot read a band"),
    ('"1-2 kg"', "energies or wavelengths"),
    ('["1 kg", "2 kg"]', "energies or wavelengths"),
    ("3", "cannot read it as a band"),
    ('["0.1 keV"]', "cannot read it as a band"),
])
def test_bad_bands_are_named(value, phrase):
    with pytest.raises(ScenarioError) as exc:
        load_toml(text=f"[r]\nb = {value}\n", name="t.toml").section("r").band("b")
    msg = str(exc.value)
    assert msg.startswith("t.toml: [r] b = ") and phrase in msg, msg


def test_load_toml_takes_paths_as_paths_and_text_only_when_named(tmp_path):
    from synthcorona.errors import InputError

    p = tmp_path / "x=1.toml"
    p.write_text('d = "3 pc"\n')
    assert load_toml(p).quantity("d", u.pc).value == 3.0
    assert load_toml(str(p)).file == str(p)
    s = load_toml(text='d = "4 pc"\n')
    assert s.file == "<string>" and s.quantity("d", u.pc).value == 4.0
    with pytest.raises(ScenarioError, match=r"d = 1: file not found \(to read TOML text rather than a file"):
        load_toml("d = 1")
    with pytest.raises(InputError, match="not both and not neither"):
        load_toml(p, text="d = 1")
    with pytest.raises(InputError, match="not both and not neither"):
        load_toml()
    bad = tmp_path / "bad.toml"
    bad.write_bytes(b'a = "\xff"\n')
    with pytest.raises(ScenarioError, match=r"bad.toml: byte 5 \(0xff, line 1\) is not UTF-8 text") as err:
        load_toml(bad)
    assert err.value.byte_offset == 5
