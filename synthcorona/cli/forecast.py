"""``synthcorona forecast``: CME-dimming forecast of a scenario file.

Reads a forecast scenario (TOML; keys in docs/scenario_reference.md) and writes into the output
folder: forecast.nc (every result, units and provenance in attrs), bands.ecsv/.csv (depth,
duration, flare contamination, P(detect), minimum detectable mass per band),
detection_vs_mass.ecsv/.csv, PNG figures (light curves with and without the CME, P(detect) vs
mass, temperature responses) and a one-page report (Markdown and/or HTML).
"""
from __future__ import annotations

import io
import pathlib

from ..errors import CliError
from .common import add_table_option

NAME = "forecast"
HELP = "CME-dimming forecast of a scenario file: depths, durations, P(detect), minimum detectable mass, report"


def add_arguments(p) -> None:
    """Options of ``synthcorona forecast``."""
    p.add_argument("scenario", help="forecast scenario file (TOML; every quantity a string with a unit)")
    p.add_argument("--out", default="forecast_out", help="output folder (created if needed; default 'forecast_out')")
    add_table_option(p)
    p.add_argument("--realisations", type=int, default=None,
                   help="Monte Carlo realisations per probability (a count, dimensionless; 100-1e6 and >= 10 / "
                        "false-alarm probability; default: the file's [montecarlo] realisations)")
    p.add_argument("--seed", type=int, default=None,
                   help="integer seed of every random draw (dimensionless; default: the file's [montecarlo] seed)")
    p.add_argument("--report", choices=("md", "html", "both", "none"), default=None,
                   help="report format: Markdown, self-contained HTML (figures embedded), both or none (default: "
                        "the file's [output] report, else md)")
    p.add_argument("--no-figures", action="store_true", help="write no PNG figures (and none in the report)")


def _figures(ds, sc) -> dict:
    """name -> (file name, PNG bytes, caption) for the light curves, P(detect) vs mass and responses."""
    import numpy as np
    import xarray as xr

    from ..plotting.dimming import plot_detection_vs_mass, plot_light_curves
    from ..plotting.instruments import plot_temperature_responses

    figs = {}
    lc = xr.Dataset({k: ds[k] for k in ("expected", "expected_without_cme", "background") if k in ds},
                    attrs={"bin_width_s": ds.attrs["bin_width_s"], "cme_onset_time_s": ds.attrs["cme_onset_time_s"],
                           "mass_g": float(ds["cme_mass"]), "star_distance_pc": ds.attrs["star_distance_pc"]})
    if "counts" in ds:
        lc["counts"] = ds["counts"]
    fig = plot_light_curves(lc, n_show=ds.sizes.get("realisation", 0))
    if "counts_without_cme" in ds:
        t_h = ds["time"].values / 3600.0
        for ax, b in zip(fig.axes, ds["band"].values):
            rows = ds["counts_without_cme"].sel(band=b).values
            for i, row in enumerate(rows):
                ax.step(t_h, row / ds.attrs["bin_width_s"], where="mid", lw=0.6, alpha=0.5, color="tab:cyan",
                        zorder=0, label="realisations (without CME)" if i == 0 else None)
            ax.legend(fontsize="x-small", loc="best")
    figs["light_curves"] = ("light_curves.png", fig, "Expected light curves with (red) and without (blue) the CME, "
                                                     "with Poisson realisations of both; dotted line: CME onset.")
    if ds.sizes.get("mass", 0):
        pv = xr.Dataset({"probability": ds["probability_vs_mass"], "probability_error": ds["probability_vs_mass_error"]},
                        attrs={"false_alarm": ds.attrs["false_alarm"]})
        fig = plot_detection_vs_mass(pv)
        ax = fig.axes[0]
        ax.axhline(ds.attrs["target_probability"], color="0.4", ls="--", lw=0.8)
        ax.axvline(float(ds["cme_mass"]), color="k", ls=":", lw=0.8)
        ax.set_title(f"{ds.attrs['n_realisations']} realisations, seed {ds.attrs['seed']}")
        figs["detection_vs_mass"] = ("detection_vs_mass.png", fig,
                                     "P(detect) against CME mass per band (dotted: the scenario's mass; dashed: "
                                     "target probability; grey: false-alarm probability).")
    resp = ds["temperature_response"].copy()
    resp.attrs.update({"units": "ct cm3 / s", "reference_distance": "1 pc", "instrument": "band"})
    fig = plot_temperature_responses(resp)
    ax = fig.axes[0]
    ax.axvline(float(sc.cme.source_temperature.to_value("K")), color="k", ls=":", lw=0.8)
    w = ds["dem_em_weights"].values
    if np.any(w > 0):
        ax2 = ax.twinx()
        ax2.plot(10 ** ds["logT"].values, np.where(w > 0, w, np.nan), color="0.5", lw=1.0, ls="--")
        ax2.set_yscale("log")
        ax2.set_ylim(w.max() * 1e-4, w.max() * 3)
        ax2.set_ylabel("quiescent EM per node [cm$^{-3}$] (dashed)")
    figs["temperature_responses"] = ("temperature_responses.png", fig,
                                     "Temperature responses of the bands used (at 1 pc, interstellar absorption "
                                     "included), the quiescent EM distribution (dashed) and the CME source "
                                     "temperature (dotted).")
    out = {}
    for name, (fname, fig, cap) in figs.items():
        buf = io.BytesIO()
        fig.savefig(buf, format="png", dpi=110)
        out[name] = (fname, buf.getvalue(), cap)
    return out


