"""The output folder of a command-line run: checked before anything is computed, locked while the run
lasts, filled with the run's complete set of files or not touched at all, and described by a manifest.

Every subcommand that writes a folder (``forecast``, ``spectrum``, ``cycle``, ``emission``) does

.. code-block:: python

    folder = check_output_folder(args.out)        # before any computation; no side effects
    with OutputRun(folder, argv=argv) as out:     # creates, locks, cleans up, makes the staging folder
        ...                                       # the computation
        write_netcdf(ds, out.path("forecast.nc"))  # every product into the staging folder
        out.record(seed=..., inputs=..., table=...)
    # here the files are in place, with manifest.json

What is inside an output folder
-------------------------------
=============================== ====================================================================
``manifest.json``               what the last complete run wrote (:mod:`synthcorona.io.manifest`)
the products                    the files the manifest lists
``.synthcorona.lock``           the lock file, while a run is writing the folder
``.synthcorona-staging-*/``     the staging folder of the run that is writing the folder
``.synthcorona-commit/``        the same folder while its files are being moved into place
=============================== ====================================================================

The staging folder lies inside the output folder, so it is on the same file system (the moves are
renames) and a run needs no write permission anywhere else.

Checks first (:func:`check_output_folder`)
    An empty name, a path that exists and is not a folder, a folder that is not writable, or a
    missing folder whose nearest existing parent is not a writable folder: an
    :class:`~synthcorona.errors.OutputFolderError` (one line, exit status 2) before any computation.

Lock
    ``fcntl.flock`` on ``.synthcorona.lock`` (exclusive, non-blocking) from the start of the
    :class:`OutputRun` block to its end, whatever the way out. The file records the pid, host, start
    time (UTC) and command line of the run; a second run into the folder is refused at once with an
    :class:`~synthcorona.errors.OutputFolderBusy` naming them. The kernel drops the lock when its
    process ends, even by SIGKILL, so the lock of a dead run never blocks. The lock file is removed at
    the end of a run (a run that finds a lock file checks, after locking it, that the name still
    points to the file it locked, and otherwise starts again). Locks of this kind hold between
    processes on one machine and, on Linux, on NFS; not on file systems without lock support.

Commit (how the files move into place)
    The products are written into the staging folder. When the block ends without an exception: each
    file is flushed to disk (``fsync``), ``manifest.json`` is written into the staging folder with
    the size and SHA-256 of every file, and a plan (the files to move; the files the previous
    manifest listed that this run did not write, to remove). Then, with SIGINT and SIGTERM held back
    (:func:`~synthcorona.io.interrupts.deferred_interrupts`), the staging folder is renamed to
    ``.synthcorona-commit`` (the point of no return), the old ``manifest.json`` is removed, each
    product replaces its old version with ``os.replace`` (atomic per file), the files to remove are
    removed, the new ``manifest.json`` is moved in last, and ``.synthcorona-commit`` is deleted.

What a reader sees meanwhile
    Before the commit: the previous files and manifest, unchanged. During the commit (milliseconds):
    ``.synthcorona-commit`` exists and ``manifest.json`` does not; each file is either its old or its
    new complete version, never a partial one. After it: the new files and a manifest listing exactly
    them. A reader that wants a consistent set waits until ``manifest.json`` exists and checks the
    files against it (:func:`~synthcorona.io.manifest.verify_manifest`).

Failures and interrupts
    Any exception inside the block (a late error, or SIGINT/SIGTERM turned into
    :class:`~synthcorona.errors.RunInterrupted`) removes the staging folder and releases the lock:
    the output folder is byte for byte as before the run (a folder the run created is removed
    again). A run killed by SIGKILL (or a power cut) leaves its staging folder, which the next run
    into the folder removes; killed during the commit, it leaves ``.synthcorona-commit``, and the
    next run first completes that commit (:func:`finish_commit`), so the folder then holds that run's
    complete results and its manifest.

Removing old files
    A run removes the files that the previous ``manifest.json`` lists and it does not write itself
    (a forecast without figures removes the figures of the forecast before it). Files that no manifest
    lists (your own notes, results of synthcorona versions before the manifest) are never deleted;
    :attr:`OutputRun.unlisted` names them, and the command line says they are not from this run.
"""
from __future__ import annotations

import contextlib
import errno
import glob
import json
import os
import pathlib
import shlex
import shutil
import socket
import sys
import tempfile
import time
from pathlib import PurePosixPath

