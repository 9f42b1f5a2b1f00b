"""The output folder on the command line: folder problems and late failures found before any computation, a
manifest of every run, and the files of a previous run removed only when a manifest lists them."""
import hashlib
import json
import os
import pathlib

import pytest

import synthcorona
from synthcorona.cli import main

DATA = pathlib.Path(__file__).parent.parent / "data"
SCENARIO = DATA / "small_forecast.toml"
CYCLE = DATA / "minimal_cycle.toml"
#: Arguments of each subcommand that writes, without --out.
COMMANDS = {
    "forecast": ["forecast", str(SCENARIO), "--no-figures"],
    "spectrum": ["spectrum", str(SCENARIO), "--no-figures"],
    "cycle": ["cycle", str(CYCLE), "--no-figures"],
    "emission": ["emission", "--temperature", "3 MK", "--band", "0.1-2.4 keV", "--wavelength-range", "10", "20",
                 "--wavelength-bin", "0.5 Angstrom"],
}


MANIFEST_NAME = "manifest.json"


def read_manifest(folder):
    return json.loads((folder / MANIFEST_NAME).read_text())


def verify_manifest(folder):
    """The files of ``folder`` that differ from its manifest (size or SHA-256, recomputed here with hashlib)."""
    bad = []
    for f in read_manifest(folder)["files"]:
        data = (folder / f["name"]).read_bytes()
        if f["size"] != len(data) or f["sha256"] != hashlib.sha256(data).hexdigest():
            bad.append(f["name"])
    return bad


class Computed(Exception):
    """Raised by a computation that should not have been reached."""


@pytest.fixture
def no_computation(monkeypatch):
    """Every computation of the subcommands (and the table build) raises :class:`Computed`."""
    import synthcorona.atomic.builder as builder
    import synthcorona.products.forecast as forecast
    import synthcorona.products.spectrum as spectrum
    from synthcorona.io.cycle_file import CycleInputs

    def computed(*a, **k):
        raise Computed

    for obj, name in ((forecast, "run_forecast"), (spectrum, "scenario_spectrum"), (spectrum, "dem_spectrum"),
                      (CycleInputs, "run"), (builder, "build_table")):
        monkeypatch.setattr(obj, name, computed)


def one_line_error(capsys, *texts):
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "Traceback" not in err and err.startswith("synthcorona "), err
    for t in texts:
        assert t in err, (t, err)
    return err


# -- folder problems, before any computation ----------------------------------------------------------------
@pytest.mark.parametrize("cmd", [*COMMANDS, "build-table"])
def test_an_empty_out_is_refused_before_computing(cmd, tmp_path, monkeypatch, capsys, no_computation):
    monkeypatch.chdir(tmp_path)                # today an empty --out writes into the current folder
    argv = COMMANDS.get(cmd, ["build-table"])
    assert main(argv + ["--out", ""]) == 2
    one_line_error(capsys, "--out: the", "name is empty")
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("cmd", COMMANDS)
def test_an_existing_file_as_out_is_refused_before_computing(cmd, tmp_path, capsys, no_computation):
    (tmp_path / "afile").write_text("mine")
    assert main(COMMANDS[cmd] + ["--out", str(tmp_path / "afile")]) == 2
    one_line_error(capsys, f"--out={tmp_path / 'afile'}: exists and is not a folder")
    assert main(COMMANDS[cmd] + ["--out", str(tmp_path / "afile" / "sub")]) == 2
    one_line_error(capsys, "afile is not a folder")
    assert (tmp_path / "afile").read_text() == "mine"


def test_build_table_refuses_a_folder_as_out_before_building(tmp_path, capsys, no_computation):
    assert main(["build-table", "--out", str(tmp_path)]) == 2
    one_line_error(capsys, "is a folder; give the name of the file to write")


@pytest.mark.parametrize("cmd", [*COMMANDS, "build-table"])
def test_an_unwritable_folder_or_parent_is_refused_before_computing(cmd, unwritable_folder, capsys, no_computation):
    argv = COMMANDS.get(cmd, ["build-table"])
    if cmd == "build-table":
        assert main(argv + ["--out", str(unwritable_folder / "t.nc")]) == 2
        one_line_error(capsys, "is not writable")
        return
    assert main(argv + ["--out", str(unwritable_folder)]) == 2
    one_line_error(capsys, f"--out={unwritable_folder}: the folder is not writable")
    assert main(argv + ["--out", str(unwritable_folder / "new")]) == 2
    one_line_error(capsys, f"cannot be created: {unwritable_folder} is not writable")


