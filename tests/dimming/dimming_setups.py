"""Invented stars, scenarios and light curves shared by the dimming tests (tests/dimming/test_*.py).

The scenario builders without arguments are cached: each is built once per test session (the tests do
not change scenarios).

SUN_DEM: a full-disk quiet-Sun DEM approximated by one Gaussian in log T: peak near log T = 6.15,
width 0.2 dex, total EM 5e49 cm-3 (from memory: quiet-Sun DEMs peak at log T 6.1-6.2 and the
full-disk EM is of order 1e49-1e50 cm-3, e.g. the CHIANTI quiet-Sun DEM shape; not read from any file).

STAR_DEM: an invented active K dwarf at 2 pc (hotter and ~1000x more emission measure than the Sun),
observed with the generic EUV imagers: ~20-50 ct/s, enough counts for high-S/N fits and Monte Carlo
tests.
"""
import functools
import math
import warnings

import astropy.units as u
import numpy as np

from synthcorona.dem import GaussianDEM, MultiComponentDEM
from synthcorona.dimming import CME, Corona, DimmingScenario, Flare, Observation, Star

SUN_DEM = GaussianDEM(6.15, 0.2, 5e49 * u.cm ** -3)
STAR_DEM = MultiComponentDEM([GaussianDEM(6.3, 0.15, 3e52 * u.cm ** -3), GaussianDEM(6.9, 0.15, 1e52 * u.cm ** -3)])
BANDS = ["sc-fe9", "sc-fe12"]


@functools.cache
def sun_scenario():
    """Sun-as-a-star at 1 AU, 1e15 g CME from 1.5 MK plasma at n_e = 1e9 cm-3, with a 1e31 erg flare."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e9 * u.cm ** -3),
                               CME(1e15 * u.g, source_temperature=1.5e6 * u.K),
                               Flare(1e31 * u.erg), BANDS, Observation(12 * u.h, 60 * u.s, 2 * u.h))


def star_scenario(flare=None, mass=1e18 * u.g, distance=2 * u.pc, **observation_kw):
    """The K dwarf (nh = 1e17 cm-2, n_e = 1e9 cm-3, 2 MK source) observed 10 h in 60 s bins, onset at 2 h."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(Star(distance, nh=1e17 * u.cm ** -2), Corona(STAR_DEM, density=1e9 * u.cm ** -3),
                               CME(mass, source_temperature=2e6 * u.K), flare, BANDS,
                               Observation(10 * u.h, 60 * u.s, 2 * u.h, **observation_kw))


@functools.cache
def star_flare_scenario():
    """The K dwarf with a 1e33 erg flare in a 5e9 cm loop of 1e19 cm2 cross-section."""
    return star_scenario(Flare(1e33 * u.erg, loop_half_length=5e9 * u.cm, loop_cross_section=1e19 * u.cm ** 2))


@functools.cache
def default_star_scenario():
    """The K dwarf with a 1e18 g CME, no flare (star_scenario's defaults)."""
    return star_scenario()


@functools.cache
def star_1e17_scenario():
    """The K dwarf with a 1e17 g CME, no flare."""
    return star_scenario(mass=1e17 * u.g)


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
