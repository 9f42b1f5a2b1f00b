"""Energy bins of an instrument: unit conversion, validation, and the numerical kernels of folding.

The :class:`~synthcorona.instruments.instrument.Instrument` keeps its bins in keV, ascending in
energy.  The functions here turn a user's bin bounds (energy or wavelength) into that form,
validate a redistribution matrix, convert point samples of an effective area into bin averages,
and compute the overlaps between the instrument's bins and the bins of an input spectrum
(the rebinning map ``O`` of :mod:`synthcorona.instruments.instrument`).
"""
from __future__ import annotations

import astropy.units as u
import numpy as np
import scipy.sparse as sp

from ..constants import HC_KEV_ANGSTROM
from ..errors import InputError
from ..spectral import SpectralGrid, to_energy_kev
from ..validation import as_quantity, check_finite

__all__ = ["EDGE_RTOL", "COLSUM_TOL", "fmt_kev", "bins_kev", "check_sorted_bins", "check_redistribution",
           "samples_to_bins", "interpolate_samples", "interpolate_bins", "rebin_overlaps",
           "check_coverage", "channel_fractions"]

#: Relative tolerance on energy edges: two edges closer than this (relative) are the same edge.
#: It absorbs round-off from wavelength<->energy conversion and float32 storage in FITS files;
#: it is far below any physical bin width.
EDGE_RTOL = 1e-9
#: Redistribution columns are probabilities; sums above 1 by more than this are refused.
COLSUM_TOL = 1e-2


def fmt_kev(e: float) -> str:
    """An energy as ``'x keV (y Angstrom)'``, for error messages."""
    lam = HC_KEV_ANGSTROM / e if e > 0 else np.inf
    return f"{e:.6g} keV ({lam:.6g} Angstrom)"


def bins_kev(name_lo: str, lo_q, name_hi: str, hi_q, allow_zero: bool = False):
    """Convert two Quantities of bin bounds (energy or wavelength) to (lo, hi) keV arrays.

    The two arrays may be given in wavelength (then ``lo``/``hi`` are swapped by the
    conversion; the element-wise min/max is taken).  Returns 1-D float arrays.
    ``allow_zero`` permits an energy of exactly 0 keV (OGIP EBOUNDS channel 0).
    """
    def conv(name, q):
        """One Quantity -> 1-D keV array (wavelength/frequency converted via hc)."""
        if not isinstance(q, u.Quantity):
            raise u.UnitsError(f"{name}={q!r} has no units; give energies (e.g. keV) or wavelengths (e.g. Angstrom)")
        if allow_zero and q.unit.physical_type == "energy":
            v = as_quantity(name, q, u.keV).value.astype(float)
            check_finite(name, v)
            if np.any(v < 0):
                raise InputError(f"{name} must be >= 0 keV everywhere; got minimum {v.min():g} keV")
            return np.atleast_1d(v)
        return np.atleast_1d(to_energy_kev(name, q))

    a, b = conv(name_lo, lo_q), conv(name_hi, hi_q)
    if a.ndim != 1 or a.shape != b.shape:
        raise InputError(f"{name_lo} and {name_hi} must be 1-D arrays of equal length; got shapes {a.shape} and {b.shape}")
    if a.size == 0:
        raise InputError(f"{name_lo} is empty; at least one bin is required")
    return np.minimum(a, b), np.maximum(a, b)


