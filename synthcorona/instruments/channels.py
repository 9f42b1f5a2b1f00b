"""Instrument bands ("channels") from the many ways a user names them: one parser for the
dimming scenarios, forecast files and activity-cycle comparisons."""
from __future__ import annotations

import pathlib
from typing import Any

from ..errors import InputError

__all__ = ["resolve_channels"]


def _split_spec(spec: str) -> tuple[str, str | None]:
    name, sep, band = spec.rpartition(":")
    if sep and name and band:
        return name, band
    return spec, None


def resolve_channels(instruments) -> list[tuple[str, Any, str]]:
    """Instrument bands ("channels") as a list of ``(label, Instrument, band name)``.

    ``instruments``: a generic instrument name or response file (every named band, or "total"
    without named bands), ``"name:band"`` for one band, an :class:`~synthcorona.instruments.Instrument`,
    a tuple ``(instrument, band)``, a list of these, or a dict label -> any of these (one band each).
    Labels are ``"name:band"``, or ``"name"`` for the band "total".
    """
    from .instrument import Instrument
    from .readers import load_instrument

    def inst_of(x):
        if isinstance(x, Instrument):
            return x
        if isinstance(x, str):
            return load_instrument(x)
        raise InputError(f"instrument {x!r} must be an Instrument, a generic instrument name or a response file")

    def expand(label, spec):
        band = None
        if isinstance(spec, tuple):
            if len(spec) != 2:
                raise InputError(f"instrument {spec!r}: a tuple must be (instrument, band name)")
            spec, band = spec
        elif isinstance(spec, str):
            name, b = _split_spec(spec)
            from .designs import list_generic

            if b is not None and (name in list_generic() or not _exists(spec)):
                spec, band = name, b
        ins = inst_of(spec)
        if band is not None and band != "total" and band not in ins.bands:
            have = ", ".join(ins.bands) or 'none (use the whole instrument, band "total")'
            raise InputError(f"instrument '{ins.name}' has no band '{band}'; its bands: {have}")
        bands = [band] if band is not None else (list(ins.bands) or ["total"])
        out = []
        for b in bands:
            lab = label if (label is not None and len(bands) == 1) else (ins.name if b == "total" else f"{ins.name}:{b}")
            out.append((lab, ins, b))
        return out

    if isinstance(instruments, (str, Instrument, tuple)):
        items = [(None, instruments)]
    elif isinstance(instruments, dict):
        items = list(instruments.items())
    elif isinstance(instruments, list):
        items = [(None, x) for x in instruments]
    else:
        raise InputError(f"instruments={instruments!r}: give a name, an Instrument, a list or a dict")
    out = []
    for label, spec in items:
        out.extend(expand(label, spec))
    labels = [o[0] for o in out]
    dup = sorted({x for x in labels if labels.count(x) > 1})
    if dup:
        raise InputError(f"instruments give duplicate band labels {dup}; use a dict with distinct labels")
    return out


def _exists(path: str) -> bool:
    return pathlib.Path(path).expanduser().exists()
