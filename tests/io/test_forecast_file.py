"""Forecast scenario files: every value read with its unit, every mistake named by file and key."""
import pathlib
import warnings

import astropy.units as u
import numpy as np
import pytest

from synthcorona.errors import InputError, ScenarioError
from synthcorona.io.forecast_file import flare_energy_from_class, read_forecast_file

EXAMPLES = pathlib.Path(__file__).parent.parent.parent / "examples" / "scenarios"

BASE = """
[scenario]
title = "test star"

[star]
distance = "5 pc"
nh = "1e18 cm-2"

[corona]
density = "2e9 cm-3"

[corona.dem]
model = "gaussian"
peak_logT = 6.301
width_logT = 0.2
total_em = "1e51 cm-3"

[cme]
mass = "1e16 g"
source_temperature = "2 MK"

[flare]
energy = "1e32 erg"

[[instrument]]
generic = "sc-fe9"

[observation]
exposure = "6 h"
bin_width = "60 s"
pre_event = "1 h"

[montecarlo]
realisations = 1000
seed = 3
"""


def _write(tmp_path, text, name="scen.toml"):
    p = tmp_path / name
    p.write_text(text)
    return p


def _read(tmp_path, text, build=False):
    return read_forecast_file(_write(tmp_path, text), build=build)


def test_values_and_units(tmp_path):
    fi = _read(tmp_path, BASE + '\n[output]\nreport = "html"\n')
    # Expected values: the file's own unit strings, converted by astropy.units; 1 h = 3600 s (SI brochure).
    assert fi.star.distance.to_value(u.pc) == pytest.approx(5.0, rel=1e-12)
    assert fi.star.nh.to_value(u.cm ** -2) == pytest.approx(1e18, rel=1e-12)
    assert fi.corona.density.to_value(u.cm ** -3) == pytest.approx(2e9, rel=1e-12)
    assert fi.cme.mass.to_value(u.g) == pytest.approx(1e16, rel=1e-12)
    assert fi.cme.source_temperature.to_value(u.K) == pytest.approx(2e6, rel=1e-12)
    assert fi.flare.energy.to_value(u.erg) == pytest.approx(1e32, rel=1e-12)
    assert fi.observation.exposure.to_value(u.s) == pytest.approx(6 * 3600, rel=1e-12)
    assert fi.montecarlo.realisations == 1000 and fi.montecarlo.seed == 3 and fi.montecarlo.statistic == "window"
    assert list(fi.instrument) == ["sc-fe9"] and fi.instrument["sc-fe9"][1] == "total"
    assert fi.output["report"] == "html" and fi.title == "test star"
    assert fi.source.endswith("scen.toml") and "[cme]" in fi.raw_text and fi.scenario is None
    # default mass grid: 9 masses from M/30 to 3 M, log-spaced (documented default)
    np.testing.assert_allclose(fi.mass_grid.to_value(u.g), np.geomspace(1e16 / 30, 3e16, 9), rtol=1e-12)


def test_variability_table_sets_the_red_noise(tmp_path):
    from synthcorona.dimming.noise import RedNoise

    assert _read(tmp_path, BASE).observation.red_noise is None     # no table: Poisson noise only
    fi = _read(tmp_path, BASE + '\n[variability]\namplitude = 0.05\ntimescale = "2 h"\n')
    # 2 h = 7200 s (SI brochure)
    assert fi.observation.red_noise == RedNoise(0.05, 7200 * u.s)
    assert fi.observation.red_noise.tau_s == pytest.approx(7200.0, rel=1e-12)


def test_onset_and_precision_keys(tmp_path):
    """[montecarlo] onset (default "scan") and precision (default 0.02 when realisations is not given). Expected
    realisations: the rule of synthcorona.dimming.sizes, (1/4 + alpha (1 - alpha) exp(z_alpha^2)) / precision^2 with
    z_alpha from scipy.stats.norm; 1/4 / precision^2 (and at least 10 / alpha) with an exact threshold."""
    import math

    from scipy import stats

    fi = _read(tmp_path, BASE)
    assert fi.montecarlo.onset == "scan" and fi.montecarlo.precision is None and fi.montecarlo.realisations == 1000
    fi = _read(tmp_path, BASE.replace("realisations = 1000", 'onset = "known"'))
    assert fi.montecarlo.onset == "known" and fi.montecarlo.precision == 0.02
    assert fi.montecarlo.realisations == 1000          # exact threshold: max(0.25 / 0.02^2 = 625, 10 / 0.01)
    fi = _read(tmp_path, BASE.replace("realisations = 1000", "precision = 0.03"))
    z = stats.norm.isf(0.01)
    assert fi.montecarlo.realisations == math.ceil((0.25 + 0.01 * 0.99 * math.exp(z * z)) / 0.03 ** 2)
    assert fi.montecarlo.precision == 0.03


