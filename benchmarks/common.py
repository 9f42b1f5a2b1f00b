"""Shared set-ups of the benchmark files: timing, test DEMs, the ten-band instrument, the dimming scenario.

Imports of synthcorona stay inside the functions, so that the harness can read every benchmark
file's ``BENCHMARKS`` list without importing the library.
"""
from __future__ import annotations

import functools
import importlib
import math
import os
import pathlib
import time

import numpy as np

CHIANTI_ENV = "SYNTHCORONA_CHIANTI"


class Skip(Exception):
    """Raised by a benchmark that cannot run here; the reason is printed in its row."""


def best_of(fn, n=3):
    """(best wall time s, CPU time s of that run, result of the last call) over ``n`` calls of ``fn``."""
    best, out = (math.inf, 0.0), None
    for _ in range(n):
        t0, c0 = time.perf_counter(), time.process_time()
        out = fn()
        best = min(best, (time.perf_counter() - t0, time.process_time() - c0))
    return best[0], best[1], out


def timed(fn, n=3, note="", scale=1.0, **extra):
    """The result dict of a benchmark part: best-of-``n`` time of ``fn`` (times ``scale``), CPU time, note."""
    t, c, _ = best_of(fn, n)
    return {"seconds": t * scale, "cpu": c * scale, "note": note, **extra}


def dimming_api(name: str):
    """A public function or constant of the dimming package by name.

    Taken from :mod:`synthcorona.dimming` when the package exports it, else from the public module
    that defines it today (``statistics`` for the detection statistics, ``noise`` for the sampler).
    """
    import synthcorona.dimming as dimming

    if hasattr(dimming, name):
        return getattr(dimming, name)
    for module in ("synthcorona.dimming.statistics", "synthcorona.dimming.noise"):
        mod = importlib.import_module(module)
        if name in getattr(mod, "__all__", ()):
            return getattr(mod, name)
    raise ImportError(f"synthcorona.dimming has no public {name!r}")


def default_table_path() -> pathlib.Path:
    """The file ``load_emissivity()`` reads: ``$SYNTHCORONA_TABLE`` if set, else the embedded table."""
    import importlib.resources

    from synthcorona import emissivity, settings

    env = settings.table_path()
    return env if env is not None else pathlib.Path(str(importlib.resources.files("synthcorona") / "data"
                                                        / emissivity.DEFAULT_TABLE_NAME))


def chianti():
    """(source, hdf5 path) of the CHIANTI copy named by ``$SYNTHCORONA_CHIANTI``, or raise Skip."""
    path = os.environ.get(CHIANTI_ENV)
    if not path or not pathlib.Path(path).exists():
        raise Skip(f"needs CHIANTI: set {CHIANTI_ENV} to a CHIANTI tree")
    from synthcorona.atomic import locate
    from synthcorona.atomic.builder import default_elements

    src = locate.find_chianti(path)
    return src, locate.ensure_hdf5(src, default_elements(src.root))


def gaussian_dems(n, seed=0):
    """``n`` Gaussian DEMs (one vectorised object): peaks 10^6-10^7.2 K, widths 0.1-0.25 dex, EM 1e50-1e52 cm-3."""
    import astropy.units as u

    import synthcorona as sc

    rng = np.random.default_rng(seed)
    return sc.GaussianDEM(rng.uniform(6.0, 7.2, n), rng.uniform(0.1, 0.25, n), 10 ** rng.uniform(50, 52, n) * u.cm**-3)


def single_dems(dems, m):
    """The first ``m`` DEMs of a vectorised GaussianDEM as separate objects (for the loop baselines)."""
    import synthcorona as sc

    return [sc.GaussianDEM(dems.peak_logT[i], dems.width_logT[i], dems.total_em[i]) for i in range(m)]


def ten_band_softx():
    """(instrument, band names): the generic sc-softx design with 10 contiguous bands, 0.2-8 keV log-spaced."""
    import astropy.units as u

    import synthcorona as sc

    edges = np.geomspace(0.2, 8.0, 11)
    bands = {f"b{k}": [edges[k], edges[k + 1]] * u.keV for k in range(10)}
    return sc.load_generic("sc-softx").with_bands(**bands), list(bands)


@functools.cache
def dimming_scenario(n_bins=1000):
    """An invented active K dwarf: 2 pc, N_H 1e17 cm-2, two-component corona (3e52 + 1e52 cm-3 at 10^6.3 and
    10^6.9 K, 1e9 cm-3), a 1e18 g CME from 2 MK plasma, a 1e33 erg flare; bands sc-fe9, sc-fe12 and the soft
    band of sc-softx; ``n_bins`` bins of 60 s with the onset after 3 h."""
    import warnings

    import astropy.units as u

    import synthcorona as sc
    from synthcorona.dimming import CME, Corona, DimmingScenario, Flare, Observation, Star

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(
            Star(2 * u.pc, nh=1e17 * u.cm**-2),
            Corona(sc.MultiComponentDEM([sc.GaussianDEM(6.3, 0.15, 3e52 * u.cm**-3),
                                         sc.GaussianDEM(6.9, 0.15, 1e52 * u.cm**-3)]), density=1e9 * u.cm**-3),
            CME(1e18 * u.g, source_temperature=2e6 * u.K),
            Flare(1e33 * u.erg, loop_half_length=5e9 * u.cm, loop_cross_section=1e19 * u.cm**2),
            ["sc-fe9", "sc-fe12", ("sc-softx", "soft")],
            Observation(n_bins * u.min, 60 * u.s, 3 * u.h))


def toy_light_curves(n_bins=1000):
    """(with event, without event) expected counts per 1 s bin: 10 ct/s quiescent, a flare at 100 s (+40 ct/s,
    e-folding 60 s) and a dimming of 5 % of the quiescent rate from 100 s, recovering over 1500 s."""
    t = np.arange(n_bins) + 0.5
    q = np.full(n_bins, 10.0)
    flare = 40.0 * np.exp(-(t - 100) / 60.0) * (t >= 100)
    profile = np.where(t >= 100, np.exp(-(t - 100) / 1500.0), 0.0)
    without = q + flare
    return without - 0.05 * q * profile, without


def relative_difference(ours, base):
    """Agreement note of two arrays of per-DEM results compared element by element."""
    a, b = np.asarray(ours), np.asarray(base)
    k = min(len(a), len(b))
    return f"max relative difference {np.max(np.abs(a[:k] / b[:k] - 1)):.1e} ({k} DEMs compared)"
