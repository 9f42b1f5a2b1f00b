"""Light curves and a flare loop shared by the dimming tests (tests/dimming/test_*.py).

flare_model_run() is cached: it runs once per test session (the tests do not change its result).
"""
import functools
import math
import warnings

import astropy.units as u
import numpy as np

# ----------------------------------------------------------------------------- light curves of the statistics tests
CTS = u.ct / u.s
#: Pre- and post-event windows of step_curve's default 1000 one-second bins.
WIN = ((0 * u.s, 500 * u.s), (500 * u.s, 1000 * u.s))


def binom_se(p, n):
    """Binomial standard error sqrt(p (1 - p) / n) of a Monte Carlo fraction."""
    return math.sqrt(p * (1 - p) / n)


def step_curve(n_bins=1000, rate=10.0, depth=0.0, onset=500):
    """Count rate [ct/s] of 1 s bins stepping down by the fraction ``depth`` at ``onset`` (s)."""
    t = np.arange(n_bins) + 0.5
    return np.where(t >= onset, rate * (1 - depth), rate) * CTS


def flare_dimming_curves(n_bins=400, q=20.0, depth=0.1):
    """Quiescent + decaying flare, and an exponentially recovering dimming after bin 200 (1 s bins).

    Returns (baseline, dimming template, baseline - depth x template), expected counts per bin.
    """
    t = np.arange(n_bins) + 0.5
    flare = 60.0 * np.exp(-(t - 200) / 30.0) * (t >= 200)
    profile = np.where(t >= 200, np.exp(-(t - 200) / 150.0), 0.0)
    base = q + flare
    dim = q * profile
    return base, dim, base - depth * dim


# ----------------------------------------------------------------------------- the flare loop of the flare tests
def flare_model(**kw):
    """A 3e9 cm, 1e17 cm2 loop in equilibrium at 1 MK, hit by 1e29 erg peaking at 100 s over 200 s (triangular);
    keyword arguments replace these."""
    from synthcorona.dimming.flare import LoopFlareModel

    args = dict(initial_temperature=1e6 * u.K, flare_energy=1e29 * u.erg, peak_time=100 * u.s,
                duration=200 * u.s)
    args.update(kw)
    return LoopFlareModel(3e9 * u.cm, 1e17 * u.cm ** 2, **args)


@functools.cache
def flare_model_run():
    """flare_model() run for 4500 s (it stops early, near 1900 s, when T leaves the table's range)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return flare_model().run(4500 * u.s)