def test_mass_grid_forms(tmp_path):
    fi = _read(tmp_path, BASE.replace("seed = 3", 'seed = 3\nmass_grid = { min = "1e14 g", max = "1e18 g", points = 5 }'))
    np.testing.assert_allclose(fi.mass_grid.to_value(u.g), [1e14, 1e15, 1e16, 1e17, 1e18], rtol=1e-12)
    fi = _read(tmp_path, BASE.replace("seed = 3", 'seed = 3\nmass_grid = ["1e-10 Msun", "2e20 kg"]'))
    # 1 Msun = 1.98841e33 g (IAU 2015 nominal GM_sun / G, as in astropy.constants)
    np.testing.assert_allclose(fi.mass_grid.to_value(u.g), [1.98841e23, 2e23], rtol=1e-4)


def test_flare_class_scaling():
    # Soft-X-ray class letters are decades of the peak 1-8 A flux: C = 1e-6, M = 1e-5, X = 1e-4 W m-2 (the standard
    # classification). flare_energy_from_class gives the heating energy of the class rule of
    # synthcorona.dimming.flare_class: it grows with the class and is case- and space-insensitive.
    e_c3, e_m25, e_x1 = (flare_energy_from_class(c).to_value(u.erg) for c in ("c3", "M2.5", "X1"))
    assert e_c3 < e_m25 < e_x1
    assert flare_energy_from_class(" x 1.0 ").to_value(u.erg) == pytest.approx(e_x1, rel=1e-12)


def test_flare_class_in_file(tmp_path):
    text = BASE.replace('energy = "1e32 erg"', 'class = "X5"\nn_strands = 3\nem_t_relation = "stellar"')
    fi = _read(tmp_path, text)
    assert fi.flare.flare_class == "X5" and fi.flare.energy is None and fi.flare_class == "X5"
    assert fi.flare.n_strands == 3 and fi.flare.em_t_relation == "stellar"
    # built: the flare as run has its heating energy explicit, and its own peak 1-8 A flux is the class flux
    # (X5 = 5e-4 W m-2, within the 10 % the rule promises; synthcorona.dimming.flare_class)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        built = read_forecast_file(_write(tmp_path, BASE.replace('energy = "1e32 erg"', 'class = "X5"')))
    assert built.flare_class == "X5" and built.flare.flare_class is None
    summary = built.scenario.flare_summary()
    assert built.flare.energy.to_value(u.erg) == pytest.approx(float(summary["heating_energy"]), rel=1e-12)
    assert float(summary["peak_flux_1_8A"]) == pytest.approx(5e-4, rel=0.1)


@pytest.mark.parametrize("line,key", [('n_strands = 0', "n_strands"), ('em_t_relation = "lunar"', "em_t_relation"),
                                      ('class = "Q1"', "class")])
def test_flare_keys_are_checked(tmp_path, line, key):
    text = BASE.replace('energy = "1e32 erg"', 'energy = "1e32 erg"\n' + line if key != "class" else line)
    with pytest.raises(ScenarioError, match=key):
        _read(tmp_path, text)


def test_physics_built_instrument_matches_the_api(tmp_path):
    from synthcorona.instruments.designs import build_instrument, default_design_grid

    text = BASE.replace('[[instrument]]\ngeneric = "sc-fe9"', """[[instrument]]
name = "probe"
[instrument.design]
geometric_area = "20 cm2"
energy_min = "40 eV"
energy_max = "2 keV"
relative_step = 0.002
[instrument.design.mirror]
kind = "multilayer"
period = "8.8 nm"
[[instrument.design.filter]]
material = "Al"
thickness = "150 nm"
[instrument.design.detector]
depletion_depth = "15 um"
""")
    fi = _read(tmp_path, text)
    inst = fi.instruments[0].instrument
    ref = build_instrument(mirror={"kind": "multilayer", "period": 8.8 * u.nm}, filters=[("Al", 150 * u.nm)],
                           detector={"depletion_depth": 15 * u.um}, geometric_area=20 * u.cm ** 2,
                           energy_grid=default_design_grid(0.04 * u.keV, 2 * u.keV, 2e-3), name="probe")
    w = [150, 171, 195] * u.AA
    np.testing.assert_allclose(inst.effective_area(w).value, ref.effective_area(w).value, rtol=1e-12)
    assert inst.name == "probe" and list(fi.instrument) == ["probe"]


def test_example_files_read():
    for p in sorted(EXAMPLES.glob("*.toml")):
        fi = read_forecast_file(p, build=False)
        assert fi.title and fi.cme.mass.to_value(u.g) > 0 and fi.instruments


