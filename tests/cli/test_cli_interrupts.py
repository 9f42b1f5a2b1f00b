"""Real ``synthcorona forecast`` processes stopped by SIGINT, SIGTERM or SIGKILL at chosen steps of writing
their output, and two forecasts started at once into one folder.

Each process runs with ``SYNTHCORONA_TEST_PAUSE`` (synthcorona.settings.pause_for_tests): it prints a line and
sleeps at the named step, and the test sends its signal when that line appears. All processes of the module
start together and run in parallel (a few seconds each on the small scenario); every wait has a timeout.
"""
import hashlib
import json
import os
import pathlib
import selectors
import shutil
import signal
import subprocess
import sys
import time

import pytest
import xarray as xr

import synthcorona.products.forecast as forecast_product
from synthcorona.cli import main
from synthcorona.errors import InputError

TEST_PAUSE_ENV = "SYNTHCORONA_TEST_PAUSE"
MANIFEST_NAME = "manifest.json"
LOCK_NAME = ".synthcorona.lock"
STAGING_PREFIX = ".synthcorona-staging-"
COMMIT_NAME = ".synthcorona-commit"

SCENARIO = str(pathlib.Path(__file__).parent.parent / "data" / "small_forecast.toml")
#: The earlier complete results: seed 3, both reports.
OLD_ARGS = ["--no-figures", "--report", "both", "--seed", "3"]
#: The run that is interrupted: another seed, one report (so the commit removes report.html).
NEW_ARGS = ["--no-figures", "--report", "md", "--seed", "11"]
RUN = "import sys; from synthcorona.cli import main; sys.exit(main(sys.argv[1:]))"
#: case -> (pause step, signal, arguments). The products move into place in name order: bands.csv, bands.ecsv,
#: detection_vs_mass.csv, detection_vs_mass.ecsv, forecast.nc, report.md.
CASES = {
    "sigint_before_computing": ("locked", signal.SIGINT, NEW_ARGS),
    "sigint_all_files_staged": ("commit", signal.SIGINT, NEW_ARGS),
    "sigterm_after_the_netcdf": ("write:bands.ecsv", signal.SIGTERM, NEW_ARGS),
    "sigterm_during_the_commit": ("move:forecast.nc=3", signal.SIGTERM, NEW_ARGS),
    "sigkill_after_the_netcdf": ("write:bands.ecsv", signal.SIGKILL, NEW_ARGS),
    "sigkill_during_the_commit": ("move:forecast.nc", signal.SIGKILL, NEW_ARGS),
}
#: Two runs into one folder; the one that locks it first holds it 5 s before computing, so that the runs overlap.
CONCURRENT = ("concurrent_a", "concurrent_b")
TIMEOUT = 240       # seconds for everything: generous for a loaded machine; a few seconds when idle


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


def files(folder):
    """Every entry of ``folder`` (hidden ones too) with its bytes."""
    return {p.name: (p.read_bytes() if p.is_file() else None) for p in sorted(pathlib.Path(folder).iterdir())}


