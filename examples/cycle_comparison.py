"""Compare an invented star's corona across its activity cycle with the Python API.

"Corvanne" is an invented young solar-type star at 3 pc (no real star or data set). Four phases of
an invented 8-year cycle are given three ways -- a DEM, multi-temperature components, and a
measured 0.1-2.4 keV flux with a temperature -- and compared: band fluxes, count rates in two
generic instruments of synthcorona, the hardness ratio, the cycle amplitude, the conversion of a
count rate in the soft-X-ray telescope into the 193 Angstrom EUV channel, and how detectable one
reference CME dimming is at each phase (small Monte Carlo, fixed seed).

The same star is described by the cycle file examples/cycle/corvanne_cycle.toml, for the command
line: ``synthcorona cycle examples/cycle/corvanne_cycle.toml --out corvanne_out``.

Run:  python examples/cycle_comparison.py
"""
import pathlib
import time

import astropy.units as u

from synthcorona.dem import GaussianDEM, IsothermalDEM
from synthcorona.dimming import CME, Corona, DimmingScenario, Observation, Star
from synthcorona.instruments.conversion import CountConversion, convert_count_rate
from synthcorona.plotting.cycle import save_cycle_figures
from synthcorona.products.cycle import compare_cycle
from synthcorona.products.cycle_phase import CyclePhase

HERE = pathlib.Path(__file__).resolve().parent


def main():
    t0 = time.perf_counter()
    star = Star(distance=3 * u.pc, nh=3e17 * u.cm ** -2)
    phases = [
        CyclePhase("minimum", 0 * u.yr, dem=GaussianDEM(6.2, 0.2, 6e50 * u.cm ** -3)),
        CyclePhase("rise", 2 * u.yr, flux=3e-11 * u.erg / u.s / u.cm ** 2, band=[0.1, 2.4] * u.keV,
                   temperature=2.2 * u.MK, width_logT=0.2),
        CyclePhase("maximum", 4 * u.yr, dem=[GaussianDEM(6.4, 0.15, 2.5e51 * u.cm ** -3),
                                             IsothermalDEM(8 * u.MK, 5e50 * u.cm ** -3)]),
        CyclePhase("decline", 6 * u.yr, flux=4e-11 * u.erg / u.s / u.cm ** 2, band=[0.1, 2.4] * u.keV,
                   temperature=2.5 * u.MK),
    ]
    # Reference CME: its corona DEM is replaced by each phase's DEM.
    reference = DimmingScenario(star, Corona(GaussianDEM(6.3, 0.2, 1e51 * u.cm ** -3), density=2e9 * u.cm ** -3),
                                CME(1e17 * u.g, source_temperature=2 * u.MK), None, "sc-fe12",
                                Observation(exposure=12 * u.h, bin_width=120 * u.s, pre_event=3 * u.h))
    ds = compare_cycle(phases, star, bands={"0.1-2.4 keV": [0.1, 2.4] * u.keV, "EUV": [100, 400] * u.AA},
                       instruments=["sc-softx", "sc-fe12"],
                       conversion=CountConversion("sc-softx:broad", "sc-fe12", rate=1.5 * u.ct / u.s),
                       reference=reference, n_realisations=1000, seed=7, density=2e9 * u.cm ** -3,
                       period=8 * u.yr, name="Corvanne (invented)")

    print("Corvanne (invented G2 V star at 3 pc) over an invented 8-year cycle")
    for i, lab in enumerate(ds["label"].values):
        print(f"  {lab:>8s} ({ds['phase'].values[i]:.0f} yr, {ds['phase_source'].values[i]:>10s}): "
              f"F(0.1-2.4 keV) {ds['flux'].values[i, 0]:.3e} erg s-1 cm-2, "
              f"sc-softx broad {ds['count_rate'].sel(channel='sc-softx:broad').values[i]:.3f} ct/s, "
              f"HR {ds['hardness_ratio'].values[i, 0]:+.3f}, "
              f"P(detect CME) {ds['detection_probability'].values[i, 0]:.2f}")
    print(f"  flux amplitude (max/min) 0.1-2.4 keV: {ds['flux_amplitude'].values[0]:.2f}, "
          f"EUV: {ds['flux_amplitude'].values[1]:.2f}")

    # One conversion by hand, and back: 1.5 ct/s in sc-softx:broad at maximum -> sc-fe12 -> sc-softx:broad.
    dem_max = phases[2].resolve(star.distance, density=2e9 * u.cm ** -3)
    fwd = convert_count_rate(1.5 * u.ct / u.s, dem_max, "sc-softx:broad", "sc-fe12", nh=star.nh,
                             density=2e9 * u.cm ** -3)
    back = convert_count_rate(fwd.rate, dem_max, "sc-fe12", "sc-softx:broad", nh=star.nh,
                              density=2e9 * u.cm ** -3)
    print(f"  at maximum: 1.5 ct/s in sc-softx:broad = {fwd.rate:.4f} in sc-fe12 "
          f"(flux {fwd.flux:.3e}); back: {back.rate:.6f}")

    out = pathlib.Path("cycle_comparison_out")
    paths = save_cycle_figures(ds, out)
    print(f"  wrote {len(paths)} figures to {out}/ ({', '.join(p.name for p in paths)})")
    print(f"  cycle file for the command line: {HERE / 'cycle' / 'corvanne_cycle.toml'}")
    print(f"done in {time.perf_counter() - t0:.1f} s")


if __name__ == "__main__":
    main()
