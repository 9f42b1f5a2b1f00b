"""Sums over the temperature grid for batches of DEMs: broadcasting of per-star arguments and chunking.

Band fluxes, luminosities and count rates are all ``sum_T w(T) K(T)``: the emission-measure weights
``w`` of a DEM (:meth:`synthcorona.dem.DEM.em_weights`) against a kernel ``K`` per band. For a batch of
DEMs the weights alone take ``8 n_T`` bytes per DEM (6.5 GB for 10 million DEMs on an 81-node grid),
so :func:`fold` computes them in chunks that fit the memory budget
(:func:`synthcorona.memory.memory_budget`) and keeps only the sums. The result does not depend on the
chunk size (the sums are taken per DEM by :func:`numpy.einsum`, in the same order for any chunk).

Per-star arguments (distance, interstellar column) broadcast against the DEM batch with numpy's
rules; :func:`broadcast_batch` gives the result's batch shape or a named error.
"""
from __future__ import annotations

import math

import numpy as np

from .errors import InputError
from .memory import check_allocation, chunk_length

__all__ = ["broadcast_batch", "fold"]


def broadcast_batch(batch_shape: tuple, **shapes) -> tuple:
    """The broadcast of the DEM batch shape and the shapes of per-star arguments (numpy rules).

    ``shapes`` maps argument names to shapes, e.g. ``broadcast_batch(dem.batch_shape, distance=(3,))``.
    Raises :class:`~synthcorona.errors.InputError` naming the first argument whose shape does not
    broadcast against the batch and the arguments before it.
    """
    out = tuple(batch_shape)
    for name, shape in shapes.items():
        try:
            out = np.broadcast_shapes(out, tuple(shape))
        except ValueError:
            raise InputError(f"{name} has shape {tuple(shape)}, which does not broadcast against the DEM batch shape "
                             f"{tuple(batch_shape)}" + (f" and the other arguments (together {out})"
                                                         if out != tuple(batch_shape) else "")
                             + "; give one value, or one per DEM of the batch", argument=name) from None
    return out


def _fold_members(dem, prep, kernel: np.ndarray, members: np.ndarray | None, what_to_change: str) -> np.ndarray:
    """``sum_T w K`` for the DEMs ``members`` of the flattened batch (None: all), shape (n_members, n_b)."""
    x = prep.table.logT
    n_t, n_b = x.size, kernel.shape[0]
    n = math.prod(dem.batch_shape) if members is None else members.size
    per_dem = dem.em_weights_nbytes(n_t) + 8 * (n_t + n_b)
    step = chunk_length(n, per_dem, "emission-measure weights of the DEM batch", what_to_change)
    out = np.empty((n, n_b))
    for a in range(0, n, step):
        b = min(a + step, n)
        if members is None and step >= n:
            sub = dem
        else:
            sub = dem.take(np.arange(a, b) if members is None else members[a:b])
        w = np.asarray(sub.em_weights(x).value, dtype=float).reshape(-1, n_t)
        prep.check_dem_weights(w)
        out[a:b] = np.einsum("mt,bt->mb", w, kernel)
    return out


def fold(dem, prep, kernels, *, select=None, shape: tuple | None = None, name: str = "result",
         what_to_change: str = "the DEM batch (fewer DEMs)") -> np.ndarray:
    """``sum_T w(T) K_b(T)`` for every DEM of a batch and every band, in chunks that fit the memory budget.

    Parameters
    ----------
    dem : synthcorona.dem.DEM
        One DEM or a batch.
    prep : synthcorona.synthesis.PreparedTable
        Its ``table.logT`` is the grid of the weights; ``check_dem_weights`` is applied to every chunk.
    kernels : ndarray
        (n_b, n_T): one kernel per band; or (n_k, n_b, n_T): ``n_k`` kernel sets, chosen per
        result element by ``select``.
    select : int array, optional
        Index of the kernel set of every result element; broadcasts to ``shape``.
    shape : tuple, optional
        Batch shape of the result (default ``dem.batch_shape``); the DEM batch and ``select`` must
        broadcast to it (see :func:`broadcast_batch`).
    name, what_to_change : str
        Name the result and the argument to change in a :class:`~synthcorona.errors.MemoryBudgetError`.

    Returns
    -------
    ndarray, shape ``shape + (n_b,)`` (possibly a read-only broadcast view: do not modify in place).
    """
    k = np.asarray(kernels, dtype=float)
    if k.ndim == 2:
        k = k[None]
    n_k, n_b = k.shape[:2]
    batch = tuple(dem.batch_shape)
    shape = batch if shape is None else tuple(shape)
    check_allocation(f"{name} of shape {shape + (n_b,)}", 8 * math.prod(shape) * n_b, what_to_change)
    if select is None or n_k == 1:
        vals = _fold_members(dem, prep, k[0], None, what_to_change).reshape(batch + (n_b,))
        return vals if shape == batch else np.broadcast_to(vals, shape + (n_b,))
    sel = np.broadcast_to(np.asarray(select), shape).ravel()
    dem_index = np.broadcast_to(np.arange(math.prod(batch)).reshape(batch), shape).ravel()
    out = np.empty((sel.size, n_b))
    for j in np.unique(sel):
        pos = np.flatnonzero(sel == j)
        members, inverse = np.unique(dem_index[pos], return_inverse=True)
        out[pos] = _fold_members(dem, prep, k[j], members, what_to_change)[inverse]
    return out.reshape(shape + (n_b,))