from ..errors import OutputFolderBusy, OutputFolderError, RunInterrupted
from .interrupts import deferred_interrupts
from .manifest import MANIFEST_NAME, build_manifest, file_entry, listed_files, read_manifest, utc_now

__all__ = ["LOCK_NAME", "STAGING_PREFIX", "COMMIT_NAME", "check_output_folder", "check_output_file", "OutputRun",
           "OutputFile", "finish_commit", "clean_up_killed_runs", "unlisted_files"]

#: Lock file inside an output folder.
LOCK_NAME = ".synthcorona.lock"
#: Name prefix of the staging folder of a run inside the output folder.
STAGING_PREFIX = ".synthcorona-staging-"
#: The staging folder while its files are moved into place.
COMMIT_NAME = ".synthcorona-commit"
#: The plan of a commit, inside :data:`COMMIT_NAME`.
PLAN_NAME = ".plan.json"
_INTERNAL = ".synthcorona"


# -- checks before the run -----------------------------------------------------------------------------
def _error(text, option: str, reason: str) -> OutputFolderError:
    return OutputFolderError(f"{option}={text}: {reason}", path=str(text), option=option, reason=reason)


def _path_text(path, option: str, what: str, example: str) -> str:
    text = "" if path is None else os.fspath(path)
    if not str(text).strip():
        raise OutputFolderError(f"{option}: the {what} name is empty (an empty name would write into the current "
                                f"folder); give one, e.g. {option} {example}", path=str(text), option=option,
                                reason="empty name")
    return str(text)


def _check_creatable(p: pathlib.Path, text: str, option: str) -> None:
    """``p`` does not exist: its nearest existing parent must be a writable folder."""
    if p.is_symlink():
        raise _error(text, option, "is a symbolic link to nothing")
    parent = next((a for a in p.parents if a.exists() or a.is_symlink()), pathlib.Path("."))
    if not parent.is_dir():
        raise _error(text, option, f"cannot be created: {parent} is not a folder")
    if not os.access(parent, os.W_OK | os.X_OK):
        raise _error(text, option, f"cannot be created: {parent} is not writable")


def check_output_folder(path, option: str = "--out") -> pathlib.Path:
    """The output folder ``path`` as a ``pathlib.Path``, checked without changing anything: not an empty
    name; if it exists, a writable folder; else creatable (its nearest existing parent a writable
    folder). Raises :class:`~synthcorona.errors.OutputFolderError` naming ``option``, the path and the
    reason."""
    text = _path_text(path, option, "folder", "results")
    p = pathlib.Path(text)
    if p.exists():
        if not p.is_dir():
            raise _error(text, option, "exists and is not a folder")
        if not os.access(p, os.W_OK | os.X_OK):
            raise _error(text, option, "the folder is not writable")
        return p
    _check_creatable(p, text, option)
    return p


def check_output_file(path, option: str = "--out") -> pathlib.Path:
    """The output file ``path`` (written whole by :class:`OutputFile`), checked like
    :func:`check_output_folder`: not an empty name, not a folder, its folder writable or creatable."""
    text = _path_text(path, option, "file", "table.nc")
    p = pathlib.Path(text)
    if p.is_dir():
        raise _error(text, option, "is a folder; give the name of the file to write")
    if p.parent.exists():
        if not p.parent.is_dir():
            raise _error(text, option, f"cannot be created: {p.parent} is not a folder")
        if not os.access(p.parent, os.W_OK | os.X_OK):
            raise _error(text, option, f"cannot be written: its folder {p.parent} is not writable")
        return p
    _check_creatable(p.parent, text, option)
    return p


# -- lock -----------------------------------------------------------------------------------------------
def _busy(text, option: str, holder: dict) -> OutputFolderBusy:
    pid, host = holder.get("pid"), str(holder.get("host", ""))
    started, command = str(holder.get("started_utc", "")), str(holder.get("command", ""))
    who = (f"pid {pid} on {host or '?'}, started {started or '?'}" + (f": {command}" if command else "")
           if isinstance(pid, int) else "it has not yet recorded its pid")
    return OutputFolderBusy(f"{option}={text}: in use by another synthcorona run ({who}); wait for it to end or "
                            "choose another folder", path=str(text), option=option,
                            pid=pid if isinstance(pid, int) else None, host=host, started=started, command=command)


