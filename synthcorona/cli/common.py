"""Helpers shared by the subcommands: unit-string parsing and the user-mistake exception."""
from __future__ import annotations

from ..errors import CliError

__all__ = ["parse_quantity", "parse_band", "add_table_option"]



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
    """'0.1-2.4 keV' or '171-175 Angstrom' -> Quantity pair (energy or wavelength)."""
    import astropy.units as u

    try:
        rng, unit = text.strip().split(None, 1) if " " in text.strip() else (None, None)
        lo, hi = rng.split("-")
        q = u.Quantity([float(lo), float(hi)], u.Unit(unit))
    except (ValueError, AttributeError, TypeError):
        raise CliError(f"{what}: cannot read '{text}'; write e.g. '0.1-2.4 keV' or '171-175 Angstrom'") from None
    if q.unit.physical_type not in ("energy", "length"):
        raise CliError(f"{what}: '{text}' must be in energy or wavelength units")
    return q


def add_table_option(p) -> None:
    """``--table FILE``: run the whole subcommand on a rebuilt emissivity table (``synthcorona.cli.main``
    puts it in ``$SYNTHCORONA_TABLE`` for the duration of the run)."""
    p.add_argument("--table", dest="emissivity_table", metavar="FILE",
                   help="emissivity table built with 'synthcorona build-table' (default: the embedded CHIANTI 10.1 "
                        "composite table, or $SYNTHCORONA_TABLE)")