def _tables(ds):
    """(per-band QTable, P(detect)-vs-mass QTable)."""
    import astropy.units as u
    import numpy as np
    from astropy.table import QTable

    bands = [str(b) for b in ds["band"].values]
    nb = len(bands)
    t = QTable()
    t["band"] = bands
    t["band_lo"] = ds["band_lo"].values * u.keV
    t["band_hi"] = ds["band_hi"].values * u.keV
    t["quiescent_rate"] = ds["quiescent_rate"].values * u.ct / u.s
    t["background"] = ds["background"].values * u.ct / u.s
    t["depth"] = ds["depth"].values
    t["depth_energy_flux"] = ds["depth_energy_flux"].values
    t["net_depth"] = ds["net_depth"].values
    t["onset_time"] = np.full(nb, float(ds["onset_time"])) * u.s
    t["recovery_time"] = np.full(nb, float(ds["recovery_time"])) * u.s
    t["fwhm_duration"] = np.full(nb, float(ds["fwhm_duration"])) * u.s
    t["flare_peak_excess"] = ds["flare_peak_excess"].values * u.ct / u.s
    t["dimming_peak_decrement"] = ds["dimming_peak_decrement"].values * u.ct / u.s
    t["flare_to_dimming"] = ds["flare_to_dimming"].values
    t["probability"] = ds["probability"].values
    t["probability_error"] = ds["probability_error"].values
    t["minimum_detectable_mass"] = ds["minimum_detectable_mass"].values * u.g
    t["minimum_detectable_mass_error"] = ds["minimum_detectable_mass_error"].values * u.g
    t["note"] = [str(x) for x in ds["minimum_detectable_mass_note"].values]
    keep = ("title", "scenario_file", "scenario_sha256", "cme_onset_time_s", "n_realisations", "seed", "statistic",
            "false_alarm", "target_probability", "chianti_version", "table_content_hash", "synthcorona_version",
            "created")
    meta = {k: ds.attrs[k] for k in keep if k in ds.attrs}
    meta["cme_mass_g"] = float(ds["cme_mass"])
    t.meta.update(meta)
    m = QTable()
    nm = ds.sizes.get("mass", 0)
    m["mass"] = np.repeat(ds["mass"].values, nb) * u.g
    m["band"] = np.tile(bands, nm) if nm else np.array([], dtype=str)
    m["depth"] = ds["depth_vs_mass"].values.ravel()
    m["probability"] = ds["probability_vs_mass"].values.ravel()
    m["probability_error"] = ds["probability_vs_mass_error"].values.ravel()
    m.meta.update(meta)
    return t, m


def _netcdf_safe(ds):
    """A copy whose attrs netCDF can store (str / number) and whose string variables are fixed-width."""
    out = ds.copy()
    out.attrs = {k: (v if isinstance(v, (str, int, float)) else str(v)) for k, v in ds.attrs.items()}
    out["minimum_detectable_mass_note"] = ds["minimum_detectable_mass_note"].astype(str)
    return out


def run(args) -> int:
    """Run the forecast and write the output folder; returns 0 (user mistakes raise for exit status 2)."""
    import time
    import warnings

    t_start = time.perf_counter()
    if args.realisations is not None and not 100 <= args.realisations <= 1_000_000:
        raise CliError(f"--realisations={args.realisations}: valid range [100, 1000000] and at least 10 / false-alarm "
                       "probability (1000 for 0.01)")
    if args.seed is not None and args.seed < 0:
        raise CliError(f"--seed={args.seed}: give a non-negative integer")
    from ..io.forecast_file import read_forecast_file
    from ..io.report import forecast_report
    from ..products.forecast import run_forecast

    inputs = read_forecast_file(args.scenario)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ds = run_forecast(inputs, realisations=args.realisations, seed=args.seed)
    out = pathlib.Path(args.out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CliError(f"--out={args.out}: cannot create the output folder ({exc.strerror})") from None
    written = []
    _netcdf_safe(ds).to_netcdf(out / "forecast.nc", engine="h5netcdf")
    written.append("forecast.nc")
    bands, vs_mass = _tables(ds)
    for name, tab in (("bands", bands), ("detection_vs_mass", vs_mass)):
        tab.write(out / f"{name}.ecsv", overwrite=True)
        plain = tab.copy()
        for col in plain.colnames:
            if hasattr(plain[col], "unit") and plain[col].unit is not None and str(plain[col].unit):
                plain.rename_column(col, f"{col} [{plain[col].unit.to_string()}]")
        plain.meta = {}
        plain.write(out / f"{name}.csv", format="ascii.csv", overwrite=True)
        written += [f"{name}.ecsv", f"{name}.csv"]
    figures = {}
    if not args.no_figures and inputs.output.get("figures", True):
        figures = _figures(ds, inputs.scenario)
        for fname, png, _ in figures.values():
            (out / fname).write_bytes(png)
            written.append(fname)
    fmt = args.report or inputs.output.get("report", "md")
    for f in (("md", "html") if fmt == "both" else (() if fmt == "none" else (fmt,))):
        (out / f"report.{f}").write_text(forecast_report(ds, inputs, figures, fmt=f), encoding="utf-8")
        written.append(f"report.{f}")
    _summary(ds, out, written, time.perf_counter() - t_start)
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