def start(out, args, pause):
    env = dict(os.environ, **{TEST_PAUSE_ENV: pause})
    return subprocess.Popen([sys.executable, "-c", RUN, "forecast", SCENARIO, "--out", str(out), *args], env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def signal_at_pauses(procs: dict, signals: dict, deadline: float) -> dict:
    """Read every process's standard error; send ``signals[case]`` when its pause line appears. Returns the
    standard error read so far, by case."""
    sel = selectors.DefaultSelector()
    err = {case: b"" for case in procs}
    for case, p in procs.items():
        sel.register(p.stderr, selectors.EVENT_READ, case)
    waiting = set(signals)
    open_streams = len(procs)
    while open_streams and time.monotonic() < deadline:
        for key, _ in sel.select(timeout=max(0.0, deadline - time.monotonic())):
            case = key.data
            chunk = os.read(key.fileobj.fileno(), 65536)
            if not chunk:
                sel.unregister(key.fileobj)
                open_streams -= 1
                continue
            err[case] += chunk
            if case in waiting and b"synthcorona: test pause at" in err[case]:
                procs[case].send_signal(signals[case])
                waiting.discard(case)
    sel.close()
    return err


@pytest.fixture(scope="module")
def old_results(tmp_path_factory):
    """A complete earlier run (in this process), and its files with their bytes."""
    out = tmp_path_factory.mktemp("old") / "out"
    assert main(["forecast", SCENARIO, "--out", str(out), *OLD_ARGS]) == 0
    return out, files(out)


@pytest.fixture(scope="module")
def runs(old_results, tmp_path_factory):
    """Start every case and the two concurrent runs at once; (return code, stderr text, folder) by case."""
    old, _ = old_results
    base = tmp_path_factory.mktemp("runs")
    procs, folders = {}, {}
    for case, (pause, _, args) in CASES.items():
        folders[case] = base / case
        shutil.copytree(old, folders[case])
        procs[case] = start(folders[case], args, pause)
    for case in CONCURRENT:
        folders[case] = base / "shared"
        procs[case] = start(folders[case], OLD_ARGS, "locked=5")
    deadline = time.monotonic() + TIMEOUT
    try:
        err = signal_at_pauses(procs, {case: CASES[case][1] for case in CASES}, deadline)
        result = {}
        for case, p in procs.items():
            _, rest = p.communicate(timeout=max(1.0, deadline - time.monotonic()))
            result[case] = (p.returncode, (err[case] + rest).decode(), folders[case])
        return result
    finally:
        for p in procs.values():
            if p.poll() is None:
                p.kill()
                p.wait(timeout=30)


@pytest.mark.parametrize("case", ["sigint_before_computing", "sigint_all_files_staged", "sigterm_after_the_netcdf"])
def test_sigint_or_sigterm_before_the_commit_leaves_the_earlier_results_byte_identical(case, runs, old_results):
    rc, err, folder = runs[case]
    sig = CASES[case][1]
    assert rc == 128 + sig, err
    assert err.strip().splitlines()[-1] == (f"synthcorona forecast: interrupted by {sig.name}; nothing was written "
                                            "(the output keeps its previous contents)")
    assert "Traceback" not in err
    assert files(folder) == old_results[1]           # same names, same bytes; no staging folder, no lock file


def test_sigterm_during_the_commit_lets_it_finish_then_exits_143(runs):
    rc, err, folder = runs["sigterm_during_the_commit"]
    assert rc == 143 and "Traceback" not in err
    assert err.strip().splitlines()[-1] == ("synthcorona forecast: interrupted by SIGTERM; the results were already "
                                            "complete and in place")
    assert verify_manifest(folder) == [] and read_manifest(folder)["seed"] == 11
    assert sorted(files(folder)) == ["bands.csv", "bands.ecsv", "detection_vs_mass.csv", "detection_vs_mass.ecsv",
                                     "forecast.nc", MANIFEST_NAME, "report.md"]    # report.html of the old run gone


def test_sigkill_before_the_commit_leaves_the_earlier_results_and_the_next_run_cleans_up(runs, old_results, capsys):
    rc, err, folder = runs["sigkill_after_the_netcdf"]
    assert rc == -signal.SIGKILL
    left = files(folder)
    staging = [n for n in left if n.startswith(STAGING_PREFIX)]
    assert len(staging) == 1 and "forecast.nc" in os.listdir(folder / staging[0])     # the half-done run's files
    assert {n: b for n, b in left.items() if n not in staging and n != LOCK_NAME} == old_results[1]
    # the next run removes the leftovers (the dead run's lock does not block it)
    assert main(["forecast", SCENARIO, "--out", str(folder), *NEW_ARGS]) == 0
    assert f"note: removed {staging[0]}, left by an earlier run that was killed" in capsys.readouterr().out
    assert not any(n.startswith(".") for n in os.listdir(folder)) and verify_manifest(folder) == []


def test_sigkill_during_the_commit_is_completed_by_the_next_run(runs, old_results, monkeypatch, capsys):
    rc, err, folder = runs["sigkill_during_the_commit"]
    assert rc == -signal.SIGKILL
    assert (folder / COMMIT_NAME).is_dir() and not (folder / MANIFEST_NAME).exists()   # cut short mid-commit
    # the next run completes the move before anything else, even one that then fails
    def fails(*a, **k):
        raise InputError("this run fails")

    monkeypatch.setattr(forecast_product, "run_forecast", fails)
    assert main(["forecast", SCENARIO, "--out", str(folder), "--seed", "5"]) == 2
    assert "this run fails" in capsys.readouterr().err
    assert verify_manifest(folder) == [] and read_manifest(folder)["seed"] == 11
    assert "report.html" not in os.listdir(folder) and not any(n.startswith(".") for n in os.listdir(folder))


def test_two_forecasts_at_once_one_refused_the_other_complete_and_equal_to_a_single_run(runs, old_results):
    (rc_a, err_a, folder), (rc_b, err_b, _) = runs["concurrent_a"], runs["concurrent_b"]
    assert sorted([rc_a, rc_b]) == [0, 2], (err_a, err_b)
    refused = err_a if rc_a == 2 else err_b
    last = refused.strip().splitlines()[-1]
    m = read_manifest(folder)
    assert last.startswith(f"synthcorona forecast: error: --out={folder}: in use by another synthcorona run "
                           f"(pid {m['pid']} on ")
    assert f"started {m['started_utc']}" in last and "Traceback" not in refused
    # the winner's files: complete, and the same as a single run with the same arguments (old_results)
    assert verify_manifest(folder) == []
    old, old_files = old_results
    new_files = files(folder)
    assert sorted(new_files) == sorted(old_files)
    for name in ("bands.csv", "detection_vs_mass.csv"):
        assert new_files[name] == old_files[name], name
    for name in ("bands.ecsv", "detection_vs_mass.ecsv", "report.md", "report.html"):   # all but the creation time
        strip = [ln for ln in new_files[name].decode().splitlines() if "created" not in ln]
        assert strip == [ln for ln in old_files[name].decode().splitlines() if "created" not in ln], name
    a = xr.load_dataset(folder / "forecast.nc", engine="h5netcdf")
    b = xr.load_dataset(old / "forecast.nc", engine="h5netcdf")
    a.attrs.pop("created")
    b.attrs.pop("created")
    xr.testing.assert_identical(a, b)
