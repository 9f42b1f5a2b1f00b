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
    from ..catalog import GENERIC_INSTRUMENTS

    lines = ["Generic instruments (designs of synthcorona, not any real mission's calibration):"]
    for name, ins in GENERIC_INSTRUMENTS.items():
        lines.append(f"  {name}: {ins['description']}")
        if with_bands:
            if ins["bands_kev"]:
                for b, (lo, hi) in ins["bands_kev"].items():
                    lines.append(f"      band {name}:{b}  {lo:g}-{hi:g} keV ({ins['band_axis']})")
            else:
                lo, hi = ins["energy_range_kev"]
                lines.append(f"      band {name} (\"total\", whole response)  {lo:g}-{hi:g} keV")
    return lines


def _abundances() -> list[str]:
    from ..catalog import abundance_sets

    return ["Abundance sets:"] + [f"  {k}: {v}" for k, v in abundance_sets().items()]


def _dems() -> list[str]:
    from ..catalog import DEM_MODELS

    return ["DEM models (model = \"...\" in a [...dem] table; keys it reads):"] + \
        [f"  {k}: {v}" for k, v in DEM_MODELS.items()]


def _table() -> list[str]:
    from ..catalog import table_repr, table_summary

    s = table_summary()
    lines = ["Embedded emissivity table:", f"  {table_repr(s)}"]
    for k in ("chianti_version", "chianti_provenance", "fiasco_version", "ioneq", "content_hash"):
        if k in s["provenance"]:
            lines.append(f"  {k}: {s['provenance'][k]}")
    lines.append(f"  elements: {', '.join(s['elements'])}")
    lines.append(f"  continuum: {s['energy_kev'][0]:.4g}-{s['energy_kev'][-1]:.4g} keV")
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
