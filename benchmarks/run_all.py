"""Benchmark suite: every speed and memory target of the project, each against a baseline.

    python benchmarks/run_all.py [--quick] [--only NAME[,NAME...]] [--json PATH] [--list]

Each benchmark runs in two fresh subprocesses, one for synthcorona's way ("ours") and one for
the baseline, so that each gets its own peak resident set size (RSS): the ``ru_maxrss`` of that
child from ``os.wait4`` (the per-child form of ``getrusage(RUSAGE_CHILDREN)``; it includes the
interpreter, numpy/astropy/xarray and the loaded table, about 250-400 MB before any work).
Times are wall-clock best-of-N on a possibly shared machine; the CPU time of the best run is
kept in the JSON output. The printed table has one row per benchmark: name, measured time (or
peak RSS for memory benchmarks), baseline time, ratio baseline/measured, target, whether the
target is met, peak RSS of ours / baseline, and a note (agreement with the baseline, sizes).
Nothing here asserts: see benchmarks/README.md for what each row means.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import pathlib
import platform
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent
CHIANTI_ENV = "SYNTHCORONA_CHIANTI"


class Skip(Exception):
    """Raised by a benchmark part that cannot run here (reason printed in the table)."""


# ----------------------------------------------------------------------------- helpers
def best_of(fn, n=3):
    """(best wall time s, CPU time s of that run, result of the last call)."""
    best, out = (math.inf, 0.0), None
    for _ in range(n):
        t0, c0 = time.perf_counter(), time.process_time()
        out = fn()
        best = min(best, (time.perf_counter() - t0, time.process_time() - c0))
    return best[0], best[1], out


def _quiet():
    import warnings

    warnings.filterwarnings("ignore")
    os.environ.setdefault("MPLBACKEND", "Agg")


def _chianti():
    """(source, hdf5 path) of the CHIANTI copy named by SYNTHCORONA_CHIANTI, or Skip."""
    path = os.environ.get(CHIANTI_ENV)
    if not path or not pathlib.Path(path).exists():
        raise Skip(f"needs CHIANTI: set {CHIANTI_ENV} to a CHIANTI tree")
    from synthcorona.atomic import locate
    from synthcorona.atomic.builder import default_elements

    src = locate.find_chianti(path)
    return src, locate.ensure_hdf5(src, default_elements(src.root))


def _gauss(n, seed=0):
    import astropy.units as u

    import synthcorona as sc

    rng = np.random.default_rng(seed)
    return sc.GaussianDEM(rng.uniform(6.0, 7.2, n), rng.uniform(0.1, 0.25, n), 10 ** rng.uniform(50, 52, n) * u.cm**-3)


def _ten_band_softx():
    import astropy.units as u

    from synthcorona.instruments import load_generic

    edges = np.geomspace(0.2, 8.0, 11)
    bands = {f"b{k}": [edges[k], edges[k + 1]] * u.keV for k in range(10)}
    return load_generic("sc-softx").with_bands(**bands), list(bands)


def _dimming_scenario(n_bins=1000):
    """The invented active K dwarf of bench_dimming.py (2 pc, 1e18 g CME, 1e33 erg flare, 3 bands)."""
    import warnings

    import astropy.units as u

    from synthcorona.dem import GaussianDEM, MultiComponentDEM
    from synthcorona.dimming import CME, Corona, DimmingScenario, Flare, Observation, Star

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(
            Star(2 * u.pc, nh=1e17 * u.cm**-2),
            Corona(MultiComponentDEM([GaussianDEM(6.3, 0.15, 3e52 * u.cm**-3),
                                      GaussianDEM(6.9, 0.15, 1e52 * u.cm**-3)]), density=1e9 * u.cm**-3),
            CME(1e18 * u.g, source_temperature=2e6 * u.K),
            Flare(1e33 * u.erg, loop_half_length=5e9 * u.cm, loop_cross_section=1e19 * u.cm**2),
            ["sc-fe9", "sc-fe12", ("sc-softx", "soft")],
            Observation(n_bins * u.min, 60 * u.s, 3 * u.h))


def _toy_light_curves(n_bins=1000):
    """The light curve of bench_statistics.py: 10 ct/s, flare at 100 s, 5 % dimming (expected ct per 1 s bin)."""
    t = np.arange(n_bins) + 0.5
    q = np.full(n_bins, 10.0)
    flare = 40.0 * np.exp(-(t - 100) / 60.0) * (t >= 100)
    profile = np.where(t >= 100, np.exp(-(t - 100) / 1500.0), 0.0)
    without = q + flare
    return without - 0.05 * q * profile, without


# ----------------------------------------------------------------------------- benchmarks
# Each benchmark: dict(ours=fn, base=fn or None, target=(kind, value), unit, agree=fn or None, about=str).
# A part fn(quick, out_dir) returns {"seconds": s, "cpu": s, "note": str, ...}; it may save arrays to
# out_dir/<part>.npz for the agreement check, which runs in the parent on both files.
BENCHMARKS: dict[str, dict] = {}


def bench(name, target=None, about=""):
    def deco(cls):
        BENCHMARKS[name] = {"ours": cls.ours, "base": getattr(cls, "base", None),
                            "agree": getattr(cls, "agree", None), "target": target, "about": about,
                            "measure": getattr(cls, "measure", "time")}
        return cls
    return deco


# --- atomic core --------------------------------------------------------------------------------
@bench("table_build", target=("speedup_min", 10.0),
       about="builder compute_ion on Fe XII (81 T x 5 n_e, lines + continua) vs plain fiasco contribution_function")
class TableBuild:
    @staticmethod
    def _grid(quick):
        from synthcorona.atomic.builder import DEFAULT_LOG_DENSITY, DEFAULT_LOGT

        return (DEFAULT_LOGT[20:61:4], np.array([9.0, 11.0])) if quick else (DEFAULT_LOGT, DEFAULT_LOG_DENSITY)

    @staticmethod
    def ours(quick, out):
        from synthcorona.atomic import locate
        from synthcorona.atomic.builder import compute_ion, default_energy_grid, proton_electron_ratio

        src, h5 = _chianti()
        logT, logn = TableBuild._grid(quick)
        work = locate.cache_dir() / "bench" / ("quick" if quick else "")  # p/e ratio cached there (once per grid)
        work.mkdir(parents=True, exist_ok=True)
        t0 = time.perf_counter()
        pe = proton_electron_ratio(h5, logT, work)  # once per grid, shared by every ion of a build
        t_pe = time.perf_counter() - t0
        t, c, res = best_of(lambda: compute_ion("fe_12", str(h5), logT, logn, default_energy_grid(), pe), n=1)
        return {"seconds": t, "cpu": c, "note": f"{logT.size} T x {logn.size} n_e; {res['emissivity'].shape[0]} "
                f"lines kept before selection; p/e ratio once per grid {t_pe:.1f} s (not counted)"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u
        import fiasco

        _, h5 = _chianti()
        fiasco.log.setLevel("ERROR")
        logT, logn = TableBuild._grid(quick)

        def run():
            ion = fiasco.Ion("fe_12", 10 ** logT * u.K, hdf5_dbase_root=h5)
            return ion.contribution_function(10 ** logn * u.cm**-3)
        t, c, g = best_of(run, n=1)
        return {"seconds": t, "cpu": c, "note": f"G shape {tuple(g.shape)}, lines only"}


@bench("spectrum_vs_fiasco", target=None,
       about="synthesize (all 113k lines + continua, 5-250 A at 0.05 A) + 3 band fluxes vs a direct fiasco "
             "synthesis of O VII, O VIII, Fe XII lines (contribution function x DEM weights, binned)")
class SpectrumFiasco:
    IONS = ("o_7", "o_8", "fe_12")
    BANDS = ((18.0, 23.0), (165.0, 175.0), (185.0, 200.0))  # Angstrom

    @staticmethod
    def _setup(quick):
        import astropy.units as u

        import synthcorona as sc

        dem = sc.GaussianDEM(6.3, 0.25, 1e50 * u.cm**-3)
        step = 0.5 if quick else 0.05
        edges = np.round(np.arange(5.0, 250.0 + step / 2, step), 6)
        return dem, edges, 1e10

    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        import synthcorona as sc
        from synthcorona.emissivity import EmissivityTable
        from synthcorona.io.table_file import read_table

        dem, edges, dens = SpectrumFiasco._setup(quick)
        table = sc.load_emissivity()
        wl = edges * u.AA
        bands = [[lo, hi] * u.AA for lo, hi in SpectrumFiasco.BANDS]

        def run():
            s = sc.synthesize(dem, wavelength=wl, edges=True, table=table, density=dens * u.cm**-3)
            f = [sc.luminosity(dem, band=b, table=table, density=dens * u.cm**-3) for b in bands]
            return s, f
        t_first, _, _ = best_of(run, n=1)
        t, c, _ = best_of(run, n=5)
        # the same public path restricted to the compared ions (lines only) for the agreement check
        ds = read_table(table.path, verify=False, lazy=("line_emissivity", "cont_ff", "cont_fb", "cont_2p"))
        keep = np.zeros(table.line_wavelength.size, bool)
        for ion in SpectrumFiasco.IONS:
            el, stage = ion.split("_")
            z = {"o": 8, "fe": 26}[el]
            keep |= (table.line_Z == z) & (table.line_ion == int(stage))
        sub = ds.isel(line=np.flatnonzero(keep))
        sub["line_emissivity"] = (("line", "log_density", "logT"),
                                  table.line_emissivity_grid()[keep].astype(float))
        for v in ("cont_ff", "cont_fb", "cont_2p"):
            sub[v] = (ds[v].dims, np.zeros(ds[v].shape))
        subtable = EmissivityTable(sub)
        spec = sc.synthesize(dem, wavelength=wl, edges=True, table=subtable, density=dens * u.cm**-3)
        flux = [float(sc.luminosity(dem, band=b, table=subtable, density=dens * u.cm**-3).value) for b in bands]
        np.savez(out / "ours.npz", spectrum=np.asarray(spec.values), bands=np.array(flux))
        return {"seconds": t, "cpu": c, "note": f"{edges.size - 1} bins; first call {t_first * 1e3:.0f} ms"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u
        import fiasco

        import synthcorona as sc
        from synthcorona.abundances import resolve_abundances

        _, h5 = _chianti()
        fiasco.log.setLevel("ERROR")
        dem, edges, dens = SpectrumFiasco._setup(quick)
        logT = sc.load_emissivity().logT
        w = dem.em_weights(logT).to_value(u.cm**-3)
        ab = resolve_abundances("coronal", elements=["O", "Fe"])

        def run():
            spec = np.zeros(edges.size - 1)
            flux = np.zeros(len(SpectrumFiasco.BANDS))
            for name in SpectrumFiasco.IONS:
                ion = fiasco.Ion(name, 10 ** logT * u.K, hdf5_dbase_root=h5)
                g = ion.contribution_function([dens] * u.cm**-3).to_value("erg cm3 s-1")[:, 0, :]
                g = g / ion.abundance.value * float(ab.as_array([name.split("_")[0].capitalize()])[0])
                wl = ion.transitions.wavelength[ion.transitions.is_bound_bound].to_value(u.AA)
                lum = w @ g  # erg s-1 per line
                spec += np.histogram(wl, bins=edges, weights=lum)[0]
                for k, (lo, hi) in enumerate(SpectrumFiasco.BANDS):
                    flux[k] += lum[(wl >= lo) & (wl < hi)].sum()
            return spec / np.diff(edges), flux
        t, c, (spec, flux) = best_of(run, n=1)
        np.savez(out / "base.npz", spectrum=spec, bands=flux)
        return {"seconds": t, "cpu": c, "note": f"{len(SpectrumFiasco.IONS)} ions, lines only"}

    @staticmethod
    def agree(out):
        a, b = np.load(out / "ours.npz"), np.load(out / "base.npz")
        sa, sb = a["spectrum"], b["spectrum"]
        sig = sb >= 0.01 * sb.max()
        rel = np.abs(sa[sig] / sb[sig] - 1)
        # a line exactly on a bin edge lands in the bin below (synthesize) or above (np.histogram): for
        # the bins off by > 2 %, compare the sums over them and their two neighbours
        off = np.flatnonzero(sig)[rel > 0.02]
        s3a, s3b = np.convolve(sa, np.ones(3), "same"), np.convolve(sb, np.ones(3), "same")
        rel3 = np.abs(s3a[off] / s3b[off] - 1) if off.size else np.zeros(1)
        band = np.abs(a["bands"] / b["bands"] - 1)
        return (f"same ions: {sig.sum()} bins >= 1% of peak agree to median {np.median(rel) * 100:.2f}%; "
                f"{off.size} bins off by > 2% (max {rel.max() * 100:.0f}%: a line on a bin edge), their 3-bin sums "
                f"agree to {rel3.max() * 100:.2f}%; bands {', '.join(f'{x * 100:.2f}%' for x in band)}")


@bench("synthesize", target=("time_max", 0.2),
       about="synthesize a Gaussian DEM on 1-400 A at 0.01 A (39,900 bins), warm caches; baseline: "
             "straightforward numpy (all line luminosities, np.histogram, continuum at bin centres x width)")
class Synthesize:
    @staticmethod
    def _setup(quick):
        import astropy.units as u

        import synthcorona as sc

        step = 0.1 if quick else 0.01
        return (sc.GaussianDEM(6.3, 0.15, 1e51 * u.cm**-3), np.arange(1, 400, step) * u.AA, sc.load_emissivity())

    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        import synthcorona as sc

        dem, wl, table = Synthesize._setup(quick)
        run = lambda: sc.synthesize(dem, wavelength=wl, table=table, density=1e10 * u.cm**-3)  # noqa: E731
        t_first, _, _ = best_of(run, n=1)
        t, c, s = best_of(run, n=5)
        np.save(out / "ours.npy", np.asarray(s.values))
        return {"seconds": t, "cpu": c, "note": f"{wl.size} bins; first call (decode, prepare) {t_first:.2f} s"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u

        from synthcorona.abundances import resolve_abundances
        from synthcorona.constants import HC_KEV_ANGSTROM

        dem, wl, table = Synthesize._setup(quick)
        c = wl.to_value(u.AA)
        edges = np.concatenate([[c[0] - (c[1] - c[0]) / 2], (c[1:] + c[:-1]) / 2, [c[-1] + (c[-1] - c[-2]) / 2]])
        ab = resolve_abundances("coronal", elements=table.elements).as_array(table.elements)
        w = dem.em_weights(table.logT).to_value(u.cm**-3)
        log_n = np.full(table.logT.size, 10.0)

        def run():
            eps = table.line_emissivity(log_n)  # (line, T)
            lum = (eps @ w) * ab[table.line_element_index]
            spec = np.histogram(table.line_wavelength, bins=edges, weights=lum)[0] / np.diff(edges)
            cont = np.einsum("t,etk,e->k", w, table.continuum(log_n), ab)  # erg s-1 keV-1 on the table grid
            e_c = HC_KEV_ANGSTROM / c
            spec += np.interp(e_c, table.energy, cont) * e_c / c  # per keV -> per Angstrom
            return spec
        t, cc, s = best_of(run, n=3)
        np.save(out / "base.npy", s)
        return {"seconds": t, "cpu": cc, "note": ""}

    @staticmethod
    def agree(out):
        a, b = np.load(out / "ours.npy"), np.load(out / "base.npy")
        ta, tb = a.sum(), b.sum()
        return f"total (sum over bins) differs by {abs(ta / tb - 1) * 100:.2f}% (continuum at bin centres in the baseline)"


@bench("band_flux_10k", target=("time_max", 0.1),
       about="band_flux (0.1-2.4 keV) of 10,000 Gaussian DEMs in one call vs a Python loop of single-DEM calls "
             "(200 DEMs, scaled)")
class BandFlux:
    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        import synthcorona as sc

        table = sc.load_emissivity()
        n = 1000 if quick else 10_000
        dems = _gauss(n, seed=1)
        band = (0.1, 2.4) * u.keV
        run = lambda: sc.band_flux(dems, band=band, distance=10 * u.pc, table=table)  # noqa: E731
        run()
        t, c, f = best_of(run, n=5)
        tw, _, _ = best_of(lambda: dems.em_weights(table.logT), n=5)
        np.save(out / "ours.npy", f.value[:200])
        return {"seconds": t, "cpu": c, "note": f"{n} DEMs; DEM weights {tw * 1e3:.0f} ms of it"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u

        import synthcorona as sc

        table = sc.load_emissivity()
        n = 1000 if quick else 10_000
        m = 50 if quick else 200
        dems = _gauss(n, seed=1)
        band = (0.1, 2.4) * u.keV
        one = [sc.GaussianDEM(dems.peak_logT[i], dems.width_logT[i], dems.total_em[i]) for i in range(m)]
        sc.band_flux(one[0], band=band, distance=10 * u.pc, table=table)
        t, c, f = best_of(lambda: [sc.band_flux(d, band=band, distance=10 * u.pc, table=table) for d in one], n=1)
        np.save(out / "base.npy", np.array([x.value for x in f]))
        return {"seconds": t * n / m, "cpu": c * n / m, "note": f"loop over {m} DEMs x {n / m:g}"}

    @staticmethod
    def agree(out):
        a, b = np.load(out / "ours.npy"), np.load(out / "base.npy")
        k = min(len(a), len(b))
        return f"max relative difference {np.max(np.abs(a[:k] / b[:k] - 1)):.1e} ({k} DEMs compared)"


@bench("load_emissivity", target=("time_max", 2.0),
       about="load_emissivity() with content-hash check (lazy decode) vs reading the file and decoding every array")
class Load:
    @staticmethod
    def ours(quick, out):
        import synthcorona as sc
        from synthcorona import emissivity

        def run():
            emissivity._load_cached.cache_clear()
            return sc.load_emissivity()
        t, c, table = best_of(run, n=3)
        return {"seconds": t, "cpu": c, "note": f"{table.line_wavelength.size} lines"}

    @staticmethod
    def base(quick, out):
        from synthcorona.emissivity import _default_path
        from synthcorona.io.table_file import read_table

        t, c, _ = best_of(lambda: read_table(_default_path(), verify=True), n=1)
        return {"seconds": t, "cpu": c, "note": "eager read_table (every array decoded to float64)"}


# --- instruments --------------------------------------------------------------------------------
@bench("responses_10x81", target=("time_max", 1.0),
       about="temperature responses of 10 bands (sc-softx with RMF) x 81 T at a new density, first call; "
             "baseline: per temperature, synthesize the isothermal spectrum and fold it (81 x 10)")
class Responses:
    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        import synthcorona as sc

        table = sc.load_emissivity()
        sxt, names = _ten_band_softx()
        sxt.temperature_response(table=table, bands=names)  # builds the instrument's matrices once
        dens = iter(10 ** np.linspace(9.05, 10.95, 10) * u.cm**-3)  # a density not seen before each time
        t, c, K = best_of(lambda: sxt.temperature_response(table=table, density=next(dens), bands=names), n=3)
        K = sxt.temperature_response(table=table, density=10**9.5 * u.cm**-3, bands=names)
        np.save(out / "ours.npy", np.asarray(K.values))
        return {"seconds": t, "cpu": c, "note": f"shape {K.shape}"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u

        import synthcorona as sc

        table = sc.load_emissivity()
        sxt, names = _ten_band_softx()
        e = sxt.energy_lo.to_value(u.keV), sxt.energy_hi.to_value(u.keV)
        edges = np.concatenate([e[0], e[1][-1:]]) * u.keV
        logT = table.logT[::8] if quick else table.logT
        em = 1e50 * u.cm**-3
        d = 1 * u.pc

        def run():
            K = np.empty((len(names), logT.size))
            for j, lt in enumerate(logT):
                s = sc.synthesize(sc.IsothermalDEM(10**lt * u.K, em), energy=edges, edges=True, table=table,
                                  density=10**9.5 * u.cm**-3, distance=d, photons=True)
                ph = np.maximum(np.asarray(s.values) * np.diff(edges.value), 0.0)  # ph cm-2 s-1 per bin (>= 0:
                # bin integrals of the continuum can round to -1e-17)
                for b, name in enumerate(names):
                    K[b, j] = float(sxt.count_rate_from_spectrum(ph * u.Unit("ph cm-2 s-1"), edges, band=name)
                                    .value) / em.value
            return K
        t, c, K = best_of(run, n=1)
        np.save(out / "base.npy", K)
        return {"seconds": t * table.logT.size / logT.size, "cpu": c, "note": f"{logT.size} T run, scaled to 81"}

    @staticmethod
    def agree(out):
        a, b = np.load(out / "ours.npy"), np.load(out / "base.npy")
        if a.shape != b.shape:
            a = a[:, ::8]
        sig = b > 1e-3 * b.max(axis=1, keepdims=True)
        rel = np.abs(a[sig] / b[sig] - 1)
        return f"median {np.median(rel) * 100:.2f}%, max {rel.max() * 100:.1f}% where > 1e-3 of each band's peak"


@bench("count_rates_10k", target=("time_max", 0.1),
       about="Instrument.count_rate of 10,000 Gaussian DEMs x 10 bands (responses cached) vs a Python loop of "
             "single-DEM calls (200 DEMs, scaled)")
class CountRates:
    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        import synthcorona as sc

        table = sc.load_emissivity()
        sxt, names = _ten_band_softx()
        n = 1000 if quick else 10_000
        dem = _gauss(n)
        run = lambda: sxt.count_rate(dem, distance=10 * u.pc, band=names, table=table)  # noqa: E731
        run()
        t, c, r = best_of(run, n=7)
        tw, _, _ = best_of(lambda: dem.em_weights(table.logT), n=7)
        np.save(out / "ours.npy", r.value[:200])
        return {"seconds": t, "cpu": c, "note": f"DEM weights {tw * 1e3:.0f} ms of it"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u

        import synthcorona as sc

        table = sc.load_emissivity()
        sxt, names = _ten_band_softx()
        n = 1000 if quick else 10_000
        m = 50 if quick else 200
        dem = _gauss(n)
        one = [sc.GaussianDEM(dem.peak_logT[i], dem.width_logT[i], dem.total_em[i]) for i in range(m)]
        sxt.count_rate(one[0], distance=10 * u.pc, band=names, table=table)
        t, c, r = best_of(lambda: [sxt.count_rate(d, distance=10 * u.pc, band=names, table=table) for d in one], n=1)
        np.save(out / "base.npy", np.array([x.value for x in r]))
        return {"seconds": t * n / m, "cpu": c * n / m, "note": f"loop over {m} DEMs x {n / m:g}"}

    agree = BandFlux.agree


# --- dimming --------------------------------------------------------------------------------------
@bench("fit_model_call", target=("time_max", 100e-6),
       about="DimmingLightCurveModel call, 1000 bins x 3 bands; baseline: per call, band count rates of the "
             "corona recomputed by Instrument.count_rate and the light curve by DimmingScenario.light_curve")
class FitModel:
    @staticmethod
    def ours(quick, out):
        from synthcorona.dimming import DimmingLightCurveModel

        sc_ = _dimming_scenario()
        model = DimmingLightCurveModel(sc_)
        times = sc_.light_curve().time.values
        n = 500 if quick else 5000
        call = lambda: model(times, mass=5e17, t0=1.1e4, recovery_time=8e3, flare_scale=1.0)  # noqa: E731
        for _ in range(200):
            call()

        def run():
            for _ in range(n):
                call()
        t, c, _ = best_of(run, n=5)
        return {"seconds": t / n, "cpu": c / n, "note": f"best of 5 x {n} calls"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u

        sc_ = _dimming_scenario()
        cor = sc_.corona

        def call():
            rates = [ins.count_rate(cor.dem, distance=sc_.star.distance, nh=sc_.star.nh, band=band,
                                    abundances=cor.abundances, density=sc_.emissivity_density * u.cm**-3)
                     for _, ins, band in sc_.bands]
            return rates, sc_.light_curve(mass=5e17 * u.g)
        call()
        n = 5 if quick else 20
        t, c, _ = best_of(lambda: [call() for _ in range(n)], n=2)
        return {"seconds": t / n, "cpu": c / n, "note": f"{n} calls"}


@bench("p_detect_window", target=("time_max", 2.0),
       about="detection_probability, window statistic, 10,000 event-free + 10,000 with-event realisations x "
             "1000 bins vs a per-realisation loop (numpy Poisson + scipy binomtest; 300 realisations, scaled)")
class PDetectWindow:
    WIN = ((0, 95), (400, 1000))

    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        from synthcorona.dimming.detection import detection_probability

        w, wo = _toy_light_curves()
        win = tuple((a * u.s, b * u.s) for a, b in PDetectWindow.WIN)
        n = 1000 if quick else 10_000
        cts = u.ct / u.s
        detection_probability(w * cts, wo * cts, 1 * u.s, windows=win, n_realisations=1000, seed=0)
        t, c, ds = best_of(lambda: detection_probability(w * cts, wo * cts, 1 * u.s, windows=win,
                                                         n_realisations=n, seed=1), n=3)
        return {"seconds": t, "cpu": c, "note": f"P = {float(ds.probability):.4f} +- {float(ds.probability_error):.4f}"}

    @staticmethod
    def base(quick, out):
        from scipy import stats

        w, wo = _toy_light_curves()
        t_c = np.arange(w.size) + 0.5
        pre = (t_c >= 0) & (t_c < 95)
        post = (t_c >= 400) & (t_c < 1000)
        q = post.sum() / (pre.sum() + post.sum())
        n = 1000 if quick else 10_000
        m = 50 if quick else 300
        rng = np.random.default_rng(0)

        def run():
            sig = []
            for mu in (wo, w):
                for _ in range(m):
                    cnt = rng.poisson(mu)
                    n1, n2 = int(cnt[pre].sum()), int(cnt[post].sum())
                    sig.append(stats.norm.isf(stats.binomtest(n2, n1 + n2, q, alternative="less").pvalue))
            return sig
        t, c, _ = best_of(run, n=1)
        return {"seconds": t * n / m, "cpu": c * n / m, "note": f"{m} + {m} realisations, scaled"}


@bench("p_detect_likelihood", target=("time_max", 2.0),
       about="detection_probability, likelihood statistic (Cash), 10,000 + 10,000 realisations x 1000 bins vs a "
             "per-realisation loop (numpy Poisson + scipy L-BFGS-B fit; 300 realisations, scaled)")
class PDetectLikelihood:
    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        from synthcorona.dimming.detection import detection_probability

        w, wo = _toy_light_curves()
        n = 1000 if quick else 10_000
        cts = u.ct / u.s
        detection_probability(w * cts, wo * cts, 1 * u.s, statistic="likelihood", n_realisations=1000, seed=0)
        t, c, ds = best_of(lambda: detection_probability(w * cts, wo * cts, 1 * u.s, statistic="likelihood",
                                                         n_realisations=n, seed=1), n=3)
        return {"seconds": t, "cpu": c, "note": f"P = {float(ds.probability):.4f} +- {float(ds.probability_error):.4f}"}

    @staticmethod
    def base(quick, out):
        from scipy import optimize, special

        w, wo = _toy_light_curves()
        B, D = wo, wo - w
        n = 1000 if quick else 10_000
        m = 30 if quick else 300
        rng = np.random.default_rng(0)

        def run():
            ts = []
            for mu in (wo, w):
                for _ in range(m):
                    cnt = rng.poisson(mu).astype(float)
                    a0 = cnt.sum() / B.sum()
                    c_null = 2 * np.sum(a0 * B - special.xlogy(cnt, a0 * B))

                    def cash(p, cnt=cnt):
                        mm = p[0] * B - p[1] * D
                        if np.any(mm <= 0):
                            return 1e300, np.zeros(2)
                        g = 1 - cnt / mm
                        return 2 * np.sum(mm - special.xlogy(cnt, mm)), 2 * np.array([np.sum(g * B), -np.sum(g * D)])
                    res = optimize.minimize(cash, [a0, 0.0], jac=True, method="L-BFGS-B",
                                            bounds=[(1e-9, None), (0.0, None)])
                    ts.append(c_null - res.fun)
            return ts
        t, c, _ = best_of(run, n=1)
        return {"seconds": t * n / m, "cpu": c * n / m, "note": f"{m} + {m} realisations, scaled"}


@bench("min_detectable_mass", target=("time_max", 10.0),
       about="DimmingScenario.minimum_detectable_mass (P = 0.5, window, 10,000 realisations, sc-fe12) vs a "
             "scan of P(detect) over 16 masses with linear interpolation (same band and realisations)")
class MinMass:
    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        sc_ = _dimming_scenario()
        n = 1000 if quick else 10_000
        t, c, res = best_of(lambda: sc_.minimum_detectable_mass(0.5, bracket=(1e16 * u.g, 1e19 * u.g),
                                                                band="sc-fe12", n_realisations=n, seed=0), n=1)
        return {"seconds": t, "cpu": c, "note": f"M = {float(res.mass):.3g} +- {float(res.mass_error):.2g} g, "
                f"{res.attrs['n_evaluations']} evaluations"}

    @staticmethod
    def base(quick, out):
        import astropy.units as u

        sc_ = _dimming_scenario()
        n = 1000 if quick else 10_000
        masses = np.geomspace(1e16, min(1e19, float(sc_.max_mass.value)), 16)

        def run():
            p = [float(sc_.detection_probability(n, seed=0, band="sc-fe12", mass=m * u.g).probability.values[0])
                 for m in masses]
            return float(np.exp(np.interp(0.5, p, np.log(masses))))
        t, c, m50 = best_of(run, n=1)
        return {"seconds": t, "cpu": c, "note": f"M = {m50:.3g} g (16-point grid)"}


# --- scaling --------------------------------------------------------------------------------------
def _build(quick, jobs):
    from synthcorona.atomic import locate
    from synthcorona.atomic.builder import DEFAULT_LOGT, BuildSettings, build_table

    _chianti()
    ions = ["o_6", "o_7", "o_8", "fe_16"] if not quick else ["o_7", "o_8"]
    logT = DEFAULT_LOGT[20:61:2] if quick else DEFAULT_LOGT
    settings = BuildSettings(logT=logT, ions=ions)  # default elements: the HDF5 database of _chianti()
    root = locate.cache_dir() / "bench" / "scaling"
    root.mkdir(parents=True, exist_ok=True)
    work = pathlib.Path(tempfile.mkdtemp(dir=root))  # fresh: no per-ion results to resume from
    _, h5 = _chianti()
    from synthcorona.atomic.builder import proton_electron_ratio

    cached = root / f"pe-{logT.size}.npy"
    if cached.exists():
        shutil.copy(cached, work / "proton_electron_ratio.npy")
    tp = time.perf_counter()
    proton_electron_ratio(h5, logT, work)  # once per grid (read by build_table from the work dir), not timed
    tp = time.perf_counter() - tp
    shutil.copy(work / "proton_electron_ratio.npy", cached)
    t0, c0 = time.perf_counter(), time.process_time()
    build_table(work / "t.nc", chianti=os.environ[CHIANTI_ENV], settings=settings, jobs=jobs, work_dir=work,
                progress=False)
    t, c = time.perf_counter() - t0, time.process_time() - c0
    shutil.rmtree(work, ignore_errors=True)
    return {"seconds": t, "cpu": c, "note": f"{len(ions)} ions ({', '.join(ions)}), {logT.size} T x 5 n_e "
            f"(p/e ratio {tp:.0f} s before, not counted)"}


@bench("build_scaling_jobs", target=None,
       about="build_table of a few ions with jobs=2 (local dask cluster) vs jobs=1 (this process); "
             "ratio = speed-up from the second worker (2 cores, shared)")
class BuildScaling:
    @staticmethod
    def ours(quick, out):
        return _build(quick, 2)

    @staticmethod
    def base(quick, out):
        return _build(quick, 1)


@bench("grid_scaling", target=None,
       about="detection_grid over 8 masses (measured) vs over 2 masses (baseline), 1000 realisations each, "
             "sc-fe12; ratio = time(2) / time(8): 0.25 = linear in the number of grid points")
class GridScaling:
    @staticmethod
    def _run(quick, k):
        import astropy.units as u

        from synthcorona.dimming.grids import detection_grid

        sc_ = _dimming_scenario()
        masses = np.geomspace(1e16, 1e18, k) * u.g
        t, c, ds = best_of(lambda: detection_grid(sc_, mass=masses, n_realisations=1000, band="sc-fe12"), n=1)
        return {"seconds": t, "cpu": c, "note": f"{k} grid points, {t / k:.2f} s per point"}

    @staticmethod
    def ours(quick, out):
        return GridScaling._run(quick, 8)

    @staticmethod
    def base(quick, out):
        return GridScaling._run(quick, 2)


# --- memory ---------------------------------------------------------------------------------------
@bench("table_memory", target=("rss_max_mb", 1000.0),
       about="peak RSS after loading the default table and decoding every density plane of the lines and "
             "all continua; baseline: the same arrays held as float64 (size computed, not allocated)")
class TableMemory:
    measure = "rss"

    @staticmethod
    def ours(quick, out):
        import synthcorona as sc

        t0 = time.perf_counter()
        table = sc.load_emissivity()
        lines = table.line_emissivity_grid()
        comp = table.continuum_components()
        for k in range(table.log_density.size):
            table.continuum(np.full(table.logT.size, table.log_density[k]))
        nbytes = lines.nbytes + sum(v.nbytes for v in comp.values())
        f64 = lines.size * 8 + sum(v.size * 8 for v in comp.values())
        return {"seconds": time.perf_counter() - t0, "cpu": 0.0,
                "note": f"decoded arrays {nbytes / 2**20:.0f} MiB (lines {lines.dtype}); as float64 "
                        f"{f64 / 2**20:.0f} MiB"}


@bench("mc_memory", target=("rss_max_mb", 2000.0),
       about="detection_probability, likelihood statistic, 1e6 + 1e6 realisations x 1000 bins (chunked); "
             "baseline: one unchunked (1e6, 1000) float64 array (size computed, not allocated)")
class MCMemory:
    measure = "rss"

    @staticmethod
    def ours(quick, out):
        import astropy.units as u

        from synthcorona.dimming.detection import detection_probability

        w, wo = _toy_light_curves()
        n = 100_000 if quick else 1_000_000
        cts = u.ct / u.s
        t, c, ds = best_of(lambda: detection_probability(w * cts, wo * cts, 1 * u.s, statistic="likelihood",
                                                         n_realisations=n, seed=2), n=1)
        return {"seconds": t, "cpu": c, "note": f"{n:.0e} realisations in {t:.0f} s; P = {float(ds.probability):.5f}; "
                f"unchunked counts would be {n * w.size * 8 / 2**30:.1f} GiB"}


# ----------------------------------------------------------------------------- runner
def _worker(name, part, quick, out):
    _quiet()
    fn = BENCHMARKS[name][part]
    try:
        res = fn(quick, pathlib.Path(out))
    except Skip as exc:
        res = {"skipped": str(exc)}
    print("@@RESULT@@" + json.dumps(res))


def _run_part(name, part, quick, out):
    """Run one part in a fresh interpreter; (result dict, peak RSS MiB of that child)."""
    cmd = [sys.executable, str(pathlib.Path(__file__).resolve()), "--worker", name, "--part", part,
           "--out", str(out)] + (["--quick"] if quick else [])
    with tempfile.TemporaryFile("w+") as so, tempfile.TemporaryFile("w+") as se:
        proc = subprocess.Popen(cmd, stdout=so, stderr=se, env={**os.environ, "MPLBACKEND": "Agg"})
        _, status, ru = os.wait4(proc.pid, 0)
        proc.returncode = os.waitstatus_to_exitcode(status)
        so.seek(0)
        se.seek(0)
        text, err = so.read(), se.read()
    rss = ru.ru_maxrss / 1024.0  # KiB on Linux
    for line in text.splitlines():
        if line.startswith("@@RESULT@@"):
            return json.loads(line[len("@@RESULT@@"):]), rss
    tail = (err.strip().splitlines() or ["no output"])[-1]
    return {"error": f"exit {proc.returncode}: {tail[:150]}"}, rss


def _fmt_time(s):
    if s is None or not np.isfinite(s):
        return "-"
    if s < 1e-3:
        return f"{s * 1e6:.1f} us"
    if s < 1:
        return f"{s * 1e3:.1f} ms"
    return f"{s:.2f} s"


def _target_text(t):
    if t is None:
        return "(report)"
    kind, v = t
    return {"speedup_min": f">= {v:g}x", "time_max": f"< {_fmt_time(v)}", "rss_max_mb": f"< {v:g} MB"}[kind]


def run_one(name, quick):
    spec = BENCHMARKS[name]
    out = pathlib.Path(tempfile.mkdtemp(prefix=f"scbench-{name}-"))
    ours, rss_o = _run_part(name, "ours", quick, out)
    base, rss_b = (None, None)
    if spec["base"] is not None and "skipped" not in ours and "error" not in ours:
        base, rss_b = _run_part(name, "base", quick, out)
    row = {"name": name, "about": spec["about"], "target": _target_text(spec["target"]),
           "ours": ours, "baseline": base, "peak_rss_mb": rss_o, "baseline_peak_rss_mb": rss_b,
           "measured_kind": spec["measure"]}
    if "skipped" in ours or "error" in ours:
        row["met"] = None
        row["note"] = ours.get("skipped") or ours.get("error")
        shutil.rmtree(out, ignore_errors=True)
        return row
    notes = [ours.get("note", "")]
    t_o = ours["seconds"]
    t_b = None
    if base is not None:
        if "seconds" in base:
            t_b = base["seconds"]
            if base.get("note"):
                notes.append("baseline: " + base["note"])
        else:
            notes.append("baseline " + (base.get("skipped") or base.get("error", "")))
    row["ratio"] = t_b / t_o if t_b else None
    if spec["agree"] is not None and t_b is not None:
        try:
            notes.append(spec["agree"](out))
        except Exception as exc:  # a failed comparison is reported, not fatal
            notes.append(f"agreement check failed: {exc}")
    kind = spec["target"][0] if spec["target"] else None
    if spec["measure"] == "rss":
        row["measured"] = rss_o
    row["met"] = (None if kind is None else
                  row["ratio"] is not None and row["ratio"] >= spec["target"][1] if kind == "speedup_min" else
                  t_o < spec["target"][1] if kind == "time_max" else rss_o < spec["target"][1])
    row["note"] = "; ".join(n for n in notes if n)
    shutil.rmtree(out, ignore_errors=True)
    return row


def _print_table(rows, file=sys.stdout):
    head = ["benchmark", "measured", "baseline", "ratio", "target", "met?", "peak RSS ours/base", "note"]
    body = []
    for r in rows:
        o = r["ours"]
        if r["measured_kind"] == "rss" and "seconds" in o:
            meas = f"{r['peak_rss_mb']:.0f} MB"
        else:
            meas = _fmt_time(o.get("seconds"))
        base = r.get("baseline") or {}
        b = _fmt_time(base.get("seconds")) if "seconds" in base else "-"
        ratio = f"{r['ratio']:.1f}x" if r.get("ratio") else "-"
        met = {True: "yes", False: "NO", None: "-"}[r.get("met")]
        rss = f"{r['peak_rss_mb']:.0f}" + (f"/{r['baseline_peak_rss_mb']:.0f}" if r.get("baseline_peak_rss_mb") else "")
        body.append([r["name"], meas, b, ratio, r["target"], met, rss + " MB", r.get("note", "")])
    widths = [max(len(str(x[i])) for x in body + [head]) for i in range(len(head) - 1)]
    line = "  ".join(h.ljust(w) for h, w in zip(head, widths)) + "  " + head[-1]
    print(line, file=file)
    print("-" * min(len(line) + 40, 200), file=file)
    for x in body:
        print("  ".join(str(v).ljust(w) for v, w in zip(x, widths)) + "  " + x[-1], file=file)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes (smoke run); figures not comparable")
    ap.add_argument("--only", help="comma-separated benchmark names (see --list)")
    ap.add_argument("--json", help="write the results (rows with raw figures) to this JSON file")
    ap.add_argument("--list", action="store_true", help="list the benchmarks and exit")
    ap.add_argument("--worker", help=argparse.SUPPRESS)
    ap.add_argument("--part", help=argparse.SUPPRESS)
    ap.add_argument("--out", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.worker:
        _worker(args.worker, args.part, args.quick, args.out)
        return 0
    if args.list:
        for name, spec in BENCHMARKS.items():
            print(f"{name:22s} {_target_text(spec['target']):10s} {spec['about']}")
        return 0
    names = list(BENCHMARKS)
    if args.only:
        names = [n.strip() for n in args.only.split(",") if n.strip()]
        unknown = [n for n in names if n not in BENCHMARKS]
        if unknown:
            print(f"run_all.py: unknown benchmark(s) {unknown}; valid: {', '.join(BENCHMARKS)}", file=sys.stderr)
            return 2
    started = time.strftime("%Y-%m-%d %H:%M:%S %Z")
    print(f"synthcorona benchmarks ({'quick' if args.quick else 'full'}), {started}; {platform.node()}: "
          f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f}; python {platform.python_version()}, "
          f"numpy {np.__version__}; {CHIANTI_ENV}={'set' if os.environ.get(CHIANTI_ENV) else 'unset'}")
    rows = []
    for name in names:
        t0 = time.perf_counter()
        rows.append(run_one(name, args.quick))
        print(f"  ran {name} in {time.perf_counter() - t0:.0f} s", file=sys.stderr, flush=True)
    print()
    _print_table(rows)
    print(f"\nload average at the end {os.getloadavg()[0]:.2f}; times are wall-clock best-of-N (CPU time in --json); "
          "peak RSS = ru_maxrss of each benchmark's own subprocess (os.wait4), interpreter and imports included")
    if args.json:
        pathlib.Path(args.json).write_text(json.dumps({"started": started, "quick": args.quick, "cpus": os.cpu_count(),
                                                       "rows": rows}, indent=1, default=str))
    return 0


if __name__ == "__main__":
    sys.exit(main())