def check_sorted_bins(lo: np.ndarray, hi: np.ndarray, what: str):
    """Validate ascending, positive-width, non-overlapping bins; return (lo, hi, reversed_flag).

    Bins given in descending energy (e.g. ascending wavelength) are reversed.  Overlaps
    smaller than :data:`EDGE_RTOL` (relative) are round-off and are closed by moving the
    upper edge down onto the next lower edge.  Gaps between bins are allowed (no
    response there).
    """
    rev = False
    if lo.size > 1 and lo[0] > lo[-1]:
        lo, hi, rev = lo[::-1].copy(), hi[::-1].copy(), True
    else:
        lo, hi = lo.copy(), hi.copy()
    width = hi - lo
    if np.any(width <= 0):
        k = int(np.argmax(width <= 0))
        raise InputError(f"{what}: bin {k} has zero or negative width ({lo[k]:.6g} to {hi[k]:.6g} keV)")
    if lo.size > 1:
        d = np.diff(lo)
        if np.any(d <= 0):
            k = int(np.argmax(d <= 0)) + 1
            raise InputError(
                f"{what}: energy bins are not sorted: bin {k} starts at {lo[k]:.6g} keV, not above "
                f"bin {k - 1} which starts at {lo[k - 1]:.6g} keV")
        over = hi[:-1] - lo[1:]
        bad = over > EDGE_RTOL * hi[:-1]
        if np.any(bad):
            k = int(np.argmax(bad))
            raise InputError(
                f"{what}: energy bins overlap: bin {k} ({lo[k]:.6g} to {hi[k]:.6g} keV) and bin {k + 1} "
                f"({lo[k + 1]:.6g} to {hi[k + 1]:.6g} keV)")
        hi[:-1] = np.minimum(hi[:-1], lo[1:])
    return lo, hi, rev


def check_redistribution(redistribution, n_e: int, reverse: bool):
    """A redistribution matrix as CSR (columns in ascending energy) and its column sums.

    ``redistribution`` has shape (n_channels, n_e) with elements >= 0 and columns summing
    to <= 1 (within :data:`COLSUM_TOL`); ``reverse`` flips the column order (energy bins
    that were given in descending energy).  Raises :class:`InputError` naming the problem.
    """
    R = sp.csr_matrix(redistribution, dtype=float)
    if R.ndim != 2 or R.shape[1] != n_e:
        hint = " (transposed? rows are channels, columns energy bins)" if R.shape[0] == n_e else ""
        raise InputError(
            f"redistribution has shape {R.shape}; expected (n_channels, {n_e}) for {n_e} energy bins{hint}")
    check_finite("redistribution", R.data)
    if np.any(R.data < 0):
        raise InputError(f"redistribution has negative elements (minimum {R.data.min():g}); "
                         "elements are probabilities >= 0")
    if reverse:
        R = R[:, ::-1].tocsr()
    colsum = np.asarray(R.sum(axis=0)).ravel()
    if np.any(colsum > 1 + COLSUM_TOL):
        k = int(np.argmax(colsum))
        raise InputError(
            f"redistribution column {k} sums to {colsum[k]:.6g} > 1: columns are probabilities that a "
            "photon is recorded in some channel. A matrix that includes the effective area must be split "
            "into area and redistribution first")
    return R, colsum


def samples_to_bins(grid, area):
    """Point samples A(x) of an effective area as energy bins with the exact bin average.

    Returns ``(x, a, kind, elo, ehi, abin)``: the samples in ascending ``x`` (Angstrom or
    keV, ``kind`` "wavelength" or "energy"), and the bins (keV) with their average area
    (cm^2).  See :meth:`Instrument.from_samples` for the method.
    """
    if not isinstance(grid, u.Quantity) or grid.unit.physical_type not in ("length", "energy", "frequency"):
        raise u.UnitsError(f"grid must be a Quantity of wavelengths or energies; got {grid!r:.60}")
    wl = grid.unit.physical_type == "length"
    x = np.atleast_1d(grid.to_value(u.AA) if wl else grid.to_value(u.keV, equivalencies=u.spectral())).astype(float)
    a = np.atleast_1d(as_quantity("area", area, u.cm**2).value).astype(float)
    check_finite("grid", x)
    check_finite("area", a)
    if x.ndim != 1 or x.size < 2 or a.shape != x.shape:
        raise InputError(f"grid and area must be 1-D of equal length >= 2; got shapes {x.shape} and {a.shape}")
    if np.any(x <= 0):
        raise InputError(f"grid must be > 0 everywhere; got minimum {x.min():g} {grid.unit}")
    if x[-1] < x[0]:
        x, a = x[::-1].copy(), a[::-1].copy()
    d = np.diff(x)
    if np.any(d < 0):
        k = int(np.argmax(d < 0)) + 1
        raise InputError(
            f"grid must be monotonic; sample {k} ({x[k]:g}) comes after sample {k - 1} ({x[k - 1]:g}) "
            f"in a grid that otherwise increases")
    if np.any(a < 0):
        k = int(np.argmax(a < 0))
        raise InputError(f"area must be >= 0 cm^2; got {a[k]:g} cm^2 at sample {k} ({x[k]:g} {'Angstrom' if wl else 'keV'})")
    keep = d > 0
    x1, x2, a1, a2 = x[:-1][keep], x[1:][keep], a[:-1][keep], a[1:][keep]
    if wl:
        mean_l = x1 * x2 * np.log1p((x2 - x1) / x1) / (x2 - x1)
        abin = a1 + (a2 - a1) / (x2 - x1) * (mean_l - x1)
        elo, ehi = HC_KEV_ANGSTROM / x2, HC_KEV_ANGSTROM / x1
    else:
        abin = 0.5 * (a1 + a2)
        elo, ehi = x1, x2
    return x, a, "wavelength" if wl else "energy", elo, ehi, abin


