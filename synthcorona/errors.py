"""Every exception and warning class of synthcorona, in one place.

Errors carry the facts they report as attributes (the argument, the value, the valid range, the
file and key), so that callers decide what to do from fields, never from the message text.

* :class:`InputError` -- a user-supplied value is invalid (a ``ValueError``).
* :class:`ScenarioError` -- a mistake in an input file (TOML); names the file and the key.
* :class:`MemoryBudgetError` -- a computation would need more memory than the budget allows.
* :class:`TableFileError` -- an emissivity table file is missing, corrupted or foreign.
* :class:`ChiantiNotFoundError` -- no usable CHIANTI database was found.
* :class:`InstrumentFileError` / :class:`InstrumentFileWarning` -- instrument response files.
* :class:`DependencyError` -- an optional dependency (fiasco for the table builder) is not installed.
* :class:`BracketError` -- a root search was given a bracket that does not straddle the target.
* :class:`CliError` -- a user mistake on the command line (one line, exit status 2).
* :class:`OutputFolderError` / :class:`OutputFolderBusy` -- an output folder that cannot be written, or that
  another run is writing (:mod:`synthcorona.io.output_folder`).
* :class:`RunInterrupted` -- a run stopped by SIGINT or SIGTERM (:mod:`synthcorona.io.interrupts`).
"""
from __future__ import annotations

__all__ = ["InputError", "ScenarioError", "MemoryBudgetError", "TableFileError", "ChiantiNotFoundError",
    "InstrumentFileError", "InstrumentFileWarning", "BracketError", "CliError", "DependencyError",
    "OutputFolderError", "OutputFolderBusy", "RunInterrupted"]


class InputError(ValueError):
    """A user-supplied value is out of range, non-finite or otherwise invalid.

    Parameters
    ----------
    message : str
        The complete, human-readable message (names the argument, the value and the valid range).
    argument : str, optional
        Name of the offending argument (e.g. ``"mass"``), when known.
    """

    def __init__(self, message: str = "", *, argument: str | None = None):
        super().__init__(message)
        self.argument = argument


class ScenarioError(InputError):
    """A mistake in an input file; the message names the file and the key.

    Attributes
    ----------
    file : str or None
        The input file, when the error is about the file as a whole (e.g. it is not UTF-8 text).
    byte_offset : int or None
        Position in the file (bytes from its start) of the offending byte, when known.
    """

    def __init__(self, message: str = "", *, argument: str | None = None, file: str | None = None,
                 byte_offset: int | None = None):
        super().__init__(message, argument=argument)
        self.file = file
        self.byte_offset = byte_offset


class MemoryBudgetError(InputError):
    """A computation would need more memory than the budget (:func:`synthcorona.memory.memory_budget`).

    Attributes
    ----------
    what : str
        What would be allocated (e.g. ``"spectrum of 400,000,000 bins"``).
    estimate : int
        Estimated bytes needed.
    budget : int
        The memory budget in bytes.
    argument : str
        The argument, key or option to change.
    """

    def __init__(self, message: str, *, what: str, estimate: int, budget: int, argument: str | None = None):
        super().__init__(message, argument=argument)
        self.what = what
        self.estimate = int(estimate)
        self.budget = int(budget)


class TableFileError(InputError):
    """An emissivity table file is missing, corrupted, or not a synthcorona table.

    Attributes
    ----------
    path : str or None
        The table file.
    variable, attribute : str or None
        The variable and its attribute that failed verification, when the error is about one
        (e.g. ``"line_emissivity"``, ``"delta_axes"``).
    """

    def __init__(self, message: str = "", *, path=None, variable: str | None = None, attribute: str | None = None):
        super().__init__(message, argument=None)
        self.path = None if path is None else str(path)
        self.variable = variable
        self.attribute = attribute


class ChiantiNotFoundError(InputError):
    """No usable CHIANTI database was found; the message says where we looked and how to fix it."""