# ----------------------------------------------------------------------------- malformed files
MALFORMED = [
    ("unknown key", ('nh = "1e18 cm-2"', 'nh = "1e18 cm-2"\ncolour = "red"'), "[star] colour", "unknown key"),
    ("unknown table", ("[scenario]", "[telescope]\nsize = 1\n\n[scenario]"), "telescope", "unknown key"),
    ("missing key", ('distance = "5 pc"\n', ""), "[star] distance", "required key is missing"),
    ("missing table", ('[cme]\nmass = "1e16 g"\nsource_temperature = "2 MK"\n', ""), "cme", "required"),
    ("bad unit", ('distance = "5 pc"', 'distance = "5 kg"'), "[star] distance", "not convertible"),
    ("no unit", ('distance = "5 pc"', "distance = 5"), "[star] distance", "needs a unit"),
    ("negative mass", ('mass = "1e16 g"', 'mass = "-1e16 g"'), "[cme] mass", "valid range"),
    ("distance 0", ('distance = "5 pc"', 'distance = "0 pc"'), "[star] distance", "valid range"),
    ("non-numeric", ('mass = "1e16 g"', 'mass = "lots of g"'), "[cme] mass", "cannot read"),
    ("wrong type", ("realisations = 1000", 'realisations = "many"'), "[montecarlo] realisations", "integer"),
    ("wrong type table", ('\n[corona.dem]\nmodel = "gaussian"\npeak_logT = 6.301\nwidth_logT = 0.2\n'
                          'total_em = "1e51 cm-3"\n', 'dem = "gaussian"\n'), "[corona] dem", "must be a table"),
    ("bad flare class", ('energy = "1e32 erg"', 'class = "Z3"'), "[flare] class", "flare class"),
    ("energy and class", ('energy = "1e32 erg"', 'energy = "1e32 erg"\nclass = "M1"'), "[flare] class", "not both"),
    ("unknown generic", ('generic = "sc-fe9"', 'generic = "sc-fe99"'), "[instrument[0]] generic", "available"),
    ("unknown band", ('generic = "sc-fe9"', 'generic = "sc-fe9"\nbands = ["soft"]'), "[instrument[0]] bands",
     "not a band"),
    ("bad statistic", ("seed = 3", 'seed = 3\nstatistic = "chi2"'), "[montecarlo] statistic", "one of"),
    ("too few realisations", ("realisations = 1000", "realisations = 200"), "[montecarlo] realisations", "1000"),
    ("bad onset", ("seed = 3", 'seed = 3\nonset = "sometime"'), "[montecarlo] onset", "one of"),
    ("realisations and precision", ("seed = 3", "seed = 3\nprecision = 0.02"), "[montecarlo] precision", "not both"),
    ("precision out of range", ("realisations = 1000", "precision = 0.5"), "[montecarlo] precision", "valid range"),
    ("precision too fine", ("realisations = 1000", "precision = 0.001"), "[montecarlo] precision",
     "more than the 1000000"),
    ("bad abundance set", ('density = "2e9 cm-3"', 'density = "2e9 cm-3"\nabundances = "martian"'),
     "[corona] abundances", "known sets"),
    ("escape fraction", ('source_temperature = "2 MK"', 'source_temperature = "2 MK"\nescape_fraction = 1.5'),
     "[cme] escape_fraction", "valid range"),
    ("dem model", ('model = "gaussian"', 'model = "lumpy"'), "[corona.dem] model", "one of"),
    ("former dem key", ('total_em = "1e51 cm-3"', 'emission_measure = "1e51 cm-3"'), "[corona.dem] emission_measure",
     "renamed: write total_em"),
    ("misspelt key", ('pre_event = "1 h"', 'pre_evnt = "1 h"'), "[observation] pre_event",
     "required key is missing (found 'pre_evnt'"),
    ("variability amplitude", ("[montecarlo]", '[variability]\namplitude = 1.5\ntimescale = "1 h"\n\n[montecarlo]'),
     "[variability] amplitude", "valid range [0, 1]"),
    ("variability timescale", ("[montecarlo]", '[variability]\namplitude = 0.1\ntimescale = "0 s"\n\n[montecarlo]'),
     "[variability] timescale", "valid range (0, 1e+09] s"),
    ("variability without unit", ("[montecarlo]", '[variability]\namplitude = 0.1\ntimescale = 3600\n\n[montecarlo]'),
     "[variability] timescale", "needs a unit"),
    ("variability misspelt", ("[montecarlo]", '[variability]\namplitude = 0.1\ntimescale = "1 h"\ntimescal = 1\n\n'
                                              '[montecarlo]'), "[variability] timescal", "did you mean 'timescale'?"),
    ("variability incomplete", ("[montecarlo]", '[variability]\namplitude = 0.1\n\n[montecarlo]'),
     "[variability] timescale", "required key is missing"),
]


