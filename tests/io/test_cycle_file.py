"""Activity-cycle files (synthcorona.io.cycle_file): every key read with its unit, mistakes named by file and key."""
import pathlib

import astropy.units as u
import numpy as np
import pytest

from synthcorona.dem import IsothermalDEM
from synthcorona.errors import ScenarioError
from synthcorona.io.cycle_file import read_cycle_file
from synthcorona.products.cycle import cycle_tables

DATA = pathlib.Path(__file__).parent.parent / "data"
MINIMAL = (DATA / "minimal_cycle.toml").read_text()
REFERENCE = pathlib.Path(__file__).parent.parent.parent / "examples" / "cycle" / "reference_cme.toml"


def test_minimal_cycle_file_runs_without_instruments():
    ds = read_cycle_file(text=MINIMAL, name="ok.toml").run()
    assert ds["flux"].sel(band="0.1-2.4 keV").values[1] == pytest.approx(1e-12, rel=1e-6)
    assert "count_rate" not in ds and ds["phase"].attrs["units"] == "1"
    per, amp = cycle_tables(ds)
    assert len(per) == 2 and len(amp) == 2


def test_response_file_path_relative_to_cycle_file(tmp_path, monkeypatch):
    from synthcorona.instruments import load_instrument, write_arf

    e = np.geomspace(0.1, 10.0, 201)
    write_arf(tmp_path / "flat.arf", e[:-1] * u.keV, e[1:] * u.keV, np.full(200, 10.0) * u.cm ** 2)
    text = MINIMAL + '\n[report]\ninstruments = ["flat.arf"]\n'
    (tmp_path / "files").mkdir()
    f = tmp_path / "c.toml"
    f.write_text(text)
    monkeypatch.chdir(tmp_path / "files")          # the path is relative to the cycle file, not the cwd
    ds = read_cycle_file(f).run()
    ins = load_instrument(str(tmp_path / "flat.arf"))
    dem = IsothermalDEM(2 * u.MK, 1e50 * u.cm ** -3)
    assert ds["count_rate"].values[0, 0] == pytest.approx(ins.count_rate(dem, distance=5 * u.pc).value[0], rel=1e-12)


@pytest.mark.parametrize("realisations, ok", [(999, False), (1000, True)])
def test_dimming_realisations_need_ten_false_alarms(tmp_path, realisations, ok):
    # the reference scenario has false_alarm = 0.01: 10 expected false alarms need 1000 realisations
    text = f'reference_scenario = "{REFERENCE}"\n' + MINIMAL + f"[dimming]\nrealisations = {realisations}\n"
    if ok:
        inputs = read_cycle_file(text=text, name="c.toml")
        assert inputs.n_realisations == realisations and inputs.minimum_realisations == 1000
    else:
        with pytest.raises(ScenarioError, match=r"c.toml: \[dimming\] realisations = 999: .*>= 1000"):
            read_cycle_file(text=text, name="c.toml")


def test_hardness_of_unreported_band_names_the_key():
    text = MINIMAL + '[report]\ninstruments = ["sc-softx"]\nhardness = ["sc-softx:hard/sc-fe9"]\n'
    with pytest.raises(ScenarioError, match=r"bad.toml: \[report\] hardness: .*'sc-fe9' is not among"):
        read_cycle_file(text=text, name="bad.toml")


def test_two_phases_at_the_same_time_name_both():
    text = MINIMAL.replace("phase = 0.5", "phase = 0.0")
    with pytest.raises(ScenarioError, match=r"c.toml: \[\[phase\]\]: phases 'a' \(\[phase\[0\]\]\) and 'b' "
                                            r"\(\[phase\[1\]\]\) are at the same time \(phase = 0.0 and 0.0\)"):
        read_cycle_file(text=text, name="c.toml")


def test_non_utf8_byte_names_file_and_offset(tmp_path):
    raw = MINIMAL.encode()
    at = raw.index(b'title = "t"') + len(b'title = "')
    f = tmp_path / "latin1.toml"
    f.write_bytes(raw[:at] + "é".encode("latin-1") + raw[at + 1:])
    with pytest.raises(ScenarioError, match=rf"latin1.toml: byte {at} \(0xe9, line 2\) is not UTF-8 text") as err:
        read_cycle_file(f)
    assert err.value.byte_offset == at and err.value.file == str(f)


def test_path_with_equals_sign_is_a_path(tmp_path):
    folder = tmp_path / "run=1"
    folder.mkdir()
    f = folder / "cycle=a.toml"
    f.write_text(MINIMAL)
    inputs = read_cycle_file(str(f))
    assert inputs.source == str(f) and inputs.title == "t" and len(inputs.phases) == 2
    with pytest.raises(ScenarioError, match=r"run=1/none=.toml: file not found"):
        read_cycle_file(str(folder / "none=.toml"))



def test_flux_phase_width_is_width_logT_and_the_former_key_is_an_error():
    # the Gaussian width of a flux phase has GaussianDEM's parameter name, width_logT
    flux_phase = 'temperature = "3 MK"\n'
    inputs = read_cycle_file(text=MINIMAL.replace(flux_phase, flux_phase + "width_logT = 0.2\n"), name="ok.toml")
    assert inputs.phases[1].width_logT == 0.2
    with pytest.raises(ScenarioError, match=r"bad.toml: \[phase\[1\]\] width_dex = 0.2: renamed: write width_logT = 0.2"):
        read_cycle_file(text=MINIMAL.replace(flux_phase, flux_phase + "width_dex = 0.2\n"), name="bad.toml")


def test_dimming_seed_beyond_what_the_file_can_record_names_the_key():
    # cycle.nc keeps the seed as a 64-bit signed netCDF attribute: 2**63 - 1 is the largest
    text = f'reference_scenario = "{REFERENCE}"\n' + MINIMAL + f"[dimming]\nseed = {2 ** 63}\n"
    with pytest.raises(ScenarioError, match=r"c.toml: \[dimming\] seed = 9223372036854775808: out of range"):
        read_cycle_file(text=text, name="c.toml")
    assert read_cycle_file(text=text.replace(str(2 ** 63), str(2 ** 63 - 1)), name="c.toml").seed == 2 ** 63 - 1


@pytest.mark.parametrize("old, new, where", [
    ('title = "t"', 'title = "t\\u0000"', r"c.toml: title: contains the control character U\+0000"),
    ('label = "b"', 'label = "b\\n"', r"c.toml: \[phase\[1\]\] label: contains the control character U\+000A"),
])
def test_control_characters_in_text_name_the_key(old, new, where):
    text = MINIMAL.replace(old, new, 1)
    assert text != MINIMAL
    with pytest.raises(ScenarioError, match=where):
        read_cycle_file(text=text, name="c.toml")
