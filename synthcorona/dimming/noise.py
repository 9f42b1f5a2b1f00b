r"""Counting noise and red-noise variability for simulated light curves.

The physics (quiescent count rate, dimming depth and time profile, flare) arrives here
as arrays of *expected* count rates per time bin; this module turns them into random
realisations, many at once.

Poisson counting noise
----------------------
Counts in bin :math:`i` of realisation :math:`j` are independent Poisson variables of
mean :math:`\mu_i = (r_i + b_i)\,\Delta t_i` (source rate :math:`r`, background rate
:math:`b`, bin width :math:`\Delta t`). Two exact samplers are used:

* *Inversion* when every bin has the same mean in every realisation (no red noise):
  per-bin tables of the Poisson cumulative distribution (``scipy.special.pdtr``) and a
  guide table turn one uniform variate into one count, ``n = F^{-1}(u; mu)``. Besides
  being several times faster than :meth:`numpy.random.Generator.poisson` for
  :math:`\mu \gtrsim 10`, inversion makes counts *monotone in the mean* under common
  random numbers: with the same seed, a deeper dimming never gives more counts in any
  bin, so detection probabilities computed with one seed are monotone in depth. Tail
  probabilities below ~1e-16 are lumped onto the table ends.
* :meth:`numpy.random.Generator.poisson` when means vary between realisations (red
  noise) and there are many columns; ``scipy.stats.poisson.ppf`` inversion when they
  vary but there are at most :data:`PPF_MAX_COLUMNS` columns (window sums).

Window sums (``groups=``) are drawn directly as Poisson variables of the summed mean:
exact, since a sum of independent Poisson variables is Poisson (conditionally on the
red-noise realisation when there is one). A window statistic on a 1000-bin light curve
then needs 2 random numbers per realisation instead of 1000.

Red noise
---------
Stellar coronae flicker. :func:`damped_random_walk` draws the relative fluctuation
:math:`\delta(t)` as a damped random walk (an Ornstein--Uhlenbeck process), the model of
Kelly, Bechtold & Siemiginowska (2009, ApJ 698, 895) for quasar variability: stationary,
Gaussian, with rms ``amplitude`` :math:`\sigma` and covariance
:math:`\sigma^2 \exp(-|t - t'|/\tau)` for damping ``timescale`` :math:`\tau`. Sampling is
exact at any spacing,

.. math:: x_{i+1} = x_i\, e^{-\Delta t_i/\tau} + \sigma \sqrt{1 - e^{-2\Delta t_i/\tau}}\;\varepsilon_{i+1},
          \qquad x_0 = \sigma \varepsilon_0,\ \varepsilon \sim N(0, 1).

On a uniform grid the recursion is a first-order IIR filter and runs in
:func:`scipy.signal.lfilter` along the time axis (vectorised C, all realisations at
once). On a non-uniform grid it is written as
:math:`x_i = A_i\,(x_s + \sum_{j \le i} e_j / A_j)` with :math:`A_i = e^{-(t_i - t_s)/\tau}`
and evaluated with ``cumsum`` in segments spanning at most ``200 tau`` (so
:math:`1/A` stays finite); the segments are the only Python loop, and there is one
segment unless the light curve is hundreds of damping times long. In the samplers the
fluctuation is applied multiplicatively, :math:`\mu_i \to \mu_i\,\max(1 + \delta_i, 0)`,
to the source (not the background); the clip biases the mean upward by a negligible
amount for ``amplitude <= 0.3`` (the Gaussian tail below -1 has probability < 4e-4).

Seeds, blocks and memory
------------------------
Random numbers are drawn in a fixed layout of *blocks* of :func:`block_rows` realisations
(a power of two that depends only on the number of columns -- of bins when red noise is
drawn per bin -- about 262,144 numbers per block); block ``b`` of stream ``s`` uses its own :class:`numpy.random.Generator` seeded by
``SeedSequence(entropy, spawn_key=(..., s, b))``. Results therefore depend only on the
seed and the inputs, never on ``chunk_size`` (a chunk is a whole number of blocks), and
the first ``n`` realisations of a larger run equal a run of ``n``.

Work is done in chunks of realisations whose size is set so that about
:data:`WORK_ARRAYS` float64 arrays of shape (chunk, columns) fit in ``memory_budget``
(default :data:`MEMORY_BUDGET`, 256 MiB; a chunk is at least one block, so budgets below
~24 MiB act as ~24 MiB). Peak memory is therefore bounded by the budget plus 8 bytes per
realisation for the statistics kept for threshold calibration: 1e6 realisations of 1000
bins need < 0.27 GB (measured tracemalloc peak ~5 arrays, i.e. about half the budget), far
below the 2 GB ceiling.
"""
from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Iterator