@pytest.mark.parametrize("case, edit, key, reason", MALFORMED, ids=[m[0] for m in MALFORMED])
def test_malformed_file_names_file_and_key(tmp_path, case, edit, key, reason):
    old, new = edit
    assert old in BASE, case
    p = _write(tmp_path, BASE.replace(old, new, 1), name="bad_case.toml")
    with pytest.raises(ScenarioError) as exc:
        read_forecast_file(p, build=False)
    msg = str(exc.value)
    assert "bad_case.toml" in msg, msg
    assert key in msg, msg
    assert reason in msg, msg


def test_toml_syntax_error_names_file(tmp_path):
    p = _write(tmp_path, BASE.replace('distance = "5 pc"', "distance = "), name="broken.toml")
    with pytest.raises(ScenarioError, match="broken.toml.*not valid TOML"):
        read_forecast_file(p)


def test_missing_file_is_named(tmp_path):
    with pytest.raises(ScenarioError, match="nowhere.toml: file not found"):
        read_forecast_file(tmp_path / "nowhere.toml")


def test_mass_above_removable_names_cme_mass(tmp_path):
    # building the scenario checks the mass against the emission measure near the source temperature
    p = _write(tmp_path, BASE.replace('mass = "1e16 g"', 'mass = "1e22 g"'), name="heavy.toml")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(ScenarioError) as exc:
            read_forecast_file(p)
    msg = str(exc.value)
    assert "heavy.toml" in msg and "[cme] mass" in msg and "largest removable mass" in msg


def test_scenario_is_built_on_the_given_table(tmp_path, table):
    import shutil

    copy = tmp_path / "copy.nc"
    shutil.copyfile(table.path, copy)
    fi = _read(tmp_path, BASE)
    assert fi.scenario is None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        built = fi.with_scenario(table=copy)
        direct = read_forecast_file(tmp_path / "scen.toml", table=copy)
    assert built.scenario.table.path == copy.resolve() and direct.scenario.table.path == copy.resolve()
    assert fi.scenario is None                                    # the inputs themselves are unchanged
    np.testing.assert_array_equal(built.scenario.depth()["depth"].values, direct.scenario.depth()["depth"].values)


def test_non_utf8_byte_names_file_and_offset(tmp_path):
    raw = BASE.encode()
    p = tmp_path / "cp1252.toml"
    p.write_bytes(raw[:10] + b"\x92" + raw[11:])
    with pytest.raises(ScenarioError, match=r"cp1252.toml: byte 10 \(0x92, line \d+\) is not UTF-8 text; save the file "
                                            "as UTF-8") as err:
        read_forecast_file(p)
    assert (err.value.file, err.value.byte_offset) == (str(p), 10)


def test_path_is_a_path_and_text_is_explicit(tmp_path):
    folder = tmp_path / "a=b"
    folder.mkdir()
    from_path = read_forecast_file(str(_write(folder, BASE, name="x=1.toml")), build=False)
    assert from_path.source == str(folder / "x=1.toml") and from_path.title == "test star"
    from_text = read_forecast_file(text=BASE, name="inline.toml", build=False)
    assert from_text.source == "inline.toml" and from_text.raw_text == BASE
    assert from_text.star.distance == from_path.star.distance
    with pytest.raises(ScenarioError, match=r"file not found \(to read TOML text rather than a file, pass it as text=\)"):
        read_forecast_file(BASE, build=False)
    with pytest.raises(InputError, match="not both"):
        read_forecast_file(folder / "x=1.toml", text=BASE)


@pytest.mark.parametrize("edit, where", [
    (('title = "test star"', 'title = "test\\u0000star"'), r"\[scenario\] title: contains the control character U\+0000 "
                                                          r"\(character 5\); a title, name or label is one line"),
    (('title = "test star"', 'title = "test\\tstar"'), r"\[scenario\] title: .*U\+0009"),
    (('distance = "5 pc"', 'distance = "5 pc"\nname = "Pell\\u001bwyn"'), r"\[star\] name: .*U\+001B"),
    (('title = "test star"', 'title = "t"\ndescription = "two\\u0007lines"'), r"\[scenario\] description: .*U\+0007 "
                                                                              r".*tabs and line breaks but no other"),
    (('generic = "sc-fe9"', 'generic = "sc-fe9\\u0000"'), r"\[instrument\[0\]\] generic: .*U\+0000"),
])
def test_control_characters_in_text_name_the_key(tmp_path, edit, where):
    # a NUL cannot be stored in a netCDF attribute: found when the file is read, not at the end of the run
    text = BASE.replace(*edit, 1)
    assert text != BASE
    with pytest.raises(ScenarioError, match=where):
        read_forecast_file(text=text, name="bad.toml", build=False)


def test_a_description_may_span_lines():
    text = BASE.replace('title = "test star"', 'title = "t"\ndescription = """two\n\tlines"""', 1)
    assert read_forecast_file(text=text, name="ok.toml", build=False).description == "two\n\tlines"
