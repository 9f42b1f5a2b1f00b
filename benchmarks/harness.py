"""Benchmark harness: runs every benchmark of benchmarks/bench_*.py and prints one table.

    python benchmarks/harness.py [--quick | --smoke] [--only NAME[,NAME...]] [--markdown PATH] [--json PATH] [--list]

Each bench_*.py file lists its rows in ``BENCHMARKS``: dicts with ``name``, ``unit`` ("s": the time the part
returns; "MB": peak RSS of its process; other units: the ``value`` it returns), ``target`` (None, ("max", v) or
("min_ratio", v) for baseline/measured), ``about``, ``source`` (of the target), ``run(quick) -> dict`` and
optionally ``baseline(quick) -> dict``, ``agree(ours, base) -> str``, ``timeout`` (s) and ``env`` (variables). A part returns
{"seconds", "cpu", "note", ...}. Each part runs in a fresh interpreter killed after its timeout; its peak RSS
is the ``ru_maxrss`` of that child (os.wait4). ``--smoke`` runs every ``run`` at quick sizes in one process.
"""
from __future__ import annotations

import argparse
import importlib.util
import json
import os
import pathlib
import pickle
import platform
import signal
import subprocess
import sys
import tempfile
import time

HERE = pathlib.Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
KEYS = {"name", "unit", "target", "about", "source", "run"}


def discover() -> dict:
    """{name: benchmark dict (with its file's stem as "file")} of every bench_*.py file, in file order."""
    found = {}
    for path in sorted(HERE.glob("bench_*.py")):
        spec = importlib.util.spec_from_file_location(path.stem, path)
        mod = sys.modules[path.stem] = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        for b in mod.BENCHMARKS:
            if KEYS - set(b) or b["name"] in found:
                raise SystemExit(f"{path.name}: benchmark {b.get('name')!r} is a duplicate or lacks {KEYS - set(b)}")
            found[b["name"]] = {**b, "file": path.stem}
    return found


def worker(specs, quick, out):
    """Run ``name:part`` specs in this process; pickle their result dicts to ``out``."""
    import traceback
    import warnings

    import common

    warnings.filterwarnings("ignore")
    benches, results = discover(), []
    for spec in specs:
        name, part = spec.split(":")
        t0 = time.perf_counter()
        try:
            res = benches[name][part](quick)
        except common.Skip as exc:
            res = {"skipped": str(exc)}
        except Exception as exc:  # reported in the row; the other benchmarks go on
            traceback.print_exc()
            res = {"error": f"{type(exc).__name__}: {exc}"[:200]}
        results.append({**res, "wall": time.perf_counter() - t0})
    pathlib.Path(out).write_bytes(pickle.dumps(results))


def spawn(specs, quick, timeout, env=None):
    """Run ``specs`` in a fresh interpreter (with the environment variables ``env`` added): (results, peak RSS MiB,
    wall s); the process is killed at ``timeout``."""
    with tempfile.TemporaryDirectory(prefix="scbench-") as tmp:
        out, err = pathlib.Path(tmp) / "results.pkl", pathlib.Path(tmp) / "stderr"
        cmd = [sys.executable, __file__, "--worker", ",".join(specs), "--out", str(out)] + ["--quick"] * quick
        t0 = time.perf_counter()
        with err.open("w") as se:
            proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=se, start_new_session=True,
                                    env={**os.environ, "MPLBACKEND": "Agg", **(env or {})})
        deadline, killed = t0 + timeout, False
        try:
            while not (status := os.wait4(proc.pid, os.WNOHANG))[0]:  # wait4: the rusage of this child alone
                if time.perf_counter() > deadline:
                    if killed:
                        raise RuntimeError(f"benchmark process {proc.pid} did not exit 30 s after SIGKILL")
                    os.killpg(proc.pid, signal.SIGKILL)  # the whole group: also any workers it started
                    killed, deadline = True, deadline + 30
                time.sleep(0.02)
        except KeyboardInterrupt:
            os.killpg(proc.pid, signal.SIGKILL)
            raise
        proc.returncode = os.waitstatus_to_exitcode(status[1])
        wall, rss = time.perf_counter() - t0, status[2].ru_maxrss / 1024.0  # KiB on Linux
        if out.exists():
            return pickle.loads(out.read_bytes()), rss, wall
        why = f"timed out after {timeout:.0f} s" if killed else \
            f"exit {proc.returncode}: {(err.read_text().strip().splitlines() or ['no output'])[-1][:150]}"
    return [{"error": why} for _ in specs], rss, wall


def fmt(v, unit):
    if v is None:
        return "-"
    if unit != "s":
        return f"{v:.0f} MB" if unit == "MB" else f"{v:.3g} {unit}"
    return f"{v * 1e6:.1f} us" if v < 1e-3 else f"{v * 1e3:.1f} ms" if v < 1 else f"{v:.2f} s"


def target_text(b):
    t = b["target"]
    return "(report)" if t is None else f">= {t[1]:g}x" if t[0] == "min_ratio" else f"< {fmt(t[1], b['unit'])}"


