"""Distributed runs on a two-process dask cluster: table builds and detection grids must give
exactly the single-process results, and a build must survive a failing task and a dying worker.

The reference of every check here is the project's own single-process path (``jobs=1`` /
``scheduler=None``), which the other test modules check against published values; what is
tested is that distributing the work changes no number (common practice for parallel
reproducibility, no source).
"""
import os
import pathlib
import shutil
import sys
import warnings

import astropy.units as u
import numpy as np
import pytest
import xarray as xr

from synthcorona.dem import GaussianDEM, MultiComponentDEM
from synthcorona.dimming import CME, Corona, DimmingScenario, Observation, Star, detection_grid
from synthcorona.errors import InputError

distributed = pytest.importorskip("distributed")

#: Three small ions (hydrogen-like H, He, O) on a coarse grid: a build of a few seconds per ion.
IONS = ["h_1", "he_2", "o_8"]
ELEMENTS = ["H", "He", "O", "Fe"]           # the element set of conftest's small build (same HDF5 file)
LOGT = np.round(np.arange(5.5, 7.5 + 1e-9, 0.1), 6)
LOGN = np.array([9.0, 11.0])
N_ENERGY = 300


@pytest.fixture(scope="module")
def client():
    """A LocalCluster of two worker processes with one thread each.

    ``allowed-failures`` 0 makes the scheduler give up on a task at the first worker death
    (``KilledWorker``), so the builder's own resubmission is what recovers the ion.
    """
    import dask
    from distributed import Client, LocalCluster

    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None)
    c = Client(cluster)
    yield c
    c.close()
    cluster.close()


# ----------------------------------------------------------------------------- table builds
def _settings():
    from synthcorona.atomic.builder import BuildSettings, default_energy_grid

    return BuildSettings(logT=LOGT, log_density=LOGN, energy=default_energy_grid(N_ENERGY), elements=ELEMENTS,
                         ions=IONS)


@pytest.fixture(scope="module")
def serial_build(fiasco_ready, chianti_path, tmp_path_factory):
    """The single-process build (jobs=1, no scheduler) of the three-ion table."""
    from synthcorona.atomic.builder import build_table

    root = tmp_path_factory.mktemp("dist-serial")
    env = os.environ.pop("SYNTHCORONA_SCHEDULER", None)
    try:
        path = build_table(root / "serial.nc", chianti=chianti_path, settings=_settings(), jobs=1,
                           work_dir=root / "work", progress=False)
    finally:
        if env is not None:
            os.environ["SYNTHCORONA_SCHEDULER"] = env
    return {"path": path, "work": root / "work", "chianti": chianti_path}


def _work_dir(serial_build, tmp_path) -> pathlib.Path:
    """A fresh work directory holding only the n_p/n_e ratio of the serial build (computed once per grid
    and cached in the work directory by design), so that every ion is computed again."""
    work = tmp_path / "work"
    work.mkdir()
    shutil.copy(serial_build["work"] / "proton_electron_ratio.npy", work)
    return work


def _assert_same_table(a_path, b_path):
    from synthcorona.io.table_file import read_table

    a, b = read_table(a_path), read_table(b_path)
    assert a.attrs["content_hash"] == b.attrs["content_hash"]
    assert sorted(a.data_vars) == sorted(b.data_vars)
    for name in a.data_vars:
        np.testing.assert_array_equal(a[name].values, b[name].values, err_msg=name)
    for name in a.coords:
        np.testing.assert_array_equal(a[name].values, b[name].values, err_msg=name)
    assert a.attrs["ions"] == b.attrs["ions"] == " ".join(IONS)


