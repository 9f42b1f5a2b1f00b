"""``synthcorona cycle CYCLE.toml``: compare a star's corona across its activity cycle.

Reads a cycle file (schema: docs/cycle_reference.md): the star, the phases (each a DEM, DEM
components, or a measured band flux plus a temperature), the bands and instrument bands to
report, an optional count-rate conversion and an optional reference CME scenario (a forecast
file). Writes to the output folder:

  cycle.nc              every result on a 'phase' dimension (netCDF, units and provenance in attrs)
  cycle_phases.ecsv     one row per phase, with units (and cycle_phases.csv, units in the header)
  cycle_amplitudes.ecsv max/min and log10(max/min) of every flux and count rate over the cycle
  cycle_*.png           each quantity against phase (unless --no-figures)
"""
from __future__ import annotations

import pathlib

from ..errors import CliError
from .common import add_table_option

NAME = "cycle"
HELP = "compare fluxes, count rates, hardness and dimming detectability across an activity cycle"


def add_arguments(p) -> None:
    """Options of ``synthcorona cycle``."""
    p.add_argument("cycle_file", metavar="CYCLE.toml", help="cycle file (TOML; keys, units and defaults in "
                                                             "docs/cycle_reference.md)")
    p.add_argument("--out", default="synthcorona_out", metavar="DIR",
                   help="output folder, created if needed (default 'synthcorona_out')")
    add_table_option(p)
    p.add_argument("--realisations", type=int, default=None, metavar="N",
                   help="Monte Carlo realisations per detection probability (a count, no unit; default: "
                        "[dimming] realisations of the file, else the reference scenario's, else 1000)")
    p.add_argument("--no-figures", action="store_true", help="do not write the PNG figures (no unit)")


def _csv_table(per):
    """The per-phase table with units moved into the column names (plain CSV keeps no units)."""
    from astropy.table import Table

    t = Table()
    for name in per.colnames:
        col = per[name]
        unit = getattr(col, "unit", None)
        label = f"{name} [{unit.to_string()}]" if unit is not None and str(unit) not in ("", "dimensionless") else name
        t[label] = getattr(col, "value", col)
    return t


def run(args) -> int:
    """Read the cycle file, compute the comparison, write netCDF/ECSV/CSV/PNG and print a summary."""
    import json

    import numpy as np

    from ..io.cycle_file import read_cycle_file
    from ..products.cycle import cycle_tables

    if args.realisations is not None and args.realisations < 1:
        raise CliError(f"--realisations={args.realisations}: give a count >= 1")
    path = pathlib.Path(args.cycle_file)
    if not path.is_file():
        raise CliError(f"{path}: file not found")
    inputs = read_cycle_file(path)
    ds = inputs.run(n_realisations=args.realisations)
    out = pathlib.Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    nc = ds.copy()
    nc.attrs = {k: (v if isinstance(v, (str, int, float)) else json.dumps(v, default=str)) for k, v in ds.attrs.items()}
    nc.to_netcdf(out / "cycle.nc", engine="h5netcdf")
    per, amp = cycle_tables(ds)
    for t in (per, amp):
        t.meta = {k: (v if isinstance(v, (str, int, float)) else str(v)) for k, v in t.meta.items()}
    per.write(out / "cycle_phases.ecsv", overwrite=True)
    _csv_table(per).write(out / "cycle_phases.csv", format="ascii.csv", overwrite=True)
    amp.write(out / "cycle_amplitudes.ecsv", overwrite=True)
    written = ["cycle.nc", "cycle_phases.ecsv", "cycle_phases.csv", "cycle_amplitudes.ecsv"]
    if not args.no_figures:
        import matplotlib

        matplotlib.use("Agg")
        from ..plotting.cycle import save_cycle_figures

        written += [p.name for p in save_cycle_figures(ds, out)]

    unit = "yr" if ds["phase"].attrs.get("units") == "yr" else ""
    print(f"{inputs.title}: {ds.sizes['phase']} phases; star at {ds.attrs['star_distance_pc']:g} pc, "
          f"N_H {ds.attrs['nh_cm-2']:.3g} cm-2; table CHIANTI {ds.attrs.get('table_chianti_version', '?')}")
    for j, b in enumerate(ds["band"].values):
        f = ds["flux"].values[:, j]
        print(f"  flux {b}: {np.nanmin(f):.3e}-{np.nanmax(f):.3e} erg s-1 cm-2, amplitude "
              f"{ds['flux_amplitude'].values[j]:.3g} ({ds['flux_log_amplitude'].values[j]:.2f} dex)")
    if "count_rate" in ds:
        for j, c in enumerate(ds["channel"].values):
            r = ds["count_rate"].values[:, j]
            print(f"  rate {c}: {np.nanmin(r):.3e}-{np.nanmax(r):.3e} ct/s, amplitude "
                  f"{ds['count_rate_amplitude'].values[j]:.3g}")
    if "hardness_ratio" in ds:
        for j, pr in enumerate(ds["pair"].values):
            h = ds["hardness_ratio"].values[:, j]
            print(f"  hardness {pr}: {np.nanmin(h):+.3f} to {np.nanmax(h):+.3f}")
    if "rate_conversion" in ds:
        rc = ds["rate_conversion"].values
        print(f"  1 ct/s in {ds.attrs['conversion_source']} = {np.nanmin(rc):.4g}-{np.nanmax(rc):.4g} ct/s in "
              f"{ds.attrs['conversion_target']} over the cycle")
    if "detection_probability" in ds:
        for j, b in enumerate(ds["dimming_band"].values):
            pr = ds["detection_probability"].values[:, j]
            best = int(np.nanargmax(pr)) if np.any(np.isfinite(pr)) else 0
            print(f"  reference CME in {b}: P(detect) {np.nanmin(pr):.3f}-{np.nanmax(pr):.3f} "
                  f"(best at {ds['label'].values[best]}, phase {ds['phase'].values[best]:g}{(' ' + unit) if unit else ''})")
        for lab, note in zip(ds["label"].values, ds["dimming_note"].values):
            if note:
                print(f"  note ({lab}): {note}")
    print(f"wrote {', '.join(written)} to {out}")
    return 0
