"""Helpers shared by the subcommands: reading quantities, bands and the emissivity table from the
command line, and the output folder (:mod:`synthcorona.io.output_folder`). Every user mistake becomes a
:class:`~synthcorona.errors.CliError` (or another :class:`~synthcorona.errors.InputError`) naming the option."""
from __future__ import annotations

import os

from ..errors import CliError, InputError

__all__ = ["parse_quantity", "parse_band", "parse_range", "add_table_option", "add_out_option", "default_out",
    "load_table", "check_out", "open_output", "output_notes"]


def parse_quantity(text: str, unit: str, what: str):
    """Read ``text`` ("10 pc") as an astropy Quantity convertible to ``unit``; ``what`` names the option."""
    import astropy.units as u

    try:
        q = u.Quantity(text)
    except (TypeError, ValueError):
        raise CliError(f"{what}: cannot read '{text}' as a quantity with a unit (e.g. '10 pc')") from None
    try:
        return q.to(unit)
    except u.UnitConversionError:
        raise CliError(f"{what}: '{text}' has units '{q.unit}', expected something convertible to '{unit}'") from None


def parse_band(text: str, what: str = "--band"):
    """'0.1-2.4 keV' or '171-175 Angstrom' -> :class:`~synthcorona.spectral.Band` (read by :meth:`Band.parse`)."""
    import astropy.units as u

    from ..spectral import Band

    try:
        return Band.parse(text, what)
    except (InputError, u.UnitsError) as exc:
        raise CliError(str(exc) if getattr(exc, "argument", None) == what else f"{what} '{text}': {exc}") from None


def parse_range(values, unit: str, what: str, unit_what: str = "--wavelength-unit"):
    """Two limits, each a quantity with a unit ("10 Angstrom", "0.5 keV") or a plain number in ``unit``
    (the value of option ``unit_what``), as a :class:`~synthcorona.spectral.Band` (wavelengths or
    energies, lower limit first)."""
    import astropy.units as u

    from ..spectral import Band

    try:
        plain_unit = u.Unit(unit)
    except (TypeError, ValueError):
        raise CliError(f"{unit_what}: cannot read the unit '{unit}'") from None
    limits = []
    for text in values:
        try:
            limits.append(float(text) * plain_unit)
            continue
        except ValueError:
            pass
        try:
            limits.append(u.Quantity(text))
        except (TypeError, ValueError):
            raise CliError(f"{what}: cannot read '{text}' as a number or a quantity with a unit "
                           "(e.g. '10 Angstrom')") from None
    lo, hi = limits
    try:
        return Band(lo, hi.to(lo.unit, equivalencies=u.spectral()), what)
    except (InputError, u.UnitsError) as exc:
        raise CliError(f"{what} {' '.join(values)}: {exc}") from None


def add_table_option(p) -> None:
    """``--table FILE``: run the whole subcommand on a rebuilt emissivity table (loaded once by
    :func:`load_table` and passed to every computation)."""
    p.add_argument("--table", dest="emissivity_table", metavar="FILE",
                   help="emissivity table built with 'synthcorona build-table' (default: $SYNTHCORONA_TABLE, else "
                        "the embedded CHIANTI 10.1 composite table)")


def default_out(command: str) -> str:
    """The default output folder of subcommand ``command``: ``<command>_out`` in the current folder
    (``forecast_out``, ``spectrum_out``, ``cycle_out``, ``emission_out``)."""
    return f"{command}_out"


def add_out_option(p, command: str) -> None:
    """``--out DIR``: the output folder of a subcommand that writes several files, default
    :func:`default_out` (the one rule for every such subcommand)."""
    p.add_argument("--out", default=default_out(command), metavar="DIR",
                   help=f"output folder, created if needed (default '{default_out(command)}': the subcommand's "
                        "name + '_out', in the current folder); checked before computing, locked while the run "
                        "lasts, its files replaced only when all new ones are complete; manifest.json lists them")


def load_table(args):
    """The emissivity table of ``--table`` (checked to exist), or the default one
    (:func:`synthcorona.emissivity.resolve_table`)."""
    from ..emissivity import resolve_table

    path = getattr(args, "emissivity_table", None)
    if path is not None and not os.path.isfile(path):
        raise CliError(f"--table {path}: no such emissivity table file")
    return resolve_table(path)


def check_out(args, option: str = "--out"):
    """Check the output folder of ``args.out`` before any computation
    (:func:`synthcorona.io.output_folder.check_output_folder`; an error names ``option``)."""
    from ..io.output_folder import check_output_folder

    return check_output_folder(args.out, option)


def open_output(args, option: str = "--out"):
    """The :class:`~synthcorona.io.output_folder.OutputRun` of ``args.out``, with the command line of the run
    for its lock file and manifest."""
    from ..io.output_folder import OutputRun

    return OutputRun(args.out, argv=getattr(args, "command_line", None), option=option)


def output_notes(out) -> list[str]:
    """Lines for the terminal about an output folder after its run: what was cleaned up after earlier killed
    runs, the previous run's files removed, and the files that are not from this run."""
    lines = [f"note: {r}" for r in out.recovered]
    if out.removed:
        lines.append(f"removed from {out.target}/ the files of the previous run that this run did not write: "
                     f"{', '.join(out.removed)}")
    if out.unlisted:
        shown = ", ".join(out.unlisted[:10]) + (f" and {len(out.unlisted) - 10} more" if len(out.unlisted) > 10 else "")
        lines.append(f"note: {out.target}/ also holds {shown}, which no manifest lists: not from this run, left in "
                     "place")
    return lines
