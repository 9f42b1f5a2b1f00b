"""Peak memory of a million Monte Carlo realisations of 1000 bins, processed in chunks."""
import time

import numpy as np
from common import best_of, dimming_api, toy_light_curves


def run(quick):
    import astropy.units as u

    detection_probability, chunk_size_for = dimming_api("detection_probability"), dimming_api("chunk_size_for")
    w, wo = toy_light_curves()
    n = 20_000 if quick else 1_000_000
    cts = u.ct / u.s
    t, c, ds = best_of(lambda: detection_probability(w * cts, wo * cts, 1 * u.s, statistic="likelihood",
                                                     n_realisations=n, seed=2, onset="known"), n=1)
    cs = chunk_size_for(w.size)
    return {"seconds": t, "cpu": c, "note": f"{n:.0e} realisations in {t:.0f} s; P = {float(ds.probability):.5f}; "
            f"unchunked counts would be {n * w.size * 8 / 2**30:.1f} GiB; default chunk {cs} realisations "
            f"({cs * w.size * 8 / 2**20:.0f} MiB per float64 array)"}


def run_stream(quick):
    import astropy.units as u

    iter_realisations = dimming_api("iter_realisations")
    w, _ = toy_light_curves()
    n = 20_000 if quick else 1_000_000
    t0, c0 = time.perf_counter(), time.process_time()
    total = np.zeros(w.size)
    for chunk in iter_realisations(w * u.ct / u.s, 1 * u.s, n, seed=3):
        total += chunk.sum(axis=0)
    t, c = time.perf_counter() - t0, time.process_time() - c0
    return {"seconds": t, "cpu": c, "note": f"{n:.0e} realisations in {t:.0f} s; mean counts per bin "
            f"{total.mean() / n:.4f} (expected {w.mean():.4f})"}


BENCHMARKS = [
    dict(name="mc_memory", unit="MB", target=("max", 2000.0), run=run,
         about="peak RSS of detection_probability, likelihood statistic, 1e6 + 1e6 realisations x 1000 bins "
               "(chunked); an unchunked (1e6, 1000) float64 count array would be 7.5 GiB (in the note)",
         source="detection statistics target (former bench_statistics.py): peak memory of the 1e6 x 1000 run < 2 GB"),
    dict(name="mc_stream_memory", unit="MB", target=None, run=run_stream,
         about="peak RSS of the bare Poisson sampler: iter_realisations of 1e6 x 1000 bins summed chunk by chunk "
               "(no statistic, no event-free set)",
         source="no target: a figure to watch"),
]
