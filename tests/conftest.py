"""Shared fixtures: the embedded table, and (when SYNTHCORONA_CHIANTI is set) a small table
built from CHIANTI for the checks against direct fiasco calculations."""
import os
import pathlib

import numpy as np
import pytest

CHIANTI_ENV = "SYNTHCORONA_CHIANTI"
#: A few ions spanning the checks of the issue: Fe XII (one of Fe IX-XIII), Fe XVIII (Fe XVII-XX),
#: O VII/VIII, and H/He for the continuum.
SMALL_IONS = ["h_1", "h_2", "he_1", "he_2", "he_3", "o_6", "o_7", "o_8", "o_9", "fe_12", "fe_18"]
SMALL_ELEMENTS = ["H", "He", "O", "Fe"]
#: A coarser grid than the default keeps the CI build short (logT 5.5-7.5 step 0.05, three densities).
SMALL_LOGT = np.round(np.arange(5.5, 7.5 + 1e-9, 0.05), 6)
SMALL_LOGN = np.array([8.0, 10.0, 12.0])


@pytest.fixture(scope="session")
def table():
    import synthcorona as sc

    return sc.load_emissivity()


@pytest.fixture(scope="session")
def chianti_path():
    p = os.environ.get(CHIANTI_ENV)
    if not p or not pathlib.Path(p).exists():
        pytest.skip(f"needs the CHIANTI database: set {CHIANTI_ENV} to an ASCII CHIANTI tree or its .tar.xz "
                    "(CI extracts ../shared/chianti/chianti-10.1-composite.tar.xz)")
    return p


@pytest.fixture(scope="session")
def fiasco_ready():
    """Skip unless fiasco (0.8.2, Python >= 3.12) is installed: the table builder and the direct fiasco checks
    need it; everything else runs without it."""
    from synthcorona.atomic.locate import FIASCO_REQUIREMENT, fiasco_available

    if not fiasco_available():
        pytest.skip(f"needs {FIASCO_REQUIREMENT} (the table builder); this is Python "
                    f"{'.'.join(map(str, __import__('sys').version_info[:3]))} without fiasco")


@pytest.fixture(scope="session")
def small_build(fiasco_ready, chianti_path, tmp_path_factory):
    """Per-ion work directory and the thresholded small table built from CHIANTI."""
    from synthcorona.atomic.builder import BuildSettings, build_table

    work = tmp_path_factory.mktemp("build-work")
    settings = BuildSettings(logT=SMALL_LOGT, log_density=SMALL_LOGN, elements=SMALL_ELEMENTS, ions=SMALL_IONS)
    path = build_table(work / "small.nc", chianti=chianti_path, settings=settings, jobs=2, work_dir=work,
                       progress=False)
    return {"work": work, "path": path, "settings": settings, "chianti": chianti_path}


#: Folder of the small input files shared by tests in several folders.
DATA = pathlib.Path(__file__).parent / "data"


@pytest.fixture(scope="session")
def small_forecast():
    """(inputs, dataset) of the small invented scenario tests/data/small_forecast.toml, run once."""
    import warnings

    from synthcorona.io.forecast_file import read_forecast_file
    from synthcorona.products.forecast import run_forecast

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        inputs = read_forecast_file(DATA / "small_forecast.toml")
        return inputs, run_forecast(inputs)


@pytest.fixture
def unwritable_folder(tmp_path):
    """An existing folder this process cannot write into: mode 0555 for an ordinary user; for root (who
    writes anywhere) the immutable attribute (``chattr +i``), else the test is skipped."""
    import subprocess

    folder = tmp_path / "read_only"
    folder.mkdir()
    undo = None
    if os.geteuid() == 0:
        try:
            done = subprocess.run(["chattr", "+i", str(folder)], capture_output=True, timeout=30).returncode == 0
        except (OSError, subprocess.TimeoutExpired):
            done = False
        if not done:
            pytest.skip("running as root where chattr +i is unavailable: no folder is unwritable")
        undo = ["chattr", "-i", str(folder)]
    else:
        folder.chmod(0o555)
    try:
        if os.access(folder, os.W_OK):
            pytest.skip("cannot make a folder unwritable here")
        yield folder
    finally:
        if undo:
            subprocess.run(undo, capture_output=True, timeout=30)
        else:
            folder.chmod(0o755)
