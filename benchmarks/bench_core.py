"""Benchmark of the atomic core (issue: atomic core). Prints figures; asserts nothing.

    python benchmarks/bench_core.py [--chianti PATH]

Targets: synthesize of a Gaussian DEM on a 1-400 A, 0.01 A grid < 0.2 s; band_flux for
10,000 DEMs < 0.1 s; table load < 2 s; builder per-ion speed-up over a plain
fiasco.Ion(...).contribution_function(...) call >= 10x (needs CHIANTI).
"""
import argparse
import json
import os
import time

import astropy.units as u
import numpy as np


def best_of(fn, n=5):
    ts = []
    for _ in range(n):
        t0 = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t0)
    return min(ts)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--chianti", default=os.environ.get("SYNTHCORONA_CHIANTI"))
    ap.add_argument("--ion", default="fe_12")
    args = ap.parse_args()
    import synthcorona as sc
    from synthcorona import emissivity

    t0 = time.perf_counter()
    emissivity._load_cached.cache_clear()
    table = sc.load_emissivity()
    t_load = time.perf_counter() - t0
    print(f"table: {table!r}")
    print(f"load_emissivity (hash check + decode): {t_load:.2f} s   target < 2 s   {'MET' if t_load < 2 else 'NOT MET'}")
    ion_s = json.loads(table.provenance.get("ion_compute_seconds", "{}"))
    if ion_s:
        tot = sum(v for v in ion_s.values() if np.isfinite(v))
        slow = sorted(ion_s.items(), key=lambda kv: -kv[1])[:5]
        print(f"embedded table build: {len(ion_s)} ions, {tot/60:.1f} CPU-min of per-ion work "
              f"(~{tot/120:.1f} min wall on 2 workers); slowest: {slow}")
    dem = sc.GaussianDEM(peak_logT=6.3, width_logT=0.15, total_em=1e51 * u.cm ** -3)
    wl = np.arange(1, 400, 0.01) * u.AA
    sc.synthesize(dem, wavelength=wl, table=table, abundances="coronal", density=1e10 * u.cm ** -3)
    t_syn = best_of(lambda: sc.synthesize(dem, wavelength=wl, table=table, abundances="coronal",
                                          density=1e10 * u.cm ** -3))
    print(f"synthesize Gaussian DEM, 1-400 A at 0.01 A ({wl.size} bins): {t_syn*1e3:.1f} ms   target < 200 ms   "
          f"{'MET' if t_syn < 0.2 else 'NOT MET'}")
    rng = np.random.default_rng(1)
    n = 10_000
    dems = sc.GaussianDEM(rng.uniform(6.0, 7.0, n), rng.uniform(0.05, 0.3, n), rng.uniform(1e50, 1e52, n) * u.cm ** -3)
    band = (0.1, 2.4) * u.keV
    sc.band_flux(dems, band=band, distance=10 * u.pc, table=table)
    t_bf = best_of(lambda: sc.band_flux(dems, band=band, distance=10 * u.pc, table=table))
    t_w = best_of(lambda: dems.em_weights(table.logT))
    print(f"band_flux for {n} DEMs: {t_bf*1e3:.1f} ms (of which DEM quadrature weights {t_w*1e3:.1f} ms)   "
          f"target < 100 ms   {'MET' if t_bf < 0.1 else 'NOT MET'}")
    if not args.chianti:
        print("builder speed-up: skipped (set SYNTHCORONA_CHIANTI or --chianti to a CHIANTI copy)")
        return
    import warnings

    import fiasco

    from synthcorona.atomic import locate
    from synthcorona.atomic.builder import (
        DEFAULT_LOG_DENSITY,
        DEFAULT_LOGT,
        compute_ion,
        default_elements,
        default_energy_grid,
        proton_electron_ratio,
    )
    fiasco.log.setLevel("ERROR")
    warnings.filterwarnings("ignore")
    src = locate.find_chianti(args.chianti)
    h5 = locate.ensure_hdf5(src, default_elements(src.root))
    T = 10 ** DEFAULT_LOGT * u.K
    dens = 10 ** DEFAULT_LOG_DENSITY * u.cm ** -3
    t0 = time.perf_counter()
    ion = fiasco.Ion(args.ion, T, hdf5_dbase_root=h5)
    ion.contribution_function(dens)
    t_plain = time.perf_counter() - t0
    work = locate.cache_dir() / "bench"
    work.mkdir(exist_ok=True)
    t0 = time.perf_counter()
    pe = proton_electron_ratio(h5, DEFAULT_LOGT, work)
    t_pe = time.perf_counter() - t0
    t0 = time.perf_counter()
    compute_ion(args.ion, str(h5), DEFAULT_LOGT, DEFAULT_LOG_DENSITY, default_energy_grid(), pe)
    t_ours = time.perf_counter() - t0
    print(f"plain fiasco {args.ion} contribution_function (81 T x 5 n_e): {t_plain:.1f} s")
    print(f"builder {args.ion} (lines + ff + fb + 2p, p/e ratio cached once per grid: {t_pe:.1f} s once): "
          f"{t_ours:.1f} s   speed-up {t_plain/t_ours:.1f}x   target >= 10x   {'MET' if t_plain/t_ours >= 10 else 'NOT MET'}")


if __name__ == "__main__":
    main()