def interpolate_samples(energy_or_wavelength, xs: np.ndarray, areas: np.ndarray, kind: str, name: str) -> np.ndarray:
    """Area (cm^2) at photon energies or wavelengths, linear between point samples ``xs`` (ascending).

    ``kind`` is "wavelength" (``xs`` in Angstrom; wavelengths are used as given, with no round trip
    through energy) or "energy" (``xs`` in keV).  Points outside the samples raise
    :class:`InputError` naming the instrument ``name``: nothing is extrapolated.
    """
    e = to_energy_kev("energy_or_wavelength", energy_or_wavelength)
    shape = np.shape(e)
    e = np.atleast_1d(e).astype(float)
    if kind == "wavelength":
        q = energy_or_wavelength
        x = (np.atleast_1d(q.to_value(u.AA)).astype(float) if q.unit.physical_type == "length"
             else HC_KEV_ANGSTROM / e)
    else:
        x = e
    bad = (x < xs[0] * (1 - EDGE_RTOL)) | (x > xs[-1] * (1 + EDGE_RTOL))
    if np.any(bad):
        unit = "Angstrom" if kind == "wavelength" else "keV"
        raise InputError(
            f"energy_or_wavelength={x[bad][:4]} {unit} is outside the effective-area grid of '{name}' "
            f"[{xs[0]:.6g}, {xs[-1]:.6g}] {unit}; nothing is extrapolated")
    return np.interp(x, xs, areas).reshape(shape)


def interpolate_bins(energy_or_wavelength, lo: np.ndarray, hi: np.ndarray, area: np.ndarray, name: str) -> np.ndarray:
    """Area (cm^2) at photon energies or wavelengths from binned areas (bins [lo, hi] keV, ascending).

    The bin values are placed at the bin centres and interpolated linearly in energy; in the
    outer half of the first and last bin the bin value is returned.  Points outside the bins,
    or in a gap between them, raise :class:`InputError` naming the instrument ``name``.
    """
    e = to_energy_kev("energy_or_wavelength", energy_or_wavelength)
    shape = np.shape(e)
    e = np.atleast_1d(e).astype(float)
    idx = np.searchsorted(lo, e * (1 + EDGE_RTOL), side="right") - 1
    ok = idx >= 0
    idx_c = np.clip(idx, 0, lo.size - 1)
    ok &= e <= hi[idx_c] * (1 + EDGE_RTOL)
    if not np.all(ok):
        raise InputError(
            f"energy_or_wavelength={e[~ok][:4]} keV is outside the effective-area grid of '{name}' "
            f"[{lo[0]:.6g}, {hi[-1]:.6g}] keV (or in a gap between its bins); nothing is extrapolated")
    return np.interp(e, 0.5 * (lo + hi), area).reshape(shape)


