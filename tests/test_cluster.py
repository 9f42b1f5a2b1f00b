"""Choosing the dask scheduler (synthcorona.cluster): the argument, else $SYNTHCORONA_SCHEDULER; bad values named."""
import pytest

from synthcorona.cluster import SCHEDULER_ENV, check_scheduler, scheduler_from_env
from synthcorona.errors import InputError


@pytest.mark.parametrize("value", ["local", "tcp://10.0.0.5:8786", "host:8786", "tls://node.example:8786"])
def test_accepted_schedulers(value):
    check_scheduler(value)            # no error
    assert scheduler_from_env(value) == value


@pytest.mark.parametrize("value, text", [
    ("", "must be a distributed.Client, 'local' or a scheduler address"),
    ("   ", "must be a distributed.Client, 'local' or a scheduler address"),
    (8786, "must be a distributed.Client, 'local' or a scheduler address"),
    (None, "must be a distributed.Client, 'local' or a scheduler address"),
    ("nowhere", "is neither 'local' nor a scheduler address"),
])
def test_refused_schedulers_name_the_argument_and_value(value, text):
    with pytest.raises(InputError, match=text) as exc:
        check_scheduler(value)
    assert str(exc.value).startswith(f"scheduler={value!r}")


def test_environment_is_the_fallback(monkeypatch):
    monkeypatch.delenv(SCHEDULER_ENV, raising=False)
    assert scheduler_from_env() is None
    monkeypatch.setenv(SCHEDULER_ENV, "  ")                  # empty counts as unset
    assert scheduler_from_env() is None
    monkeypatch.setenv(SCHEDULER_ENV, "tcp://10.0.0.5:8786")
    assert scheduler_from_env() == "tcp://10.0.0.5:8786"
    assert scheduler_from_env("local") == "local"             # the argument wins
    monkeypatch.setenv(SCHEDULER_ENV, "nowhere")
    with pytest.raises(InputError, match=f"{SCHEDULER_ENV}='nowhere' is neither 'local' nor a scheduler address"):
        scheduler_from_env()
    with pytest.raises(InputError, match="scheduler='bad' is neither"):
        scheduler_from_env("bad")


def test_client_is_accepted():
    from distributed import Client

    client = Client.__new__(Client)       # an (unconnected) Client instance is accepted as it is
    check_scheduler(client)