import astropy.units as u
import numpy as np
from scipy import signal, special, stats

from ..errors import InputError
from ..validation import as_quantity, check_finite, check_range

__all__ = [
    "MEMORY_BUDGET", "MAX_RESULT_BYTES", "WORK_ARRAYS", "BLOCK_ELEMENTS", "PPF_MAX_COLUMNS",
    "RedNoise", "CountSampler", "as_seed_sequence", "block_rows", "chunk_size_for",
    "poisson_counts", "iter_realisations", "damped_random_walk",
]

#: Default working-memory budget of one chunk (bytes).
MEMORY_BUDGET = 256 * 2**20
#: Largest array :func:`poisson_counts` will return (bytes); use :func:`iter_realisations` beyond.
MAX_RESULT_BYTES = 2 * 2**30
#: Number of (chunk, columns) float64 arrays a chunk is allowed to hold at once (sampling plus
#: the likelihood fit of :mod:`synthcorona.dimming.statistics`; measured tracemalloc peak ~5.
#: A chunk is at least one block, so budgets below ~WORK_ARRAYS x 8 x BLOCK_ELEMENTS bytes = 24 MiB
#: are not honoured exactly).
WORK_ARRAYS = 12
#: Random numbers per block of the fixed stream layout (block rows = this / columns, power of 2).
BLOCK_ELEMENTS = 2**18
#: With red noise, columns up to this number are sampled by exact ``scipy.stats.poisson.ppf``
#: inversion (monotone under common random numbers); more columns use ``Generator.poisson``.
PPF_MAX_COLUMNS = 16
#: Largest total size of the per-column inversion tables (entries); larger means use ``Generator.poisson``.
TABLE_MAX_ENTRIES = 4_000_000
#: Stream identifiers inside one seed: Poisson variates and red-noise normals.
STREAM_POISSON = 0
STREAM_VARIABILITY = 1
_DRW_SEGMENT_SPAN = 200.0  # damping times per cumsum segment (exp(200) ~ 7e86, far from overflow)
_GUIDE_DENSITY = 4  # guide slots per table entry: ~1/8 of draws need one extra comparison
COUNT_RATE = u.ct / u.s


# ----------------------------------------------------------------------------- argument helpers
def as_seed_sequence(seed) -> np.random.SeedSequence:
    """Normalise ``seed`` to a :class:`numpy.random.SeedSequence`.

    ``None`` draws fresh entropy (recorded in results so a run can be repeated); a
    non-negative integer or a ``SeedSequence`` is used as is; a
    :class:`numpy.random.Generator` contributes 256 bits drawn from it (so the same
    generator state gives the same numbers, and the generator advances).
    """
    if seed is None:
        return np.random.SeedSequence()
    if isinstance(seed, np.random.SeedSequence):
        return seed
    if isinstance(seed, np.random.Generator):
        return np.random.SeedSequence([int(x) for x in seed.integers(0, 2**63, size=4, dtype=np.uint64)])
    if isinstance(seed, numbers.Integral) and not isinstance(seed, bool):
        if seed < 0:
            raise InputError(f"seed={seed} is outside the valid range [0, inf)")
        return np.random.SeedSequence(int(seed))
    raise InputError(f"seed={seed!r} must be None, a non-negative integer, a numpy SeedSequence or a numpy Generator")