def make_row(b, ours, base, rss, rss_base, wall):
    """One table row (a dict) from the results of the two parts of benchmark ``b``."""
    row = {"name": b["name"], "file": b["file"], "unit": b["unit"], "target": target_text(b), "ours": ours,
           "baseline": base, "peak_rss_mb": rss, "baseline_peak_rss_mb": rss_base, "process_wall_s": wall,
           "measured": None, "base_value": None, "ratio": None, "met": None}
    if "seconds" not in ours:
        return {**row, "note": ours.get("skipped") or ours.get("error", "")}
    measured = {"s": ours["seconds"], "MB": rss}.get(b["unit"], ours.get("value"))
    notes = [ours.get("note", "")]
    if base and "seconds" in base:
        row["base_value"] = base["seconds"]
        row["ratio"] = base["seconds"] / ours["seconds"] if ours["seconds"] > 0 else None
        notes.append("baseline: " + base["note"] if base.get("note") else "")
        try:
            notes.append(b["agree"](ours, base) if b.get("agree") else "")
        except Exception as exc:  # a failed comparison is reported, not fatal
            notes.append(f"agreement check failed: {exc}")
    elif base:
        notes.append("baseline " + (base.get("skipped") or base.get("error", "")))
    kind, limit = b["target"] or (None, None)
    value = measured if kind == "max" else row["ratio"]
    met = None if kind is None or value is None else value < limit if kind == "max" else value >= limit
    return {**row, "measured": measured, "met": met, "note": "; ".join(n for n in notes if n)}


def table(rows, markdown=False):
    head = ["benchmark", "measured", "baseline", "ratio", "target", "met?", "peak RSS ours/base", "note"]
    body = [[r["name"], fmt(r["measured"], r["unit"]), fmt(r["base_value"], "s"),
             f"{r['ratio']:.1f}x" if r["ratio"] else "-", r["target"], {True: "yes", False: "NO"}.get(r["met"], "-"),
             f"{r['peak_rss_mb']:.0f}" + (f"/{r['baseline_peak_rss_mb']:.0f}" if r["baseline_peak_rss_mb"] else "")
             + " MB", r["note"]] for r in rows]
    if markdown:
        return "\n".join("| " + " | ".join(v.replace("|", "\\|") for v in x) + " |"
                         for x in [head, ["---"] * len(head)] + body)
    widths = [max(len(x[i]) for x in body + [head]) for i in range(len(head) - 1)]
    lines = ["  ".join(v.ljust(w) for v, w in zip(x, widths)) + "  " + x[-1] for x in [head] + body]
    return "\n".join(lines[:1] + ["-" * min(len(lines[0]) + 40, 200)] + lines[1:])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes; figures not comparable with a full run")
    ap.add_argument("--smoke", action="store_true", help="quick sizes, no baselines, every benchmark in one process")
    ap.add_argument("--only", help="comma-separated benchmark names (see --list)")
    ap.add_argument("--markdown", help="also write the results as markdown to this file")
    ap.add_argument("--json", help="also write every raw figure (incl. CPU times) to this JSON file")
    ap.add_argument("--timeout", type=float, help="seconds per process (default: the benchmark's, else 1800)")
    ap.add_argument("--list", action="store_true", help="list the benchmarks and exit")
    ap.add_argument("--worker", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.worker:
        return worker(args.worker.split(","), args.quick, args.out)
    benches = discover()
    if args.list:
        return print("\n".join(f"{n:26s} {target_text(b):11s} {b['about']}" for n, b in benches.items()))
    names = [n.strip() for n in args.only.split(",") if n.strip()] if args.only else list(benches)
    if unknown := [n for n in names if n not in benches]:
        print(f"harness.py: unknown benchmark(s) {unknown}; valid: {', '.join(benches)}", file=sys.stderr)
        return 2
    mode = "smoke" if args.smoke else "quick" if args.quick else "full"
    head = (f"synthcorona benchmarks ({mode}), {time.strftime('%Y-%m-%d %H:%M %Z')}; {platform.node()}: "
            f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f}; python {platform.python_version()}; "
            f"SYNTHCORONA_CHIANTI {'set' if os.environ.get('SYNTHCORONA_CHIANTI') else 'unset'}")
    print(head, flush=True)
    rows = []
    if args.smoke:  # one process: peak RSS and wall time are those of the whole smoke run
        res, rss, wall = spawn([f"{n}:run" for n in names], True, args.timeout or 600)
        rows = [make_row(benches[n], r, None, rss, None, wall) for n, r in zip(names, res)]
        rows = [{**r, "measured": None, "met": None} if r["unit"] == "MB" else r for r in rows]  # RSS is shared
    for n in names if not args.smoke else ():
        b = benches[n]
        limit = args.timeout or b.get("timeout", 1800)
        (ours,), rss, wall = spawn([f"{n}:run"], args.quick, limit, b.get("env"))
        (base,), rss_b = (None,), None
        if b.get("baseline") and "seconds" in ours:
            (base,), rss_b, wall_b = spawn([f"{n}:baseline"], args.quick, limit, b.get("env"))
            wall += wall_b
        rows.append(make_row(b, ours, base, rss, rss_b, wall))
        print(f"  ran {n} in {wall:.0f} s", file=sys.stderr, flush=True)
    print("\n" + table(rows), flush=True)
    tail = (f"load average at the end {os.getloadavg()[0]:.2f}; times are wall-clock best-of-N (CPU time in --json); "
            "peak RSS = ru_maxrss of each benchmark's own process (interpreter and imports included)")
    print("\n" + tail)
    if args.markdown:
        pathlib.Path(args.markdown).write_text(f"{head}\n\n{table(rows, markdown=True)}\n\n{tail}\n")
    if args.json:
        strip = lambda d: d and {k: v for k, v in d.items() if k != "arrays"}  # noqa: E731
        pathlib.Path(args.json).write_text(json.dumps({"header": head, "rows": [
            {**r, "ours": strip(r["ours"]), "baseline": strip(r["baseline"])} for r in rows]}, indent=1, default=str))


if __name__ == "__main__":
    sys.exit(main())
