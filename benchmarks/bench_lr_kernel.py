"""The likelihood-ratio fit: one realisation per call against all realisations in one vectorised call."""
import numpy as np
from common import best_of, dimming_api, toy_light_curves


def _counts(quick):
    w, wo = toy_light_curves()
    m = 30 if quick else 300
    return np.random.default_rng(1).poisson(w, size=(m, w.size)).astype(float), wo, wo - w


def run(quick):
    likelihood_ratio = dimming_api("likelihood_ratio")
    counts, B, D = _counts(quick)
    t, c, res = best_of(lambda: likelihood_ratio(counts, B, D), n=3)
    return {"seconds": t, "cpu": c, "arrays": {"ts": res.ts},
            "note": f"{len(counts)} realisations x {B.size} bins at once, {t / len(counts) * 1e3:.4f} ms each"}


def baseline(quick):
    likelihood_ratio = dimming_api("likelihood_ratio")
    counts, B, D = _counts(quick)
    t, c, res = best_of(lambda: [likelihood_ratio(row, B, D) for row in counts], n=1)
    return {"seconds": t, "cpu": c, "arrays": {"ts": np.array([r.ts for r in res])},
            "note": f"one per call, {t / len(counts) * 1e3:.3f} ms each"}


def agree(ours, base):
    a, b = ours["arrays"]["ts"], base["arrays"]["ts"]
    return f"max |TS difference| {np.max(np.abs(a - b)):.1e}"


BENCHMARKS = [dict(
    name="lr_kernel_batch", unit="s", target=None, run=run, baseline=baseline, agree=agree,
    about="likelihood_ratio (Newton fit of the Cash statistic) of 300 realisations x 1000 bins in one call vs one "
          "realisation per call (argument checks included); ratio = gain of the vectorised fit",
    source="no target: a figure to watch")]
