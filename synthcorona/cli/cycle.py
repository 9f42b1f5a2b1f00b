"""``synthcorona cycle CYCLE.toml``: compare a star's corona across its activity cycle (what it writes:
:data:`DESCRIPTION`)."""
from __future__ import annotations

import pathlib

from ..errors import CliError
from .common import add_out_option, add_table_option, check_out, load_table, open_output, output_notes

NAME = "cycle"
HELP = "compare fluxes, count rates, hardness and dimming detectability across an activity cycle"
#: The text of ``synthcorona cycle --help`` (plain text).
DESCRIPTION = """\
Compare a star's corona across its activity cycle.

Reads a cycle file (schema: docs/cycle_reference.md): the star, the phases (each a DEM, DEM
components, or a measured band flux plus a temperature), the bands and instrument bands to
report, an optional count-rate conversion and an optional reference CME scenario (a forecast
file). Writes into the output folder:

  cycle.nc              every result on a 'phase' dimension (netCDF, units and provenance in attrs)
  cycle_phases.ecsv     one row per phase, with units (and cycle_phases.csv, units in the header)
  cycle_amplitudes.ecsv max/min and log10(max/min) of every flux and count rate over the cycle
  cycle_*.png           each quantity against phase (unless --no-figures)
  cycle_report.md/.html a one-page summary and an appendix, like the forecast report (HTML: figures embedded)
  manifest.json         every file above with its size and SHA-256, the inputs, the seed, the command

The output folder is checked before computing, locked while the run lasts and replaced whole (as for
"forecast").
"""


def add_arguments(p) -> None:
    """Options of ``synthcorona cycle``."""
    p.add_argument("cycle_file", metavar="CYCLE.toml", help="cycle file (TOML; keys, units and defaults in "
                                                             "docs/cycle_reference.md)")
    add_out_option(p, NAME)
    add_table_option(p)
    p.add_argument("--realisations", type=int, default=None, metavar="N",
                   help="Monte Carlo realisations per detection probability (a count, no unit; default: "
                        "[dimming] realisations of the file, else the reference scenario's, else 1000; checked "
                        "before any computation)")
    p.add_argument("--no-figures", action="store_true", help="do not write the PNG figures (no unit)")


def run(args) -> int:
    """Read the cycle file, compute the comparison, write netCDF/ECSV/CSV/PNG and print a summary."""
    from ..dimming.sizes import MIN_EXCEEDANCES
    from ..io.cycle_file import read_cycle_file
    from ..io.cycle_report import cycle_report
    from ..io.manifest import input_entry, table_entry
    from ..io.writers import write_figure, write_netcdf, write_table, write_text
    from ..plotting.cycle import cycle_captions, cycle_figures
    from ..products.cycle import cycle_tables

    if args.realisations is not None and args.realisations < 1:
        raise CliError(f"--realisations={args.realisations}: give a count >= 1")
    path = pathlib.Path(args.cycle_file)
    if not path.is_file():
        raise CliError(f"{path}: file not found")
    check_out(args)
    table = load_table(args)
    inputs = read_cycle_file(path)
    if args.realisations is not None and args.realisations < inputs.minimum_realisations:
        raise CliError(f"--realisations={args.realisations}: the reference scenario's false-alarm probability "
                       f"{inputs.reference.observation.false_alarm:g} needs at least {inputs.minimum_realisations} "
                       f"({MIN_EXCEEDANCES} expected false alarms)")
    with open_output(args) as out:
        ds = inputs.run(n_realisations=args.realisations, table=table)
        ins = {"cycle": input_entry(path)}
        if inputs.reference_path:
            ins["reference_scenario"] = input_entry(inputs.reference_path)
        out.record(seed=int(inputs.seed) if inputs.reference is not None else None, inputs=ins,
                   table=table_entry(table))
        written = [write_netcdf(ds, out.path("cycle.nc"))]
        per, amp = cycle_tables(ds)
        written += write_table(per, out.path("cycle_phases.ecsv"), csv=True)
        written += write_table(amp, out.path("cycle_amplitudes.ecsv"))
        figures = {}
        if not args.no_figures:
            captions = cycle_captions(ds)
            for name, fig in cycle_figures(ds).items():
                png = write_figure(fig, out.path(name), dpi=120)
                written.append(png)
                figures[name] = (name, png.read_bytes(), captions.get(name, ""))
        for fmt in ("md", "html"):
            written.append(write_text(cycle_report(ds, inputs, figures, fmt=fmt), out.path(f"cycle_report.{fmt}")))
    _summary(ds, inputs, out.target, [p.name for p in written])
    for line in output_notes(out):
        print(line)
    return 0


def _summary(ds, inputs, out, written) -> None:
    """A few lines for the terminal."""
    import numpy as np

    unit = "yr" if ds["phase"].attrs.get("units") == "yr" else ""
    print(f"{inputs.title}: {ds.sizes['phase']} phases; star at {ds.attrs['star_distance_pc']:g} pc, "
          f"N_H {ds.attrs['nh_cm-2']:.3g} cm-2; table CHIANTI {ds.attrs.get('table_chianti_version', '?')}")
    for j, b in enumerate(ds["band"].values):
        f = ds["flux"].values[:, j]
        print(f"  flux {b}: {np.nanmin(f):.3e} to {np.nanmax(f):.3e} erg s-1 cm-2, amplitude "
              f"{ds['flux_amplitude'].values[j]:.3g} ({ds['flux_log_amplitude'].values[j]:.2f} dex)")
    if "count_rate" in ds:
        for j, c in enumerate(ds["channel"].values):
            r = ds["count_rate"].values[:, j]
            print(f"  rate {c}: {np.nanmin(r):.3e} to {np.nanmax(r):.3e} ct/s, amplitude "
                  f"{ds['count_rate_amplitude'].values[j]:.3g}")
    if "hardness_ratio" in ds:
        for j, pr in enumerate(ds["pair"].values):
            h = ds["hardness_ratio"].values[:, j]
            print(f"  hardness {pr}: {np.nanmin(h):+.3f} to {np.nanmax(h):+.3f}")
    if "rate_conversion" in ds:
        rc = ds["rate_conversion"].values
        print(f"  1 ct/s in {ds.attrs['conversion_source']} = {np.nanmin(rc):.4g} to {np.nanmax(rc):.4g} ct/s in "
              f"{ds.attrs['conversion_target']} over the cycle")
    if "detection_probability" in ds:
        for j, b in enumerate(ds["dimming_band"].values):
            pr = ds["detection_probability"].values[:, j]
            best = int(np.nanargmax(pr)) if np.any(np.isfinite(pr)) else 0
            print(f"  reference CME in {b}: P(detect) {np.nanmin(pr):.3f} to {np.nanmax(pr):.3f} "
                  f"(best at {ds['label'].values[best]}, phase {ds['phase'].values[best]:g}{(' ' + unit) if unit else ''})")
        for lab, note in zip(ds["label"].values, ds["dimming_note"].values):
            if note:
                print(f"  note ({lab}): {note}")
    print(f"wrote {', '.join(written)} to {out}")
