"""Parallel table build: build_table of a few ions with two dask workers against one process."""
import os
import pathlib
import shutil
import tempfile
import time

from common import CHIANTI_ENV, chianti


def _build(quick, jobs):
    from synthcorona.atomic import locate
    from synthcorona.atomic.builder import DEFAULT_LOGT, BuildSettings, build_table, proton_electron_ratio

    _, h5 = chianti()
    ions = ["o_7", "o_8"] if quick else ["o_6", "o_7", "o_8", "fe_16"]
    logT = DEFAULT_LOGT[20:61:2] if quick else DEFAULT_LOGT
    settings = BuildSettings(logT=logT, ions=ions)  # default elements: the HDF5 database of chianti()
    root = locate.cache_dir() / "bench" / "scaling"
    root.mkdir(parents=True, exist_ok=True)
    work = pathlib.Path(tempfile.mkdtemp(dir=root))  # fresh: no per-ion results to resume from
    cached = root / f"pe-{logT.size}.npy"
    if cached.exists():
        shutil.copy(cached, work / "proton_electron_ratio.npy")
    tp = time.perf_counter()
    proton_electron_ratio(h5, logT, work)  # once per grid (build_table reads it from the work dir), not timed
    tp = time.perf_counter() - tp
    shutil.copy(work / "proton_electron_ratio.npy", cached)
    t0, c0 = time.perf_counter(), time.process_time()
    build_table(work / "t.nc", chianti=os.environ[CHIANTI_ENV], settings=settings, jobs=jobs, work_dir=work,
                progress=False)
    t, c = time.perf_counter() - t0, time.process_time() - c0
    shutil.rmtree(work, ignore_errors=True)
    return {"seconds": t, "cpu": c, "note": f"{len(ions)} ions ({', '.join(ions)}), {logT.size} T x 5 n_e "
            f"(p/e ratio {tp:.0f} s before, not counted)"}


BENCHMARKS = [dict(
    name="build_scaling_jobs", unit="s", target=None, timeout=3600,
    run=lambda quick: _build(quick, 2), baseline=lambda quick: _build(quick, 1),
    about="build_table(..., jobs=2) of four ions (O VI-VIII, Fe XVI; local dask cluster), fresh work directory, vs "
          "the same with jobs=1; ratio = speed-up from the second worker, cluster start-up included (the p/e "
          "ratio of the grid is computed before the timer); needs CHIANTI",
    source="no target: a figure to watch (2 cores, shared)")]
