"""``synthcorona emission``: spectrum and band fluxes of a DEM (Gaussian in log T or isothermal)."""
from __future__ import annotations

import json
import pathlib

import numpy as np

from .common import parse_band, parse_quantity

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
    p.add_argument("--band", action="append", help="band, e.g. '0.1-2.4 keV' or '171-175 Angstrom' (repeatable)")
    p.add_argument("--wmin", type=float, default=1.0, help="spectrum start [Angstrom] (default 1)")
    p.add_argument("--wmax", type=float, default=400.0, help="spectrum end [Angstrom] (default 400)")
    p.add_argument("--wstep", type=float, default=0.02, help="spectrum bin [Angstrom] (default 0.02)")
    p.add_argument("--table", help="emissivity table file (default: embedded)")
    p.add_argument("--out", default="synthcorona_out", help="output folder (default 'synthcorona_out')")


def run(args) -> int:
    import astropy.units as u
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from astropy.table import QTable

    from .. import GaussianDEM, IsothermalDEM, band_flux, load_emissivity, luminosity, synthesize

    table = load_emissivity(args.table)
    em = parse_quantity(args.em, "cm-3", "--em")
    dist = parse_quantity(args.distance, "pc", "--distance")
    dens = parse_quantity(args.density, "cm-3", "--density")
    if args.temperature:
        dem = IsothermalDEM(temperature=parse_quantity(args.temperature, "K", "--temperature"), total_em=em)
    else:
        dem = GaussianDEM(peak_logT=args.peak_logT, width_logT=args.width_logT, total_em=em)
    bands = [parse_band(b) for b in (args.band or ["0.1-2.4 keV", "0.3-2.0 keV", "2.0-10.0 keV", "165-180 Angstrom",
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