# -- late failures found early ------------------------------------------------------------------------------
def test_a_seed_beyond_what_the_file_can_record_is_refused_before_computing(tmp_path, capsys, no_computation):
    out = tmp_path / "o"
    assert main(COMMANDS["forecast"] + ["--out", str(out), "--seed", str(2 ** 63)]) == 2
    one_line_error(capsys, f"--seed={2 ** 63}: give an integer in [0, {2 ** 63 - 1}]")
    assert main(COMMANDS["forecast"] + ["--out", str(out), "--seed", "-1"]) == 2
    one_line_error(capsys, "--seed=-1")
    with pytest.raises(Computed):            # the largest 64-bit seed passes the checks
        main(COMMANDS["forecast"] + ["--out", str(out), "--seed", str(2 ** 63 - 1)])
    assert not out.exists()


@pytest.mark.parametrize("cmd", ["forecast", "spectrum"])
def test_a_control_character_in_the_title_is_refused_naming_the_key(cmd, tmp_path, capsys, no_computation):
    bad = tmp_path / "nul.toml"
    bad.write_text(SCENARIO.read_text().replace('title = "small test star"', 'title = "small\\u0000star"'))
    out = tmp_path / "o"
    out.mkdir()
    (out / "forecast.nc").write_bytes(b"an earlier result")
    assert main([cmd, str(bad), "--out", str(out)]) == 2
    one_line_error(capsys, "nul.toml: [scenario] title: contains the control character U+0000")
    assert os.listdir(out) == ["forecast.nc"] and (out / "forecast.nc").read_bytes() == b"an earlier result"


# -- manifest and the files of a previous run ---------------------------------------------------------------
@pytest.fixture(scope="module")
def two_forecasts(tmp_path_factory):
    """A forecast with figures and both reports, a file of the user's, then a forecast with neither into the same
    folder; (folder, the two runs' stdout)."""
    import contextlib
    import io

    out = tmp_path_factory.mktemp("rerun") / "out"
    texts = []
    for extra in (["--report", "both"], ["--no-figures", "--report", "md", "--seed", "11"]):
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            assert main(["forecast", str(SCENARIO), "--out", str(out)] + extra) == 0
        texts.append(buf.getvalue())
        if not (out / "notes.txt").exists():
            (out / "notes.txt").write_text("my notes")
    return out, texts


def test_a_rerun_removes_the_earlier_runs_figures_and_report_and_keeps_other_files(two_forecasts):
    out, (first, second) = two_forecasts
    assert "light_curves.png" in first and "report.html" in first
    assert sorted(os.listdir(out)) == ["bands.csv", "bands.ecsv", "detection_vs_mass.csv", "detection_vs_mass.ecsv",
                                       "forecast.nc", MANIFEST_NAME, "notes.txt", "report.md"]
    assert (out / "notes.txt").read_text() == "my notes"
    assert ("the files of the previous run that this run did not write: detection_vs_mass.png, effective_area.png, "
            "light_curves.png, report.html, temperature_responses.png") in second
    assert "notes.txt, which no manifest lists: not from this run, left in place" in second


def test_the_manifest_lists_every_file_with_sha256_and_the_inputs(two_forecasts, table):
    out, _ = two_forecasts
    m = read_manifest(out)
    names = sorted(set(os.listdir(out)) - {MANIFEST_NAME, "notes.txt"})
    assert [f["name"] for f in m["files"]] == names
    assert verify_manifest(out) == []          # sizes and digests recomputed with hashlib
    assert m["inputs"]["scenario"] == {"path": str(SCENARIO.resolve()), "size": SCENARIO.stat().st_size,
                                       "sha256": hashlib.sha256(SCENARIO.read_bytes()).hexdigest()}
    assert m["seed"] == 11 and m["subcommand"] == "forecast" and m["synthcorona_version"] == synthcorona.__version__
    assert m["argv"][:4] == ["synthcorona", "forecast", str(SCENARIO), "--out"] and "--seed 11" in m["command"]
    assert m["table"]["content_hash"] == table.provenance["content_hash"]
    assert m["started_utc"] <= m["finished_utc"]
    json.loads((out / MANIFEST_NAME).read_text())


@pytest.mark.parametrize("cmd", ["spectrum", "cycle", "emission"])
def test_every_writing_subcommand_writes_a_manifest_and_leaves_nothing_else(cmd, tmp_path, capsys):
    out = tmp_path / "o"
    assert main(COMMANDS[cmd] + ["--out", str(out)]) == 0
    assert verify_manifest(out) == []
    assert sorted(os.listdir(out)) == sorted([f["name"] for f in read_manifest(out)["files"]] + [MANIFEST_NAME])
    assert read_manifest(out)["subcommand"] == cmd
    capsys.readouterr()