def _holder(fd: int) -> dict:
    try:
        data = json.loads(os.pread(fd, 1 << 16, 0).decode("utf-8"))
    except (OSError, ValueError):
        return {}
    return data if isinstance(data, dict) else {}


def _acquire(lock_path: pathlib.Path, info: dict, text, option: str) -> int | None:
    """Lock ``lock_path`` (created if needed) and write ``info`` into it; the open descriptor (None on a
    system without ``fcntl``). Raises :class:`OutputFolderBusy` if another process holds it."""
    try:
        import fcntl
    except ImportError:   # pragma: no cover - not a POSIX system: no lock
        return None
    while True:
        try:
            fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:
            raise _error(text, option, f"cannot create its lock file ({exc.strerror})") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError as exc:
            holder = _holder(fd)
            os.close(fd)
            if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN, errno.EACCES):
                raise _busy(text, option, holder) from None
            raise _error(text, option, f"cannot lock it ({exc.strerror})") from None
        try:
            current = os.stat(lock_path)
        except FileNotFoundError:
            current = None
        if current is None or not os.path.samestat(os.fstat(fd), current):
            os.close(fd)              # the run before us removed the file we locked: lock the new one
            continue
        os.ftruncate(fd, 0)
        os.pwrite(fd, json.dumps(info).encode("utf-8"), 0)
        return fd


def _release(lock_path: pathlib.Path, fd: int | None) -> None:
    """Remove the lock file (while still holding it), then unlock."""
    if fd is None:
        return
    with contextlib.suppress(OSError):
        os.unlink(lock_path)
    os.close(fd)


# -- small file-system helpers ---------------------------------------------------------------------------
def _pause(step: str) -> None:
    """Stop here when ``$SYNTHCORONA_TEST_PAUSE`` names ``step`` (tests only; see
    :func:`synthcorona.settings.pause_for_tests`)."""
    from ..settings import pause_for_tests

    want = pause_for_tests()
    if want is not None and want[0] == step:
        sys.stderr.write(f"synthcorona: test pause at {step} (pid {os.getpid()})\n")   # one write: a signal
        sys.stderr.flush()                                                               # cannot split the line
        time.sleep(want[1])


def _fsync(path, directory: bool = False) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        if directory:
            return
        raise
    try:
        os.fsync(fd)
    except OSError:
        if not directory:
            raise
    finally:
        os.close(fd)


def _write_json(data, path) -> None:
    pathlib.Path(path).write_text(json.dumps(data, indent=2) + "\n", encoding="utf-8")
    _fsync(path)


def _safe_name(name) -> bool:
    """A product name a run may write or remove: relative, inside the folder, not one of our own files."""
    if not isinstance(name, str) or not name or "\\" in name or "\x00" in name:
        return False
    p = PurePosixPath(name)
    return (not p.is_absolute() and ".." not in p.parts and "." not in p.parts
            and not p.parts[0].startswith(_INTERNAL) and name != MANIFEST_NAME)


def _staged_files(staging: pathlib.Path) -> list[str]:
    return sorted(p.relative_to(staging).as_posix() for p in staging.rglob("*") if p.is_file())


# -- commit and cleaning up ------------------------------------------------------------------------------
def finish_commit(folder) -> bool:
    """Complete the commit of a run into ``folder`` that was stopped while moving its files into place
    (it left ``.synthcorona-commit``): move the remaining files, remove those to remove, move the
    manifest in last. Returns True if there was one. Call it only while holding the folder's lock
    (:class:`OutputRun` does, on entering)."""
    folder = pathlib.Path(folder)
    commit = folder / COMMIT_NAME
    if not commit.is_dir():
        return False
    try:
        plan = json.loads((commit / PLAN_NAME).read_text(encoding="utf-8"))
        move, remove = list(plan["move"]), list(plan["remove"])
    except (OSError, ValueError, KeyError, TypeError):
        raise OutputFolderError(f"{folder}: an earlier run was stopped while moving its files into place and its "
                                f"plan {commit / PLAN_NAME} cannot be read; look at {commit} and remove it by hand",
                                path=str(folder), reason="unreadable commit plan") from None
    with contextlib.suppress(FileNotFoundError):
        os.unlink(folder / MANIFEST_NAME)
    for name in filter(_safe_name, move):
        _pause(f"move:{name}")
        if (commit / name).exists():
            (folder / name).parent.mkdir(parents=True, exist_ok=True)
            os.replace(commit / name, folder / name)
    for name in filter(_safe_name, remove):
        path = folder / name
        if path.is_symlink() or path.is_file():
            with contextlib.suppress(FileNotFoundError):
                path.unlink()
    if (commit / MANIFEST_NAME).exists():
        os.replace(commit / MANIFEST_NAME, folder / MANIFEST_NAME)
    _fsync(folder, directory=True)
    shutil.rmtree(commit)
    return True


