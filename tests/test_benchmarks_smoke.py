"""Smoke test of the benchmark suite: one cheap benchmark runs and prints its table row (no timing checks)."""
import pathlib
import re
import subprocess
import sys

SCRIPT = pathlib.Path(__file__).resolve().parents[1] / "benchmarks" / "run_all.py"


def test_quick_window_benchmark_prints_a_row():
    out = subprocess.run([sys.executable, str(SCRIPT), "--quick", "--only", "p_detect_window"],
                         capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr[-2000:]
    rows = [line for line in out.stdout.splitlines() if line.startswith("p_detect_window")]
    assert len(rows) == 1, out.stdout
    # measured and baseline times, a ratio, the target, a verdict and the peak RSS of both subprocesses
    assert re.search(r"\d+(\.\d+)? (us|ms|s) +\d+(\.\d+)? (us|ms|s) +\d+(\.\d+)?x +< 2\.00 s +(yes|NO) +\d+/\d+ MB",
                     rows[0]), rows[0]
    # the note carries the detection probability of the with-event realisations, a number in [0, 1]
    p = float(re.search(r"P = ([0-9.]+)", rows[0]).group(1))
    assert 0.0 <= p <= 1.0


def test_unknown_benchmark_name_is_refused():
    out = subprocess.run([sys.executable, str(SCRIPT), "--only", "no_such_benchmark"],
                         capture_output=True, text=True, timeout=60)
    assert out.returncode == 2
    assert "no_such_benchmark" in out.stderr and "p_detect_window" in out.stderr
