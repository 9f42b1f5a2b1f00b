"""``synthcorona table-info``: print the provenance of an emissivity table."""
from __future__ import annotations

NAME = "table-info"
HELP = "print the provenance of an emissivity table"
#: The text of ``synthcorona table-info --help`` (plain text).
DESCRIPTION = """\
Print the provenance of an emissivity table: CHIANTI version and substituted ions, fiasco
version, ionisation equilibrium, elements, line threshold, build date and content hash.
"""


def add_arguments(p) -> None:
    """Options of ``synthcorona table-info``."""
    p.add_argument("table", nargs="?", help="table file (default: the embedded table)")


def run(args) -> int:
    from ..catalog import table_repr, table_summary

    s = table_summary(args.table)
    print(table_repr(s))
    for k in ("chianti_version", "chianti_provenance", "chianti_substituted_ions", "fiasco_version", "ioneq",
              "elements", "line_threshold",
              "lines_kept", "two_ion_model", "build_date", "content_hash", "storage_error"):
        if k in s["provenance"]:
            print(f"{k}: {s['provenance'][k]}")
    return 0
