"""Light curves shared by the dimming tests (tests/dimming/test_*.py)."""
import math

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