class InstrumentFileError(InputError):
    """An instrument response file is missing, unreadable, truncated or malformed."""


class InstrumentFileWarning(UserWarning):
    """A response file is readable but suspicious (e.g. FITS checksum mismatch)."""


class DependencyError(InputError):
    """An optional dependency needed by one part of synthcorona is not installed.

    Attributes
    ----------
    package : str
        The distribution that is missing (e.g. ``"fiasco"``).
    requirement : str
        What it needs to install (e.g. ``"fiasco 0.8.2 on Python >= 3.12"``).
    """

    def __init__(self, message: str, *, package: str, requirement: str = ""):
        super().__init__(message, argument=None)
        self.package = package
        self.requirement = requirement


class BracketError(InputError):
    """A root search's bracket does not straddle the target.

    Attributes
    ----------
    bracket : tuple of float
        The two ends of the bracket (in the unit of ``unit``).
    values : tuple of float
        The function's values at the two ends (e.g. P(detect) at the two masses).
    target : float
        The value sought.
    unit : str
        Unit of ``bracket``.
    """

    def __init__(self, message: str, *, bracket=(float("nan"), float("nan")), values=(float("nan"), float("nan")),
                 target: float = float("nan"), unit: str = "", argument: str | None = "bracket"):
        super().__init__(message, argument=argument)
        self.bracket = tuple(float(b) for b in bracket)
        self.values = tuple(float(v) for v in values)
        self.target = float(target)
        self.unit = unit


class CliError(Exception):
    """A user mistake on the command line (printed as one line, exit status 2)."""


class OutputFolderError(InputError):
    """An output folder (or output file) that a run cannot use: an empty name, a path that exists and is
    not a folder, a folder or parent that is not writable.

    Attributes
    ----------
    path : str
        The path as given.
    option : str
        The command-line option or argument that gave it (e.g. ``"--out"``).
    reason : str
        Why it cannot be used (the end of the message).
    """

    def __init__(self, message: str, *, path: str, option: str = "--out", reason: str = ""):
        super().__init__(message, argument=option)
        self.path = path
        self.option = option
        self.reason = reason


class OutputFolderBusy(OutputFolderError):
    """Another run holds the lock of the output folder.

    Attributes
    ----------
    pid : int or None
        Process id of the other run (None when its lock file was not yet filled in).
    host : str
        Host name of the other run ("" when unknown).
    started : str
        Its start time, ISO 8601 UTC ("" when unknown).
    command : str
        Its command line ("" when unknown).
    """

    def __init__(self, message: str, *, path: str, option: str = "--out", pid: int | None = None, host: str = "",
                 started: str = "", command: str = ""):
        super().__init__(message, path=path, option=option, reason="in use by another run")
        self.pid = pid
        self.host = host
        self.started = started
        self.command = command


class RunInterrupted(BaseException):
    """A run was stopped by SIGINT or SIGTERM (raised by the handlers of
    :func:`synthcorona.io.interrupts.raise_on_interrupts`).

    A ``BaseException``, like ``KeyboardInterrupt``, so that no ``except Exception`` on the way swallows
    it; every ``with`` and ``finally`` block on the way still runs (temporary files removed, locks
    released).

    Attributes
    ----------
    signum : int
        The signal number.
    signal_name : str
        Its name (``"SIGINT"``, ``"SIGTERM"``).
    exit_status : int
        128 + ``signum``: 130 for SIGINT, 143 for SIGTERM (the shell's convention).
    results_written : bool or None
        Set by :class:`synthcorona.io.output_folder.OutputRun`: True if the run's files were already
        in place when the signal took effect, False if the output folder keeps its previous
        contents; None when no output folder was involved.
    """

    def __init__(self, signum: int, signal_name: str = ""):
        super().__init__(signum)
        self.signum = int(signum)
        self.signal_name = signal_name or f"signal {signum}"
        self.exit_status = 128 + int(signum)
        self.results_written: bool | None = None
