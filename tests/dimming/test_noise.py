"""Noise models: Poisson samplers, red noise, seeds, chunks and memory (synthcorona.dimming.noise).

Outside references used below:
* scipy.stats.poisson as the reference Poisson distribution;
* Poisson variance Var N = mu, hence the Gaussian-limit step S/N (Li & Ma 1983, ApJ 272, 317, eq. 5);
* the damped random walk covariance sigma^2 exp(-|dt|/tau) (Kelly, Bechtold & Siemiginowska
  2009, ApJ 698, 895).
No timing asserts: speed is in benchmarks/bench_statistics.py.
"""
import math

import astropy.units as u
import numpy as np
import pytest
from dimming_setups import CTS, step_curve
from scipy import stats

from synthcorona.dimming import noise
from synthcorona.dimming.noise import (
    chunk_size_for,
    damped_random_walk,
    iter_realisations,
    poisson_counts,
)
from synthcorona.dimming.statistics import step_snr
from synthcorona.errors import InputError


def test_poisson_inversion_table_is_exact():
    """The table sampler returns exactly scipy.stats.poisson.ppf of the same uniforms."""
    lam = np.array([0.0, 0.01, 0.7, 3.0, 20.0, 150.0, 1e4, 2e6])
    uni = np.random.default_rng(3).random((20000, lam.size))
    got = noise._PoissonTable(lam).sample(uni)
    np.testing.assert_array_equal(got, stats.poisson.ppf(uni, lam).astype(np.int64))


def test_monte_carlo_step_snr_matches_analytic():
    """Per-bin Poisson simulation of a step (1e4 counts pre, 9e3 post): mean/std of the rate
    difference equals step_snr (Poisson variance Var N = mu) to 3 %."""
    rate = np.r_[np.full(200, 50.0), np.full(200, 45.0)] * CTS
    counts = poisson_counts(rate, 1 * u.s, 20000, seed=11)
    diff = counts[:, :200].sum(axis=1) / 200.0 - counts[:, 200:].sum(axis=1) / 200.0
    mc = diff.mean() / diff.std(ddof=1)
    expected = float(step_snr(50 * CTS, 45 * CTS, 200 * u.s, 200 * u.s))
    assert mc == pytest.approx(expected, rel=0.03)
    # and the per-bin counts have Poisson mean and variance
    assert counts[:, :200].mean() == pytest.approx(50.0, rel=2e-3)
    assert counts[:, :200].var() == pytest.approx(50.0, rel=2e-2)


# ----------------------------------------------------------------------------- red noise
def test_damped_random_walk_covariance_uniform_grid():
    """Stationary variance sigma^2 and autocorrelation exp(-dt/tau) (Kelly et al. 2009)."""
    n = 20000
    t = np.arange(0, 100, 5.0)
    x = damped_random_walk(t * u.s, 0.2, 30 * u.s, n, seed=1)
    assert x.shape == (n, t.size)
    var = x.var(axis=0)
    np.testing.assert_allclose(var, 0.04, rtol=0.05)  # SE of a variance sqrt(2/n) = 1 %
    for lag in (1, 4, 10):
        rho = np.mean(x[:, :-lag] * x[:, lag:]) / 0.04
        assert rho == pytest.approx(math.exp(-5.0 * lag / 30.0), abs=0.02)


def test_damped_random_walk_covariance_irregular_grid():
    """Irregular sampling (segmented cumsum path), including steps >> tau and spans > 200 tau."""
    t = np.array([0.0, 1.0, 4.0, 4.5, 20.0, 400.0, 401.0, 2000.0])
    x = damped_random_walk(t * u.s, 0.3, 2 * u.s, 40000, seed=2)
    cov = np.cov(x, rowvar=False)
    ref = 0.09 * np.exp(-np.abs(t[:, None] - t[None, :]) / 2.0)
    np.testing.assert_allclose(cov, ref, atol=0.09 * 0.03)  # SE ~ sigma^2 sqrt(2/n) = 0.7 % of sigma^2


