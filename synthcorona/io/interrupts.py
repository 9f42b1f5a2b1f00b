"""SIGINT and SIGTERM during a run: an exception that cleans up on its way out, and a short section that
finishes before either takes effect.

* :func:`raise_on_interrupts` -- while it is active, SIGINT (Ctrl-C) and SIGTERM (``kill``) raise
  :class:`~synthcorona.errors.RunInterrupted` in the main thread. It travels up like any exception,
  so every ``with`` and ``finally`` block of the run does its cleaning (the staging folder of
  :class:`~synthcorona.io.output_folder.OutputRun` is removed, its lock released); the command line
  turns it into a one-line message and exit status 128 + signal number (130 for SIGINT, 143 for
  SIGTERM). Further SIGINT/SIGTERM during that cleaning are ignored, so a second Ctrl-C cannot cut
  it short. A signal that was ignored when it began (``SIG_IGN``, e.g. SIGINT of a background job
  started by a non-interactive shell) stays ignored.
* :func:`deferred_interrupts` -- SIGINT/SIGTERM arriving inside the block are held and delivered to
  the handler in place when the block ends: used for the few milliseconds in which finished files
  are moved into the output folder, so that they are moved all or not at all.

Both do nothing outside the main thread (Python runs signal handlers there only). SIGKILL cannot be
caught; what it leaves behind is cleaned by the next run into the same folder (see
:mod:`synthcorona.io.output_folder`).
"""
from __future__ import annotations

import contextlib
import signal
import threading

from ..errors import RunInterrupted

__all__ = ["INTERRUPT_SIGNALS", "raise_on_interrupts", "deferred_interrupts"]

#: The signals that end a run cleanly: SIGINT and SIGTERM.
INTERRUPT_SIGNALS = (signal.SIGINT, signal.SIGTERM)


def _in_main_thread() -> bool:
    return threading.current_thread() is threading.main_thread()


def _install(handler) -> dict:
    """Install ``handler`` for every signal of :data:`INTERRUPT_SIGNALS` not ignored now; the previous
    handlers, by signal."""
    previous = {}
    for s in INTERRUPT_SIGNALS:
        old = signal.getsignal(s)
        if old is signal.SIG_IGN or old is None:   # ignored, or set outside Python: leave it alone
            continue
        previous[s] = signal.signal(s, handler)
    return previous


def _restore(previous: dict) -> None:
    for s, old in previous.items():
        signal.signal(s, old)


@contextlib.contextmanager
def raise_on_interrupts():
    """Context manager: SIGINT and SIGTERM raise :class:`~synthcorona.errors.RunInterrupted` (the first
    one; later ones are ignored until the block ends); the previous handlers come back at the end."""
    if not _in_main_thread():
        yield
        return
    raised = []

    def handler(signum, frame):
        if raised:                      # already on the way out: let the cleaning finish
            return
        raised.append(signum)
        raise RunInterrupted(signum, signal.Signals(signum).name)

    previous = _install(handler)
    try:
        yield
    finally:
        _restore(previous)


@contextlib.contextmanager
def deferred_interrupts():
    """Context manager: SIGINT and SIGTERM that arrive inside the block wait until it ends, and are then
    delivered (each once, in order of arrival) to the handler that was in place before it."""
    if not _in_main_thread():
        yield
        return
    pending = []

    def hold(signum, frame):
        if signum not in pending:
            pending.append(signum)

    previous = _install(hold)
    try:
        yield
    finally:
        _restore(previous)
        for s in pending:
            signal.raise_signal(s)
