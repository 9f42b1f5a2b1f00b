"""Subcommands of the ``synthcorona`` command line, one module each.

Each module defines ``NAME`` (the subcommand), ``HELP`` (one line), ``add_arguments(parser)`` and
``run(args) -> int``. :data:`COMMANDS` lists the modules in the order ``--help`` shows them.
"""
COMMANDS = [
    "forecast",
    "spectrum",
    "build_table",
    "table_info",
    "emission",
    "cycle",
    "list_items",
]