@pytest.mark.chianti
def test_dask_build_identical_to_single_process(serial_build, client, tmp_path):
    from synthcorona.atomic.builder import build_table

    work = _work_dir(serial_build, tmp_path)
    out = build_table(tmp_path / "dask.nc", chianti=serial_build["chianti"], settings=_settings(),
                      work_dir=work, progress=False, scheduler=client)
    _assert_same_table(serial_build["path"], out)
    # the per-ion files themselves are the same numbers (the compute time stored beside them aside)
    for ion in IONS:
        with np.load(serial_build["work"] / "ions" / f"{ion}.npz") as a, np.load(work / "ions" / f"{ion}.npz") as b:
            assert sorted(a.files) == sorted(b.files)
            for key in a.files:
                if key != "seconds":
                    np.testing.assert_array_equal(a[key], b[key], err_msg=f"{ion}:{key}")
    assert not list((work / "ions").glob("*.partial.npz"))
    # resumable: a second run finds every ion done, recomputes none and writes the same table
    stamps = {p.name: p.stat().st_mtime_ns for p in (work / "ions").glob("*.npz")}
    again = build_table(tmp_path / "again.nc", chianti=serial_build["chianti"], settings=_settings(),
                        work_dir=work, progress=False, scheduler=client)
    assert {p.name: p.stat().st_mtime_ns for p in (work / "ions").glob("*.npz")} == stamps
    _assert_same_table(serial_build["path"], again)


