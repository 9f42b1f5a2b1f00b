"""The memory budget of one computation, and the check made before a large allocation.

Large arrays are estimated before they are allocated: a spectrum grid, the result of a band flux
or count rate over a batch of DEMs, the emission-measure weights of that batch. An estimate above
the budget is refused with a :class:`~synthcorona.errors.MemoryBudgetError` that gives the
estimate, the budget and the argument (or file key, or option) to change, instead of letting the
process grow until the system kills it. Work that can be split (DEM batches) is processed in
chunks that fit the budget (:func:`chunk_length`); the results do not depend on the chunking.

The budget is ``$SYNTHCORONA_MEMORY_BUDGET`` when set (bytes, or a number with a unit such as
``"4 GB"``; read by :func:`synthcorona.settings.memory_budget_setting`), otherwise
:data:`DEFAULT_FRACTION` of the memory available when the computation starts (``MemAvailable``
of ``/proc/meminfo``, or the limit of the process's control group if that is smaller; the
operating system's count of free pages elsewhere).
"""
from __future__ import annotations

import os
import pathlib

from .errors import MemoryBudgetError
from .settings import MEMORY_BUDGET_ENV, memory_budget_setting

__all__ = ["DEFAULT_FRACTION", "FALLBACK_AVAILABLE", "available_memory", "memory_budget", "check_allocation",
           "chunk_length", "format_bytes"]

#: Share of the available memory one computation may use when ``$SYNTHCORONA_MEMORY_BUDGET`` is unset.
DEFAULT_FRACTION = 0.5
#: Available memory assumed when the operating system does not report it (bytes).
FALLBACK_AVAILABLE = 4 * 2**30


def _meminfo_available() -> int | None:
    try:
        for line in pathlib.Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        return None
    return None


def _cgroup_available() -> int | None:
    """Room left under the control group's memory limit (cgroup v2), or None without a limit."""
    try:
        limit = pathlib.Path("/sys/fs/cgroup/memory.max").read_text().strip()
        if limit == "max":
            return None
        used = int(pathlib.Path("/sys/fs/cgroup/memory.current").read_text().strip())
        return max(int(limit) - used, 0)
    except (OSError, ValueError):
        return None


def available_memory() -> int:
    """Memory available to this process now, in bytes (see the module docstring for the sources)."""
    values = [v for v in (_meminfo_available(), _cgroup_available()) if v is not None]
    if not values:
        try:
            values = [os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")]
        except (ValueError, OSError, AttributeError):
            values = [FALLBACK_AVAILABLE]
    return int(min(values))


def memory_budget() -> int:
    """The memory budget of one computation in bytes: ``$SYNTHCORONA_MEMORY_BUDGET``, else
    :data:`DEFAULT_FRACTION` of :func:`available_memory`."""
    set_value = memory_budget_setting()
    if set_value is not None:
        return set_value
    return max(int(DEFAULT_FRACTION * available_memory()), 1)


def _budget_text(budget: int) -> str:
    if memory_budget_setting() is not None:
        return f"the memory budget of {format_bytes(budget)} (${MEMORY_BUDGET_ENV})"
    return (f"the memory budget of {format_bytes(budget)} ({DEFAULT_FRACTION:.0%} of the memory available now; "
            f"set ${MEMORY_BUDGET_ENV} to change it)")


def format_bytes(n: float) -> str:
    """A byte count for messages: ``"6.4 GB"``, ``"512 kB"`` (powers of 1000)."""
    for unit, size in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= size:
            return f"{n / size:.3g} {unit}"
    return f"{int(n)} B"


def check_allocation(name: str, nbytes: float, what_to_change: str, argument: str | None = None) -> None:
    """Refuse an allocation of about ``nbytes`` bytes that exceeds :func:`memory_budget`.

    Parameters
    ----------
    name : str
        What would be allocated (``"spectrum of 400,000,000 bins"``).
    nbytes : float
        Estimated bytes.
    what_to_change : str
        The argument, file key or option that reduces the need, with a hint
        (``"wavelength_bin (wider bins)"``); ends the message.
    argument : str, optional
        The argument of the :class:`~synthcorona.errors.MemoryBudgetError` (default: the first word
        of ``what_to_change``).

    Raises
    ------
    MemoryBudgetError
        With the estimate, the budget and the argument as fields.
    """
    budget = memory_budget()
    if nbytes <= budget:
        return
    raise MemoryBudgetError(
        f"{name} would need about {format_bytes(nbytes)}, more than {_budget_text(budget)}; change {what_to_change}",
        what=name, estimate=int(nbytes), budget=budget,
        argument=argument if argument is not None else what_to_change.split()[0])


def chunk_length(n_items: int, bytes_per_item: float, name: str, what_to_change: str,
                 argument: str | None = None) -> int:
    """How many of ``n_items`` items (each needing ``bytes_per_item`` of work memory) fit the budget at once.

    At least 1; raises :class:`~synthcorona.errors.MemoryBudgetError` (see :func:`check_allocation`)
    when a single item does not fit.
    """
    check_allocation(f"{name} (one at a time)", bytes_per_item, what_to_change, argument=argument)
    per_chunk = int(memory_budget() // max(bytes_per_item, 1.0))
    return max(1, min(int(n_items), per_chunk))
