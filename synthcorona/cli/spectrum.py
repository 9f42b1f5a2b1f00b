"""``synthcorona spectrum``: spectrum, band fluxes, luminosities and count rates of a scenario's corona.

Uses the ``[star]``, ``[corona]``, ``[[instrument]]`` and ``[output]`` tables of a forecast scenario
file (the CME, flare and observation tables are read and checked but not used). Writes
spectrum.nc (flux density at the observer, no interstellar absorption), spectrum.png,
band_fluxes.ecsv/.csv (energy flux at the observer without absorption and luminosity per band of
``[output] flux_bands``) and count_rates.ecsv/.csv (count rate per instrument band, interstellar
absorption of ``[star] nh`` included).
"""
from __future__ import annotations

import json
import pathlib

from ..errors import CliError
from .common import add_table_option

NAME = "spectrum"
HELP = "spectrum, band fluxes, luminosities and instrument count rates of a scenario file's corona"


def add_arguments(p) -> None:
    """Options of ``synthcorona spectrum``."""
    p.add_argument("scenario", help="forecast scenario file (TOML; its [star], [corona], [[instrument]] are used)")
    p.add_argument("--out", default="spectrum_out", help="output folder (created if needed; default 'spectrum_out')")
    add_table_option(p)
    p.add_argument("--no-figures", action="store_true", help="write no PNG figure")


def emission_density(inputs):
    """Electron density [cm-3] for the emissivities: [corona] density, else the RTV scaling law at the CME
    source temperature and [corona] loop_half_length (Rosner, Tucker & Vaiana 1978, ApJ 220, 643), as in
    :class:`~synthcorona.dimming.scenario.DimmingScenario`; (value, where it came from)."""
    import astropy.units as u

    from ..dimming.mass_removal import rtv_density

    if inputs.corona.density is not None:
        return inputs.corona.density.to(u.cm ** -3), "[corona] density"
    n = rtv_density(inputs.cme.source_temperature, inputs.corona.loop_half_length).to(u.cm ** -3)
    return n, "Rosner, Tucker & Vaiana (1978) scaling law at the CME source temperature"


def compute(inputs, table=None):
    """Band fluxes, luminosities, count rates (QTables) and the spectrum (DataArray) of a scenario's corona."""
    import astropy.units as u
    import numpy as np
    from astropy.table import QTable

    from ..emissivity import load_emissivity
    from ..synthesis import band_flux, luminosity, synthesize

    table = table or load_emissivity()
    dem, abund, dist, nh = inputs.corona.dem, inputs.corona.abundances, inputs.star.distance, inputs.star.nh
    n_e, n_from = emission_density(inputs)
    lo, hi = 10 ** float(table.log_density[0]), 10 ** float(table.log_density[-1])
    dens = float(np.clip(n_e.to_value(u.cm ** -3), lo, hi)) * u.cm ** -3
    rows = []
    for b in inputs.output["flux_bands"]:
        f = band_flux(dem, band=b, distance=dist, table=table, abundances=abund, density=dens)
        L = luminosity(dem, band=b, table=table, abundances=abund, density=dens)
        rows.append((f"{b[0].value:g}-{b[1].value:g} {b.unit}", f.to(u.erg / u.s / u.cm ** 2), L.to(u.erg / u.s)))
    fluxes = QTable(rows=rows, names=("band", "flux", "luminosity"))
    crow = []
    for e in inputs.instruments:
        ins = e.instrument
        for b in e.bands:
            r = ins.count_rate(dem, distance=dist, nh=nh, band=b, table=table, abundances=abund, density=dens)
            label = ins.name if b == "total" else f"{ins.name}:{b}"
            crow.append((label, ins.name, b, float(np.asarray(r.to_value(u.ct / u.s))) * u.ct / u.s))
    rates = QTable(rows=crow, names=("label", "instrument", "band", "count_rate"))
    w = inputs.output["spectrum_range"].to(u.AA, equivalencies=u.spectral())
    wlo, whi = float(w.value.min()), float(w.value.max())
    step = float(inputs.output["spectrum_bin"].to_value(u.AA))
    if (whi - wlo) / step > 2e6:
        raise CliError(f"[output] spectrum_range {wlo:g}-{whi:g} Angstrom in {step:g} Angstrom bins is more than 2e6 "
                       "bins; widen spectrum_bin")
    spec = synthesize(dem, wavelength=np.arange(wlo, whi, step) * u.AA, table=table, abundances=abund,
                      density=dens, distance=dist)
    meta = {"dem": repr(dem), "distance": str(dist), "nh": str(nh) if nh is not None else "0 cm-2",
            "abundances": str(getattr(abund, "name", abund)), "density": str(dens), "density_from": n_from,
            "scenario_file": str(inputs.source), "table": str(table.path),
            "chianti_version": str(table.provenance.get("chianti_version")),
            "table_content_hash": str(table.provenance.get("content_hash"))}
    fluxes.meta.update(meta)
    fluxes.meta["note"] = "energy flux at the observer without interstellar absorption; luminosity into 4 pi"
    rates.meta.update(meta)
    rates.meta["note"] = "count rates with interstellar absorption of the [star] nh column"
    return fluxes, rates, spec, meta


