"""``synthcorona emission``: spectrum and band fluxes of a DEM (Gaussian in log T or isothermal).

Writes band_fluxes.ecsv (energy flux at the observer and luminosity per band), spectrum.nc (flux
density at the observer over ``--wavelength-range`` in bins of ``--wavelength-bin``) and
spectrum.png, and manifest.json (every file with its SHA-256; the output folder is handled as for
``forecast``); the numbers come from :func:`synthcorona.products.spectrum.dem_spectrum`.
"""
from __future__ import annotations

from .common import (
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


def add_arguments(p) -> None:
    """Options of ``synthcorona emission``."""
    p.add_argument("--peak-logT", type=float, default=6.6, help="Gaussian DEM peak, log10 T [K] (default 6.6)")
    p.add_argument("--width-logT", type=float, default=0.25, help="Gaussian DEM sigma [dex] (default 0.25)")
    p.add_argument("--temperature", help="isothermal plasma instead, e.g. '8 MK'")
    p.add_argument("--em", default="3e51 cm-3", help="total volume emission measure (default '3e51 cm-3')")
    p.add_argument("--distance", default="8.4 pc", help="distance of the star (default '8.4 pc')")
    p.add_argument("--density", default="1e10 cm-3", help="electron density (default '1e10 cm-3')")
    p.add_argument("--abundances", default="coronal", help="abundance set name (default 'coronal')")
    p.add_argument("--band", action="append", help="band, e.g. '0.1-2.4 keV' or '171-175 Angstrom' (repeatable; "
                                                    "default: six X-ray and EUV bands)")
    p.add_argument("--wavelength-range", nargs=2, metavar=("MIN", "MAX"), default=["1", "400"],
                   help="limits of the spectrum: two quantities ('10 Angstrom' '40 Angstrom', or energies "
                        "'0.5 keV' '2 keV') or two numbers in --wavelength-unit (default 1 400)")
    p.add_argument("--wavelength-unit", default="Angstrom",
                   help="unit of plain numbers in --wavelength-range (default 'Angstrom')")
    p.add_argument("--wavelength-bin", default="0.02 Angstrom",
                   help="bin width of the spectrum (default '0.02 Angstrom')")
    add_table_option(p)
    p.add_argument("--out", default="synthcorona_out", help="output folder (default 'synthcorona_out'; checked before computing, locked, "
                                                          "replaced whole; manifest.json lists the files)")


def run(args) -> int:
    """Compute and write the spectrum and band fluxes of the DEM; returns 0."""
    from ..dem import GaussianDEM, IsothermalDEM
    from ..io.manifest import table_entry
    from ..io.writers import write_figure, write_netcdf, write_table
    from ..plotting.spectrum import plot_spectrum
    from ..products.spectrum import DEFAULT_FLUX_BANDS, dem_spectrum

    em = parse_quantity(args.em, "cm-3", "--em")
    dist = parse_quantity(args.distance, "pc", "--distance")
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
        written = write_table(res.fluxes, out.path("band_fluxes.ecsv"))
        written.append(write_netcdf(res.spectrum, out.path("spectrum.nc")))
        written.append(write_figure(plot_spectrum(res.spectrum, title=f"{dem!r} at {dist}"), out.path("spectrum.png"),
                                    dpi=120))
    print(f"DEM: {dem!r}; distance {dist}; abundances {args.abundances}; n_e {dens}")
    print(f"table: {table.path.name} (CHIANTI {table.provenance.get('chianti_version')}, see provenance)")
    for r in res.fluxes:
        print(f"  {r['band']:>22s}: flux {r['flux'].value:10.3e} erg s-1 cm-2   L {r['luminosity'].value:10.3e} erg s-1")
    print(f"wrote {', '.join(str(out.target / p.name) for p in written)}")
    for line in output_notes(out):
        print(line)
    return 0
