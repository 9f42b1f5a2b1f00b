"""SIGINT/SIGTERM as an exception, and sections that finish before one takes effect (synthcorona.io.interrupts)."""
import signal

import pytest

from synthcorona.errors import RunInterrupted
from synthcorona.io.interrupts import deferred_interrupts, raise_on_interrupts


@pytest.mark.parametrize("sig, status, name", [(signal.SIGINT, 130, "SIGINT"), (signal.SIGTERM, 143, "SIGTERM")])
def test_a_signal_raises_run_interrupted_with_the_shell_exit_status(sig, status, name):
    before = signal.getsignal(sig)
    with pytest.raises(RunInterrupted) as err:
        with raise_on_interrupts():
            signal.raise_signal(sig)
    assert (err.value.signum, err.value.exit_status, err.value.signal_name) == (sig, status, name)
    assert err.value.results_written is None
    assert signal.getsignal(sig) is before              # the previous handler is back


def test_a_second_signal_does_not_cut_the_cleaning_short():
    cleaned = []
    with pytest.raises(RunInterrupted) as err:
        with raise_on_interrupts():
            try:
                signal.raise_signal(signal.SIGTERM)
            finally:
                signal.raise_signal(signal.SIGINT)     # ignored: already on the way out
                cleaned.append(True)
    assert cleaned == [True] and err.value.signal_name == "SIGTERM"


def test_signals_in_a_deferred_section_arrive_when_it_ends():
    steps = []
    with pytest.raises(RunInterrupted) as err:
        with raise_on_interrupts():
            with deferred_interrupts():
                signal.raise_signal(signal.SIGTERM)
                steps.append("after the signal")      # still running
            steps.append("never")
    assert steps == ["after the signal"] and err.value.exit_status == 143


def test_an_ignored_signal_stays_ignored():
    old = signal.signal(signal.SIGTERM, signal.SIG_IGN)
    try:
        with raise_on_interrupts():
            signal.raise_signal(signal.SIGTERM)       # nothing happens
            assert signal.getsignal(signal.SIGTERM) is signal.SIG_IGN
    finally:
        signal.signal(signal.SIGTERM, old)
