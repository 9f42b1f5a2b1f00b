"""The output folder of a run (synthcorona.io.output_folder): checked before anything is done, locked, written
whole or not at all, old products removed only when a manifest lists them, killed runs cleaned up after."""
import hashlib
import json
import os
import signal
import subprocess
import sys

import pytest

from synthcorona.errors import OutputFolderBusy, OutputFolderError, RunInterrupted
from synthcorona.io.interrupts import raise_on_interrupts
from synthcorona.io.manifest import MANIFEST_NAME, read_manifest, verify_manifest
from synthcorona.io.output_folder import (
    COMMIT_NAME,
    LOCK_NAME,
    STAGING_PREFIX,
    OutputFile,
    OutputRun,
    check_output_file,
    check_output_folder,
    clean_up_killed_runs,
)

ARGV = ["synthcorona", "test", "--out", "x"]


def snapshot(folder):
    """Every entry of ``folder`` (hidden ones included) with its bytes: the whole state a run may change."""
    return {p.relative_to(folder).as_posix(): (p.read_bytes() if p.is_file() else None)
            for p in sorted(folder.rglob("*"))}


def run_into(folder, files: dict, **facts):
    """One complete run writing ``files`` ({name: text}) into ``folder``; returns the OutputRun."""
    with OutputRun(folder, argv=ARGV) as out:
        for name, text in files.items():
            out.path(name).write_text(text)
        out.record(**facts)
    return out


# -- checks before anything is done -------------------------------------------------------------------------
@pytest.mark.parametrize("name", ["", "   ", None])
def test_an_empty_folder_name_is_refused(name):
    with pytest.raises(OutputFolderError, match="--out: the folder name is empty") as err:
        check_output_folder(name)
    assert err.value.option == "--out" and err.value.reason == "empty name"


def test_an_existing_file_or_a_file_on_the_way_is_refused_without_changes(tmp_path):
    (tmp_path / "afile").write_text("keep")
    with pytest.raises(OutputFolderError, match="afile: exists and is not a folder"):
        check_output_folder(tmp_path / "afile")
    with pytest.raises(OutputFolderError, match="cannot be created: .*afile is not a folder"):
        check_output_folder(tmp_path / "afile" / "sub")
    with pytest.raises(OutputFolderError, match="exists and is not a folder"):
        OutputRun(tmp_path / "afile")
    assert (tmp_path / "afile").read_text() == "keep"


def test_unwritable_folder_and_unwritable_parent_are_refused(unwritable_folder):
    with pytest.raises(OutputFolderError, match="the folder is not writable"):
        check_output_folder(unwritable_folder, "--out")
    with pytest.raises(OutputFolderError, match="cannot be created: .*read_only is not writable"):
        check_output_folder(unwritable_folder / "new" / "deeper")
    with pytest.raises(OutputFolderError, match="its folder .*read_only is not writable"):
        check_output_file(unwritable_folder / "table.nc")


def test_the_check_creates_nothing(tmp_path):
    assert check_output_folder(tmp_path / "a" / "b") == tmp_path / "a" / "b"
    assert check_output_folder(tmp_path) == tmp_path
    assert os.listdir(tmp_path) == []
    with pytest.raises(OutputFolderError, match="is a folder; give the name of the file"):
        check_output_file(tmp_path)
    with pytest.raises(OutputFolderError, match="--out: the file name is empty"):
        check_output_file("")


