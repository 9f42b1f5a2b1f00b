"""Settings that come from the environment, read here and nowhere else.

Three environment variables change where synthcorona finds its inputs:

========================== =========================================================================
``SYNTHCORONA_TABLE``      an emissivity table file used wherever no ``table=`` is passed
                           (default: the table embedded in the package)
``SYNTHCORONA_CHIANTI``    an ASCII CHIANTI tree, or a ``.tar.xz`` of one, for the table builder and
                           CHIANTI's instrument-response files
``SYNTHCORONA_SCHEDULER``  a dask.distributed scheduler address (``tcp://host:port``) for table
                           builds and detection grids
========================== =========================================================================

One more exists for the tests only: ``SYNTHCORONA_TEST_PAUSE`` makes a command-line run stop for a
while at one step of writing its output folder (:func:`pause_for_tests`), so that a test can interrupt
it at a known point.

Each function reads the variable when called (so that a test or a long-lived session can change
it); an empty value counts as unset. Library code takes explicit arguments (``table=``,
``chianti=``, ``scheduler=``) first and falls back to these only when the argument is absent.
"""
from __future__ import annotations

import os
import pathlib

__all__ = ["TABLE_ENV", "CHIANTI_ENV", "SCHEDULER_ENV", "TEST_PAUSE_ENV", "table_path", "chianti_path",
           "scheduler_address", "pause_for_tests"]

#: Environment variable naming an emissivity table file.
TABLE_ENV = "SYNTHCORONA_TABLE"
#: Environment variable naming a CHIANTI tree or its .tar.xz.
CHIANTI_ENV = "SYNTHCORONA_CHIANTI"
#: Environment variable naming a dask.distributed scheduler address.
SCHEDULER_ENV = "SYNTHCORONA_SCHEDULER"
#: Environment variable for tests: pause a run at one step of writing its output (:func:`pause_for_tests`).
TEST_PAUSE_ENV = "SYNTHCORONA_TEST_PAUSE"


def _value(name: str) -> str | None:
    v = os.environ.get(name, "").strip()
    return v or None


def table_path() -> pathlib.Path | None:
    """The emissivity table named by ``$SYNTHCORONA_TABLE`` (user-expanded), or None when unset."""
    v = _value(TABLE_ENV)
    return pathlib.Path(v).expanduser() if v else None


def chianti_path() -> pathlib.Path | None:
    """The CHIANTI tree or archive named by ``$SYNTHCORONA_CHIANTI`` (user-expanded), or None when unset."""
    v = _value(CHIANTI_ENV)
    return pathlib.Path(v).expanduser() if v else None


def scheduler_address() -> str | None:
    """The scheduler address in ``$SYNTHCORONA_SCHEDULER``, or None when unset."""
    return _value(SCHEDULER_ENV)


def pause_for_tests() -> tuple[str, float] | None:
    """The step and duration of ``$SYNTHCORONA_TEST_PAUSE`` (for tests only), or None when unset.

    The value is ``STEP`` (a pause of 120 s) or ``STEP=SECONDS``; the steps are those of
    :class:`synthcorona.io.output_folder.OutputRun`: ``locked`` (the folder is locked, nothing is
    computed yet), ``write:NAME`` (the run is about to write the file NAME into its staging folder;
    the files before it are complete there), ``commit`` (every file is complete in the staging folder,
    nothing is moved yet) and ``move:NAME`` (inside the commit: the files before NAME are already in
    the output folder). At that step the run prints ``synthcorona: test pause at STEP (pid N)`` on
    standard error and sleeps. A value that cannot be read is ignored.
    """
    v = _value(TEST_PAUSE_ENV)
    if v is None:
        return None
    step, sep, seconds = v.rpartition("=")
    if not sep:
        return v, 120.0
    try:
        return step, max(0.0, float(seconds))
    except ValueError:
        return None
