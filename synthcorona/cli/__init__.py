"""Command line: ``synthcorona <subcommand>``.

The subcommands live in this package, one module each (see ``synthcorona --help`` for the list);
each parses its options, calls a product (:mod:`synthcorona.products`), and hands the result to the
writers (:mod:`synthcorona.io.writers`) and figures (:mod:`synthcorona.plotting`). Every quantity on
the command line or in a scenario file carries a unit string parsed by astropy ("10 pc",
"1e51 cm-3", "0.1-2.4 keV"). User mistakes end with a one-line reason and exit status 2, never a
traceback; SIGINT and SIGTERM end a run with one line and exit status 130 or 143. The subcommands that
write a folder go through :class:`synthcorona.io.output_folder.OutputRun` (checked before computing,
locked, written whole or not at all, with a manifest).
"""
from __future__ import annotations

import argparse
import importlib
import sys

__all__ = ["main", "build_parser", "COMMANDS"]

#: Subcommand modules, one each (``NAME``, ``HELP``, ``DESCRIPTION``, ``add_arguments(parser)``,
#: ``run(args) -> int``), in the order ``--help`` shows them. ``HELP`` (one line) and ``DESCRIPTION``
#: (the text of ``synthcorona <subcommand> --help``) are plain text, without reStructuredText markup.
COMMANDS = [
    "forecast",
    "spectrum",
    "cycle",
    "list_items",
    "emission",
    "build_table",
    "table_info",
]


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand of :data:`COMMANDS`."""
    p = argparse.ArgumentParser(prog="synthcorona",
                                description="Synthetic coronal X-ray/EUV emission from CHIANTI, instrument "
                                            "responses and CME-dimming forecasts.")
    sub = p.add_subparsers(dest="command", required=True, metavar="<subcommand>")
    for modname in COMMANDS:
        mod = importlib.import_module(f".{modname}", __package__)
        sp = sub.add_parser(mod.NAME, help=mod.HELP, description=mod.DESCRIPTION.strip(),
                            formatter_class=argparse.RawDescriptionHelpFormatter)
        mod.add_arguments(sp)
        sp.set_defaults(func=mod.run)
    return p


def main(argv=None) -> int:
    """Run ``synthcorona`` with ``argv`` (default: sys.argv[1:]); returns the exit status.

    0 on success; 2 for a user mistake (one line on standard error); 130 or 143 when SIGINT or SIGTERM
    stopped the run (one line saying whether the output folder keeps its previous contents).
    """
    from ..errors import RunInterrupted
    from ..io.interrupts import raise_on_interrupts

    argv = sys.argv[1:] if argv is None else [str(a) for a in argv]
    with raise_on_interrupts():
        args = build_parser().parse_args(argv)
        args.command_line = ["synthcorona", *argv]
        try:
            return _run(args)
        except RunInterrupted as exc:
            if exc.results_written is None:
                outcome = ""
            elif exc.results_written:
                outcome = "; the results were already complete and in place"
            else:
                outcome = "; nothing was written (the output keeps its previous contents)"
            print(f"synthcorona {args.command}: interrupted by {exc.signal_name}{outcome}", file=sys.stderr)
            return exc.exit_status


def _run(args) -> int:
    """The subcommand of ``args``; a user mistake becomes one line and exit status 2.

    astropy's ``UnitsError`` is caught only if astropy was imported by the subcommand (``list`` and
    ``table-info`` never import it: they answer without numerical libraries).
    """
    from ..errors import CliError, InputError

    try:
        return int(args.func(args) or 0)
    except (CliError, InputError) as exc:
        return _user_mistake(args, exc)
    except Exception as exc:
        units = sys.modules.get("astropy.units")
        if units is not None and isinstance(exc, units.UnitsError):
            return _user_mistake(args, exc)
        raise


def _user_mistake(args, exc) -> int:
    msg = " ".join(str(exc).split())
    print(f"synthcorona {args.command}: error: {msg}", file=sys.stderr)
    return 2


if __name__ == "__main__":
    sys.exit(main())
