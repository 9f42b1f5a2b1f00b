"""Start-up: the commands and calls a first-time user meets, each in a fresh process (cold) beside the same call
repeated in one process (warm).

Cold times are wall-clock times of a whole new interpreter (``subprocess.run``), best of N; the CPU time of that
process (user + system, from ``RUSAGE_CHILDREN``) is in ``cpu``. The files are in the operating system's cache
(every cold run after the first), so "cold" means a new Python process, not a cold disk.
"""
import json
import os
import pathlib
import resource
import subprocess
import sys
import tempfile
import time

from common import best_of

ROOT = pathlib.Path(__file__).resolve().parents[1]
SCENARIO = ROOT / "examples" / "scenarios" / "young_star_softx.toml"
SMALL_SCENARIO = ROOT / "tests" / "data" / "small_forecast.toml"
#: Targets of the issue "First run on any machine".
SOURCE = ("issue 'First run on any machine': --help, list and table-info < 0.5 s, import < 1 s, first band_flux "
          "after the table load within 2x of a warm call plus the load")


def _command(*args):
    """``synthcorona ARGS`` as installed beside this interpreter (the console script), else through ``-c``."""
    script = pathlib.Path(sys.executable).with_name("synthcorona")
    if script.is_file():
        return [sys.executable, str(script), *args]
    return [sys.executable, "-c", "import sys; from synthcorona.cli import main; sys.exit(main())", *args]


def cold(cmd, n):
    """(best wall s, CPU s of that run, stdout of the last run) of ``n`` fresh processes running ``cmd``."""
    best, out = (float("inf"), 0.0), ""
    for _ in range(n):
        r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        run = subprocess.run(cmd, capture_output=True, text=True, timeout=600, cwd=ROOT,
                             env={**os.environ, "MPLBACKEND": "Agg"})
        wall = time.perf_counter() - t0
        r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
        if run.returncode != 0:
            raise RuntimeError(f"{' '.join(map(str, cmd[1:]))}: exit {run.returncode}: {run.stderr.strip()[-300:]}")
        best = min(best, (wall, (r1.ru_utime - r0.ru_utime) + (r1.ru_stime - r0.ru_stime)))
        out = run.stdout
    return best[0], best[1], out


def _warm_cli(argv, n):
    """Best wall time of ``main(argv)`` repeated in this process (output discarded; --help's exit caught)."""
    import contextlib
    import io

    from synthcorona.cli import main

    def call():
        with contextlib.redirect_stdout(io.StringIO()):
            try:
                main(list(argv))
            except SystemExit:
                pass
    call()
    return best_of(call, n)[0]


def _cli_row(argv):
    def run(quick):
        n = 3 if quick else 7
        t, c, _ = cold(_command(*argv), n)
        warm = _warm_cli(argv, n)
        return {"seconds": t, "cpu": c, "warm": warm,
                "note": f"cold: new process, best of {n} (CPU {c:.2f} s); warm: main({argv}) repeated in one "
                        f"process {warm * 1e3:.1f} ms"}
    return run


def run_import(quick):
    n = 3 if quick else 7
    t, c, _ = cold([sys.executable, "-c", "import synthcorona"], n)
    bare, _, _ = cold([sys.executable, "-c", "pass"], n)
    import importlib

    import synthcorona  # noqa: F401
    warm = best_of(lambda: importlib.import_module("synthcorona"), n)[0]
    return {"seconds": t, "cpu": c, "warm": warm,
            "note": f"cold: new process, best of {n} (the interpreter alone {bare * 1e3:.0f} ms); warm: a second "
                    f"import in the same process {warm * 1e6:.1f} us"}


#: Run in a fresh process: times of the imports, the table load, the first band_flux and the warm one (JSON).
FIRST_BAND_FLUX = """
import json, time
clock = lambda: (time.perf_counter(), time.process_time())
t0 = clock()
import astropy.units as u
import synthcorona as sc
from synthcorona import synthesis
t1 = clock()
table = sc.load_emissivity()
t2 = clock()
dem = sc.GaussianDEM(peak_logT=6.3, width_logT=0.2, total_em=1e51 * u.cm**-3)
call = lambda: sc.band_flux(dem, (0.1, 2.4) * u.keV, 10 * u.pc, table=table)
call()
t3 = clock()
warm = []
for _ in range(5):
    s = clock(); call(); e = clock(); warm.append((e[0] - s[0], e[1] - s[1]))
w = min(warm)
print(json.dumps({"import": t1[0] - t0[0], "load": t2[0] - t1[0], "first": t3[0] - t2[0], "warm": w[0],
                  "cpu": {"import": t1[1] - t0[1], "load": t2[1] - t1[1], "first": t3[1] - t2[1], "warm": w[1]}}))
"""


