"""``synthcorona forecast``: CME-dimming forecast of a scenario file.

Reads a forecast scenario (TOML; keys in docs/scenario_reference.md) and writes into the output
folder: forecast.nc (every result, units and provenance in attrs), bands.ecsv/.csv (depth,
duration, flare contamination, P(detect), minimum detectable mass per band),
detection_vs_mass.ecsv/.csv, PNG figures (light curves with and without the CME, P(detect) vs
mass, temperature responses) and a one-page report (Markdown and/or HTML).
"""
from __future__ import annotations

from ..errors import CliError
from .common import add_table_option, load_table, output_folder

NAME = "forecast"
HELP = "CME-dimming forecast of a scenario file: depths, durations, P(detect), minimum detectable mass, report"


def add_arguments(p) -> None:
    """Options of ``synthcorona forecast``."""
    p.add_argument("scenario", help="forecast scenario file (TOML; every quantity a string with a unit)")
    p.add_argument("--out", default="forecast_out", help="output folder (created if needed; default 'forecast_out')")
    add_table_option(p)
    p.add_argument("--realisations", type=int, default=None,
                   help="Monte Carlo realisations per probability (a count, dimensionless; 100-1e6 and >= 10 / "
                        "false-alarm probability, checked before any computation; default: the file's "
                        "[montecarlo] realisations)")
    p.add_argument("--seed", type=int, default=None,
                   help="integer seed of every random draw (dimensionless; default: the file's [montecarlo] seed)")
    p.add_argument("--report", choices=("md", "html", "both", "none"), default=None,
                   help="report format: Markdown, self-contained HTML (figures embedded), both or none (default: "
                        "the file's [output] report, else md)")
    p.add_argument("--no-figures", action="store_true", help="write no PNG figures (and none in the report)")


def run(args) -> int:
    """Run the forecast and write the output folder; returns 0 (user mistakes raise for exit status 2)."""
    import time
    import warnings

    from ..io.forecast_file import read_forecast_file
    from ..io.report import forecast_report
    from ..io.writers import figure_png, write_bytes, write_netcdf, write_table, write_text
    from ..plotting.forecast import forecast_figures
    from ..products.forecast import check_realisations, forecast_tables, run_forecast

    t_start = time.perf_counter()
    if args.realisations is not None:
        check_realisations(args.realisations, name="--realisations")
    if args.seed is not None and args.seed < 0:
        raise CliError(f"--seed={args.seed}: give a non-negative integer")
    table = load_table(args)
    inputs = read_forecast_file(args.scenario, build=False)
    if args.realisations is not None:
        check_realisations(args.realisations, inputs.observation.false_alarm, name="--realisations")
    inputs = inputs.with_scenario(table=table)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ds = run_forecast(inputs, realisations=args.realisations, seed=args.seed, table=table)
    out = output_folder(args.out)
    written = [write_netcdf(ds, out / "forecast.nc")]
    bands, vs_mass = forecast_tables(ds)
    for name, tab in (("bands", bands), ("detection_vs_mass", vs_mass)):
        written += write_table(tab, out / f"{name}.ecsv", csv=True)
    figures = {}
    if not args.no_figures and inputs.output.get("figures", True):
        for name, (fname, fig, caption) in forecast_figures(ds, inputs).items():
            figures[name] = (fname, figure_png(fig, dpi=110), caption)
            written.append(write_bytes(figures[name][1], out / fname))
    fmt = args.report or inputs.output.get("report", "md")
    for f in (("md", "html") if fmt == "both" else (() if fmt == "none" else (fmt,))):
        written.append(write_text(forecast_report(ds, inputs, figures, fmt=f), out / f"report.{f}"))
    _summary(ds, out, [p.name for p in written], time.perf_counter() - t_start)
    return 0


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