def clean_up_killed_runs(folder, prefix: str = STAGING_PREFIX) -> list[str]:
    """What runs killed by SIGKILL (or a power cut) left in ``folder``: complete an interrupted commit
    (:func:`finish_commit`) and remove staging folders. Call it only while holding the folder's lock.
    Returns one line per thing done."""
    folder = pathlib.Path(folder)
    done = []
    if prefix == STAGING_PREFIX and finish_commit(folder):
        done.append(f"completed moving the files of an earlier run into {folder} (it was stopped while moving them)")
    for p in sorted(folder.glob(glob.escape(prefix) + "*")):
        shutil.rmtree(p, ignore_errors=True)
        done.append(f"removed {p.name}, left by an earlier run that was killed")
    return done


def unlisted_files(folder, listed) -> list[str]:
    """The entries of ``folder`` that neither the manifest (``listed`` names) nor synthcorona's own files
    account for: left by someone else or by a run from before manifests (folders end in ``/``)."""
    folder = pathlib.Path(folder)
    known = {PurePosixPath(n).parts[0] for n in listed} | {MANIFEST_NAME}
    return sorted(p.name + ("/" if p.is_dir() else "") for p in folder.iterdir()
                  if p.name not in known and not p.name.startswith(_INTERNAL))


class _LockedRun:
    """What :class:`OutputRun` and :class:`OutputFile` share: the folder made if needed, the lock, the
    cleaning after killed runs, the staging folder, and the way out (commit on success, else discard)."""

    def __init__(self, target: pathlib.Path, text: str, *, folder: pathlib.Path, lock: pathlib.Path, prefix: str,
                 argv=None, option: str = "--out"):
        self.target, self._text, self.option = target, text, option
        self._folder, self._lock_path, self._prefix = folder, lock, prefix
        self.argv = list(argv) if argv else ["synthcorona", *sys.argv[1:]]
        self.started = utc_now()
        self.staging: pathlib.Path | None = None
        self.committed = False
        self.recovered: list[str] = []
        self._fd = None
        self._created = False

    def _make_folder(self) -> bool:
        if self._folder.is_dir():
            return False
        try:
            self._folder.mkdir(parents=True)
        except FileExistsError:
            if self._folder.is_dir():
                return False
            raise _error(self._text, self.option, "exists and is not a folder") from None
        except OSError as exc:
            raise _error(self._text, self.option, f"cannot create the folder ({exc.strerror})") from None
        return True

    def __enter__(self):
        self._created = self._make_folder()
        try:
            info = {"pid": os.getpid(), "host": socket.gethostname(), "started_utc": self.started,
                    "command": shlex.join(self.argv)}
            self._fd = _acquire(self._lock_path, info, self._text, self.option)
            self.recovered = clean_up_killed_runs(self._folder, self._prefix)
            try:
                self.staging = pathlib.Path(tempfile.mkdtemp(prefix=self._prefix, dir=self._folder))
            except OSError as exc:
                raise _error(self._text, self.option, f"cannot write into it ({exc.strerror})") from None
            _pause("locked")
        except BaseException as exc:
            self._discard()
            if isinstance(exc, RunInterrupted):
                exc.results_written = False
            raise
        return self

    def __exit__(self, exc_type, exc, tb):
        try:
            if exc_type is None:
                self._commit()
        except RunInterrupted as late:       # held back during the commit, delivered after it
            late.results_written = self.committed
            raise
        finally:
            self._discard()
        if isinstance(exc, RunInterrupted):
            exc.results_written = False
        return False

    def _commit(self) -> None:
        raise NotImplementedError

    def _discard(self) -> None:
        """Remove the staging folder, release the lock, remove the folder if this run made it and
        wrote nothing."""
        if self.staging is not None:
            shutil.rmtree(self.staging, ignore_errors=True)
            self.staging = None
        _release(self._lock_path, self._fd)
        self._fd = None
        if self._created and not self.committed:
            with contextlib.suppress(OSError):
                self._folder.rmdir()


