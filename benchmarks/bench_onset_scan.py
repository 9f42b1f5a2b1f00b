"""Detection with the onset scanned (the default): P(detect), minimum detectable mass and memory, against the
same calculations with the onset known (one trial)."""
import numpy as np
from common import best_of, dimming_api, dimming_scenario

WINDOWS = ((0, 400), (400, 550))  # s: reference windows of the window statistic (true onset at 400 s)


def scan_light_curves(n_bins=1000):
    """(with event, without event) expected counts per 1 s bin: 10 ct/s quiescent and a 5 % dimming at 400 s
    recovering with a 150 s e-folding time; scanned over ~110-120 trials (onsets 1/8 of the duration apart,
    durations x 0.5, 1, 2)."""
    t = np.arange(n_bins) + 0.5
    q = np.full(n_bins, 10.0)
    profile = np.where(t >= 400, np.exp(-(t - 400) / 150.0), 0.0)
    return q - 0.05 * q * profile, q


def _p_detect(quick, statistic, onset, repeat=3):
    import astropy.units as u

    detection_probability = dimming_api("detection_probability")
    w, wo = scan_light_curves()
    cts = u.ct / u.s
    kw = dict(statistic=statistic, onset=onset,
              windows=tuple((a * u.s, b * u.s) for a, b in WINDOWS) if statistic == "window" else None)
    n = 1000 if quick else 10_000
    detection_probability(w * cts, wo * cts, 1 * u.s, n_realisations=1000, seed=0, **kw)  # warm-up
    t, c, ds = best_of(lambda: detection_probability(w * cts, wo * cts, 1 * u.s, n_realisations=n, seed=1, **kw),
                       n=repeat)
    return {"seconds": t, "cpu": c, "note": f"P = {float(ds.probability):.4f} +- {float(ds.probability_error):.4f}, "
            f"threshold {float(ds.threshold):.3g}, {ds.attrs['n_trials']} trials, {ds.attrs['threshold_method']}"}


def _min_mass(quick, onset):
    import astropy.units as u

    scenario = dimming_scenario()
    n = 1000 if quick else 10_000
    t, c, res = best_of(lambda: scenario.minimum_detectable_mass(0.5, bracket=(1e16 * u.g, 1e19 * u.g),
                                                                 band="sc-fe12", n_realisations=n, seed=0,
                                                                 onset=onset), n=1)
    return {"seconds": t, "cpu": c, "note": f"M = {float(res.mass):.3g} +- {float(res.mass_error):.2g} g, "
            f"{res.attrs['n_evaluations']} evaluations, {res.attrs['n_trials']} trials"}


def _memory(quick):
    import astropy.units as u

    detection_probability = dimming_api("detection_probability")
    w, wo = scan_light_curves()
    cts = u.ct / u.s
    n = 20_000 if quick else 200_000
    t, c, ds = best_of(lambda: detection_probability(w * cts, wo * cts, 1 * u.s, statistic="likelihood",
                                                     n_realisations=n, seed=2), n=1)
    return {"seconds": t, "cpu": c, "note": f"{n} + {n} realisations x 1000 bins in {t:.0f} s; "
            f"P = {float(ds.probability):.4f}"}


CURVES = ("10,000 event-free + 10,000 with-event realisations x 1000 bins of a toy light curve (10 ct/s, a 5 % "
          "dimming at 400 s recovering over 150 s)")
SOURCE = "issue 'Credible forecasts II': P(detect) with onset scan, 10,000 realisations x 1000 bins < 3 s"
BENCHMARKS = [
    dict(name="p_detect_window_scan", unit="s", target=("max", 3.0), source=SOURCE,
         run=lambda quick: _p_detect(quick, "window", "scan"),
         baseline=lambda quick: _p_detect(quick, "window", "known"),
         about=f"detection_probability, window statistic, onset scanned, {CURVES} vs the same with the onset known "
               "(exact threshold, one trial)"),
    dict(name="p_detect_likelihood_scan", unit="s", target=("max", 3.0), source=SOURCE,
         env={"OPENBLAS_NUM_THREADS": "1"},
         run=lambda quick: _p_detect(quick, "likelihood", "scan"),
         baseline=lambda quick: _p_detect(quick, "likelihood", "known"),
         about=f"detection_probability, likelihood (Cash) statistic, onset scanned (score statistic over the trials, "
               f"full fit of the best), {CURVES} vs the same with the onset known"),
    dict(name="min_detectable_mass_scan", unit="s", target=("max", 20.0),
         source="issue 'Credible forecasts II': minimum detectable mass with the scan < 20 s",
         run=lambda quick: _min_mass(quick, "scan"), baseline=lambda quick: _min_mass(quick, "known"),
         about="DimmingScenario.minimum_detectable_mass (P = 0.5, window statistic, 10,000 realisations, sc-fe12), "
               "onset scanned vs onset known"),
    dict(name="mc_memory_scan", unit="MB", target=("max", 2000.0), timeout=900,
         source="issue 'Credible forecasts II': peak memory of any forecast < 2 GB (chunked)",
         run=_memory,
         about="peak RSS of detection_probability, likelihood statistic with the onset scanned, 200,000 + 200,000 "
               "realisations x 1000 bins (chunked)"),
]
