"""Simulate and fit a CME dimming on an invented star.

The star, its corona and the event are invented for illustration: "Tessamir", an active K dwarf
at 3 pc, whose corona (two Gaussian DEM components at 2 and 8 MK) loses 3e18 g of 2 MK plasma in a
CME with a 1e33 erg flare. Two generic instruments of synthcorona observe it (no real mission).

Steps: build a DimmingScenario; draw one Poisson light curve (10 h in 1-min bins, onset after
3 h); fit the CME mass and onset time with scipy.optimize by minimising the Cash (1979, ApJ 228,
939) statistic of the fast DimmingLightCurveModel; estimate 1-sigma errors from the curvature
(Delta C = 1). If emcee is installed, a short MCMC run follows; otherwise it is skipped.

Run:  python examples/fit_dimming_lightcurve.py
"""
import time
import warnings

import astropy.units as u
import numpy as np
from scipy import optimize

from synthcorona.dem import GaussianDEM, MultiComponentDEM
from synthcorona.dimming import CME, Corona, DimmingLightCurveModel, DimmingScenario, Flare, Observation, Star


def main():
    t_start = time.perf_counter()
    corona = Corona(MultiComponentDEM([GaussianDEM(6.3, 0.15, 5e52 * u.cm ** -3),
                                       GaussianDEM(6.9, 0.15, 1.5e52 * u.cm ** -3)]),
                    abundances="coronal", density=1e9 * u.cm ** -3)
    star = Star(distance=3 * u.pc, nh=2e17 * u.cm ** -2, radius=0.75 * u.R_sun)
    cme = CME(3e18 * u.g, source_temperature=2e6 * u.K, speed=800 * u.km / u.s, source_size=2e10 * u.cm)
    flare = Flare(1e33 * u.erg, loop_half_length=5e9 * u.cm, loop_cross_section=1e19 * u.cm ** 2)
    obs = Observation(exposure=10 * u.h, bin_width=60 * u.s, pre_event=3 * u.h,
                      background={"sc-fe12": 0.5 * u.ct / u.s})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")    # the flare loop run may stop early; the scenario records it
        scenario = DimmingScenario(star, corona, cme, flare, ["sc-fe9", "sc-fe12"], obs)
    print("Tessamir (invented K dwarf at 3 pc)")
    depth = scenario.depth()
    for band in depth.band.values:
        print(f"  {band}: quiescent {float(depth.quiescent_rate.sel(band=band)):.2f} ct/s, "
              f"full depth {100 * float(depth.depth.sel(band=band)):.2f} % of counts, "
              f"{100 * float(depth.depth_energy_flux.sel(band=band)):.2f} % of energy flux")
    print(f"  recovery time {scenario.recovery_time / 3600:.2f} h, onset {scenario.onset:.0f} s; "
          f"flare: {scenario.flare_termination}")

    lc = scenario.light_curve(n_realisations=1, seed=2024)
    counts = lc.counts.values[0]
    t = lc.time.values
    model = DimmingLightCurveModel(scenario)
    m_true, t0_true = cme.mass.to_value(u.g), scenario.t0

    # fit (mass / 1e18 g, t0 / 1 h) without using the true values
    def cstat(x):
        mass, t0 = x[0] * 1e18, x[1] * 3600.0
        if not (0 <= mass <= model.max_mass) or not (0 < t0 < t[-1]):
            return np.inf
        return model.cash(counts, t, mass=mass, t0=t0)

    # the C surface has local minima in t0 at the scale of a bin when the flare is faint: scan a coarse
    # (mass, t0) grid first (vectorised over nothing heavier than ~1000 fast model calls), then refine
    t0_grid = np.arange(0.5, 8.0, 1.0 / 12.0)            # every 5 min [h]
    m_grid = np.geomspace(0.1, min(20.0, model.max_mass / 1e18), 25)
    c_grid = np.array([[cstat((mm, tt)) for mm in m_grid] for tt in t0_grid])
    i, j = np.unravel_index(np.argmin(c_grid), c_grid.shape)
    res = optimize.minimize(cstat, x0=[m_grid[j], t0_grid[i]], method="Nelder-Mead",
                            options={"xatol": 1e-4, "fatol": 1e-3, "maxiter": 2000})
    m_fit, t0_fit = res.x[0] * 1e18, res.x[1] * 3600
    # 1-sigma error on the mass from Delta C = 1 along the mass axis (t0 held at its best value)
    c_min = res.fun
    grid = np.linspace(0.5, 1.5, 41) * m_fit
    dc = np.array([model.cash(counts, t, mass=m, t0=t0_fit) for m in grid]) - c_min
    curv = np.polyfit(grid / 1e18, dc, 2)[0]
    sigma_m = 1e18 / np.sqrt(curv) if curv > 0 else np.inf
    print(f"  fit: mass = {m_fit:.3g} +- {sigma_m:.2g} g (true {m_true:.3g} g), "
          f"onset = {t0_fit / 3600:.3f} h (true {t0_true / 3600:.3f} h), C_min = {c_min:.1f} "
          f"for {counts.size} bins")

    try:
        import emcee  # optional: not a dependency of synthcorona
    except ImportError:
        print("  emcee is not installed: MCMC step skipped")
    else:
        def logp(x):
            c = cstat(x)
            return -0.5 * c if np.isfinite(c) else -np.inf

        rng = np.random.default_rng(1)
        p0 = res.x + 1e-3 * rng.standard_normal((16, 2))
        sampler = emcee.EnsembleSampler(16, 2, logp)
        sampler.run_mcmc(p0, 400, progress=False)
        chain = sampler.get_chain(discard=150, flat=True)
        print(f"  emcee: mass = {np.median(chain[:, 0]) * 1e18:.3g} g "
              f"(16-84 %: {np.percentile(chain[:, 0], 16) * 1e18:.3g}-{np.percentile(chain[:, 0], 84) * 1e18:.3g})")

    p = scenario.detection_probability(n_realisations=2000, seed=7)
    for band in p.band.values:
        print(f"  P(detect) in {band} (window test, false alarm {obs.false_alarm:g}): "
              f"{float(p.probability.sel(band=band)):.3f}")
    print(f"done in {time.perf_counter() - t_start:.1f} s")


if __name__ == "__main__":
    main()
