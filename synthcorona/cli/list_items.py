"""``synthcorona list [instruments|bands|abundances|dems|table|all]``: what is available without any file
(the choices: :data:`WHAT`)."""
from __future__ import annotations

import textwrap

NAME = "list"
HELP = "list generic instruments, bands, abundance sets, DEM models and the embedded table"
#: The choices of ``synthcorona list`` and what each prints.
WHAT = {
    "instruments": "the ready-made generic instruments (designs of synthcorona, not any real mission's "
                   "calibration) with their named bands",
    "bands": "every named band of those instruments with its limits",
    "abundances": "the named abundance sets and their published sources",
    "dems": "the DEM models a [...dem] table of an input file may use, with their keys",
    "table": "a summary of the embedded emissivity table",
    "all": "everything above (the default)",
}
#: The text of ``synthcorona list --help`` (plain text).
DESCRIPTION = "What is available without any file:\n\n" + "\n".join(
    textwrap.fill(v, width=96, initial_indent=f"  {k:<13s}", subsequent_indent=" " * 15) for k, v in WHAT.items())


def add_arguments(p) -> None:
    """Options of ``synthcorona list``."""
    p.add_argument("what", nargs="?", default="all", choices=tuple(WHAT),
                   help=f"what to list: {', '.join(WHAT)} (default 'all'; each is described above)")


def _instruments(with_bands: bool) -> list[str]:
    from ..instruments.designs import list_generic, load_generic

    lines = ["Generic instruments (designs of synthcorona, not any real mission's calibration):"]
    for name, desc in list_generic().items():
        lines.append(f"  {name}: {desc}")
        if with_bands:
            ins = load_generic(name)
            lo, hi = ins.energy_range.to_value("keV")
            if ins.bands:
                for b, q in ins.bands.items():
                    lines.append(f"      band {name}:{b}  {q[0].to_value('keV'):g}-{q[1].to_value('keV'):g} keV "
                                 f"({ins.band_axis})")
            else:
                lines.append(f"      band {name} (\"total\", whole response)  {lo:g}-{hi:g} keV")
    return lines


def _abundances() -> list[str]:
    from ..abundances import available_sets

    return ["Abundance sets:"] + [f"  {k}: {v}" for k, v in available_sets().items()]


def _dems() -> list[str]:
    from ..io.toml import DEM_MODELS

    return ["DEM models (model = \"...\" in a [...dem] table; keys it reads):"] + \
        [f"  {k}: {v}" for k, v in DEM_MODELS.items()]


def _table() -> list[str]:
    from ..emissivity import load_emissivity

    t = load_emissivity()
    lines = ["Embedded emissivity table:", f"  {t!r}"]
    for k in ("chianti_version", "chianti_provenance", "fiasco_version", "ioneq", "content_hash"):
        if k in t.provenance:
            lines.append(f"  {k}: {t.provenance[k]}")
    lines.append(f"  elements: {', '.join(t.elements)}")
    lines.append(f"  continuum: {t.energy[0]:.4g}-{t.energy[-1]:.4g} keV")
    return lines


def run(args) -> int:
    """Print the requested lists."""
    what = args.what
    blocks = []
    if what in ("instruments", "all"):
        blocks.append(_instruments(with_bands=True))
    if what == "bands":
        blocks.append([ln for ln in _instruments(with_bands=True) if ln.startswith("      band") or ln.endswith(":")])
    if what in ("abundances", "all"):
        blocks.append(_abundances())
    if what in ("dems", "all"):
        blocks.append(_dems())
    if what in ("table", "all"):
        blocks.append(_table())
    print("\n\n".join("\n".join(b) for b in blocks))
    return 0