# -- a complete run -----------------------------------------------------------------------------------------
def test_files_appear_only_at_the_end_with_a_manifest_of_their_sha256(tmp_path):
    folder = tmp_path / "out"
    with OutputRun(folder, argv=ARGV) as out:
        out.path("a.txt").write_text("alpha")
        out.path("sub/b.bin").write_bytes(b"\x00\x01")
        out.record(seed=7, inputs={"scenario": {"path": "s.toml", "size": 1, "sha256": "0"}})
        assert sorted(os.listdir(folder)) == sorted([LOCK_NAME, out.staging.name])   # nothing in place yet
        lock = json.loads((folder / LOCK_NAME).read_text())
        assert lock["pid"] == os.getpid() and lock["command"] == "synthcorona test --out x" and lock["started_utc"] == out.started
    assert sorted(os.listdir(folder)) == ["a.txt", MANIFEST_NAME, "sub"]              # lock and staging gone
    m = read_manifest(folder)
    # expected values computed here with hashlib, independently of the code under test
    assert m["files"] == [{"name": "a.txt", "size": 5, "sha256": hashlib.sha256(b"alpha").hexdigest()},
                          {"name": "sub/b.bin", "size": 2, "sha256": hashlib.sha256(b"\x00\x01").hexdigest()}]
    assert m["seed"] == 7 and m["inputs"]["scenario"]["path"] == "s.toml" and m["argv"] == ARGV
    assert m["subcommand"] == "test" and m["pid"] == os.getpid() and m["started_utc"] <= m["finished_utc"]
    assert out.written == ["a.txt", "sub/b.bin"] and out.removed == [] and out.unlisted == []
    assert verify_manifest(folder) == []
    (folder / "a.txt").write_text("changed")
    assert verify_manifest(folder) == ["a.txt: differs from the manifest (size or SHA-256)"]


def test_an_error_during_the_run_leaves_the_folder_byte_identical(tmp_path):
    folder = tmp_path / "out"
    run_into(folder, {"a.txt": "old a", "b.txt": "old b"}, seed=1)
    before = snapshot(folder)
    with pytest.raises(RuntimeError, match="late failure"):
        with OutputRun(folder, argv=ARGV) as out:
            out.path("a.txt").write_text("new a")
            out.path("c.txt").write_text("new c")
            raise RuntimeError("late failure")
    assert snapshot(folder) == before                       # no staging folder, no lock file, same bytes
    run_into(folder, {"a.txt": "new a"})                   # and the lock was released


def test_a_failed_run_into_a_new_folder_leaves_no_folder(tmp_path):
    with pytest.raises(RuntimeError):
        with OutputRun(tmp_path / "new" / "out", argv=ARGV) as out:
            out.path("a.txt").write_text("x")
            raise RuntimeError("late failure")
    assert os.listdir(tmp_path / "new") == []


def test_product_names_stay_inside_the_folder(tmp_path):
    with OutputRun(tmp_path, argv=ARGV) as out:
        for bad in ("../x", "/abs", MANIFEST_NAME, ".synthcorona-x", "a/../../b", ""):
            with pytest.raises(ValueError):
                out.path(bad)


# -- the lock -----------------------------------------------------------------------------------------------
def test_a_second_run_into_a_locked_folder_is_refused_naming_the_first(tmp_path):
    with OutputRun(tmp_path, argv=ARGV) as first:
        first.path("a.txt").write_text("first")
        with pytest.raises(OutputFolderBusy) as err:
            with OutputRun(tmp_path, argv=["synthcorona", "other"]):
                pass
        e = err.value
        assert e.pid == os.getpid() and e.started == first.started and e.command == "synthcorona test --out x"
        msg = str(e)
        assert "\n" not in msg and f"pid {os.getpid()}" in msg and first.started in msg and "in use by another" in msg
    assert (tmp_path / "a.txt").read_text() == "first"       # the refused run changed nothing


HOLDER = """
import fcntl, json, os, sys, time
fd = os.open(sys.argv[1], os.O_RDWR | os.O_CREAT)
fcntl.flock(fd, fcntl.LOCK_EX)
os.write(fd, json.dumps({"pid": os.getpid(), "host": "h", "started_utc": "2025-01-01T00:00:00Z",
                         "command": "synthcorona forecast s.toml"}).encode())
print("locked", flush=True)
time.sleep(60)
"""


