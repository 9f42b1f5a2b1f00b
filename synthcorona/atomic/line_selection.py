"""Which lines of an ion a table keeps: the per-ion line selection of the table builder.

A line is dropped only if it carries less than ``fraction`` of the ion's line emission at every grid
point where the ion is present, and if the dropped lines together carry less than
:data:`WINDOW_TARGET` of the emission in any :data:`WINDOW_WIDTH`-Angstrom window that holds at
least :data:`WINDOW_SIGNIFICANCE` of the ion's line emission (see :func:`select_lines_windowed`).
Common practice for line-list thinning; the thresholds are ours (no single source).
"""
from __future__ import annotations

import numpy as np

__all__ = ["select_lines", "window_sums", "select_lines_windowed", "WINDOW_WIDTH", "WINDOW_TARGET",
           "WINDOW_SIGNIFICANCE", "ION_PRESENCE"]

#: Window width, largest dropped share and significance of the window test (see select_lines_windowed).
WINDOW_WIDTH = 10.0
WINDOW_TARGET = 0.005
WINDOW_SIGNIFICANCE = 0.01
#: Grid points where an ion's total line emissivity is below this fraction of its maximum are not
#: considered when selecting lines, and its line emissivities there are stored as zero.
ION_PRESENCE = 1e-5


def select_lines(eps: np.ndarray, fraction: float) -> np.ndarray:
    """Boolean mask of lines kept by the per-point cumulative rule (see module doc).

    Parameters
    ----------
    eps : ndarray (n_lines, n_points)
        Line emissivities of one ion at the grid points considered.
    fraction : float
        Largest share of the ion's line emission the dropped lines may carry at any point.
    """
    if eps.shape[0] == 0 or fraction <= 0:
        return np.ones(eps.shape[0], dtype=bool)
    flat = eps.reshape(eps.shape[0], -1)
    order = np.argsort(flat, axis=0, kind="stable")
    srt = np.take_along_axis(flat, order, axis=0)
    cums = np.cumsum(srt, axis=0)
    droppable_sorted = cums < fraction * cums[-1]
    droppable = np.empty_like(droppable_sorted)
    np.put_along_axis(droppable, order, droppable_sorted, axis=0)
    return ~np.all(droppable, axis=1)


def window_sums(wavelength: np.ndarray, eps: np.ndarray, keep: np.ndarray, width: float = WINDOW_WIDTH):
    """Total and dropped emissivity in the windows [λ_i, λ_i + width) starting at each line.

    ``wavelength`` must be sorted ascending; ``eps`` is (n_lines, n_points).
    Returns (lo, hi, total, dropped) with total/dropped of shape (n_lines, n_points).
    """
    zero = np.zeros((1,) + eps.shape[1:])
    c_all = np.concatenate([zero, np.cumsum(eps, axis=0)])
    c_drop = np.concatenate([zero, np.cumsum(eps * (~keep)[:, None], axis=0)])
    hi = np.searchsorted(wavelength, wavelength + width, side="left")
    lo = np.arange(wavelength.size)
    return lo, hi, c_all[hi] - c_all[lo], c_drop[hi] - c_drop[lo]


def select_lines_windowed(wavelength: np.ndarray, eps: np.ndarray, fraction: float,
                          window_fraction: float = WINDOW_TARGET, significance: float = WINDOW_SIGNIFICANCE,
                          presence: float = ION_PRESENCE) -> np.ndarray:
    """Lines of one ion to keep: the cumulative rule, then repaired window by window.

    1. Only grid points where the ion's total line emissivity is at least ``presence``
       times its maximum over the grid are considered (elsewhere the ion is absent).
    2. :func:`select_lines` with ``fraction``.
    3. For every window [λ_i, λ_i + 10 Å) and grid point where the window holds at least
       ``significance`` of the ion's line emission, the strongest dropped lines are
       restored until the dropped lines carry at most ``window_fraction`` of the window.

    Parameters
    ----------
    wavelength : ndarray (n_lines,) in Angstrom
    eps : ndarray (n_lines, n_density, n_T) in erg cm3 s-1
    """
    n = wavelength.size
    if n == 0 or fraction <= 0:
        return np.ones(n, dtype=bool)
    flat = eps.reshape(n, -1)
    tot = flat.sum(axis=0)
    if tot.max() <= 0:
        return np.zeros(n, dtype=bool)
    present = tot >= presence * tot.max()
    e = flat[:, present].astype(np.float64)
    tot = tot[present]
    order = np.argsort(wavelength, kind="stable")
    w, e = wavelength[order], e[order]
    keep = select_lines(e, fraction)
    for _ in range(10000):
        lo, hi, w_tot, w_drop = window_sums(w, e, keep)
        bad = (w_tot >= significance * tot[None, :]) & (w_drop > window_fraction * w_tot)
        if not bad.any():
            break
        # restore, in each violating window, the strongest dropped line at its worst grid point
        excess = np.where(bad, w_drop - window_fraction * w_tot, -np.inf)
        for j in np.flatnonzero(bad.any(axis=1)):
            p = int(np.argmax(excess[j]))
            seg = np.arange(lo[j], hi[j])
            cand = seg[~keep[seg]]
            if cand.size:
                keep[cand[np.argmax(e[cand, p])]] = True
    out = np.zeros(n, dtype=bool)
    out[order] = keep
    return out