class OutputRun(_LockedRun):
    """Context manager for one run's output folder (see the module documentation): on entering, the
    folder is made if needed and locked, what killed runs left is cleaned up and a staging folder is
    made; :meth:`path` gives where to write each product; a clean exit moves them into place with
    ``manifest.json`` written last, an exception leaves the folder as it was.

    Parameters
    ----------
    folder : path
        The output folder (checked by :func:`check_output_folder`).
    argv : list of str, optional
        The command line, for the lock file and the manifest (default ``sys.argv``).
    option : str
        The option that named the folder, for messages.

    Attributes
    ----------
    target : pathlib.Path
        The output folder.
    written, removed : list of str
        After the commit: the files of this run, and the files of the previous run that it removed.
    unlisted : list of str
        After the commit: entries of the folder that no manifest lists (:func:`unlisted_files`).
    recovered : list of str
        What was cleaned up after earlier killed runs (:func:`clean_up_killed_runs`).
    """

    def __init__(self, folder, *, argv=None, option: str = "--out"):
        target = check_output_folder(folder, option)
        super().__init__(target, os.fspath(folder), folder=target, lock=target / LOCK_NAME, prefix=STAGING_PREFIX,
                         argv=argv, option=option)
        self.facts: dict = {}
        self.written: list[str] = []
        self.removed: list[str] = []
        self.unlisted: list[str] = []

    def path(self, name: str) -> pathlib.Path:
        """Where to write the product ``name`` (a relative name such as ``"forecast.nc"``): a path in the
        staging folder."""
        if self.staging is None:
            raise RuntimeError("OutputRun.path() is for use inside the 'with' block")
        if not _safe_name(name):
            raise ValueError(f"{name!r} cannot be the name of a product in an output folder")
        _pause(f"write:{name}")
        path = self.staging / name
        path.parent.mkdir(parents=True, exist_ok=True)
        return path

    def record(self, **facts) -> None:
        """Add facts to the manifest: ``seed``, ``inputs`` (role -> :func:`~synthcorona.io.manifest.input_entry`),
        ``table`` (:func:`~synthcorona.io.manifest.table_entry`), or any other JSON value."""
        self.facts.update(facts)

    def _commit(self) -> None:
        _pause("commit")
        staging = self.staging
        names = [n for n in _staged_files(staging) if _safe_name(n)]
        for n in names:
            if (self.target / n).is_dir() and not (self.target / n).is_symlink():
                raise _error(self._text, self.option, f"holds a folder {n}, which the file {n} of this run cannot "
                                                      "replace")
            _fsync(staging / n)
        manifest = build_manifest([file_entry(staging / n, n) for n in names], argv=self.argv, started=self.started,
                                  facts=self.facts)
        remove = [n for n in listed_files(read_manifest(self.target)) if n not in names and _safe_name(n)]
        _write_json(manifest, staging / MANIFEST_NAME)
        _write_json({"move": names, "remove": remove}, staging / PLAN_NAME)
        _fsync(staging, directory=True)
        with deferred_interrupts():
            os.rename(staging, self.target / COMMIT_NAME)     # from here on, the new files will be in place
            self.staging = None
            self.committed = True
            finish_commit(self.target)
        self.written, self.removed = names, remove
        self.unlisted = unlisted_files(self.target, names)


class OutputFile(_LockedRun):
    """Context manager for a run that writes one file (``build-table --out FILE``): checked by
    :func:`check_output_file`, locked through ``.NAME.synthcorona.lock`` beside it, written into a
    staging folder beside it (:meth:`path`) and moved into place with ``os.replace`` only on a clean
    exit. No manifest: the file carries its own provenance."""

    def __init__(self, path, *, argv=None, option: str = "--out"):
        target = check_output_file(path, option)
        folder = target.parent
        super().__init__(target, os.fspath(path), folder=folder, lock=folder / f".{target.name}{_INTERNAL}.lock",
                         prefix=f".{target.name}{_INTERNAL}-staging-", argv=argv, option=option)

    def path(self) -> pathlib.Path:
        """Where to write the file: a path in the staging folder."""
        if self.staging is None:
            raise RuntimeError("OutputFile.path() is for use inside the 'with' block")
        return self.staging / self.target.name

    def _commit(self) -> None:
        _pause("commit")
        written = self.staging / self.target.name
        if not written.is_file():
            raise _error(self._text, self.option, "the run finished without writing it")
        _fsync(written)
        with deferred_interrupts():
            os.replace(written, self.target)
            self.committed = True
        _fsync(self._folder, directory=True)
