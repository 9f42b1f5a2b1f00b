"""Benchmark of the dimming forecast. Prints figures; asserts nothing.

    python benchmarks/bench_dimming.py

Scenario: an invented active K dwarf at 2 pc (two Gaussian DEM components, 3e52 + 1e52 cm-3), a
1e18 g CME from 2 MK plasma at 1e9 cm-3 with a 1e33 erg flare, the generic sc-fe9, sc-fe12
and sc-softx (soft band) instruments, 1000 bins of 60 s with the onset after 3 h.

Targets: fitting-model call (1000 bins x 3 bands) < 100 us after setup; detection probability
from 10,000 realisations of 1000 bins < 2 s; minimum detectable mass at one grid point < 10 s.
Wall times are best of several runs (on a shared machine they include waiting for the CPU).
"""
import math
import time
import warnings

import astropy.units as u
import numpy as np

from synthcorona.dem import GaussianDEM, MultiComponentDEM
from synthcorona.dimming import CME, Corona, DimmingLightCurveModel, DimmingScenario, Flare, Observation, Star


def best_of(fn, n=3):
    best = math.inf
    out = None
    for _ in range(n):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main():
    t = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sc = DimmingScenario(
            Star(2 * u.pc, nh=1e17 * u.cm ** -2),
            Corona(MultiComponentDEM([GaussianDEM(6.3, 0.15, 3e52 * u.cm ** -3),
                                      GaussianDEM(6.9, 0.15, 1e52 * u.cm ** -3)]), density=1e9 * u.cm ** -3),
            CME(1e18 * u.g, source_temperature=2e6 * u.K),
            Flare(1e33 * u.erg, loop_half_length=5e9 * u.cm, loop_cross_section=1e19 * u.cm ** 2),
            ["sc-fe9", "sc-fe12", ("sc-softx", "soft")],
            Observation(1000 * u.min, 60 * u.s, 3 * u.h))
    print(f"scenario setup (table, responses, flare run): {time.perf_counter() - t:.2f} s")

    model = DimmingLightCurveModel(sc)
    times = sc.light_curve().time.values
    for _ in range(200):
        model(times, mass=5e17, t0=1.1e4, recovery_time=8e3, flare_scale=1.0)
    n = 5000
    per_call, cpu = [], []
    for _ in range(5):
        t0, c0 = time.perf_counter(), time.process_time()
        for _ in range(n):
            model(times, mass=5e17, t0=1.1e4, recovery_time=8e3, flare_scale=1.0)
        per_call.append((time.perf_counter() - t0) / n)
        cpu.append((time.process_time() - c0) / n)
    print(f"fitting model, {times.size} bins x {len(sc.labels)} bands: {1e6 * min(per_call):.1f} us per call "
          f"(median {1e6 * float(np.median(per_call)):.1f} us wall, best {1e6 * min(cpu):.1f} us CPU; "
          f"target < 100 us)")
    counts = sc.light_curve(n_realisations=1, seed=1).counts.values[0]
    t0 = time.perf_counter()
    for _ in range(2000):
        model.cash(counts, times, mass=5e17, t0=1.1e4)
    print(f"Cash statistic incl. model: {1e6 * (time.perf_counter() - t0) / 2000:.1f} us per call")

    for stat in ("window", "likelihood"):
        dt, res = best_of(lambda stat=stat: sc.detection_probability(10_000, statistic=stat, seed=3, band="sc-fe12"), n=2)
        print(f"detection probability ({stat}), 10,000 realisations x {sc.prepared.timing.n_bins} bins, one band: {dt:.2f} s "
              f"(target < 2 s); P = {float(res.probability.values[0]):.3f}")

    dt, res = best_of(lambda: sc.minimum_detectable_mass(0.5, bracket=(1e16 * u.g, 1e19 * u.g), band="sc-fe12",
                                                         n_realisations=10_000, seed=0), n=1)
    print(f"minimum detectable mass (P = 0.5, window, 10,000 realisations): {dt:.2f} s (target < 10 s); "
          f"M = {float(res.mass):.3g} +- {float(res.mass_error):.2g} g after {res.attrs['n_evaluations']} evaluations")


if __name__ == "__main__":
    main()
