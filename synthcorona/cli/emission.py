"""``synthcorona emission``: spectrum and band fluxes of a DEM (Gaussian in log T or isothermal) given on the
command line (what it writes: :data:`DESCRIPTION`; the numbers come from
:func:`synthcorona.products.spectrum.dem_spectrum`).

The DEM options are the parameter names of :class:`~synthcorona.dem.GaussianDEM` and
:class:`~synthcorona.dem.IsothermalDEM` with ``-`` for ``_`` (``--peak-logT``, ``--width-logT``,
``--temperature``, ``--total-em``).
"""
from __future__ import annotations

import argparse

from .common import (
    add_out_option,
    add_table_option,
    check_out,
    load_table,
    open_output,
    output_notes,
    parse_band,
    parse_quantity,
    parse_range,
)

NAME = "emission"
HELP = "spectrum and band fluxes of a DEM (Gaussian in log T or isothermal)"
#: The text of ``synthcorona emission --help`` (plain text).
DESCRIPTION = """\
Spectrum and band fluxes of a DEM given on the command line: a Gaussian in log T (--peak-logT,
--width-logT) or an isothermal plasma (--temperature), of total emission measure --total-em. The
DEM options are the parameter names of the Python DEM classes (GaussianDEM, IsothermalDEM) and of
the [...dem] keys of input files.

With --distance, fluxes at the observer (no interstellar absorption); without it, luminosities
only (emission into 4 pi) and the spectrum as a luminosity density. Writes into the output folder:

  band_fluxes.ecsv, band_fluxes.csv   per band: flux (with --distance) and luminosity
  spectrum.nc, spectrum.png           flux density at the observer (luminosity density without
                                      --distance) over --wavelength-range in --wavelength-bin bins
"""


class _Renamed(argparse.Action):
    """A former option name: an error naming the new option (never read as an alias)."""

    def __init__(self, option_strings, dest, new: str = "", **kwargs):
        self.new = new
        super().__init__(option_strings, dest, help=argparse.SUPPRESS, **kwargs)

    def __call__(self, parser, namespace, values, option_string=None):
        parser.error(f"{option_string} was renamed {self.new} (the DEM parameter name): write {self.new} '{values}'")


def add_arguments(p) -> None:
    """Options of ``synthcorona emission``."""
    p.add_argument("--peak-logT", type=float, default=6.6, metavar="LOGT",
                   help="Gaussian DEM: log10 of the peak temperature in K, a plain number (default 6.6)")
    p.add_argument("--width-logT", type=float, default=0.25, metavar="DEX",
                   help="Gaussian DEM: sigma in log10 T, dex, a plain number (default 0.25)")
    p.add_argument("--temperature", metavar="T", help="isothermal plasma of this temperature instead, e.g. '8 MK'")
    p.add_argument("--total-em", default="3e51 cm-3", metavar="EM",
                   help="total volume emission measure of the DEM (default '3e51 cm-3')")
    p.add_argument("--em", action=_Renamed, new="--total-em")
    p.add_argument("--distance", default=None, metavar="D",
                   help="distance of the star, e.g. '8.4 pc'; needed for fluxes (default: none, so luminosities "
                        "only)")
    p.add_argument("--density", default="1e10 cm-3", metavar="N_E", help="electron density (default '1e10 cm-3')")
    p.add_argument("--abundances", default="coronal", metavar="SET", help="abundance set name (default 'coronal'; "
                                                             "'synthcorona list abundances')")
    p.add_argument("--band", action="append", metavar="BAND", help="band, e.g. '0.1-2.4 keV' or '171-175 Angstrom' (repeatable; "
                                                    "default: six X-ray and EUV bands)")
    p.add_argument("--wavelength-range", nargs=2, metavar=("MIN", "MAX"), default=["1", "400"],
                   help="limits of the spectrum: two quantities ('10 Angstrom' '40 Angstrom', or energies "
                        "'0.5 keV' '2 keV') or two numbers in --wavelength-unit (default 1 400)")
    p.add_argument("--wavelength-unit", default="Angstrom", metavar="UNIT",
                   help="unit of plain numbers in --wavelength-range (default 'Angstrom')")
    p.add_argument("--wavelength-bin", default="0.02 Angstrom", metavar="WIDTH",
                   help="bin width of the spectrum (default '0.02 Angstrom')")
    add_table_option(p)
    add_out_option(p, NAME)


def run(args) -> int:
    """Compute and write the spectrum and band fluxes (or luminosities) of the DEM; returns 0."""
    from ..dem import GaussianDEM, IsothermalDEM
    from ..io.manifest import table_entry
    from ..io.writers import write_figure, write_netcdf, write_table
    from ..plotting.spectrum import plot_spectrum
    from ..products.spectrum import DEFAULT_FLUX_BANDS, dem_spectrum

    em = parse_quantity(args.total_em, "cm-3", "--total-em")
    dist = parse_quantity(args.distance, "pc", "--distance") if args.distance is not None else None
    dens = parse_quantity(args.density, "cm-3", "--density")
    if args.temperature:
        dem = IsothermalDEM(temperature=parse_quantity(args.temperature, "K", "--temperature"), total_em=em)
    else:
        dem = GaussianDEM(peak_logT=args.peak_logT, width_logT=args.width_logT, total_em=em)
    bands = [parse_band(b) for b in args.band] if args.band else list(DEFAULT_FLUX_BANDS)
    limits = parse_range(args.wavelength_range, args.wavelength_unit, "--wavelength-range")
    step = parse_quantity(args.wavelength_bin, "Angstrom", "--wavelength-bin")
    check_out(args)
    table = load_table(args)
    with open_output(args) as out:
        res = dem_spectrum(dem, dist, bands=bands, density=dens, abundances=args.abundances,
                           wavelength_range=limits, wavelength_bin=step, table=table)
        out.record(table=table_entry(table))
        written = write_table(res.fluxes, out.path("band_fluxes.ecsv"), csv=True)
        written.append(write_netcdf(res.spectrum, out.path("spectrum.nc")))
        fig = plot_spectrum(res.spectrum, title=f"{dem!r} at {dist}" if dist is not None else f"{dem!r}: luminosity",
                            lines=res.lines)
        if dist is None:
            fig.axes[0].set_ylabel(f"luminosity density [{res.spectrum.attrs.get('units', '')}]")
        written.append(write_figure(fig, out.path("spectrum.png"), dpi=120))
    print(f"DEM: {dem!r}; distance {dist if dist is not None else 'not given (luminosities only)'}; "
          f"abundances {args.abundances}; n_e {dens}")
    print(f"table: {table.path.name} (CHIANTI {table.provenance.get('chianti_version')}, see provenance)")
    for r in res.fluxes:
        flux = f"flux {r['flux'].value:10.3e} erg s-1 cm-2   " if "flux" in r.colnames else ""
        print(f"  {r['band']:>22s}: {flux}L {r['luminosity'].value:10.3e} erg s-1")
    print(f"wrote {', '.join(str(out.target / p.name) for p in written)}")
    for line in output_notes(out):
        print(line)
    return 0
