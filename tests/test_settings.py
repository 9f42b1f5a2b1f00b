"""Settings read from the environment (synthcorona.settings): the memory budget's text form.

Expected values: the definitions of the decimal (SI) and binary (IEC 80000-13) byte prefixes.
"""
import pytest

from synthcorona.errors import InputError
from synthcorona.settings import MEMORY_BUDGET_ENV, memory_budget_setting, parse_bytes


@pytest.mark.parametrize("text, n", [("4000000000", 4_000_000_000), ("4 GB", 4_000_000_000), ("4gb", 4_000_000_000),
                                     ("512 MiB", 536_870_912), ("1.5 kB", 1500), ("2 KiB", 2048), ("1e9 B", 10**9),
                                     (" 3 TiB ", 3 * 2**40)])
def test_parse_bytes(text, n):
    assert parse_bytes(text) == n


@pytest.mark.parametrize("text", ["lots", "4 GiBs", "-1 GB", "0", "0.5 B", "GB"])
def test_parse_bytes_refuses_nonsense(text):
    with pytest.raises(InputError, match=MEMORY_BUDGET_ENV) as err:
        parse_bytes(text)
    assert err.value.argument == MEMORY_BUDGET_ENV


def test_memory_budget_setting(monkeypatch):
    monkeypatch.delenv(MEMORY_BUDGET_ENV, raising=False)
    assert memory_budget_setting() is None
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "  ")
    assert memory_budget_setting() is None
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "8 GB")
    assert memory_budget_setting() == 8 * 10**9
