"""Subcommands of the ``synthcorona`` command line, one module each.

Each module defines ``NAME`` (the subcommand), ``HELP`` (one line), ``add_arguments(parser)`` and
``run(args) -> int``. :data:`COMMANDS` lists the modules in the order ``--help`` shows them.
"""
COMMANDS = [
    "forecast",
    "spectrum",
    "cycle",
    "list_items",
    "emission",
    "build_table",
    "table_info",
]