def test_red_noise_sampler_matches_public_drw_and_raises_variance():
    rate = np.full(300, 20.0) * CTS
    rn = (0.1, 40 * u.s)
    counts = poisson_counts(rate, 1 * u.s, 4000, seed=3, red_noise=rn)
    sums = counts.sum(axis=1)
    delta = damped_random_walk((np.arange(300) + 0.5) * u.s, 0.1, 40 * u.s, 4000, seed=3)
    # same seed => the sampler used exactly these fluctuations: mean rate per realisation tracks them
    lam_sum = (20.0 * np.maximum(1 + delta, 0)).sum(axis=1)
    assert np.corrcoef(sums, lam_sum)[0, 1] > 0.95
    # Var(sum) = E[lam_sum] + Var(lam_sum) (Poisson given the red noise; law of total variance)
    assert sums.var() == pytest.approx(lam_sum.mean() + lam_sum.var(), rel=0.1)


# ----------------------------------------------------------------------------- seeds and chunks
def test_same_seed_same_numbers_for_any_chunk_size():
    rate = step_curve(n_bins=700, depth=0.1)
    a = np.concatenate(list(iter_realisations(rate, 1 * u.s, 3000, seed=9, chunk_size=64)))
    b = np.concatenate(list(iter_realisations(rate, 1 * u.s, 3000, seed=9, chunk_size=5000)))
    c = poisson_counts(rate, 1 * u.s, 3000, seed=9)
    np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(a, c)
    d = poisson_counts(rate, 1 * u.s, 1000, seed=9)  # a shorter run is a prefix
    np.testing.assert_array_equal(d, a[:1000])
    e = poisson_counts(rate, 1 * u.s, 1000, seed=10)
    assert not np.array_equal(d, e)
    # red-noise path
    f = np.concatenate(list(iter_realisations(rate, 1 * u.s, 700, seed=9, chunk_size=16, red_noise=(0.1, 50 * u.s))))
    g = np.concatenate(list(iter_realisations(rate, 1 * u.s, 700, seed=9, chunk_size=700, red_noise=(0.1, 50 * u.s))))
    np.testing.assert_array_equal(f, g)
    # a numpy Generator in the same state gives the same numbers
    h1 = poisson_counts(rate, 1 * u.s, 50, seed=np.random.default_rng(4))
    h2 = poisson_counts(rate, 1 * u.s, 50, seed=np.random.default_rng(4))
    np.testing.assert_array_equal(h1, h2)


# ----------------------------------------------------------------------------- memory discipline
def test_chunks_respect_memory_bound():
    n_bins = 1000
    budget = 64 * 2**20
    cs = chunk_size_for(n_bins, budget)
    assert cs * n_bins * 8 * noise.WORK_ARRAYS <= budget
    assert cs % noise.block_rows(n_bins) == 0
    shapes = [c.shape for c in iter_realisations(step_curve(), 1 * u.s, 3 * cs + 17, seed=0, memory_budget=budget)]
    assert all(s[0] <= cs and s[1] == n_bins for s in shapes)
    assert sum(s[0] for s in shapes) == 3 * cs + 17
    # The documented 1e6 x 1000 bound: default-budget chunk arrays plus 8 bytes per kept statistic < 2 GB.
    cs_default = chunk_size_for(n_bins)
    assert cs_default * n_bins * 8 * noise.WORK_ARRAYS + 8 * 10**6 < 2 * 10**9


def test_poisson_counts_refuses_huge_results():
    with pytest.raises(InputError, match="iter_realisations"):
        poisson_counts(step_curve(), 1 * u.s, 10**6)


# ----------------------------------------------------------------------------- bad inputs
@pytest.mark.parametrize("call,error,match", [
    (lambda: poisson_counts(np.ones(10), 1 * u.s, 10), u.UnitsError, "rate"),
    (lambda: poisson_counts(-np.ones(10) * CTS, 1 * u.s, 10), InputError, r"rate=.*outside the valid range \[0, inf\]"),
    (lambda: poisson_counts(np.ones(10) * CTS, 0 * u.s, 10), InputError, "bin_width"),
    (lambda: damped_random_walk(np.arange(5) * u.s, -0.1, 1 * u.s, 3), InputError, r"amplitude"),
    (lambda: damped_random_walk(np.array([0.0, 2.0, 1.0]) * u.s, 0.1, 1 * u.s, 3), InputError, "strictly increasing"),
])
def test_bad_inputs(call, error, match):
    with pytest.raises(error, match=match):
        call()
