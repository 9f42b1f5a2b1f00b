"""The memory budget and the check before large allocations (synthcorona.memory).

Expected values are arithmetic on the inputs (the budget is a setting or a fixed share of a
patched available memory), no external source.
"""
import pytest

from synthcorona import memory
from synthcorona.errors import MemoryBudgetError
from synthcorona.settings import MEMORY_BUDGET_ENV


def test_budget_is_half_the_available_memory_unless_set(monkeypatch):
    monkeypatch.delenv(MEMORY_BUDGET_ENV, raising=False)
    monkeypatch.setattr(memory, "available_memory", lambda: 8_000_000_000)
    assert memory.DEFAULT_FRACTION == 0.5
    assert memory.memory_budget() == 4_000_000_000
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "512 MiB")
    assert memory.memory_budget() == 512 * 2**20


def test_available_memory_is_positive():
    assert memory.available_memory() > 0


def test_check_allocation_names_estimate_budget_and_argument(monkeypatch):
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "2 GB")
    memory.check_allocation("a grid", 2e9, "step (wider bins)")      # exactly the budget: accepted
    with pytest.raises(MemoryBudgetError, match=r"a grid would need about 6.4 GB, more than the memory budget of "
                                                r"2 GB \(\$SYNTHCORONA_MEMORY_BUDGET\); change step \(wider bins\)") as err:
        memory.check_allocation("a grid", 6.4e9, "step (wider bins)")
    assert (err.value.estimate, err.value.budget, err.value.argument, err.value.what) == (
        6_400_000_000, 2_000_000_000, "step", "a grid")
    monkeypatch.delenv(MEMORY_BUDGET_ENV)
    monkeypatch.setattr(memory, "available_memory", lambda: 1_000_000)
    with pytest.raises(MemoryBudgetError, match=r"500 kB \(50% of the memory available now; set "
                                                r"\$SYNTHCORONA_MEMORY_BUDGET to change it\)"):
        memory.check_allocation("x", 600_000, "n")


def test_chunk_length_fits_the_budget(monkeypatch):
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "1000")
    assert memory.chunk_length(1_000_000, 30, "items", "n") == 33
    assert memory.chunk_length(10, 30, "items", "n") == 10
    with pytest.raises(MemoryBudgetError, match=r"items \(one at a time\) would need about 2 kB"):
        memory.chunk_length(10, 2000, "items", "n")


@pytest.mark.parametrize("n, text", [(6.4e9, "6.4 GB"), (512e3, "512 kB"), (999, "999 B"), (1.5e12, "1.5 TB")])
def test_format_bytes(n, text):
    assert memory.format_bytes(n) == text
