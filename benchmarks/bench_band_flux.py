"""Band fluxes of 10,000 Gaussian DEMs in one call, against a loop of single-DEM calls."""
from common import best_of, gaussian_dems, relative_difference, single_dems


def _setup(quick):
    import astropy.units as u

    import synthcorona as sc

    n = 1000 if quick else 10_000
    return sc.load_emissivity(), n, gaussian_dems(n, seed=1), (0.1, 2.4) * u.keV


def run(quick):
    import astropy.units as u

    import synthcorona as sc

    table, n, dems, band = _setup(quick)
    fluxes = lambda: sc.band_flux(dems, band=band, distance=10 * u.pc, table=table)  # noqa: E731
    fluxes()
    t, c, f = best_of(fluxes, n=5)
    tw, _, _ = best_of(lambda: dems.em_weights(table.logT), n=5)
    return {"seconds": t, "cpu": c, "note": f"{n} DEMs; DEM weights {tw * 1e3:.0f} ms of it",
            "arrays": {"flux": f.value[:200]}}


def baseline(quick):
    import astropy.units as u

    import synthcorona as sc

    table, n, dems, band = _setup(quick)
    m = 50 if quick else 200
    one = single_dems(dems, m)
    sc.band_flux(one[0], band=band, distance=10 * u.pc, table=table)
    t, c, f = best_of(lambda: [sc.band_flux(d, band=band, distance=10 * u.pc, table=table) for d in one], n=1)
    return {"seconds": t * n / m, "cpu": c * n / m, "note": f"loop over {m} DEMs x {n / m:g}",
            "arrays": {"flux": [x.value for x in f]}}


BENCHMARKS = [dict(
    name="band_flux_10k", unit="s", target=("max", 0.1), run=run, baseline=baseline,
    agree=lambda ours, base: relative_difference(ours["arrays"]["flux"], base["arrays"]["flux"]),
    about="band_flux (0.1-2.4 keV, 10 pc) of 10,000 Gaussian DEMs in one call vs a Python loop of single-DEM "
          "band_flux calls (200 DEMs, scaled); agreement of the fluxes",
    source="issue 'atomic core': band fluxes of 10,000 DEMs in < 0.1 s")]
