"""``synthcorona spectrum``: spectrum, band fluxes, luminosities and count rates of a scenario's corona
(what it writes: :data:`DESCRIPTION`; the numbers come from
:func:`synthcorona.products.spectrum.scenario_spectrum`)."""
from __future__ import annotations

from .common import add_out_option, add_table_option, check_out, load_table, open_output, output_notes

NAME = "spectrum"
HELP = "spectrum, band fluxes, luminosities and instrument count rates of a scenario file's corona"
#: The text of ``synthcorona spectrum --help`` (plain text).
DESCRIPTION = """\
Spectrum, band fluxes, luminosities and count rates of a scenario file's corona.

Uses the [star], [corona], [[instrument]] and [output] tables of a forecast scenario file (the
CME, flare and observation tables are read and checked but not used). Writes into the output
folder:

  spectrum.nc, spectrum.png       flux density at the observer, no interstellar absorption
  band_fluxes.ecsv, .csv          energy flux at the observer (no absorption) and luminosity
                                  in each band of [output] flux_bands
  count_rates.ecsv, .csv          count rate in each instrument band, interstellar absorption
                                  of [star] nh included
"""


def add_arguments(p) -> None:
    """Options of ``synthcorona spectrum``."""
    p.add_argument("scenario", help="forecast scenario file (TOML; its [star], [corona], [[instrument]] are used)")
    add_out_option(p, NAME)
    add_table_option(p)
    p.add_argument("--no-figures", action="store_true", help="write no PNG figure")


def run(args) -> int:
    """Compute and write the spectrum products; returns 0."""
    import astropy.units as u

    from ..io.forecast_file import read_forecast_file
    from ..io.manifest import input_entry, table_entry
    from ..io.writers import write_figure, write_netcdf, write_table
    from ..plotting.spectrum import plot_spectrum
    from ..products.spectrum import scenario_spectrum

    check_out(args)
    table = load_table(args)
    inputs = read_forecast_file(args.scenario, build=False)
    with open_output(args) as out:
        res = scenario_spectrum(inputs, table=table)
        out.record(inputs={"scenario": input_entry(args.scenario)}, table=table_entry(table))
        written = []
        for name, tab in (("band_fluxes", res.fluxes), ("count_rates", res.rates)):
            written += write_table(tab, out.path(f"{name}.ecsv"), csv=True)
        written.append(write_netcdf(res.spectrum, out.path("spectrum.nc")))
        if not args.no_figures:
            written.append(write_figure(plot_spectrum(res.spectrum, title=inputs.title, lines=res.lines), out.path("spectrum.png"),
                                        dpi=110))
    meta = res.meta
    print(f"{inputs.title}")
    print(f"DEM: {meta['dem']}; distance {inputs.star.distance}; abundances {meta['abundances']}; n_e {meta['density']}")
    for r in res.fluxes:
        print(f"  {r['band']:>22s}: flux {r['flux'].to_value(u.erg / u.s / u.cm ** 2):10.3e} erg s-1 cm-2   "
              f"L {r['luminosity'].to_value(u.erg / u.s):10.3e} erg s-1")
    for r in res.rates:
        print(f"  {r['label']:>22s}: {r['count_rate'].to_value(u.ct / u.s):10.4g} ct/s")
    print(f"wrote {', '.join(p.name for p in written)} to {out.target}/")
    for line in output_notes(out):
        print(line)
    return 0
