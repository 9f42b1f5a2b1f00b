"""``synthcorona forecast``: CME-dimming forecast of a scenario file (what it writes: :data:`DESCRIPTION`)."""
from __future__ import annotations

from ..errors import CliError
from .common import add_out_option, add_table_option, check_out, load_table, open_output, output_notes

NAME = "forecast"
HELP = "CME-dimming forecast of a scenario file: depths, durations, P(detect), minimum detectable mass, report"
#: The text of ``synthcorona forecast --help`` (plain text).
DESCRIPTION = """\
CME-dimming forecast of a scenario file.

Reads a forecast scenario (TOML; every key, unit, default and valid range in
docs/scenario_reference.md) and writes into the output folder:

  forecast.nc                  every result (netCDF, units and provenance in attrs)
  bands.ecsv, bands.csv        per band: depth, duration, flare contamination, P(detect),
                               minimum detectable mass
  detection_vs_mass.ecsv/.csv  P(detect) over the scenario's grid of CME masses
  *.png                        light curves with and without the CME, P(detect) against mass,
                               temperature responses (unless --no-figures)
  report.md / report.html      a one-page report (--report)
"""


def add_arguments(p) -> None:
    """Options of ``synthcorona forecast``."""
    p.add_argument("scenario", help="forecast scenario file (TOML; every quantity a string with a unit)")
    add_out_option(p, NAME)
    add_table_option(p)
    p.add_argument("--realisations", type=int, default=None,
                   help="Monte Carlo realisations per probability (a count, dimensionless; 100-1e6 and >= 10 / "
                        "false-alarm probability, checked before any computation; default: the file's "
                        "[montecarlo] realisations)")
    p.add_argument("--seed", type=int, default=None,
                   help="integer seed of every random draw (dimensionless, 0 to 2**63-1; default: the file's "
                        "[montecarlo] seed)")
    p.add_argument("--report", choices=("md", "html", "both", "none"), default=None,
                   help="report format: Markdown, self-contained HTML (figures embedded), both or none (default: "
                        "the file's [output] report, else md)")
    p.add_argument("--no-figures", action="store_true", help="write no PNG figures (and none in the report)")


#: The largest seed the forecast file can record (netCDF attributes hold 64-bit signed integers).
SEED_MAX = 2 ** 63 - 1


def run(args) -> int:
    """Run the forecast and write the output folder; returns 0 (user mistakes raise for exit status 2).

    Every check that needs no computation comes first: the options, the output folder, the scenario
    file; the folder is then locked, and the products are written into it only when all are complete
    (:class:`~synthcorona.io.output_folder.OutputRun`)."""
    import time

    from ..io.forecast_file import read_forecast_file
    from ..products.forecast import check_realisations

    t_start = time.perf_counter()
    if args.realisations is not None:
        check_realisations(args.realisations, name="--realisations")
    if args.seed is not None and not 0 <= args.seed <= SEED_MAX:
        raise CliError(f"--seed={args.seed}: give an integer in [0, {SEED_MAX}] (the range the forecast file can "
                       "record)")
    check_out(args)
    table = load_table(args)
    inputs = read_forecast_file(args.scenario, build=False)
    if args.realisations is not None:
        check_realisations(args.realisations, inputs.observation.false_alarm, name="--realisations")
    with open_output(args) as out:
        ds, written = _compute_and_write(args, inputs, table, out)
    _summary(ds, out.target, written, time.perf_counter() - t_start)
    for line in output_notes(out):
        print(line)
    return 0


def _compute_and_write(args, inputs, table, out):
    """The forecast, written into the staging folder of ``out``; (Dataset, names of the files written)."""
    import warnings

    from ..io.manifest import input_entry, table_entry
    from ..io.report import forecast_report
    from ..io.writers import figure_png, write_bytes, write_netcdf, write_table, write_text
    from ..plotting.forecast import forecast_figures
    from ..products.forecast import forecast_tables, run_forecast

    inputs = inputs.with_scenario(table=table)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ds = run_forecast(inputs, realisations=args.realisations, seed=args.seed, table=table)
    out.record(seed=int(ds.attrs["seed"]), inputs={"scenario": input_entry(args.scenario)},
               table=table_entry(table))
    written = [write_netcdf(ds, out.path("forecast.nc"))]
    bands, vs_mass = forecast_tables(ds)
    for name, tab in (("bands", bands), ("detection_vs_mass", vs_mass)):
        written += write_table(tab, out.path(f"{name}.ecsv"), csv=True)
    figures = {}
    if not args.no_figures and inputs.output.get("figures", True):
        for name, (fname, fig, caption) in forecast_figures(ds, inputs).items():
            figures[name] = (fname, figure_png(fig, dpi=110), caption)
            written.append(write_bytes(figures[name][1], out.path(fname)))
    fmt = args.report or inputs.output.get("report", "md")
    for f in (("md", "html") if fmt == "both" else (() if fmt == "none" else (fmt,))):
        written.append(write_text(forecast_report(ds, inputs, figures, fmt=f), out.path(f"report.{f}")))
    return ds, [p.name for p in written]


def _summary(ds, out, written, seconds) -> None:
    """A few lines for the terminal."""
    import numpy as np

    print(f"{ds.attrs['title']}")
    print(f"CME mass {float(ds['cme_mass']):.3g} g; onset {float(ds['onset_time']):.4g} s, recovery "
          f"{float(ds['recovery_time']) / 3600:.3g} h, time above half depth {float(ds['fwhm_duration']) / 3600:.3g} h")
    print(f"{'band':>18s} {'rate ct/s':>10s} {'depth':>9s} {'net':>9s} {'flare/dim':>9s} {'P(detect)':>10s} "
          f"{'min mass g':>10s}")
    for b in ds["band"].values:
        s = ds.sel(band=b)
        mm = float(s["minimum_detectable_mass"])
        print(f"{str(b):>18s} {float(s['quiescent_rate']):10.4g} {float(s['depth']):9.3g} {float(s['net_depth']):9.3g} "
              f"{float(s['flare_to_dimming']):9.3g} {float(s['probability']):10.3f} "
              f"{(f'{mm:10.3g}' if np.isfinite(mm) else '         -')}")
    print(f"({ds.attrs['n_realisations']} realisations, seed {ds.attrs['seed']}, {ds.attrs['statistic']} statistic, "
          f"false-alarm probability {ds.attrs['false_alarm']:g}; CHIANTI {ds.attrs['chianti_version']} table "
          f"{ds.attrs['table_content_hash'][:12]})")
    print(f"wrote {', '.join(written)} to {out}/ in {seconds:.1f} s")