def run_first_band_flux(quick):
    n = 1 if quick else 5
    runs = [json.loads(cold([sys.executable, "-c", FIRST_BAND_FLUX], 1)[2]) for _ in range(n)]
    r = min(runs, key=lambda x: x["load"] + x["first"])
    c = r["cpu"]
    ratio = (r["load"] + r["first"]) / (r["load"] + r["warm"])
    return {"seconds": r["load"] + r["first"], "value": ratio, "cpu": c["load"] + c["first"], "warm": r["warm"],
            "note": f"(load + first call) / (load + warm call), wall, best of {n} new processes: table load "
                    f"{r['load']:.2f} s, first band_flux {r['first']:.3f} s, warm {r['warm'] * 1e3:.1f} ms "
                    f"(0.1-2.4 keV, Gaussian DEM, default 1e10 cm-3; imports before it {r['import']:.2f} s); "
                    f"CPU: load {c['load']:.2f} s, first {c['first']:.3f} s, warm {c['warm'] * 1e3:.1f} ms, ratio "
                    f"{(c['load'] + c['first']) / (c['load'] + c['warm']):.2f}"}


def run_forecast(quick):
    # --quick (and the smoke test): the small test scenario without figures or report, to stay short
    scenario, extra = (SMALL_SCENARIO, ["--no-figures", "--report", "none"]) if quick else (SCENARIO, [])
    with tempfile.TemporaryDirectory(prefix="scbench-forecast-") as tmp:
        t, c, _ = cold(_command("forecast", str(scenario), "--out", f"{tmp}/cold", *extra), 1)
        first, warm = _forecast_in_one_process(scenario, f"{tmp}/warm", extra)
    what = f"--quick: {scenario.relative_to(ROOT)} {' '.join(extra)}" if quick else "README forecast"
    return {"seconds": t, "cpu": c, "warm": warm,
            "note": f"{what}: cold = one new process (CPU {c:.1f} s); in one process the first call "
                    f"{first:.1f} s (imports on first use and table load included), the second (warm) {warm:.1f} s"}


def _forecast_in_one_process(scenario, out, extra):
    code = (
        "import contextlib, io, json, sys, time\n"
        "from synthcorona.cli import main\n"
        "times = []\n"
        "for k in range(2):\n"
        "    s = time.perf_counter()\n"
        "    with contextlib.redirect_stdout(io.StringIO()):\n"
        "        assert main(['forecast', sys.argv[1], '--out', sys.argv[2] + str(k), *sys.argv[3:]]) == 0\n"
        "    times.append(time.perf_counter() - s)\n"
        "print(json.dumps(times))\n"
    )
    first, second = json.loads(cold([sys.executable, "-c", code, str(scenario), out, *extra], 1)[2])
    return first, second


def _row(name, target, run, about, unit="s"):
    return dict(name=name, unit=unit, target=target, run=run, about=about, source=SOURCE, timeout=900)


BENCHMARKS = [
    _row("startup_help", ("max", 0.5), _cli_row(["--help"]), "synthcorona --help in a new process (cold), beside "
         "main(['--help']) repeated in one process (warm)"),
    _row("startup_list", ("max", 0.5), _cli_row(["list"]), "synthcorona list (every choice) in a new process, beside "
         "main(['list']) repeated in one process"),
    _row("startup_table_info", ("max", 0.5), _cli_row(["table-info"]), "synthcorona table-info (the embedded table) "
         "in a new process, beside main(['table-info']) repeated in one process"),
    _row("startup_import", ("max", 1.0), run_import, "python -c 'import synthcorona' in a new process, beside a "
         "second import in one process"),
    _row("startup_first_band_flux", ("max", 2.0), run_first_band_flux, "in a new process: (table load + first "
         "band_flux) / (table load + warm band_flux); times in the note", unit="x"),
    _row("startup_forecast", None, run_forecast, "synthcorona forecast examples/scenarios/young_star_softx.toml "
         "--out DIR in a new process, beside the first and second call of the same command in one process"),
]
