"""Command line: ``synthcorona <subcommand>``.

Subcommands
-----------
build-table   build an emissivity table from a CHIANTI copy (resumable, parallel, progress bar)
table-info    print the provenance of an emissivity table (default: the embedded one)
emission      spectrum and band fluxes of a DEM from the embedded (or a given) table

Every quantity on the command line carries a unit string parsed by astropy
("10 pc", "1e51 cm-3", "0.1-2.4 keV"). User mistakes end with a one-line reason and
exit status 2, never a traceback.
"""
from __future__ import annotations

import argparse
import json
import pathlib
import sys

import numpy as np

__all__ = ["main"]


class CliError(Exception):
    """A user mistake on the command line (printed as one line, exit status 2)."""


def _quantity(text: str, unit: str, what: str):
    import astropy.units as u

    try:
        q = u.Quantity(text)
    except (TypeError, ValueError):
        raise CliError(f"{what}: cannot read '{text}' as a quantity with a unit (e.g. '10 pc')") from None
    try:
        return q.to(unit)
    except u.UnitConversionError:
        raise CliError(f"{what}: '{text}' has units '{q.unit}', expected something convertible to '{unit}'") from None


def _band(text: str):
    """'0.1-2.4 keV' or '171-175 Angstrom' → Quantity pair."""
    import astropy.units as u

    try:
        rng, unit = text.strip().split(None, 1) if " " in text.strip() else (None, None)
        lo, hi = rng.split("-")
        q = u.Quantity([float(lo), float(hi)], u.Unit(unit))
    except (ValueError, AttributeError, TypeError):
        raise CliError(f"--band: cannot read '{text}'; write e.g. '0.1-2.4 keV' or '171-175 Angstrom'") from None
    if q.unit.physical_type not in ("energy", "length"):
        raise CliError(f"--band: '{text}' must be in energy or wavelength units")
    return q


def _cmd_build_table(args) -> int:
    from .atomic.builder import BuildSettings, build_table, default_energy_grid

    logT = np.round(np.arange(args.logT_min, args.logT_max + 1e-9, args.logT_step), 6)
    settings = BuildSettings(logT=logT, log_density=np.array(args.log_densities, dtype=float),
                             energy=default_energy_grid(args.energy_points), elements=args.elements,
                             line_threshold=args.line_threshold, two_ion_max_levels=args.two_ion_max_levels)
    out = build_table(args.output, chianti=args.chianti, settings=settings, jobs=args.jobs,
                      work_dir=args.work_dir, progress=not args.quiet)
    print(f"wrote {out}")
    return 0


def _cmd_table_info(args) -> int:
    from .emissivity import load_emissivity

    t = load_emissivity(args.table)
    print(repr(t))
    for k in ("chianti_version", "chianti_provenance", "chianti_substituted_ions", "fiasco_version", "ioneq",
              "elements", "line_threshold",
              "lines_kept", "two_ion_model", "build_date", "content_hash", "storage_error"):
        if k in t.provenance:
            print(f"{k}: {t.provenance[k]}")
    return 0