def rebin_overlaps(bin_lo: np.ndarray, bin_hi: np.ndarray, energy_edges) -> dict:
    """Overlaps of instrument bins [bin_lo, bin_hi] (keV, ascending) with the bins of an input grid.

    Returns a dict with ``n_in`` (number of input bins), ``range`` (keV span of the input
    grid), and one entry per overlapping (instrument bin, input bin) pair: ``rows``
    (instrument bin), ``cols`` (input bin, in the user's order), ``s``, ``t`` (the overlap
    interval, keV), ``width`` (the input bin's width, keV), and ``O``, the sparse rebinning
    matrix ``O[i, j] = |b_j ∩ e_i| / |b_j|``.

    Method: the input bins are sorted by energy; for every instrument bin the range of
    overlapping input bins is found by ``searchsorted`` and all pairs are generated at once
    with ``np.repeat`` (no Python loop).  The overlap interval of each pair is kept for exact
    band cuts.
    """
    g = energy_edges if isinstance(energy_edges, SpectralGrid) else SpectralGrid("energy_edges", energy_edges,
                                                                                  edges=True)
    in_lo, in_hi = g.lo_hi_kev()
    n_in = in_lo.size
    order = np.argsort(in_lo, kind="stable")
    e_asc = np.concatenate([in_lo[order], in_hi[order][-1:]])
    n_e = bin_lo.size
    j0 = np.clip(np.searchsorted(e_asc, bin_lo, side="right") - 1, 0, n_in - 1)
    j1 = np.clip(np.searchsorted(e_asc, bin_hi, side="left") - 1, 0, n_in - 1)
    cnt = np.maximum(j1 - j0 + 1, 0)
    rows = np.repeat(np.arange(n_e), cnt)
    offs = np.arange(cnt.sum()) - np.repeat(np.cumsum(cnt) - cnt, cnt)
    js = np.repeat(j0, cnt) + offs
    s = np.maximum(e_asc[js], bin_lo[rows])
    t = np.minimum(e_asc[js + 1], bin_hi[rows])
    keep = t > s
    rows, js, s, t = rows[keep], js[keep], s[keep], t[keep]
    width = e_asc[js + 1] - e_asc[js]
    cols = order[js]                      # back to the user's bin order
    rebin = sp.csr_matrix(((t - s) / width, (rows, cols)), shape=(n_e, n_in))
    return {"n_in": n_in, "range": (float(e_asc[0]), float(e_asc[-1])),
            "rows": rows, "cols": cols, "s": s, "t": t, "width": width, "O": rebin}


def check_coverage(grid_range: tuple[float, float], need, what: str) -> None:
    """Raise :class:`InputError` if an input grid spanning ``grid_range`` (keV) misses part of ``need`` (keV).

    ``need`` is the photon-energy range an instrument (or band) responds to, None for none;
    ``what`` says who needs it, e.g. ``"instrument 'x' responds in band 'soft'"``.
    """
    if need is None:
        return
    glo, ghi = grid_range
    nlo, nhi = need
    missing = []
    if glo > nlo * (1 + EDGE_RTOL):
        missing.append(f"{fmt_kev(nlo)} to {fmt_kev(min(glo, nhi))}")
    if ghi < nhi * (1 - EDGE_RTOL):
        missing.append(f"{fmt_kev(max(ghi, nlo))} to {fmt_kev(nhi)}")
    if missing:
        raise InputError(
            f"energy_edges cover {fmt_kev(glo)} to {fmt_kev(ghi)}, but {what} from {fmt_kev(nlo)} to "
            f"{fmt_kev(nhi)}; the spectrum is missing {' and '.join(missing)}. Extend the spectral grid "
            "(nothing is extrapolated).")


def channel_fractions(ch_lo: np.ndarray, ch_hi: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """Fraction of each channel's EBOUNDS width [ch_lo, ch_hi] inside the band [lo, hi] keV.

    A zero-width channel counts fully if ``lo <= ch_lo < hi`` (vectorised over channels).
    """
    width = ch_hi - ch_lo
    ov = np.clip(np.minimum(ch_hi, hi) - np.maximum(ch_lo, lo), 0.0, None)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(width > 0, ov / np.where(width > 0, width, 1.0), ((ch_lo >= lo) & (ch_lo < hi)).astype(float))
    return frac
