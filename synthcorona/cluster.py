"""Dask clients for distributed runs: an in-process local cluster or a running scheduler.

The table builder (:func:`synthcorona.atomic.builder.build_table`) and the detection grids
(:func:`synthcorona.dimming.grids.detection_grid`) accept ``scheduler=``:

* a ``distributed.Client`` -- used as it is (not closed afterwards);
* ``"local"`` -- a ``distributed.LocalCluster`` on this machine, ``n_workers`` worker
  processes with one thread each (default: one per CPU core), closed when the run ends;
* an address such as ``"tcp://10.0.0.5:8786"`` -- a scheduler started elsewhere
  (``dask scheduler`` / ``dask worker ADDRESS``, a batch-system launcher, ...).

See ``docs/distributed.md`` for running on a cluster.
"""
from __future__ import annotations

import contextlib
import logging
import os

from .errors import InputError
from .settings import SCHEDULER_ENV, scheduler_address

__all__ = ["SCHEDULER_ENV", "check_scheduler", "dask_client", "scheduler_from_env", "n_workers_of"]



def scheduler_from_env(scheduler=None):
    """``scheduler`` if given, else the value of ``$SYNTHCORONA_SCHEDULER`` (None when unset or empty),
    checked with :func:`check_scheduler`."""
    if scheduler is not None:
        check_scheduler(scheduler)
        return scheduler
    value = scheduler_address()
    if value is not None:
        check_scheduler(value, name=SCHEDULER_ENV)
    return value


def check_scheduler(scheduler, name: str = "scheduler") -> None:
    """Raise :class:`InputError` unless ``scheduler`` is a Client, ``"local"`` or looks like an address."""
    from distributed import Client

    if isinstance(scheduler, Client):
        return
    if not isinstance(scheduler, str) or not scheduler.strip():
        raise InputError(f"{name}={scheduler!r} must be a distributed.Client, 'local' or a scheduler address "
                         "such as 'tcp://host:8786'")
    if scheduler != "local" and "://" not in scheduler and ":" not in scheduler:
        raise InputError(f"{name}={scheduler!r} is neither 'local' nor a scheduler address "
                         "('tcp://host:port' or 'host:port')")


@contextlib.contextmanager
def dask_client(scheduler, n_workers: int | None = None):
    """Context manager yielding a ``distributed.Client`` for ``scheduler`` (see the module doc).

    Parameters
    ----------
    scheduler : distributed.Client, "local" or str
        Where the tasks run.
    n_workers : int, optional
        Worker processes of a ``"local"`` cluster (>= 1; default ``os.cpu_count()``); ignored otherwise.
    """
    from distributed import Client, LocalCluster

    check_scheduler(scheduler)
    if isinstance(scheduler, Client):
        yield scheduler
        return
    if scheduler == "local":
        n = (os.cpu_count() or 1) if n_workers is None else int(n_workers)
        if n < 1:
            raise InputError(f"n_workers={n_workers} is outside the valid range [1, {os.cpu_count()}]")
        cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None,
                               silence_logs=logging.ERROR)
        client = Client(cluster)
        try:
            yield client
        finally:
            client.close()
            cluster.close()
        return
    try:
        client = Client(scheduler, timeout="30s")
    except (OSError, TimeoutError) as exc:
        raise InputError(f"scheduler={scheduler!r}: cannot connect ({exc})") from None
    try:
        yield client
    finally:
        client.close()


def n_workers_of(client) -> int:
    """Number of workers currently connected to ``client``'s scheduler (at least 1)."""
    return max(1, len(client.scheduler_info().get("workers", {})))