def child_sequence(seq: np.random.SeedSequence, *key: int) -> np.random.SeedSequence:
    """The child of ``seq`` with spawn key ``seq.spawn_key + key`` (deterministic, no spawn counter)."""
    return np.random.SeedSequence(seq.entropy, spawn_key=tuple(seq.spawn_key) + tuple(int(k) for k in key))


def _block_generator(seq, stream: int, block: int) -> np.random.Generator:
    return np.random.Generator(np.random.PCG64(child_sequence(seq, stream, block)))


def check_count(name: str, value, lo: int = 1) -> int:
    """A positive integer count (``n_realisations``, ``chunk_size``) -> int, else a named error."""
    ok = isinstance(value, numbers.Integral) and not isinstance(value, bool)
    if not ok and isinstance(value, float) and math.isfinite(value) and value == int(value):
        ok = True
    if not ok:
        raise InputError(f"{name}={value!r} must be an integer >= {lo}")
    value = int(value)
    if value < lo:
        raise InputError(f"{name}={value} is outside the valid range [{lo}, inf)")
    return value


def rate_values(name: str, rate) -> np.ndarray:
    """Count rates as a float array in counts s^-1 (Quantity in ct/s or 1/s required; >= 0, finite)."""
    if isinstance(rate, u.Quantity) and rate.unit.is_equivalent(1 / u.s):
        vals = rate.to_value(1 / u.s)
    else:
        vals = as_quantity(name, rate, COUNT_RATE).value
    vals = np.asarray(vals, dtype=float)
    check_range(name, vals, lo=0.0, unit_label="ct/s")
    return vals


def time_values(name: str, value, positive: bool = True) -> np.ndarray:
    """Times as a float array in seconds (Quantity required; finite; > 0 if ``positive``)."""
    vals = np.asarray(as_quantity(name, value, u.s).value, dtype=float)
    if positive:
        check_range(name, vals, lo=0.0, unit_label="s", inclusive=False)
    else:
        check_finite(name, vals)
    return vals


def bin_widths(bin_width, n_bins: int) -> np.ndarray:
    """Per-bin widths (s), shape (n_bins,), from a scalar or per-bin ``bin_width`` Quantity."""
    w = time_values("bin_width", bin_width)
    if w.ndim == 0:
        return np.full(n_bins, float(w))
    if w.shape != (n_bins,):
        raise InputError(f"bin_width has shape {w.shape}; give a scalar or one width per bin, shape ({n_bins},)")
    return w


def block_rows(n_columns: int) -> int:
    """Realisations per block of the fixed random-stream layout (power of 2 in [16, 4096])."""
    rows = 2 ** int(math.floor(math.log2(max(BLOCK_ELEMENTS / max(int(n_columns), 1), 1.0))))
    return int(min(max(rows, 16), 4096))


