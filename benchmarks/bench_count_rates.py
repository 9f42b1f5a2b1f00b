"""Count rates of 10,000 Gaussian DEMs in 10 bands, against a loop of single-DEM calls."""
from common import best_of, gaussian_dems, relative_difference, single_dems, ten_band_softx


def _setup(quick):
    import synthcorona as sc

    n = 1000 if quick else 10_000
    softx, names = ten_band_softx()
    return sc.load_emissivity(), softx, names, n, gaussian_dems(n)


def run(quick):
    import astropy.units as u

    table, softx, names, n, dem = _setup(quick)
    rates = lambda: softx.count_rate(dem, distance=10 * u.pc, band=names, table=table)  # noqa: E731
    rates()  # the responses, cached afterwards
    t, c, r = best_of(rates, n=7)
    w = dem.em_weights(table.logT).value
    K = softx.temperature_response(table=table, bands=names).values
    tw, _, _ = best_of(lambda: dem.em_weights(table.logT), n=7)
    tf, _, _ = best_of(lambda: (w @ K.T) * (1.0 / 10.0) ** 2, n=7)
    return {"seconds": t, "cpu": c, "arrays": {"rates": r.value[:200]},
            "note": f"{n} DEMs x {len(names)} bands; DEM weights {tw * 1e3:.0f} ms and the fold w @ K^T "
                    f"{tf * 1e3:.1f} ms of it"}


def baseline(quick):
    import astropy.units as u

    table, softx, names, n, dem = _setup(quick)
    m = 50 if quick else 200
    one = single_dems(dem, m)
    softx.count_rate(one[0], distance=10 * u.pc, band=names, table=table)
    t, c, r = best_of(lambda: [softx.count_rate(d, distance=10 * u.pc, band=names, table=table) for d in one], n=1)
    return {"seconds": t * n / m, "cpu": c * n / m, "note": f"loop over {m} DEMs x {n / m:g}",
            "arrays": {"rates": [x.value for x in r]}}


def run_nh(quick):
    import astropy.units as u

    table, softx, names, n, dem = _setup(quick)
    rates = lambda: softx.count_rate(dem, distance=10 * u.pc, nh=1e20 * u.cm**-2, band=names, table=table)  # noqa: E731
    rates()  # the absorbed responses, cached afterwards
    t, c, _ = best_of(rates, n=5)
    return {"seconds": t, "cpu": c, "note": f"{n} DEMs x {len(names)} bands, N_H = 1e20 cm-2"}


BENCHMARKS = [
    dict(name="count_rates_10k", unit="s", target=("max", 0.1), run=run, baseline=baseline,
         agree=lambda ours, base: relative_difference(ours["arrays"]["rates"], base["arrays"]["rates"]),
         about="Instrument.count_rate of 10,000 Gaussian DEMs x 10 bands (sc-softx, responses cached) vs a Python "
               "loop of single-DEM count_rate calls (200 DEMs, scaled); agreement of the rates",
         source="issue 'Instruments': count rates of 10,000 DEMs x 10 bands < 0.1 s"),
    dict(name="count_rates_10k_nh", unit="s", target=None, run=run_nh,
         about="the same with interstellar absorption N_H = 1e20 cm-2 (absorbed responses cached)",
         source="no target: a figure to watch"),
]