class _FailFirstAttempt(distributed.WorkerPlugin):
    """Worker plugin making the first attempt of chosen ions fail: ``kill`` ends the worker process
    (as a crash or an out-of-memory kill would), ``raise`` raises in the task. A marker file per ion
    in ``marker_dir`` (shared by the worker processes) records that the first attempt happened."""

    def __init__(self, marker_dir, plan):
        self.marker_dir, self.plan = str(marker_dir), dict(plan)

    def setup(self, worker):
        import synthcorona.atomic.builder as builder

        original = getattr(builder, "_original_compute_ion", builder.compute_ion)
        builder._original_compute_ion = original
        marker_dir, plan = pathlib.Path(self.marker_dir), self.plan

        def compute_ion(name, *args, **kwargs):
            how = plan.get(name)
            if how is not None:
                marker = marker_dir / f"{name}.{how}"
                try:
                    fd = os.open(marker, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
                except FileExistsError:
                    pass  # not the first attempt: compute normally
                else:
                    os.close(fd)
                    if how == "kill":
                        os._exit(1)
                    raise RuntimeError(f"injected failure of the first attempt of {name}")
            return original(name, *args, **kwargs)

        builder.compute_ion = compute_ion

    def teardown(self, worker):
        import synthcorona.atomic.builder as builder

        if hasattr(builder, "_original_compute_ion"):
            builder.compute_ion = builder._original_compute_ion


@pytest.mark.chianti
def test_dask_build_survives_failed_task_and_dead_worker(serial_build, client, tmp_path):
    import cloudpickle

    from synthcorona.atomic.builder import build_table

    cloudpickle.register_pickle_by_value(sys.modules[__name__])   # the plugin class travels by value
    markers = tmp_path / "markers"
    markers.mkdir()
    work = _work_dir(serial_build, tmp_path)
    client.register_plugin(_FailFirstAttempt(markers, {"o_8": "kill", "he_2": "raise"}), name="fail-first")
    try:
        out = build_table(tmp_path / "faulty.nc", chianti=serial_build["chianti"], settings=_settings(),
                          work_dir=work, progress=False, scheduler=client, retries=2)
    finally:
        client.unregister_worker_plugin("fail-first")
        cloudpickle.unregister_pickle_by_value(sys.modules[__name__])
    # both failures happened, and the build still equals the single-process one
    assert sorted(p.name for p in markers.iterdir()) == ["he_2.raise", "o_8.kill"]
    _assert_same_table(serial_build["path"], out)
    client.wait_for_workers(2, timeout=120)   # the nanny restarted the killed worker


@pytest.mark.chianti
def test_build_without_retries_reports_the_failure(serial_build, client, tmp_path):
    import cloudpickle

    from synthcorona.atomic.builder import build_table

    cloudpickle.register_pickle_by_value(sys.modules[__name__])
    markers = tmp_path / "markers"
    markers.mkdir()
    work = _work_dir(serial_build, tmp_path)
    client.register_plugin(_FailFirstAttempt(markers, {"h_1": "raise"}), name="fail-first")
    try:
        with pytest.raises(RuntimeError, match="injected failure of the first attempt of h_1"):
            build_table(tmp_path / "x.nc", chianti=serial_build["chianti"], settings=_settings(),
                        work_dir=work, progress=False, scheduler=client, retries=0)
    finally:
        client.unregister_worker_plugin("fail-first")
        cloudpickle.unregister_pickle_by_value(sys.modules[__name__])
    assert not (work / "ions" / "h_1.npz").exists()
    assert not list((work / "ions").glob("h_1.*.partial.npz"))   # the failed ion left nothing behind


def test_build_bad_scheduler_and_jobs(tmp_path, monkeypatch, capsys):
    from synthcorona.atomic.builder import build_table
    from synthcorona.cli import main

    with pytest.raises(InputError, match="jobs=-1"):
        build_table(tmp_path / "x.nc", jobs=-1)
    with pytest.raises(InputError, match="retries=-1"):
        build_table(tmp_path / "x.nc", retries=-1)
    with pytest.raises(InputError, match="scheduler='nowhere'"):
        build_table(tmp_path / "x.nc", scheduler="nowhere")
    monkeypatch.setenv("SYNTHCORONA_SCHEDULER", "nowhere")
    with pytest.raises(InputError, match="SYNTHCORONA_SCHEDULER='nowhere'"):
        build_table(tmp_path / "x.nc")
    monkeypatch.delenv("SYNTHCORONA_SCHEDULER")
    # the command: one line naming the option's value, exit status 2
    assert main(["build-table", "--out", str(tmp_path / "x.nc"), "--scheduler", "nowhere"]) == 2
    err = capsys.readouterr().err
    assert "scheduler='nowhere'" in err and "Traceback" not in err


# ----------------------------------------------------------------------------- detection grids
# Same invented active K dwarf as tests/test_dimming_extra.py.
STAR_DEM = MultiComponentDEM([GaussianDEM(6.3, 0.15, 3e52 * u.cm ** -3), GaussianDEM(6.9, 0.15, 1e52 * u.cm ** -3)])


@pytest.fixture(scope="module")
def star():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(Star(2 * u.pc, nh=1e17 * u.cm ** -2), Corona(STAR_DEM, density=1e9 * u.cm ** -3),
                               CME(1e17 * u.g, source_temperature=2e6 * u.K), None, ["sc-fe9", "sc-fe12"],
                               Observation(10 * u.h, 60 * u.s, 2 * u.h))


def test_detection_grid_on_cluster_identical_to_in_process(star, client):
    kw = dict(distance=[2, 3, 4] * u.pc, bin_width=[60, 300] * u.s, mass=[1e17, 4e17, 1.5e18] * u.g,
              n_realisations=1000, seed=7)
    ref = detection_grid(star, **kw)
    for chunk_size in (1, 4, None):           # 6 outer points: one per task, uneven chunks, default
        got = detection_grid(star, scheduler=client, chunk_size=chunk_size, **kw)
        xr.testing.assert_identical(ref, got)
    # the grid is not trivially flat: P(detect) spans a range and grows with mass. With the onset scanned (the
    # default) common random numbers keep it monotone only up to Monte Carlo error (a deeper dimming also lowers
    # trials whose baseline it overlaps; synthcorona.dimming.detection): within 2 binomial standard errors.
    p = ref.probability.values
    assert p.min() < 0.2 and p.max() > 0.8
    se = np.sqrt(np.maximum(p, 1e-3) * (1 - p) / 1000)
    assert np.all(np.diff(p, axis=2) >= -2 * se[:, :, 1:])


def test_min_mass_grid_on_cluster_identical_to_in_process(star, client):
    kw = dict(distance=[2, 4] * u.pc, instrument=[("sc-fe12")], n_realisations=1000, seed=1, min_mass=True,
              bracket=(1e16 * u.g, 1e19 * u.g))
    ref = detection_grid(star, **kw)
    got = detection_grid(star, scheduler=client, chunk_size=1, **kw)
    xr.testing.assert_identical(ref, got)
    assert np.all(np.isfinite(got.minimum_detectable_mass.values))
    # the same cluster reached by its scheduler address (as a remote cluster would be)
    by_address = detection_grid(star, scheduler=client.scheduler.address, **kw)
    xr.testing.assert_identical(ref, by_address)


def test_detection_grid_bad_scheduler(star):
    with pytest.raises(InputError, match="scheduler=42"):
        detection_grid(star, distance=[2, 3] * u.pc, scheduler=42)
    with pytest.raises(InputError, match="scheduler='nowhere'"):
        detection_grid(star, distance=[2, 3] * u.pc, scheduler="nowhere")
