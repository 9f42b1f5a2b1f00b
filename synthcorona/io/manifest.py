"""The manifest of an output folder: ``manifest.json``, written last by every command-line run.

It lists every file the run wrote (name, size in bytes, SHA-256) and how they were made: the command
line, the synthcorona version, the start and end times (UTC), the host and process id, the input
files with their SHA-256, the emissivity table (path, content hash, CHIANTI version) and the random
seed (``null`` for the subcommands that draw no random numbers). Example::

    {
      "synthcorona_manifest": 1,
      "command": "synthcorona forecast star.toml --out forecast_out",
      "argv": ["synthcorona", "forecast", "star.toml", "--out", "forecast_out"],
      "subcommand": "forecast",
      "synthcorona_version": "0.1.0",
      "started_utc": "2025-03-01T10:00:00Z",
      "finished_utc": "2025-03-01T10:00:07Z",
      "host": "workstation", "pid": 4242,
      "seed": 3,
      "inputs": {"scenario": {"path": "/home/me/star.toml", "size": 1234, "sha256": "6df9..."}},
      "table": {"path": ".../chianti_table.nc", "content_hash": "65d6...", "chianti_version": "10.1"},
      "files": [{"name": "bands.csv", "size": 624, "sha256": "..."}, ...]
    }

The next run into the folder removes the files this manifest lists that it does not write itself;
files that no manifest lists are never deleted (:mod:`synthcorona.io.output_folder`). Check a
folder with :func:`verify_manifest`.
"""
from __future__ import annotations

import datetime
import json
import os
import pathlib
import shlex
import socket

from ..catalog import file_sha256

__all__ = ["MANIFEST_NAME", "MANIFEST_FORMAT", "file_entry", "input_entry", "table_entry",
           "utc_now", "build_manifest", "read_manifest", "listed_files", "verify_manifest"]

#: File name of the manifest inside an output folder.
MANIFEST_NAME = "manifest.json"
#: Version of the manifest layout (the ``synthcorona_manifest`` key).
MANIFEST_FORMAT = 1



def file_entry(path, name: str) -> dict:
    """``{"name", "size", "sha256"}`` of the file ``path``, listed as ``name``."""
    return {"name": name, "size": os.stat(path).st_size, "sha256": file_sha256(path)}


def input_entry(path) -> dict:
    """``{"path", "size", "sha256"}`` of an input file (its absolute path)."""
    p = pathlib.Path(path).resolve()
    return {"path": str(p), "size": p.stat().st_size, "sha256": file_sha256(p)}


def table_entry(table) -> dict:
    """``{"path", "content_hash", "chianti_version"}`` of an emissivity table
    (:class:`~synthcorona.emissivity.EmissivityTable`)."""
    prov = getattr(table, "provenance", {}) or {}
    path = getattr(table, "path", None)
    return {"path": str(path) if path is not None else None, "content_hash": prov.get("content_hash"),
            "chianti_version": prov.get("chianti_version")}


def utc_now() -> str:
    """The time now, ISO 8601 UTC to the second (``2025-03-01T10:00:00Z``)."""
    return datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def build_manifest(files: list[dict], *, argv: list[str], started: str, facts: dict | None = None) -> dict:
    """The manifest of a run that wrote ``files`` (:func:`file_entry` each), was started at ``started``
    (:func:`utc_now`) by the command line ``argv``, with ``facts`` (``seed``, ``inputs``, ``table``)."""
    from .. import __version__

    facts = dict(facts or {})
    return {
        "synthcorona_manifest": MANIFEST_FORMAT,
        "command": shlex.join(argv),
        "argv": list(argv),
        "subcommand": argv[1] if len(argv) > 1 else "",
        "synthcorona_version": __version__,
        "started_utc": started,
        "finished_utc": utc_now(),
        "host": socket.gethostname(),
        "pid": os.getpid(),
        "seed": facts.pop("seed", None),
        "inputs": facts.pop("inputs", {}),
        "table": facts.pop("table", None),
        **facts,
        "files": sorted(files, key=lambda f: f["name"]),
    }


def read_manifest(folder) -> dict | None:
    """The manifest of ``folder``, or None if it has none or it cannot be read as one."""
    try:
        data = json.loads((pathlib.Path(folder) / MANIFEST_NAME).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or not isinstance(data.get("files"), list):
        return None
    return data


def listed_files(manifest: dict | None) -> list[str]:
    """The file names a manifest lists (those of well-formed entries)."""
    if not manifest:
        return []
    return [f["name"] for f in manifest.get("files", []) if isinstance(f, dict) and isinstance(f.get("name"), str)]


def verify_manifest(folder) -> list[str]:
    """Check the files of ``folder`` against its manifest: a list of problems (a missing manifest, a
    missing file, a size or SHA-256 that differs); empty when everything matches."""
    folder = pathlib.Path(folder)
    manifest = read_manifest(folder)
    if manifest is None:
        return [f"{folder / MANIFEST_NAME}: missing or unreadable"]
    problems = []
    for i, f in enumerate(manifest["files"]):
        if not isinstance(f, dict) or not isinstance(f.get("name"), str):
            problems.append(f"files[{i}]: not a file entry")
            continue
        path = folder / f["name"]
        if not path.is_file():
            problems.append(f"{f['name']}: missing")
        elif path.stat().st_size != f.get("size") or file_sha256(path) != f.get("sha256"):
            problems.append(f"{f['name']}: differs from the manifest (size or SHA-256)")
    return problems
