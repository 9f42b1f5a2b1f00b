"""Settings that come from the environment, read here and nowhere else.

Four environment variables change where synthcorona finds its inputs and how much memory it uses:

============================= ======================================================================
``SYNTHCORONA_TABLE``         an emissivity table file used wherever no ``table=`` is passed
                              (default: the table embedded in the package)
``SYNTHCORONA_CHIANTI``       an ASCII CHIANTI tree, or a ``.tar.xz`` of one, for the table builder
                              and CHIANTI's instrument-response files
``SYNTHCORONA_SCHEDULER``     a dask.distributed scheduler address (``tcp://host:port``) for table
                              builds and detection grids
``SYNTHCORONA_MEMORY_BUDGET`` the memory one computation may use, in bytes (``"4000000000"``) or
                              with a unit (``"4 GB"``, ``"512 MiB"``); default: half the memory
                              available when the computation starts (:mod:`synthcorona.memory`)
============================= ======================================================================

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
import re

from .errors import InputError

__all__ = ["TABLE_ENV", "CHIANTI_ENV", "SCHEDULER_ENV", "MEMORY_BUDGET_ENV", "table_path", "chianti_path",
    "scheduler_address", "memory_budget_setting", "parse_bytes", "TEST_PAUSE_ENV", "pause_for_tests"]

#: Environment variable naming an emissivity table file.
TABLE_ENV = "SYNTHCORONA_TABLE"
#: Environment variable naming a CHIANTI tree or its .tar.xz.
CHIANTI_ENV = "SYNTHCORONA_CHIANTI"
#: Environment variable naming a dask.distributed scheduler address.
SCHEDULER_ENV = "SYNTHCORONA_SCHEDULER"
#: Environment variable giving the memory budget of one computation (bytes, or a number with a unit).
MEMORY_BUDGET_ENV = "SYNTHCORONA_MEMORY_BUDGET"

#: Byte units accepted by :func:`parse_bytes` (lower case): decimal (kB, MB, ...) and binary (KiB, MiB, ...).
_BYTE_UNITS = {"": 1, "b": 1, "byte": 1, "bytes": 1, "kb": 10**3, "mb": 10**6, "gb": 10**9, "tb": 10**12,
               "kib": 2**10, "mib": 2**20, "gib": 2**30, "tib": 2**40}
_BYTES_RE = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][+-]?[0-9]+)?)\s*([A-Za-z]*)\s*$")
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


def parse_bytes(text: str, name: str = MEMORY_BUDGET_ENV) -> int:
    """A memory size: a number of bytes (``"4000000000"``) or a number with a unit (``"4 GB"``, ``"512 MiB"``).

    Units: B, kB, MB, GB, TB (powers of 1000) and KiB, MiB, GiB, TiB (powers of 1024), any case.
    Raises :class:`~synthcorona.errors.InputError` naming ``name`` unless the size is at least 1 byte.
    """
    m = _BYTES_RE.match(str(text))
    unit = m.group(2).lower() if m else None
    if m is None or unit not in _BYTE_UNITS:
        raise InputError(f"{name}={text!r}: give a memory size in bytes or with a unit, e.g. '4 GB' or '512 MiB' "
                         "(units B, kB, MB, GB, TB, KiB, MiB, GiB, TiB)", argument=name)
    size = float(m.group(1)) * _BYTE_UNITS[unit]
    if not size >= 1:
        raise InputError(f"{name}={text!r} is below 1 byte; valid range >= 1 B", argument=name)
    return int(size)


def memory_budget_setting() -> int | None:
    """The memory budget in bytes from ``$SYNTHCORONA_MEMORY_BUDGET`` (see :func:`parse_bytes`), or None when unset."""
    v = _value(MEMORY_BUDGET_ENV)
    return parse_bytes(v) if v else None
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