def _cmd_emission(args) -> int:
    import astropy.units as u
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from astropy.table import QTable

    from . import GaussianDEM, IsothermalDEM, band_flux, load_emissivity, luminosity, synthesize

    table = load_emissivity(args.table)
    em = _quantity(args.em, "cm-3", "--em")
    dist = _quantity(args.distance, "pc", "--distance")
    dens = _quantity(args.density, "cm-3", "--density")
    if args.temperature:
        dem = IsothermalDEM(temperature=_quantity(args.temperature, "K", "--temperature"), total_em=em)
    else:
        dem = GaussianDEM(peak_logT=args.peak_logT, width_logT=args.width_logT, total_em=em)
    bands = [_band(b) for b in (args.band or ["0.1-2.4 keV", "0.3-2.0 keV", "2.0-10.0 keV", "165-180 Angstrom",
                                               "185-200 Angstrom", "60-400 Angstrom"])]
    out = pathlib.Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    rows = []
    for b in bands:
        f = band_flux(dem, band=b, distance=dist, table=table, abundances=args.abundances, density=dens)
        L = luminosity(dem, band=b, table=table, abundances=args.abundances, density=dens)
        rows.append((f"{b[0].value:g}-{b[1].value:g} {b.unit}", f.to(u.erg / u.s / u.cm ** 2), L.to(u.erg / u.s)))
    qt = QTable(rows=rows, names=("band", "flux", "luminosity"))
    qt.meta.update({"dem": repr(dem), "distance": str(dist), "abundances": args.abundances, "density": str(dens),
                    "table": str(table.path), "chianti_version": table.provenance.get("chianti_version"),
                    "table_content_hash": table.provenance.get("content_hash")})
    qt.write(out / "band_fluxes.ecsv", overwrite=True)
    spec = synthesize(dem, wavelength=np.arange(args.wmin, args.wmax, args.wstep) * u.AA, table=table,
                      abundances=args.abundances, density=dens, distance=dist)
    spec.attrs = {k: (v if isinstance(v, (str, int, float)) else json.dumps(v, default=str)) for k, v in spec.attrs.items()}
    spec.to_netcdf(out / "spectrum.nc", engine="h5netcdf")
    fig, ax = plt.subplots(figsize=(9, 4))
    ax.semilogy(spec.wavelength, np.maximum(spec.values, 1e-300), lw=0.6)
    ax.set_xlabel("wavelength [Angstrom]")
    ax.set_ylabel(f"flux density [{spec.attrs['units']}]")
    pos = spec.values[spec.values > 0]
    if pos.size:
        ax.set_ylim(pos.max() * 1e-6, pos.max() * 3)
    ax.set_title(f"{dem!r} at {dist}")
    fig.tight_layout()
    fig.savefig(out / "spectrum.png", dpi=120)
    print(f"DEM: {dem!r}; distance {dist}; abundances {args.abundances}; n_e {dens}")
    print(f"table: {table.path.name} (CHIANTI {table.provenance.get('chianti_version')}, see provenance)")
    for name, f, L in rows:
        print(f"  {name:>22s}: flux {f.value:10.3e} erg s-1 cm-2   L {L.value:10.3e} erg s-1")
    print(f"wrote {out/'band_fluxes.ecsv'}, {out/'spectrum.nc'}, {out/'spectrum.png'}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="synthcorona", description="Synthetic coronal X-ray/EUV emission from CHIANTI.")
    sub = p.add_subparsers(dest="command", required=True)

    b = sub.add_parser("build-table", help="build an emissivity table from a CHIANTI copy")
    b.add_argument("--chianti", help="ASCII CHIANTI tree or .tar.xz (default: $SYNTHCORONA_CHIANTI, then fiasco's)")
    b.add_argument("--output", "-o", required=True, help="netCDF file to write")
    b.add_argument("--jobs", "-j", type=int, default=1, help="parallel worker processes (default 1)")
    b.add_argument("--work-dir", help="directory for per-ion results (resumable; default: user cache)")
    b.add_argument("--elements", nargs="+", help="element symbols (default: photospheric abundance >= 1e-7 of H)")
    b.add_argument("--logT-min", type=float, default=4.5, help="lowest log10 T [K] (default 4.5)")
    b.add_argument("--logT-max", type=float, default=8.5, help="highest log10 T [K] (default 8.5)")
    b.add_argument("--logT-step", type=float, default=0.05, help="log10 T step [dex] (default 0.05)")
    b.add_argument("--log-densities", type=float, nargs="+", default=[8, 9, 10, 11, 12],
                   help="log10 electron densities [cm-3] (default 8 9 10 11 12)")
    b.add_argument("--energy-points", type=int, default=1000, help="continuum grid points, 1 eV-50 keV (default 1000)")
    b.add_argument("--line-threshold", type=float, default=1e-3,
                   help="largest share of an ion's line emission the dropped weak lines may carry (default 1e-3)")
    b.add_argument("--two-ion-max-levels", type=int, default=None,
                   help="use the two-ion level model only up to this many levels (default: always)")
    b.add_argument("--quiet", action="store_true", help="no progress bar")
    b.set_defaults(func=_cmd_build_table)

    i = sub.add_parser("table-info", help="print the provenance of an emissivity table")
    i.add_argument("table", nargs="?", help="table file (default: the embedded table)")
    i.set_defaults(func=_cmd_table_info)

    e = sub.add_parser("emission", help="spectrum and band fluxes of a DEM (Gaussian in log T or isothermal)")
    e.add_argument("--peak-logT", type=float, default=6.6, help="Gaussian DEM peak, log10 T [K] (default 6.6)")
    e.add_argument("--width-logT", type=float, default=0.25, help="Gaussian DEM sigma [dex] (default 0.25)")
    e.add_argument("--temperature", help="isothermal plasma instead, e.g. '8 MK'")
    e.add_argument("--em", default="3e51 cm-3", help="total volume emission measure (default '3e51 cm-3')")
    e.add_argument("--distance", default="8.4 pc", help="distance of the star (default '8.4 pc')")
    e.add_argument("--density", default="1e10 cm-3", help="electron density (default '1e10 cm-3')")
    e.add_argument("--abundances", default="coronal", help="abundance set name (default 'coronal')")
    e.add_argument("--band", action="append", help="band, e.g. '0.1-2.4 keV' or '171-175 Angstrom' (repeatable)")
    e.add_argument("--wmin", type=float, default=1.0, help="spectrum start [Angstrom] (default 1)")
    e.add_argument("--wmax", type=float, default=400.0, help="spectrum end [Angstrom] (default 400)")
    e.add_argument("--wstep", type=float, default=0.02, help="spectrum bin [Angstrom] (default 0.02)")
    e.add_argument("--table", help="emissivity table file (default: embedded)")
    e.add_argument("--out", default="synthcorona_out", help="output folder (default 'synthcorona_out')")
    e.set_defaults(func=_cmd_emission)
    return p


def main(argv=None) -> int:
    from .validation import InputError
    import astropy.units as u

    args = build_parser().parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except (CliError, InputError, u.UnitsError) as exc:
        print(f"synthcorona {args.command}: error: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
