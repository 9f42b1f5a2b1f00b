"""Minimum detectable CME mass at one grid point, against a scan of P(detect) over masses."""
import numpy as np
from common import best_of, dimming_scenario


def run(quick):
    import astropy.units as u

    scenario = dimming_scenario()
    n = 1000 if quick else 10_000
    t, c, res = best_of(lambda: scenario.minimum_detectable_mass(0.5, bracket=(1e16 * u.g, 1e19 * u.g),
                                                                 band="sc-fe12", n_realisations=n, seed=0,
                                                                 onset="known"), n=1)
    return {"seconds": t, "cpu": c, "note": f"M = {float(res.mass):.3g} +- {float(res.mass_error):.2g} g, "
            f"{res.attrs['n_evaluations']} evaluations"}


def baseline(quick):
    import astropy.units as u

    scenario = dimming_scenario()
    n = 1000 if quick else 10_000
    masses = np.geomspace(1e16, min(1e19, float(scenario.max_mass.value)), 16)

    def scan():
        p = [float(scenario.detection_probability(n, seed=0, band="sc-fe12", mass=m * u.g,
                                                  onset="known").probability.values[0]) for m in masses]
        return float(np.exp(np.interp(0.5, p, np.log(masses))))
    t, c, m50 = best_of(scan, n=1)
    return {"seconds": t, "cpu": c, "note": f"M = {m50:.3g} g (16-point grid)"}


BENCHMARKS = [dict(
    name="min_detectable_mass", unit="s", target=("max", 10.0), run=run, baseline=baseline,
    about="DimmingScenario.minimum_detectable_mass (P = 0.5, window statistic, onset known, 10,000 realisations, "
          "sc-fe12) vs a scan of P(detect) over 16 masses with interpolation at P = 0.5 (same band and realisations)",
    source="dimming forecast target (former bench_dimming.py): minimum detectable mass at one grid point < 10 s")]
