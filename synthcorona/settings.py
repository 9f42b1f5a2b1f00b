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

Each function reads the variable when called (so that a test or a long-lived session can change
it); an empty value counts as unset. Library code takes explicit arguments (``table=``,
``chianti=``, ``scheduler=``) first and falls back to these only when the argument is absent.
"""
from __future__ import annotations

import os
import pathlib

__all__ = ["TABLE_ENV", "CHIANTI_ENV", "SCHEDULER_ENV", "table_path", "chianti_path", "scheduler_address"]

#: Environment variable naming an emissivity table file.
TABLE_ENV = "SYNTHCORONA_TABLE"
#: Environment variable naming a CHIANTI tree or its .tar.xz.
CHIANTI_ENV = "SYNTHCORONA_CHIANTI"
#: Environment variable naming a dask.distributed scheduler address.
SCHEDULER_ENV = "SYNTHCORONA_SCHEDULER"


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