def test_a_lock_held_by_another_process_refuses_and_a_killed_holder_does_not_block(tmp_path):
    holder = subprocess.Popen([sys.executable, "-c", HOLDER, str(tmp_path / LOCK_NAME)], stdout=subprocess.PIPE,
                              text=True)
    try:
        assert holder.stdout.readline().strip() == "locked"
        with pytest.raises(OutputFolderBusy, match=f"pid {holder.pid} on h, started 2025-01-01T00:00:00Z"):
            with OutputRun(tmp_path, argv=ARGV):
                pass
    finally:
        holder.kill()
        holder.wait(timeout=30)
    # the kernel released the dead process's lock: its lock file no longer blocks
    run_into(tmp_path, {"a.txt": "after"})
    assert sorted(os.listdir(tmp_path)) == ["a.txt", MANIFEST_NAME]


# -- old products -------------------------------------------------------------------------------------------
def test_previous_products_not_rewritten_are_removed_and_unlisted_files_kept(tmp_path):
    run_into(tmp_path, {"a.txt": "1", "b.png": "1", "report.html": "1"})
    (tmp_path / "notes.txt").write_text("mine")
    out = run_into(tmp_path, {"a.txt": "2"})
    assert sorted(os.listdir(tmp_path)) == ["a.txt", MANIFEST_NAME, "notes.txt"]
    assert out.removed == ["b.png", "report.html"] and out.unlisted == ["notes.txt"]
    assert [f["name"] for f in read_manifest(tmp_path)["files"]] == ["a.txt"]
    assert (tmp_path / "notes.txt").read_text() == "mine"


def test_names_outside_the_folder_in_a_tampered_manifest_are_never_removed(tmp_path):
    folder = tmp_path / "out"
    run_into(folder, {"a.txt": "1"})
    (tmp_path / "outside.txt").write_text("keep")
    m = read_manifest(folder)
    m["files"] += [{"name": n} for n in ("../outside.txt", str(tmp_path / "outside.txt"), LOCK_NAME, "x/../../o")]
    (folder / MANIFEST_NAME).write_text(json.dumps(m))
    run_into(folder, {"b.txt": "2"})
    assert (tmp_path / "outside.txt").read_text() == "keep"
    assert sorted(os.listdir(folder)) == ["b.txt", MANIFEST_NAME]


def test_a_folder_in_the_way_of_a_product_stops_the_run_before_anything_moves(tmp_path):
    run_into(tmp_path, {"a.txt": "1"})
    (tmp_path / "b.txt").mkdir()
    before = snapshot(tmp_path)
    with pytest.raises(OutputFolderError, match="holds a folder b.txt"):
        run_into(tmp_path, {"a.txt": "2", "b.txt": "2"})
    assert snapshot(tmp_path) == before


# -- killed runs --------------------------------------------------------------------------------------------
def test_leftovers_of_a_killed_run_are_removed_by_the_next_run(tmp_path):
    run_into(tmp_path, {"a.txt": "1"})
    (tmp_path / f"{STAGING_PREFIX}dead").mkdir()
    (tmp_path / f"{STAGING_PREFIX}dead" / "a.txt").write_text("half")
    (tmp_path / LOCK_NAME).write_text('{"pid": 1}')            # a dead run's lock file, not locked by anyone
    out = run_into(tmp_path, {"a.txt": "2"})
    assert sorted(os.listdir(tmp_path)) == ["a.txt", MANIFEST_NAME]
    assert out.recovered == [f"removed {STAGING_PREFIX}dead, left by an earlier run that was killed"]


