"""The dimming light-curve fitting model: one call, and the Cash statistic of a realisation with it."""
from common import best_of, dimming_scenario

PARAMS = dict(mass=5e17, t0=1.1e4, recovery_time=8e3, flare_scale=1.0)


def run(quick):
    from synthcorona.dimming import DimmingLightCurveModel

    scenario = dimming_scenario()
    model = DimmingLightCurveModel(scenario)
    times = scenario.light_curve().time.values
    n = 500 if quick else 5000
    for _ in range(200):
        model(times, **PARAMS)

    def calls():
        for _ in range(n):
            model(times, **PARAMS)
    t, c, _ = best_of(calls, n=5)
    return {"seconds": t / n, "cpu": c / n, "note": f"{times.size} bins x {len(scenario.labels)} bands; "
            f"best of 5 x {n} calls"}


def baseline(quick):
    import astropy.units as u

    scenario = dimming_scenario()
    cor, star = scenario.corona, scenario.star

    def call():
        rates = [ins.count_rate(cor.dem, distance=star.distance, nh=star.nh, band=band, abundances=cor.abundances,
                                density=scenario.prepared.source.emissivity_density * u.cm**-3)
                 for _, ins, band in scenario.channels]
        return rates, scenario.light_curve(mass=5e17 * u.g)
    call()
    n = 5 if quick else 20
    t, c, _ = best_of(lambda: [call() for _ in range(n)], n=2)
    return {"seconds": t / n, "cpu": c / n, "note": f"{n} calls"}


def run_cash(quick):
    from synthcorona.dimming import DimmingLightCurveModel

    scenario = dimming_scenario()
    model = DimmingLightCurveModel(scenario)
    times = scenario.light_curve().time.values
    counts = scenario.light_curve(n_realisations=1, seed=1).counts.values[0]
    n = 200 if quick else 2000
    model.cash(counts, times, mass=5e17, t0=1.1e4)

    def calls():
        for _ in range(n):
            model.cash(counts, times, mass=5e17, t0=1.1e4)
    t, c, _ = best_of(calls, n=3)
    return {"seconds": t / n, "cpu": c / n, "note": f"best of 3 x {n} calls"}


BENCHMARKS = [
    dict(name="fit_model_call", unit="s", target=("max", 100e-6), run=run, baseline=baseline,
         about="one call of DimmingLightCurveModel (1000 bins x 3 bands, after set-up) vs, per call, the corona's "
               "band count rates recomputed with Instrument.count_rate and the light curve with "
               "DimmingScenario.light_curve",
         source="dimming forecast target (former bench_dimming.py): fitting-model call < 100 us after set-up"),
    dict(name="fit_cash_call", unit="s", target=None, run=run_cash,
         about="DimmingLightCurveModel.cash: the Cash statistic of one simulated realisation, model included",
         source="no target: a figure to watch"),
]
