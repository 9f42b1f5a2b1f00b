"""Benchmark: temperature responses and count rates of many DEMs (prints figures; no asserts).

Targets (issue "Instruments"):
* temperature responses of 10 bands over the full table grid: < 1 s after the table is loaded;
* count rates for 10,000 DEMs x 10 bands: < 0.1 s.

Run:  python benchmarks/bench_instruments.py [path/to/table.nc]
"""
from __future__ import annotations

import sys
import time

import astropy.units as u
import numpy as np

import synthcorona as sc
from synthcorona.instruments import Instrument, load_generic
from synthcorona.synthesis import prepare


def _timed(fn, repeat=1):
    """(result, best wall time in s over ``repeat`` calls)."""
    best, out = np.inf, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return out, best


def _verdict(t, target):
    return f"{t * 1e3:9.2f} ms  (target < {target * 1e3:g} ms: {'met' if t < target else 'NOT met'})"


def main(path=None):
    t0 = time.perf_counter()
    table = sc.load_emissivity(path)
    print(f"table: {table}")
    print(f"  load: {(time.perf_counter() - t0) * 1e3:.1f} ms (not counted in the targets)")

    # ten contiguous channel bands of the generic CCD telescope (with redistribution matrix)
    edges = np.geomspace(0.2, 8.0, 11)
    bands10 = {f"b{k}": [edges[k], edges[k + 1]] * u.keV for k in range(10)}
    names10 = list(bands10)
    t0 = time.perf_counter()
    sxt = load_generic("sc-softx").with_bands(**bands10)
    print(f"  building sc-softx (optics + Gaussian RMF): {(time.perf_counter() - t0) * 1e3:.1f} ms (cached afterwards)")
    # the same ten bands on a perfect-resolution instrument (no redistribution)
    e = np.geomspace(0.1, 10.0, 4001)
    flat = Instrument("flat", e[:-1] * u.keV, e[1:] * u.keV, np.full(4000, 100.0) * u.cm**2, bands=bands10)

    print("\n1. temperature responses, 10 bands x", table.logT.size, "temperatures")
    for label, inst, kw in [("sc-softx (RMF), no absorption", sxt, {}),
                            ("sc-softx (RMF), N_H = 1e20 cm-2", sxt, {"nh": 1e20 * u.cm**-2}),
                            ("flat ARF-like, no absorption", flat, {})]:
        dens = 10 ** np.random.uniform(9, 11) * u.cm**-3      # a density not seen before: cold prepare()
        resp, cold = _timed(lambda: inst.temperature_response(table=table, density=dens, bands=names10, **kw))
        _, warm = _timed(lambda: inst.temperature_response(table=table, density=dens, bands=names10, **kw), repeat=5)
        assert resp.shape == (10, table.logT.size)
        print(f"  {label:32s} first call {_verdict(cold, 1.0)}; repeated {warm * 1e3:.2f} ms")
    _, prep_t = _timed(lambda: prepare(table, "coronal", 10 ** np.random.uniform(9, 11) * u.cm**-3))
    print(f"  (of which synthcorona.synthesis.prepare for a new density: {prep_t * 1e3:.1f} ms)")
    for name in ("sc-fe9", "sc-fe12", "sc-fe14", "sc-euvphot"):
        inst = load_generic(name)
        _, cold = _timed(lambda: inst.temperature_response(table=table))
        print(f"  {name:32s} first call {cold * 1e3:9.2f} ms ({inst.area.size} energy bins)")

    print("\n2. count rates, 10,000 Gaussian DEMs x 10 bands")
    rng = np.random.default_rng(0)
    dem = sc.GaussianDEM(rng.uniform(6.0, 7.2, 10000), rng.uniform(0.1, 0.25, 10000),
                         10 ** rng.uniform(50, 52, 10000) * u.cm**-3)
    sxt.count_rate(dem, distance=10 * u.pc, band=names10, table=table)       # warm the response cache
    rates, full = _timed(lambda: sxt.count_rate(dem, distance=10 * u.pc, band=names10, table=table), repeat=5)
    w, wt = _timed(lambda: dem.em_weights(table.logT).value, repeat=5)
    K = sxt.temperature_response(table=table, bands=names10).values
    _, fold = _timed(lambda: (w @ K.T) * (1.0 / 10.0) ** 2, repeat=5)
    print(f"  result shape {rates.shape}, unit {rates.unit}")
    print(f"  Instrument.count_rate (whole call)        {_verdict(full, 0.1)}")
    print(f"    of which DEM.em_weights (synthcorona.dem) {wt * 1e3:9.2f} ms")
    print(f"    of which the fold w @ K^T               {fold * 1e3:9.2f} ms")
    _, nh_t = _timed(lambda: sxt.count_rate(dem, distance=10 * u.pc, nh=1e20 * u.cm**-2, band=names10, table=table),
                     repeat=3)
    print(f"  with N_H = 1e20 cm-2 (response cached)    {nh_t * 1e3:9.2f} ms")
    import os
    if hasattr(os, "getloadavg"):
        print(f"\nmachine: {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f} (timings are wall-clock)")


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else None)