def test_a_commit_cut_short_is_completed_by_the_next_run(tmp_path, monkeypatch):
    run_into(tmp_path, {"a.txt": "old", "b.txt": "old", "c.txt": "old"}, seed=1)
    real_replace, calls = os.replace, []

    def crash_after_one(src, dst):      # the process "dies" after moving one file into place
        calls.append(dst)
        if len(calls) > 1:
            raise OSError("simulated crash")
        real_replace(src, dst)

    monkeypatch.setattr(os, "replace", crash_after_one)
    with pytest.raises(OSError, match="simulated crash"):
        run_into(tmp_path, {"a.txt": "new", "b.txt": "new"}, seed=2)
    monkeypatch.undo()
    assert (tmp_path / COMMIT_NAME).is_dir() and not (tmp_path / MANIFEST_NAME).exists()
    assert (tmp_path / "a.txt").read_text() == "new" and (tmp_path / "b.txt").read_text() == "old"
    # the next run, even one that fails, first completes the interrupted commit
    with pytest.raises(RuntimeError):
        with OutputRun(tmp_path, argv=ARGV) as out:
            raise RuntimeError("fails after entering")
    assert out.recovered[0].startswith("completed moving the files of an earlier run")
    assert sorted(os.listdir(tmp_path)) == ["a.txt", "b.txt", MANIFEST_NAME]      # c.txt of the old run removed
    assert (tmp_path / "b.txt").read_text() == "new" and read_manifest(tmp_path)["seed"] == 2
    assert verify_manifest(tmp_path) == []


def test_clean_up_of_an_unreadable_commit_plan_is_refused(tmp_path):
    (tmp_path / COMMIT_NAME).mkdir()
    with pytest.raises(OutputFolderError, match="cannot be read; look at"):
        clean_up_killed_runs(tmp_path)


# -- interrupts ---------------------------------------------------------------------------------------------
def test_an_interrupt_during_the_run_discards_it(tmp_path):
    run_into(tmp_path, {"a.txt": "old"})
    before = snapshot(tmp_path)
    with pytest.raises(RunInterrupted) as err:
        with raise_on_interrupts():
            with OutputRun(tmp_path, argv=ARGV) as out:
                out.path("a.txt").write_text("new")
                signal.raise_signal(signal.SIGTERM)
    assert err.value.exit_status == 143 and err.value.results_written is False
    assert snapshot(tmp_path) == before


def test_an_interrupt_during_the_commit_waits_until_every_file_is_in_place(tmp_path, monkeypatch):
    import threading

    run_into(tmp_path, {"a.txt": "old", "b.txt": "old"})
    # pause 1 s inside the commit, with a.txt already moved and b.txt not yet; SIGINT arrives during the pause
    monkeypatch.setenv("SYNTHCORONA_TEST_PAUSE", "move:b.txt=1")
    timer = threading.Timer(0.3, os.kill, (os.getpid(), signal.SIGINT))
    with pytest.raises(RunInterrupted) as err:
        with raise_on_interrupts():
            with OutputRun(tmp_path, argv=ARGV) as out:
                out.path("a.txt").write_text("new")
                out.path("b.txt").write_text("new")
                timer.start()
    timer.join()
    assert err.value.exit_status == 130 and err.value.results_written is True
    assert (tmp_path / "a.txt").read_text() == "new" and (tmp_path / "b.txt").read_text() == "new"
    assert verify_manifest(tmp_path) == [] and sorted(os.listdir(tmp_path)) == ["a.txt", "b.txt", MANIFEST_NAME]


# -- one output file ----------------------------------------------------------------------------------------
def test_an_output_file_is_replaced_only_by_a_complete_one(tmp_path):
    target = tmp_path / "table.nc"
    target.write_text("old table")
    with pytest.raises(RuntimeError):
        with OutputFile(target, argv=ARGV) as out:
            out.path().write_text("half a table")
            raise RuntimeError("build failed")
    assert os.listdir(tmp_path) == ["table.nc"] and target.read_text() == "old table"
    with OutputFile(target, argv=ARGV) as out:
        out.path().write_text("new table")
        with pytest.raises(OutputFolderBusy, match=f"pid {os.getpid()}"):
            with OutputFile(target, argv=ARGV):
                pass
    assert os.listdir(tmp_path) == ["table.nc"] and target.read_text() == "new table"