def run(args) -> int:
    """Compute and write the spectrum products; returns 0."""
    import astropy.units as u
    import numpy as np

    from ..io.forecast_file import read_forecast_file

    inputs = read_forecast_file(args.scenario, build=False)
    fluxes, rates, spec, meta = compute(inputs)
    out = pathlib.Path(args.out)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CliError(f"--out={args.out}: cannot create the output folder ({exc.strerror})") from None
    written = []
    for name, tab in (("band_fluxes", fluxes), ("count_rates", rates)):
        tab.write(out / f"{name}.ecsv", overwrite=True)
        plain = tab.copy()
        for col in plain.colnames:
            if getattr(plain[col], "unit", None) is not None and str(plain[col].unit):
                plain.rename_column(col, f"{col} [{plain[col].unit.to_string()}]")
        plain.meta = {}
        plain.write(out / f"{name}.csv", format="ascii.csv", overwrite=True)
        written += [f"{name}.ecsv", f"{name}.csv"]
    sp = spec.copy()
    sp.attrs = {k: (v if isinstance(v, (str, int, float)) else json.dumps(v, default=str)) for k, v in spec.attrs.items()}
    sp.attrs.update(meta)
    sp.to_netcdf(out / "spectrum.nc", engine="h5netcdf")
    written.append("spectrum.nc")
    if not args.no_figures:
        from matplotlib.figure import Figure

        fig = Figure(figsize=(9, 4), layout="constrained")
        ax = fig.add_subplot()
        ax.semilogy(sp.wavelength, np.maximum(sp.values, 1e-300), lw=0.6)
        pos = sp.values[sp.values > 0]
        if pos.size:
            ax.set_ylim(pos.max() * 1e-6, pos.max() * 3)
        ax.set_xlabel("wavelength [Angstrom]")
        ax.set_ylabel(f"flux density [{sp.attrs.get('units', '')}]")
        ax.set_title(f"{inputs.title}", fontsize="small")
        fig.savefig(out / "spectrum.png", dpi=110)
        written.append("spectrum.png")
    print(f"{inputs.title}")
    print(f"DEM: {meta['dem']}; distance {inputs.star.distance}; abundances {meta['abundances']}; n_e {meta['density']}")
    for r in fluxes:
        print(f"  {r['band']:>22s}: flux {r['flux'].to_value(u.erg / u.s / u.cm ** 2):10.3e} erg s-1 cm-2   "
              f"L {r['luminosity'].to_value(u.erg / u.s):10.3e} erg s-1")
    for r in rates:
        print(f"  {r['label']:>22s}: {r['count_rate'].to_value(u.ct / u.s):10.4g} ct/s")
    print(f"wrote {', '.join(written)} to {out}/")
    return 0
