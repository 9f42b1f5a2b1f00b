"""Smoke test of the benchmark suite (benchmarks/harness.py): every benchmark file yields rows, no timing checks."""
import json
import os
import pathlib
import re
import subprocess
import sys

BENCH = pathlib.Path(__file__).resolve().parents[1] / "benchmarks"
HARNESS = BENCH / "harness.py"
# the rows that need CHIANTI are skipped here: with a CHIANTI copy they would take minutes
ENV = {k: v for k, v in os.environ.items() if k != "SYNTHCORONA_CHIANTI"}


def test_smoke_run_gives_a_timed_row_for_every_benchmark_file(tmp_path):
    out = tmp_path / "smoke.json"
    md = tmp_path / "smoke.md"
    run = subprocess.run([sys.executable, str(HARNESS), "--smoke", "--json", str(out), "--markdown", str(md)],
                         capture_output=True, text=True, timeout=240, env=ENV)
    assert run.returncode == 0, run.stderr[-2000:]
    rows = json.loads(out.read_text())["rows"]
    files = {p.stem for p in BENCH.glob("bench_*.py")}
    assert len(files) >= 10
    assert {r["file"] for r in rows} == files
    for r in rows:
        assert "error" not in r["ours"], (r["name"], r["ours"]["error"])
        if "skipped" in r["ours"]:  # only the rows that need a CHIANTI copy are skipped
            assert "needs CHIANTI" in r["ours"]["skipped"], r
            continue
        assert r["ours"]["seconds"] > 0, r
        assert r["ours"]["wall"] >= r["ours"]["seconds"] * 0.99, r
    # every file has at least one row that really ran here (CHIANTI rows excepted)
    ran = {r["file"] for r in rows if "seconds" in r["ours"]}
    assert ran >= files - {"bench_table_build", "bench_build_scaling"}
    # the printed table and the markdown file carry one line per benchmark
    for r in rows:
        assert re.search(rf"^{r['name']} ", run.stdout, re.M), r["name"]
        assert f"| {r['name']} |" in md.read_text()


def test_quick_row_has_baseline_ratio_target_and_both_peak_rss():
    run = subprocess.run([sys.executable, str(HARNESS), "--quick", "--only", "p_detect_window"],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr[-2000:]
    rows = [line for line in run.stdout.splitlines() if line.startswith("p_detect_window")]
    assert len(rows) == 1, run.stdout
    # measured and baseline times, a ratio, the target, a verdict and the peak RSS of both subprocesses
    assert re.search(r"\d+(\.\d+)? (us|ms|s) +\d+(\.\d+)? (us|ms|s) +\d+(\.\d+)?x +< 2\.00 s +(yes|NO) +\d+/\d+ MB",
                     rows[0]), rows[0]
    # the note carries the detection probability of the with-event realisations, a number in [0, 1]
    p = float(re.search(r"P = ([0-9.]+)", rows[0]).group(1))
    assert 0.0 <= p <= 1.0


def test_unknown_benchmark_name_is_refused():
    run = subprocess.run([sys.executable, str(HARNESS), "--only", "no_such_benchmark"],
                         capture_output=True, text=True, timeout=60)
    assert run.returncode == 2
    assert "no_such_benchmark" in run.stderr and "p_detect_window" in run.stderr
