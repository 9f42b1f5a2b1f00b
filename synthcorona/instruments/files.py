"""Source files of instrument responses: existence checks and provenance records (path and SHA-256).

Shared by the readers of :mod:`synthcorona.instruments.ogip` and
:mod:`synthcorona.instruments.area_files`.
"""
from __future__ import annotations

import os
from pathlib import Path

from ..catalog import file_sha256
from ..errors import InstrumentFileError

__all__ = ["file_sha256", "existing_file", "file_record"]



def existing_file(path, what: str) -> Path:
    """``path`` as a Path (``~`` expanded); :class:`InstrumentFileError` if it is not an existing regular file.

    ``what`` names the kind of file in the message, e.g. ``"ARF"``.
    """
    p = Path(os.fspath(path)).expanduser()
    if not p.exists():
        raise InstrumentFileError(f"{what} file '{p}' does not exist")
    if not p.is_file():
        raise InstrumentFileError(f"{what} path '{p}' is not a regular file")
    return p


def file_record(p: Path, role: str) -> dict:
    """Provenance record of one source file: absolute path, SHA-256 and its role (e.g. ``"ARF"``)."""
    return {"path": str(p.resolve()), "sha256": file_sha256(p), "role": role}
