"""A whole-table spectrum against a direct fiasco synthesis of three ions, with their agreement."""
import numpy as np
from common import best_of, chianti

IONS = ("o_7", "o_8", "fe_12")
BANDS = ((18.0, 23.0), (165.0, 175.0), (185.0, 200.0))  # Angstrom
DENSITY = 1e10  # cm-3


def _setup(quick):
    import astropy.units as u

    import synthcorona as sc

    step = 0.5 if quick else 0.05
    return sc.GaussianDEM(6.3, 0.25, 1e50 * u.cm**-3), np.round(np.arange(5.0, 250.0 + step / 2, step), 6)


def _ions_only(table):
    """The table restricted to the lines of IONS, with every continuum zero (what the baseline computes)."""
    import synthcorona as sc
    from synthcorona.io.table_file import read_table

    ds = read_table(table.path, verify=False, lazy=("line_emissivity", "cont_ff", "cont_fb", "cont_2p"))
    keep = np.zeros(table.line_wavelength.size, bool)
    for ion in IONS:
        el, stage = ion.split("_")
        keep |= (table.line_Z == {"o": 8, "fe": 26}[el]) & (table.line_ion == int(stage))
    sub = ds.isel(line=np.flatnonzero(keep))
    sub["line_emissivity"] = (("line", "log_density", "logT"), table.line_emissivity_grid()[keep].astype(float))
    for v in ("cont_ff", "cont_fb", "cont_2p"):
        sub[v] = (ds[v].dims, np.zeros(ds[v].shape))
    return sc.EmissivityTable(sub)


def run(quick):
    import astropy.units as u

    import synthcorona as sc

    dem, edges = _setup(quick)
    table = sc.load_emissivity()
    wl, dens = edges * u.AA, DENSITY * u.cm**-3
    bands = [[lo, hi] * u.AA for lo, hi in BANDS]

    def spectrum_and_bands(tab):
        s = sc.synthesize(dem, wavelength=wl, edges=True, table=tab, density=dens)
        return s, [sc.luminosity(dem, band=b, table=tab, density=dens) for b in bands]
    t_first, _, _ = best_of(lambda: spectrum_and_bands(table), n=1)
    t, c, _ = best_of(lambda: spectrum_and_bands(table), n=5)
    # the same public path on a table restricted to the compared ions (lines only), for the agreement check
    spec, flux = spectrum_and_bands(_ions_only(table))
    return {"seconds": t, "cpu": c, "note": f"{edges.size - 1} bins; first call {t_first * 1e3:.0f} ms",
            "arrays": {"spectrum": np.asarray(spec.values), "bands": np.array([float(f.value) for f in flux])}}


def baseline(quick):
    import astropy.units as u
    import fiasco

    import synthcorona as sc

    _, h5 = chianti()
    fiasco.log.setLevel("ERROR")
    dem, edges = _setup(quick)
    logT = sc.load_emissivity().logT
    w = dem.em_weights(logT).to_value(u.cm**-3)
    ab = sc.resolve_abundances("coronal", elements=["O", "Fe"])

    def direct():
        spec, flux = np.zeros(edges.size - 1), np.zeros(len(BANDS))
        for name in IONS:
            ion = fiasco.Ion(name, 10 ** logT * u.K, hdf5_dbase_root=h5)
            g = ion.contribution_function([DENSITY] * u.cm**-3).to_value("erg cm3 s-1")[:, 0, :]
            g = g / ion.abundance.value * float(ab.as_array([name.split("_")[0].capitalize()])[0])
            wl = ion.transitions.wavelength[ion.transitions.is_bound_bound].to_value(u.AA)
            lum = w @ g  # erg s-1 per line
            spec += np.histogram(wl, bins=edges, weights=lum)[0]
            for k, (lo, hi) in enumerate(BANDS):
                flux[k] += lum[(wl >= lo) & (wl < hi)].sum()
        return spec / np.diff(edges), flux
    t, c, (spec, flux) = best_of(direct, n=1)
    return {"seconds": t, "cpu": c, "note": f"{len(IONS)} ions, lines only", "arrays": {"spectrum": spec, "bands": flux}}


def agree(ours, base):
    a, b = ours["arrays"], base["arrays"]
    sa, sb = a["spectrum"], b["spectrum"]
    sig = sb >= 0.01 * sb.max()
    rel = np.abs(sa[sig] / sb[sig] - 1)
    # a line exactly on a bin edge lands in the bin below (synthesize) or above (np.histogram): for the bins off
    # by > 2 %, compare the sums over them and their two neighbours
    off = np.flatnonzero(sig)[rel > 0.02]
    s3a, s3b = np.convolve(sa, np.ones(3), "same"), np.convolve(sb, np.ones(3), "same")
    rel3 = np.abs(s3a[off] / s3b[off] - 1) if off.size else np.zeros(1)
    band = np.abs(a["bands"] / b["bands"] - 1)
    return (f"same ions: {sig.sum()} bins >= 1% of peak agree to median {np.median(rel) * 100:.2f}%; "
            f"{off.size} bins off by > 2% (max {rel.max() * 100:.0f}%: a line on a bin edge), their 3-bin sums "
            f"agree to {rel3.max() * 100:.2f}%; bands {', '.join(f'{x * 100:.2f}%' for x in band)}")


BENCHMARKS = [dict(
    name="spectrum_vs_fiasco", unit="s", target=None, run=run, baseline=baseline, agree=agree,
    about="synthesize of a Gaussian DEM on 5-250 A at 0.05 A with the whole table (113k lines + continua) plus "
          "three band luminosities vs a direct fiasco synthesis of O VII, O VIII and Fe XII lines (contribution "
          "function x the same DEM weights, np.histogram into the same bins); agreement on a table restricted to "
          "the same ions (lines only); needs CHIANTI",
    source="no target: speed and agreement with fiasco, a figure to watch")]
