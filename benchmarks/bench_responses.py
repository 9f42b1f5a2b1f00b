"""Temperature responses of instruments: ten bands x 81 temperatures at a density not seen before."""
import time

import numpy as np
from common import best_of, ten_band_softx

NEW_DENSITIES = 10 ** np.linspace(9.05, 10.95, 10)  # cm-3: a density not seen before at each timed call


def _new_density_calls(inst, names, **kw):
    """Best of 3 first calls of inst.temperature_response at densities not seen before (instrument built)."""
    import astropy.units as u

    import synthcorona as sc

    table = sc.load_emissivity()
    dens = iter(NEW_DENSITIES * u.cm**-3)
    inst.temperature_response(table=table, bands=names, **kw)  # builds the instrument's matrices once
    t, c, K = best_of(lambda: inst.temperature_response(table=table, density=next(dens), bands=names, **kw), n=3)
    return t, c, K, table


def run(quick):
    import astropy.units as u

    import synthcorona as sc
    from synthcorona.synthesis import prepare

    t0 = time.perf_counter()
    softx, names = ten_band_softx()
    t_build = time.perf_counter() - t0
    t, c, K, table = _new_density_calls(softx, names)
    dens = 10**9.5 * u.cm**-3
    K = softx.temperature_response(table=table, density=dens, bands=names)
    t_warm, _, _ = best_of(lambda: softx.temperature_response(table=table, density=dens, bands=names), n=5)
    t_prep, _, _ = best_of(lambda: prepare(table, "coronal", 10**9.33 * u.cm**-3), n=1)
    return {"seconds": t, "cpu": c, "arrays": {"K": np.asarray(K.values)},
            "note": f"shape {K.shape}; building sc-softx with 10 bands {t_build * 1e3:.0f} ms (once); "
                    f"synthesis.prepare alone at a new density {t_prep * 1e3:.0f} ms; repeated call at a density "
                    f"seen before {t_warm * 1e3:.1f} ms; table {sc.load_emissivity().logT.size} T"}


def baseline(quick):
    import astropy.units as u

    import synthcorona as sc

    table = sc.load_emissivity()
    softx, names = ten_band_softx()
    e = softx.energy_lo.to_value(u.keV), softx.energy_hi.to_value(u.keV)
    edges = np.concatenate([e[0], e[1][-1:]]) * u.keV
    logT = table.logT[::8] if quick else table.logT
    em, d = 1e50 * u.cm**-3, 1 * u.pc

    def responses():
        K = np.empty((len(names), logT.size))
        for j, lt in enumerate(logT):
            s = sc.synthesize(sc.IsothermalDEM(10**lt * u.K, em), energy=edges, edges=True, table=table,
                              density=10**9.5 * u.cm**-3, distance=d, photons=True)
            # ph cm-2 s-1 per bin (>= 0: bin integrals of the continuum can round to -1e-17)
            ph = np.maximum(np.asarray(s.values) * np.diff(edges.value), 0.0) * u.Unit("ph cm-2 s-1")
            for b, name in enumerate(names):
                K[b, j] = float(softx.count_rate_from_spectrum(ph, edges, band=name).value) / em.value
        return K
    t, c, K = best_of(responses, n=1)
    scale = table.logT.size / logT.size
    return {"seconds": t * scale, "cpu": c * scale, "note": f"{logT.size} T run, scaled to {table.logT.size}",
            "arrays": {"K": K}}


def agree(ours, base):
    a, b = ours["arrays"]["K"], base["arrays"]["K"]
    if a.shape != b.shape:  # --quick: the baseline ran every 8th temperature
        a = a[:, ::8]
    sig = b > 1e-3 * b.max(axis=1, keepdims=True)
    rel = np.abs(a[sig] / b[sig] - 1)
    return f"median {np.median(rel) * 100:.2f}%, max {rel.max() * 100:.1f}% where > 1e-3 of each band's peak"


def run_nh(quick):
    import astropy.units as u

    softx, names = ten_band_softx()
    t, c, K, _ = _new_density_calls(softx, names, nh=1e20 * u.cm**-2)
    return {"seconds": t, "cpu": c, "note": f"shape {K.shape}, N_H = 1e20 cm-2"}


def run_flat(quick):
    import astropy.units as u

    import synthcorona as sc

    _, names = ten_band_softx()
    edges = np.geomspace(0.2, 8.0, 11)
    e = np.geomspace(0.1, 10.0, 4001)
    flat = sc.Instrument("flat", e[:-1] * u.keV, e[1:] * u.keV, np.full(4000, 100.0) * u.cm**2,
                         bands={n: [edges[k], edges[k + 1]] * u.keV for k, n in enumerate(names)})
    t, c, K, _ = _new_density_calls(flat, names)
    return {"seconds": t, "cpu": c, "note": f"shape {K.shape}; 4000 energy bins, 100 cm2, no redistribution"}


def run_euv(quick):
    import synthcorona as sc

    table, times, cpu = sc.load_emissivity(), {}, 0.0
    for name in ("sc-fe9", "sc-fe12", "sc-fe14", "sc-euvphot"):
        inst = sc.load_generic(name)
        times[name], c, _ = best_of(lambda inst=inst: inst.temperature_response(table=table), n=1)
        cpu += c
    return {"seconds": sum(times.values()), "cpu": cpu,
            "note": "first call each: " + ", ".join(f"{k} {v * 1e3:.0f} ms" for k, v in times.items())
                    + " (the first one also prepares the table at the default density)"}


ABOUT_VARIANT = "Instrument.temperature_response of the same 10 bands x 81 T at a density not seen before, "
SOURCE = "issue 'Instruments': temperature responses of 10 bands over the table grid < 1 s after the table is loaded"
BENCHMARKS = [
    dict(name="responses_10x81", unit="s", target=("max", 1.0), run=run, baseline=baseline, agree=agree,
         about="Instrument.temperature_response of 10 bands (sc-softx with its redistribution matrix, 0.2-8 keV) x "
               "81 T at a density not seen before vs, per temperature, synthesize the isothermal photon spectrum on "
               "the instrument grid and fold it with count_rate_from_spectrum (every 8th T in --quick, scaled); "
               "agreement of the responses", source=SOURCE),
    dict(name="responses_10x81_nh", unit="s", target=("max", 1.0), run=run_nh,
         about=ABOUT_VARIANT + "with interstellar absorption N_H = 1e20 cm-2 (sc-softx)", source=SOURCE),
    dict(name="responses_10x81_flat", unit="s", target=("max", 1.0), run=run_flat,
         about=ABOUT_VARIANT + "for a flat 100 cm2 instrument without redistribution (4000 energy bins)",
         source=SOURCE),
    dict(name="responses_euv", unit="s", target=None, run=run_euv,
         about="first temperature_response call (default density, every band) of each generic EUV design: sc-fe9, "
               "sc-fe12, sc-fe14, sc-euvphot; measured = their sum",
         source="no target: a figure to watch"),
]