def chunk_size_for(n_columns: int, memory_budget: int = MEMORY_BUDGET, work_arrays: int = WORK_ARRAYS,
                   rows: int | None = None) -> int:
    """Largest chunk (a multiple of the block rows, at least one block) within ``memory_budget``.

    ``work_arrays`` float64 arrays of shape (chunk, n_columns) must fit in the budget.
    """
    memory_budget = check_count("memory_budget", memory_budget, lo=2**16)
    rows = block_rows(n_columns) if rows is None else rows
    per_row = 8 * max(int(n_columns), 1) * work_arrays
    n_blocks = max(memory_budget // (per_row * rows), 1)
    return int(n_blocks * rows)


# ----------------------------------------------------------------------------- red noise
@dataclass(frozen=True)
class RedNoise:
    """Multiplicative damped-random-walk variability of the source (Kelly et al. 2009, ApJ 698, 895).

    Parameters
    ----------
    amplitude : float
        rms of the relative fluctuation delta(t), in [0, 1]. Values above ~0.3 are clipped
        noticeably at delta = -1 (the rate cannot go negative).
    timescale : Quantity [time]
        Damping timescale tau (> 0): the autocorrelation is ``exp(-|dt| / tau)``.
    """

    amplitude: float
    timescale: u.Quantity

    def __post_init__(self):
        check_range("red_noise.amplitude", self.amplitude, lo=0.0, hi=1.0)
        tau = time_values("red_noise.timescale", self.timescale)
        if tau.ndim != 0:
            raise InputError(f"red_noise.timescale must be a scalar time, got shape {tau.shape}")

    @property
    def tau_s(self) -> float:
        """The damping timescale tau in seconds."""
        return float(self.timescale.to_value(u.s))

    @property
    def description(self) -> str:
        """One line for result attributes: "damped random walk, amplitude 0.05, timescale 3600 s"."""
        return f"damped random walk, amplitude {self.amplitude:g}, timescale {self.tau_s:g} s"

    @classmethod
    def coerce(cls, value) -> "RedNoise | None":
        """Accept ``None``, a :class:`RedNoise` or an ``(amplitude, timescale)`` pair."""
        if value is None or isinstance(value, cls):
            return value
        try:
            amp, tau = value
        except (TypeError, ValueError):
            raise InputError(f"red_noise={value!r} must be None, a RedNoise or an (amplitude, timescale) pair") from None
        return cls(float(amp), tau)


class _DRWPlan:
    """Precomputed coefficients of the exact DRW recursion on a fixed set of times."""

    def __init__(self, times_s: np.ndarray, amplitude: float, tau_s: float):
        t = np.asarray(times_s, dtype=float)
        if t.ndim != 1 or t.size < 1:
            raise InputError(f"times must be a 1-D array with at least one element, got shape {t.shape}")
        dt = np.diff(t)
        if np.any(dt <= 0):
            raise InputError(f"times must be strictly increasing; found a step of {dt[dt <= 0][0]:g} s")
        self.n = t.size
        self.sigma = float(amplitude)
        self.tau = float(tau_s)
        self.uniform = t.size < 3 or np.allclose(dt, dt[0], rtol=1e-9, atol=0.0)
        if self.uniform:
            self.phi = math.exp(-dt[0] / tau_s) if t.size > 1 else 0.0
            self.innov = self.sigma * math.sqrt(-math.expm1(-2.0 * dt[0] / tau_s)) if t.size > 1 else 0.0
        else:
            self.innov_scale = np.concatenate([[self.sigma], self.sigma * np.sqrt(-np.expm1(-2.0 * dt / tau_s))])
            # Segments of span <= _DRW_SEGMENT_SPAN tau; within one, decay relative to its first time.
            seg = np.floor((t - t[0]) / (_DRW_SEGMENT_SPAN * tau_s)).astype(np.int64)
            starts = np.flatnonzero(np.r_[True, seg[1:] != seg[:-1]])
            self.segments = list(zip(starts, np.r_[starts[1:], t.size]))
            self.t = t

    def draw(self, rng: np.random.Generator, rows: int) -> np.ndarray:
        """``rows`` realisations of x(t), shape (rows, n); consumes ``rows * n`` standard normals."""
        eps = rng.standard_normal((rows, self.n))
        if self.sigma == 0.0:
            eps[...] = 0.0
            return eps
        if self.uniform:
            first = eps[:, 0] * self.sigma  # stationary start x_0 ~ N(0, sigma^2)
            eps *= self.innov
            eps[:, 0] = first
            if self.n > 1:
                return signal.lfilter([1.0], [1.0, -self.phi], eps, axis=1)
            return eps
        eps *= self.innov_scale
        out = eps
        carry = None
        for s, e in self.segments:
            ts = self.t[s:e] - self.t[s]
            if carry is not None:  # first element of the segment continues the previous one
                out[:, s] += carry * math.exp(-(self.t[s] - self.t[s - 1]) / self.tau)
            a_inv = np.exp(ts / self.tau)
            seg = out[:, s:e]
            seg *= a_inv
            np.cumsum(seg, axis=1, out=seg)
            seg /= a_inv
            carry = seg[:, -1].copy()
        return out


def damped_random_walk(times, amplitude, timescale, n_realisations, seed=None) -> np.ndarray:
    r"""Relative fluctuation :math:`\delta(t)` of a damped random walk, shape (n_realisations, n_times).

    The damped random walk (Ornstein--Uhlenbeck process) of Kelly, Bechtold & Siemiginowska
    (2009, ApJ 698, 895): stationary Gaussian process of zero mean, rms ``amplitude`` and
    covariance :math:`\sigma^2 e^{-|t_i - t_j|/\tau}`, sampled exactly at ``times`` with
    :math:`x_{i+1} = x_i e^{-\Delta t/\tau} + \sigma\sqrt{1 - e^{-2\Delta t/\tau}}\,\varepsilon`
    (``scipy.signal.lfilter`` along time on a uniform grid; segmented ``cumsum`` otherwise,
    see the module notes). Apply it multiplicatively, ``rate * (1 + delta)``, or
    additively, ``rate + mean_rate * delta``, as the model requires.

    Parameters
    ----------
    times : Quantity [time], shape (n_times,)
        Strictly increasing sample times.
    amplitude : float
        rms of the fluctuation (>= 0; dimensionless when applied multiplicatively).
    timescale : Quantity [time]
        Damping timescale tau (> 0).
    n_realisations : int
        Number of independent realisations.
    seed : None, int, SeedSequence or Generator
        Same seed => same numbers (drawn in the fixed block layout of :func:`block_rows`,
        identical to the red noise that :class:`CountSampler` applies at the same times).
    """
    t = time_values("times", times, positive=False)
    check_range("amplitude", amplitude, lo=0.0)
    tau = time_values("timescale", timescale)
    if tau.ndim != 0:
        raise InputError(f"timescale must be a scalar time, got shape {tau.shape}")
    n = check_count("n_realisations", n_realisations)
    plan = _DRWPlan(np.atleast_1d(t), float(amplitude), float(tau))
    rows = block_rows(plan.n)
    if n * plan.n * 8 > MAX_RESULT_BYTES:
        raise InputError(f"n_realisations={n} x {plan.n} times needs {n * plan.n * 8 / 2**30:.1f} GiB, above the "
                         f"{MAX_RESULT_BYTES / 2**30:.0f} GiB limit; draw fewer realisations per call")
    seq = as_seed_sequence(seed)
    out = np.empty((n, plan.n))
    for b in range(-(-n // rows)):
        r0, r1 = b * rows, min((b + 1) * rows, n)
        out[r0:r1] = plan.draw(_block_generator(seq, STREAM_VARIABILITY, b), r1 - r0)
    return out


# ----------------------------------------------------------------------------- Poisson inversion table
class _PoissonTable:
    """Exact Poisson inversion for a fixed mean per column (CDF tables plus a guide table)."""

    def __init__(self, lam: np.ndarray):
        lam = np.asarray(lam, dtype=float)
        sd = np.sqrt(lam)
        lo = np.maximum(np.floor(lam - 9.0 * sd - 10.0), 0.0).astype(np.int64)
        hi = np.ceil(lam + 9.0 * sd + 25.0).astype(np.int64)
        hi = np.where(lam == 0, 0, hi)
        lens = hi - lo + 1
        self.size = int(lens.sum())
        off = np.concatenate([[0], np.cumsum(lens)])
        col = np.repeat(np.arange(lam.size), lens)
        k = np.arange(self.size) - off[col] + lo[col]
        cdf = special.pdtr(k, lam[col])
        cdf[off[1:] - 1] = 1.0  # upper tail (< 1e-16) lumped onto the last entry; u < 1 always stops here
        self.cdf = cdf
        self.k = k
        # Guide table, S = _GUIDE_DENSITY * lens[c] slots for column c: slot j -> first entry with
        # cdf >= j / S, i.e. off[c] + #(entries of column c with cdf < j / S). Entry e has cdf < j / S
        # for all j >= floor(cdf_e S) + 1: count entries by that first slot, accumulate per column.
        slots = _GUIDE_DENSITY * lens
        goff = np.concatenate([[0], np.cumsum(slots)])
        S = slots[col]
        first_slot = np.floor(cdf * S).astype(np.int64) + 1
        inside = first_slot < S
        per_slot = np.bincount(goff[col[inside]] + first_slot[inside], minlength=int(goff[-1]))
        cum = np.cumsum(per_slot)
        before = np.concatenate([[0], cum[goff[1:-1] - 1]])  # cumulative count before each column
        gcol = np.repeat(np.arange(lam.size), slots)
        self.guide = off[gcol] + cum - before[gcol]
        self.gm = slots.astype(float)
        self.gmax = slots - 1
        self.goff = goff[:-1]

    def sample(self, u: np.ndarray) -> np.ndarray:
        """Counts F^{-1}(u) for uniforms ``u`` of shape (rows, n_columns)."""
        slot = (u * self.gm).astype(np.int64)
        np.minimum(slot, self.gmax, out=slot)
        slot += self.goff
        idx = self.guide[slot].ravel()
        del slot
        uf = u.ravel()
        sel = np.flatnonzero(self.cdf[idx] < uf)
        while sel.size:
            idx[sel] += 1
            sel = sel[self.cdf[idx[sel]] < uf[sel]]
        return self.k[idx].reshape(u.shape)


# ----------------------------------------------------------------------------- samplers
#: Largest expected counts in one bin the Poisson sampler accepts: numpy's Generator.poisson refuses
#: lam above about 1e19 ("lam value too large"); 1e18 keeps a margin for the red-noise factor.
MAX_EXPECTED_COUNTS = 1e18


class CountSampler:
    """Poisson realisations of a light curve of known expected count rate, in chunks.

    Parameters
    ----------
    rate : Quantity [ct/s], shape (n_bins,)
        Expected source count rate per bin (>= 0).
    bin_width : Quantity [time], scalar or (n_bins,)
        Bin widths (> 0).
    background : Quantity [ct/s], scalar or (n_bins,), optional
        Expected background rate added to every realisation (not subject to red noise).
    red_noise : RedNoise or (amplitude, timescale), optional
        Multiplicative damped-random-walk variability of the source, sampled at bin centres.
    groups : int array (n_bins,), optional
        Column label per bin (0..G-1; -1 drops the bin). Realisations then hold the summed
        counts per label, drawn directly (exact: sums of independent Poisson variables are
        Poisson).
    start_time : Quantity [time]
        Left edge of the first bin (only sets the absolute times; results do not depend on it).

    Notes
    -----
    Calling the sampler, ``sampler(n_realisations, seed, chunk_size)``, returns an iterator
    of int64 arrays of shape (rows, n_columns) with ``rows <= chunk_size``; this is the
    ``null_sampler`` interface of :func:`synthcorona.dimming.thresholds.calibrate_threshold`.
    """

    def __init__(self, rate, bin_width, *, background=None, red_noise=None, groups=None, start_time=0 * u.s):
        r = rate_values("rate", rate)
        if r.ndim != 1 or r.size < 1:
            raise InputError(f"rate must be a 1-D array of per-bin rates, got shape {r.shape}")
        w = bin_widths(bin_width, r.size)
        t0 = time_values("start_time", start_time, positive=False)
        bg = None
        if background is not None:
            bgr = rate_values("background", background)
            if bgr.ndim not in (0, 1) or (bgr.ndim == 1 and bgr.shape != r.shape):
                raise InputError(f"background has shape {bgr.shape}; give a scalar or shape {r.shape} like rate")
            bg = np.broadcast_to(bgr, r.shape) * w
        centres = float(t0) + np.cumsum(w) - 0.5 * w
        self._setup(r * w, bg, centres, RedNoise.coerce(red_noise), groups)

    @classmethod
    def from_expected_counts(cls, expected, *, background=None, times=None, red_noise=None,
                             groups=None) -> "CountSampler":
        """Build from expected counts per bin (plain arrays; ``times`` in s at bin centres, needed with red noise).

        Inputs are checked (finite, >= 0, matching shapes) but carry no units.
        """
        mu = np.asarray(expected, dtype=float)
        check_range("expected", mu, lo=0.0, unit_label="counts")
        if mu.ndim != 1:
            raise InputError(f"expected must be 1-D (one value per bin), got shape {mu.shape}")
        bg = None
        if background is not None:
            bg = np.asarray(background, dtype=float)
            check_range("background", bg, lo=0.0, unit_label="counts")
            if bg.shape != mu.shape:
                raise InputError(f"background has shape {bg.shape}, expected {mu.shape} like expected")
        red_noise = RedNoise.coerce(red_noise)
        if times is None:
            if red_noise is not None:
                raise InputError("times (bin centres, s) are required with red_noise")
            times = np.arange(mu.size, dtype=float)
        times = np.asarray(times, dtype=float)
        if times.shape != mu.shape:
            raise InputError(f"times has shape {times.shape}, expected {mu.shape} like expected")
        self = cls.__new__(cls)
        self._setup(mu, bg, times, red_noise, groups)
        return self

    def _setup(self, mu, bg, centres, red_noise, groups):
        total = mu if bg is None else mu + bg
        if total.size and float(np.max(total)) > MAX_EXPECTED_COUNTS:
            k = int(np.argmax(total))
            raise InputError(f"expected counts per bin reach {float(total[k]):.3g} (bin {k}), above the "
                             f"{MAX_EXPECTED_COUNTS:.3g} counts per bin the Poisson sampler handles (numpy's limit "
                             "for its Poisson generator); lower the emission measure or the bin width, or move the "
                             "star further away", argument="rate")
        self.expected = mu
        self.background = bg
        self.times = centres
        self.red_noise = red_noise
        n_bins = mu.size
        if groups is None:
            self.groups = None
            self.n_columns = n_bins
            self._G = None
        else:
            g = np.asarray(groups)
            if g.shape != (n_bins,) or not np.issubdtype(g.dtype, np.integer):
                raise InputError(f"groups must be an integer label per bin, shape ({n_bins},); got "
                                 f"shape {g.shape}, dtype {g.dtype}")
            check_range("groups", g, lo=-1)
            if not np.any(g >= 0):
                raise InputError("groups drops every bin (all labels are -1)")
            self.groups = g
            self.n_columns = int(g.max()) + 1
            G = np.zeros((n_bins, self.n_columns))
            keep = g >= 0
            G[np.flatnonzero(keep), g[keep]] = 1.0
            self._G = G
        total = mu if bg is None else mu + bg
        self.column_means = total if self._G is None else total @ self._G
        # Memory per realisation scales with the bins when red noise is drawn per bin.
        self.width = n_bins if red_noise is not None else self.n_columns
        self.block_rows = block_rows(self.width)
        self._table = None
        if red_noise is None:
            est = np.sum(np.ceil(18.0 * np.sqrt(self.column_means) + 36.0))
            if est <= TABLE_MAX_ENTRIES:
                self._table = _PoissonTable(self.column_means)
        else:
            self._drw = _DRWPlan(self.times, red_noise.amplitude, red_noise.tau_s)

    @property
    def method(self) -> str:
        """Sampling method: 'inversion-table', 'inversion-ppf' or 'numpy-poisson'."""
        if self._table is not None:
            return "inversion-table"
        if self.red_noise is not None and self.n_columns <= PPF_MAX_COLUMNS:
            return "inversion-ppf"
        return "numpy-poisson"

    def chunk_size(self, memory_budget: int = MEMORY_BUDGET, work_arrays: int = WORK_ARRAYS) -> int:
        """Default chunk size: whole blocks, ``work_arrays`` float64 (chunk, width) arrays within the budget."""
        return chunk_size_for(self.width, memory_budget, work_arrays, rows=self.block_rows)

    def block(self, seq: np.random.SeedSequence, b: int, rows: int) -> np.ndarray:
        """Realisations of block ``b`` (its first ``rows`` rows), shape (rows, n_columns), int64."""
        rng = _block_generator(seq, STREAM_POISSON, b)
        if self._table is not None:
            return self._table.sample(rng.random((rows, self.n_columns)))
        if self.red_noise is None:
            return rng.poisson(self.column_means, size=(rows, self.n_columns))
        delta = self._drw.draw(_block_generator(seq, STREAM_VARIABILITY, b), rows)
        delta += 1.0
        np.maximum(delta, 0.0, out=delta)
        lam = np.multiply(delta, self.expected, out=delta)
        if self.background is not None:
            lam += self.background
        if self._G is not None:
            lam = lam @ self._G
        if self.n_columns <= PPF_MAX_COLUMNS:
            # u == 0 exactly (probability 2^-53) would give ppf = -1; clip to 0.
            return np.maximum(stats.poisson.ppf(rng.random(lam.shape), lam), 0.0).astype(np.int64)
        return rng.poisson(lam)

    def __call__(self, n_realisations, seed=None, chunk_size=None, memory_budget=MEMORY_BUDGET) -> Iterator[np.ndarray]:
        n = check_count("n_realisations", n_realisations)
        seq = as_seed_sequence(seed)
        cs = self.chunk_size(memory_budget) if chunk_size is None else self._round_chunk(chunk_size)
        return self._iterate(n, seq, cs)

    def _round_chunk(self, chunk_size) -> int:
        cs = check_count("chunk_size", chunk_size)
        return -(-cs // self.block_rows) * self.block_rows

    def _iterate(self, n, seq, cs):
        rows = self.block_rows
        for start in range(0, n, cs):
            stop = min(n, start + cs)
            out = np.empty((stop - start, self.n_columns), dtype=np.int64)
            for b in range(start // rows, -(-stop // rows)):
                r0, r1 = b * rows, min((b + 1) * rows, stop)
                out[r0 - start:r1 - start] = self.block(seq, b, r1 - r0)
            yield out


def iter_realisations(rate, bin_width, n_realisations, seed=None, *, background=None, red_noise=None,
                      groups=None, chunk_size=None, memory_budget=MEMORY_BUDGET,
                      start_time=0 * u.s) -> Iterator[np.ndarray]:
    """Iterate over Poisson realisations of a light curve in chunks of bounded memory.

    Yields int64 arrays of shape (rows, n_columns) (``n_columns`` = bins, or groups when
    ``groups`` is given), ``rows <= chunk_size``; the chunks together hold
    ``n_realisations`` rows. ``chunk_size`` is rounded up to whole blocks
    (:func:`block_rows`); by default it is the largest that keeps :data:`WORK_ARRAYS` float64
    arrays of one chunk within ``memory_budget``. Same seed => same numbers for any chunk
    size. Parameters as for :class:`CountSampler`.
    """
    sampler = CountSampler(rate, bin_width, background=background, red_noise=red_noise, groups=groups,
                           start_time=start_time)
    return sampler(n_realisations, seed, chunk_size, memory_budget)


def poisson_counts(rate, bin_width, n_realisations, seed=None, *, background=None, red_noise=None,
                   groups=None) -> np.ndarray:
    """Poisson counts for every realisation at once, int64 array of shape (n_realisations, n_bins).

    ``counts[j, i] ~ Poisson((rate_i (1 + delta_ji) + background_i) * bin_width_i)`` with
    ``delta = 0`` unless ``red_noise`` is given. The numbers are those of
    :func:`iter_realisations` with the same seed. Results above :data:`MAX_RESULT_BYTES`
    (2 GiB) are refused: iterate with :func:`iter_realisations` instead.

    Parameters
    ----------
    rate : Quantity [ct/s], shape (n_bins,)
    bin_width : Quantity [time], scalar or (n_bins,)
    n_realisations : int
    seed : None, int, SeedSequence or numpy Generator
    background, red_noise, groups : see :class:`CountSampler`.
    """
    sampler = CountSampler(rate, bin_width, background=background, red_noise=red_noise, groups=groups)
    n = check_count("n_realisations", n_realisations)
    need = n * sampler.n_columns * 8
    if need > MAX_RESULT_BYTES:
        raise InputError(f"n_realisations={n} x {sampler.n_columns} columns needs {need / 2**30:.1f} GiB, above the "
                         f"{MAX_RESULT_BYTES / 2**30:.0f} GiB limit of poisson_counts; use iter_realisations")
    return np.concatenate(list(sampler(n, seed)), axis=0)
