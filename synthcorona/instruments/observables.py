"""Observables of a corona seen through an instrument and the interstellar medium.

Functions here (all vectorised over batches of DEMs and over the table temperatures; the distance
and the interstellar column broadcast against the DEM batch with numpy's rules, and large batches
are worked through in chunks that fit the memory budget, see :mod:`synthcorona.batch`):

* :func:`observed_flux` -- energy (or photon) flux at the observer in an energy band,
  with optional interstellar absorption;
* :func:`band_luminosity` -- intrinsic band luminosity (into 4 pi) of a volume DEM;
* :func:`hardness_ratio` / :func:`hardness_ratio_curve` -- ``(H - S) / (H + S)`` of two
  instrument bands, for DEMs or for isothermal plasma on the table grid;
* :func:`counts_to_flux` -- the energy flux in an energy band per count s^-1 in an
  instrument band, for isothermal plasma at every table temperature (or for DEMs):
  the number a proposal needs.

Count rates themselves are :meth:`Instrument.count_rate` / :meth:`Instrument.count_rates`,
built on :meth:`Instrument.temperature_response`.

Absorbed emission on a grid
---------------------------
:func:`binned_emissivity` is the kernel shared with the temperature responses: the
photon (or energy) emissivity per unit EM in each bin of an energy grid, shape
(n_T, n_bins), multiplied by the interstellar transmission ``exp(-sigma(E) N_H)``
(:func:`synthcorona.absorption.ism_transmission`; Verner et al. 1996, ApJ 465, 487 for
H and He, Chantler 2000, J. Phys. Chem. Ref. Data 29, 597 for heavier elements).
Lines are delta functions and take the transmission at their own energy, exactly.
The continuum is integrated exactly over each bin (piecewise-linear model of the
table, see :mod:`synthcorona.synthesis`) and multiplied by the transmission at the
bin's logarithmic centre; callers keep bins narrow where absorption is applied
(relative width <= :data:`ABSORPTION_MAX_REL_WIDTH`), which bounds the error of that
midpoint rule away from absorption edges to ~(1e-3 d ln T/d ln E)^2 / 24.
"""
from __future__ import annotations

import hashlib
import json
from collections import OrderedDict

import astropy.units as u
import numpy as np
import xarray as xr

from ..absorption import ISM_ENERGY_MAX, ISM_ENERGY_MIN, NH_MAX, ism_cross_section, ism_transmission
from ..abundances import resolve_abundances
from ..batch import broadcast_batch, fold
from ..constants import HC_KEV_ANGSTROM, KEV_TO_ERG, PARSEC_CM
from ..errors import InputError
from ..spectral import Band
from ..synthesis import band_list, check_dem, luminosity, prepare
from ..validation import as_quantity, check_range

__all__ = [
    "ABSORPTION_MAX_REL_WIDTH", "REFERENCE_DISTANCE", "FOUR_PI_PC2", "binned_emissivity", "absorbed_band_kernel",
    "nh_value", "nh_values", "nh_kernels", "distance_cm", "observed_flux", "band_luminosity", "hardness_ratio", "hardness_ratio_curve",
    "counts_to_flux",
]

#: Largest relative bin width (d E / E) used where interstellar absorption is applied (0.1 %).
ABSORPTION_MAX_REL_WIDTH = 1e-3
#: Reference distance of temperature responses.
REFERENCE_DISTANCE = 1.0 * u.pc
#: Area of the sphere of the reference distance, 4 pi (1 pc)^2, in cm^2.
FOUR_PI_PC2 = 4.0 * np.pi * PARSEC_CM**2
# Caches keyed on the prepared table's content key (PreparedTable.key): a table prepared again with
# the same content, abundances and density model hits them; a PreparedTable without a key is not cached.
_CACHE_SIZE = 16
_MATRIX_CACHE: OrderedDict = OrderedDict()
_LINE_ORDER_CACHE: dict = {}
_LINE_SIGMA_CACHE: dict = {}


# ----------------------------------------------------------------------------- argument helpers
def nh_value(nh) -> float | None:
    """Validate an interstellar column: scalar Quantity in [0, 1e24] cm^-2 -> float (None stays None)."""
    if nh is None:
        return None
    col = as_quantity("nh", nh, u.cm**-2)
    if np.ndim(col) != 0:
        raise InputError(f"nh must be a single column density, got shape {np.shape(col)}")
    check_range("nh", float(col.value), lo=0.0, hi=NH_MAX.to_value(u.cm**-2), unit_label="cm^-2")
    return float(col.value)


def nh_values(nh) -> np.ndarray | None:
    """Validate interstellar columns: a Quantity (any shape) in [0, 1e24] cm^-2 -> float array (None stays None)."""
    if nh is None:
        return None
    col = as_quantity("nh", nh, u.cm**-2)
    values = np.asarray(col.value, dtype=float)
    check_range("nh", values, lo=0.0, hi=NH_MAX.to_value(u.cm**-2), unit_label="cm^-2")
    return values


def nh_kernels(nh, kernel) -> tuple[np.ndarray, np.ndarray | None, tuple]:
    """The kernels of every distinct interstellar column in ``nh`` (validated by :func:`nh_values`).

    ``kernel(nh_float_or_None)`` returns the (n_b, n_T) kernel for one column. Returns the stack
    (n_k, n_b, n_T), the index of the kernel for each element of ``nh`` (None when ``nh`` is None)
    and the shape of ``nh``, for :func:`synthcorona.batch.fold`. Each distinct column is computed once.
    """
    cols = nh_values(nh)
    if cols is None:
        return np.asarray(kernel(None))[None], None, ()
    distinct, index = np.unique(cols, return_inverse=True)
    return np.stack([np.asarray(kernel(float(v))) for v in distinct]), index.reshape(cols.shape), cols.shape


def ism_key(ism_abundances) -> tuple:
    """Hashable key of an ISM abundance specification (resolved values)."""
    ab = resolve_abundances(ism_abundances)
    return tuple(sorted(ab.values.items()))


def ism_range_kev() -> tuple[float, float]:
    """Photon-energy range (keV) of the interstellar absorption model."""
    return float(ISM_ENERGY_MIN.to_value(u.keV)), float(ISM_ENERGY_MAX.to_value(u.keV))


def ism_attrs(nh, ism_abundances) -> dict:
    """Attributes describing the interstellar absorption applied (or not); ``nh`` in cm^-2: None, a float, or
    an array (one column per result element, recorded as a JSON list)."""
    if nh is None:
        return {"ism_absorption": "none"}
    ab = resolve_abundances(ism_abundances)
    cols = np.asarray(nh, dtype=float)
    if cols.ndim:
        text = f"N_H = {cols.min():.4g}-{cols.max():.4g} cm-2 (one column per result element)"
        value = json.dumps(cols.tolist())
    else:
        text, value = f"N_H = {float(cols):.4g} cm-2", float(cols)
    return {
        "ism_absorption": (f"{text}, photoelectric absorption of neutral gas "
                           "(synthcorona.absorption.ism_transmission: Verner et al. 1996, ApJ 465, 487; "
                           "Chantler 2000, JPCRD 29, 597)"),
        "ism_nh_cm-2": value,
        "ism_abundances": ab.name,
    }


def refine_edges(edges: np.ndarray, max_rel_width: float = ABSORPTION_MAX_REL_WIDTH) -> np.ndarray:
    """Split every bin of ``edges`` (keV, ascending) wider than ``max_rel_width`` into equal log parts.

    Vectorised: the number of parts per bin is ``ceil(ln(e1/e0) / ln(1 + max_rel_width))``.
    Existing edges are kept exactly.
    """
    e0, e1 = edges[:-1], edges[1:]
    n = np.maximum(np.ceil(np.log(e1 / e0) / np.log1p(max_rel_width) - 1e-6), 1).astype(int)
    if np.all(n == 1):
        return edges
    start = np.repeat(np.arange(e0.size), n)
    k = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)
    frac = k / n[start]
    new = e0[start] * (e1[start] / e0[start]) ** frac
    return np.concatenate([new, edges[-1:]])


def _line_layout(prep):
    """Line energies in ascending order and the matching index order (cached per prepared table)."""
    key = prep.key
    hit = _LINE_ORDER_CACHE.get(key) if key is not None else None
    if hit is not None:
        return hit
    e = prep.line_energy_kev
    if e.size > 1 and np.all(np.diff(e) <= 0):
        order = slice(None, None, -1)          # wavelengths ascending -> energies descending: a view
    else:
        order = np.argsort(e, kind="stable")
    e_sorted = np.ascontiguousarray(e[order])
    if key is not None:
        if len(_LINE_ORDER_CACHE) > _CACHE_SIZE:
            _LINE_ORDER_CACHE.clear()
        _LINE_ORDER_CACHE[key] = (order, e_sorted)
    return order, e_sorted


def _line_cross_section(prep, ism_abundances) -> np.ndarray:
    """ISM cross-section (cm^2 per H) at every line energy in ascending order (NaN outside the ISM model's
    range); computed once per (prepared table, ISM abundances) and reused for any N_H and grid."""
    key = (prep.key, ism_key(ism_abundances)) if prep.key is not None else None
    hit = _LINE_SIGMA_CACHE.get(key) if key is not None else None
    if hit is not None:
        return hit
    _, e_sorted = _line_layout(prep)
    lo, hi = ism_range_kev()
    sigma = np.full(e_sorted.shape, np.nan)
    inside = (e_sorted >= lo) & (e_sorted <= hi)
    if np.any(inside):
        sigma[inside] = ism_cross_section(e_sorted[inside] * u.keV, ism_abundances).to_value(u.cm**2)
    sigma.setflags(write=False)
    if key is not None:
        if len(_LINE_SIGMA_CACHE) > _CACHE_SIZE:
            _LINE_SIGMA_CACHE.clear()
        _LINE_SIGMA_CACHE[key] = sigma
    return sigma


def binned_emissivity(edges_kev: np.ndarray, prep, photons: bool = True, nh: float | None = None,
                      ism_abundances="photospheric") -> np.ndarray:
    """Emissivity per unit EM in each bin of an energy grid, with interstellar absorption.

    Parameters
    ----------
    edges_kev : ndarray
        Strictly increasing bin edges in keV inside the table's continuum range (and, with
        ``nh``, inside the ISM model's 10 eV-10 keV).
    prep : synthcorona.synthesis.PreparedTable
        From :func:`synthcorona.synthesis.prepare`.
    photons : bool
        Photons cm3 s-1 per bin (True) or erg cm3 s-1 per bin.
    nh : float or None
        Hydrogen column in cm^-2 (already validated), None or 0 for no absorption.
    ism_abundances
        Abundances of the absorbing gas.

    Returns
    -------
    ndarray (n_T, n_bins), read-only; cached per (prepared table, grid, photons, nh, ISM abundances).

    Method
    ------
    Without absorption this equals :func:`synthcorona.synthesis.emissivity_matrix`. Lines
    are summed per bin with ``np.add.reduceat`` over the energy-sorted line list (exact
    sums, processed in chunks to bound memory); with ``nh`` each line is multiplied by the
    transmission at its own energy and each continuum bin by the transmission at its
    logarithmic centre (module docstring).
    """
    edges = np.ascontiguousarray(edges_kev, dtype=float)
    if edges.ndim != 1 or edges.size < 2 or not np.all(np.diff(edges) > 0):
        raise InputError("energy_edges must be strictly increasing with at least two values")
    nh_eff = None if not nh else float(nh)
    ikey = ism_key(ism_abundances) if nh_eff else None
    key = None
    if prep.key is not None:
        key = (prep.key, hashlib.blake2b(edges.tobytes(), digest_size=16).hexdigest(), bool(photons), nh_eff, ikey)
        hit = _MATRIX_CACHE.get(key)
        if hit is not None:
            _MATRIX_CACHE.move_to_end(key)
            return hit
    if nh_eff:
        lo, hi = ism_range_kev()
        if edges[0] < lo * (1 - 1e-9) or edges[-1] > hi * (1 + 1e-9):
            raise InputError(
                f"nh={nh_eff:g} cm^-2: interstellar absorption is modelled from {lo * 1e3:g} eV to {hi:g} keV "
                f"({HC_KEV_ANGSTROM / hi:.4g}-{HC_KEV_ANGSTROM / lo:.4g} Angstrom), but the emission is needed "
                f"from {edges[0]:.6g} to {edges[-1]:.6g} keV; nothing is extrapolated")
    out = prep.cont_integral(edges[:-1], edges[1:], photons)          # (T, n) new array
    if nh_eff:
        centres = np.sqrt(edges[:-1] * edges[1:])
        out *= ism_transmission(centres * u.keV, nh_eff * u.cm**-2, ism_abundances).value[None, :]
    order, e_sorted = _line_layout(prep)
    i0 = int(np.searchsorted(e_sorted, edges[0], side="left"))
    i1 = int(np.searchsorted(e_sorted, edges[-1], side="left"))   # bins are [lo, hi): a line at the top edge is out
    if i1 > i0:
        power = prep.line_power[order]        # a view when the table is sorted by wavelength
        sigma_lines = _line_cross_section(prep, ism_abundances) if nh_eff else None
        chunk = 20000
        for c0 in range(i0, i1, chunk):       # loop over memory chunks of the line list, not over T or E
            c1 = min(c0 + chunk, i1)
            e_c = e_sorted[c0:c1]
            vals = power[c0:c1]
            scale = 1.0 / (e_c * KEV_TO_ERG) if photons else np.ones(e_c.size)
            if nh_eff:
                scale = scale * np.exp(-sigma_lines[c0:c1] * nh_eff)     # ism_transmission, cached sigma
            vals = vals * scale[:, None]
            idx = np.searchsorted(edges, e_c, side="right") - 1
            starts = np.flatnonzero(np.concatenate([[True], np.diff(idx) > 0]))
            sums = np.add.reduceat(vals, starts, axis=0)        # (n_occupied, T)
            out[:, idx[starts]] += sums.T
    out.setflags(write=False)
    if key is not None:
        _MATRIX_CACHE[key] = out
        if len(_MATRIX_CACHE) > _CACHE_SIZE:
            _MATRIX_CACHE.popitem(last=False)
    return out


def _energy_bands(band) -> tuple[np.ndarray, list[str], bool]:
    """Energy bands as ((n, 2) keV limits, labels, single).

    One band (a :class:`~synthcorona.spectral.Band`, a text, a (2,) Quantity or a pair of scalar
    Quantities; read by :meth:`Band.coerce <synthcorona.spectral.Band.coerce>`) gives ``single=True``;
    an (n, 2) Quantity, a list of Bands or texts, or a dict label -> band gives several.
    """
    if isinstance(band, dict) or (isinstance(band, u.Quantity) and band.ndim == 2) or (
            isinstance(band, list) and band and all(isinstance(b, (Band, str)) for b in band)):
        arr, labels = band_list(band)
        return arr, labels, False
    b = Band.coerce(band, "band")
    return np.array([b.energy_kev]), [b.label], True


def absorbed_band_kernel(bands_kev: np.ndarray, prep, nh: float | None, ism_abundances="photospheric",
                         photons: bool = False) -> np.ndarray:
    """Band emissivity per unit EM after interstellar absorption, shape (n_bands, n_T).

    ``int_band T_ISM(E) eps(E, T) dE`` in erg cm3 s-1 (or photons cm3 s-1), on one log grid
    holding every band edge exactly, with bins of relative width <= 0.1 % (see
    :func:`binned_emissivity`). Without ``nh`` this is :func:`synthcorona.synthesis.band_kernel`
    computed on a grid (identical up to round-off).
    """
    bands_kev = np.atleast_2d(np.asarray(bands_kev, dtype=float))
    base = np.unique(bands_kev.ravel())                      # every band edge; segments between them
    edges = refine_edges(base) if nh else base
    em = binned_emissivity(edges, prep, photons=photons, nh=nh, ism_abundances=ism_abundances)  # (T, n)
    seg_start = np.searchsorted(edges, base[:-1])           # first fine bin of each segment
    seg = np.add.reduceat(em, seg_start, axis=1)             # (T, n_seg): sums of positive terms, no subtraction
    member = (base[:-1][None, :] >= bands_kev[:, :1] * (1 - 1e-12)) & (base[1:][None, :] <= bands_kev[:, 1:] * (1 + 1e-12))
    return member.astype(float) @ seg.T


def _provenance_json(obj) -> str:
    return json.dumps(obj, default=str, sort_keys=True)


# ----------------------------------------------------------------------------- observables
def observed_flux(dem, band, distance, nh=None, table=None, abundances="coronal", density=None, pressure=None,
                  ism_abundances="photospheric", photons: bool = False) -> u.Quantity:
    """Energy (or photon) flux at the observer in an energy band, after interstellar absorption.

    ``F = sum_T EM(T) int_band T_ISM(E) eps(E, T) dE / (4 pi d^2)``.

    Parameters
    ----------
    dem : synthcorona.dem.DEM
        Volume DEM (cm^-3); a batch of DEMs is allowed.
    band : Band, str or Quantity
        One band (a :class:`~synthcorona.spectral.Band`, a text such as ``"0.2-2.4 keV"``, or two
        energies or wavelengths, lower limit first in the unit given); an (n, 2) Quantity, a list
        of Bands or texts, or a dict label -> band for several.
    distance : Quantity [length]
        Distance of the star (> 0); an array broadcasts against the DEM batch shape (numpy rules).
    nh : Quantity [cm^-2], optional
        Interstellar hydrogen column, [0, 1e24] cm^-2; an array broadcasts against the DEM batch
        and the distance. None: no absorption (then the result equals
        :func:`synthcorona.synthesis.band_flux`). Requires the band inside 10 eV-10 keV.
    table, abundances, density, pressure
        As for :func:`synthcorona.synthesis.band_flux`.
    ism_abundances : str or dict
        Abundances of the absorbing gas (default "photospheric").
    photons : bool
        Photon flux (ph s-1 cm-2) instead of energy flux (erg s-1 cm-2).

    Returns
    -------
    Quantity, shape = broadcast of the DEM batch, distance and nh shapes (+ (n_bands,) for several
    bands). Shapes that do not broadcast raise :class:`InputError` naming the argument.
    """
    prep = prepare(table, abundances, density, pressure)
    em_unit = check_dem(dem)
    if not em_unit.is_equivalent(u.cm**-3):
        raise InputError(f"dem has units {em_unit}: observed_flux needs a volume DEM (cm^-3)", argument="dem")
    d = distance_cm(distance)
    bands, _, single = _energy_bands(band)
    kernels, select, nh_shape = nh_kernels(
        nh, lambda col: absorbed_band_kernel(bands, prep, col, ism_abundances, photons=photons))  # (n_k, n_b, T)
    shape = broadcast_batch(dem.batch_shape, distance=d.shape, nh=nh_shape)
    vals = fold(dem, prep, kernels, select=select, shape=shape, name="observed fluxes",
                what_to_change="dem (a smaller batch), distance or nh")
    vals = vals / (4.0 * np.pi * d[..., None] ** 2)
    unit = (u.ph if photons else u.erg) / (u.s * u.cm**2)
    q = u.Quantity(vals, unit)
    return q[..., 0] if single else q


def band_luminosity(dem, band, table=None, abundances="coronal", density=None, pressure=None,
                    photons: bool = False) -> u.Quantity:
    """Intrinsic band luminosity ``L = sum_T EM(T) K_band(T)`` (erg s-1 into 4 pi) of a volume DEM.

    The emitted power does not depend on interstellar absorption; this is
    :func:`synthcorona.synthesis.luminosity`, listed here with the other observables.
    """
    return luminosity(dem, band, table=table, abundances=abundances, density=density, pressure=pressure,
                      photons=photons)


def distance_cm(distance) -> np.ndarray:
    """Validated distance (a length Quantity > 0, any shape) in cm as floats.

    Raises :class:`InputError` naming ``distance`` if it is missing or not > 0; its broadcasting
    against a DEM batch is checked by :func:`synthcorona.batch.broadcast_batch`.
    """
    if distance is None:
        raise InputError("distance is required for a volume DEM (cm^-3): give e.g. distance=10 * u.pc",
                         argument="distance")
    d = as_quantity("distance", distance, u.cm)
    check_range("distance", d.to_value(u.pc), lo=0.0, hi=None, unit_label="pc", inclusive=False)
    return np.asarray(d.value, dtype=float)


def hardness_ratio(instrument, dem, hard="hard", soft="soft", nh=None, table=None, abundances="coronal",
                   density=None, pressure=None, ism_abundances="photospheric") -> u.Quantity:
    """Hardness ratio ``HR = (H - S) / (H + S)`` of the count rates in two instrument bands.

    Parameters
    ----------
    instrument : Instrument
    dem : synthcorona.dem.DEM
        One DEM or a batch (volume or column DEM; the distance cancels).
    hard, soft : str or Quantity pair
        Band names of the instrument or (lo, hi) limits (channel energies with a
        redistribution matrix, photon energies without).
    nh, table, abundances, density, pressure, ism_abundances
        As for :meth:`Instrument.count_rate`.

    Returns
    -------
    Quantity (dimensionless)
        DEM batch shape, in [-1, 1]; NaN where both bands record no
        counts (the ratio is undefined there).
    """
    rates = instrument.count_rate(dem, distance=1 * u.pc if _is_volume(dem) else None,
                                  solid_angle=None if _is_volume(dem) else 1 * u.sr,
                                  band=[hard, soft], nh=nh, table=table, abundances=abundances,
                                  density=density, pressure=pressure, ism_abundances=ism_abundances).value
    h, s = rates[..., 0], rates[..., 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        hr = np.where(h + s > 0, (h - s) / (h + s), np.nan)
    return hr * u.dimensionless_unscaled


def _is_volume(dem) -> bool:
    return getattr(dem, "em_unit", u.cm**-3).is_equivalent(u.cm**-3)


def hardness_ratio_curve(instrument, hard="hard", soft="soft", nh=None, table=None, abundances="coronal",
                         density=None, pressure=None, ism_abundances="photospheric") -> xr.DataArray:
    """Hardness ratio ``(H - S)/(H + S)`` of isothermal plasma at every table temperature.

    From the temperature responses of the two bands (:meth:`Instrument.temperature_response`).
    Returns a DataArray over ``logT`` (dimensionless; NaN where neither band records counts).
    """
    resp = instrument.temperature_response(table=table, abundances=abundances, density=density, pressure=pressure,
                                           bands=[hard, soft], nh=nh, ism_abundances=ism_abundances)
    h, s = resp.values[0], resp.values[1]
    with np.errstate(invalid="ignore", divide="ignore"):
        hr = np.where(h + s > 0, (h - s) / (h + s), np.nan)
    attrs = {k: v for k, v in resp.attrs.items() if k not in ("units", "quantity", "reference_distance")}
    attrs.update({"units": "", "quantity": "hardness ratio (H - S) / (H + S) of count rates, isothermal plasma",
                  "hard_band": str(resp.band.values[0]), "soft_band": str(resp.band.values[1])})
    return xr.DataArray(hr, dims=("logT",), coords={"logT": resp.logT.values}, attrs=attrs, name="hardness_ratio")


def counts_to_flux(instrument, band=None, flux_band=None, nh=None, absorbed: bool = False, dem=None,
                   table=None, abundances="coronal", density=None, pressure=None,
                   ism_abundances="photospheric") -> xr.DataArray:
    """Energy flux in an energy band per count s^-1 recorded in an instrument band.

    ``C(T) = F_flux_band(T) / R_band(T)`` in erg cm-2 per count, for isothermal plasma at every
    table temperature (default), or for each DEM of a batch with ``dem=``. Multiply a measured
    count rate by it to get the flux; divide a known flux by it to get the expected rate.

    Parameters
    ----------
    instrument : Instrument
    band : str or Quantity pair, optional
        Instrument band (name or limits). Default: the instrument's only named band, or all
        channels ("total") if it has none.
    flux_band : Band, str or Quantity pair, optional
        Band (photon energies or wavelengths, read by :meth:`Band.coerce
        <synthcorona.spectral.Band.coerce>`) of the flux. Default: the limits of
        ``band`` (for "total", the instrument's response range).
    nh : Quantity [cm^-2], optional
        Interstellar column; the count rate always includes it.
    absorbed : bool
        False (default): the flux is the unabsorbed (intrinsic) source flux, as needed for a
        luminosity; True: the flux arriving at the telescope (absorbed).
    dem : synthcorona.dem.DEM, optional
        A DEM or a batch: the factor for each DEM instead of isothermal plasma.
    table, abundances, density, pressure, ism_abundances
        As for :meth:`Instrument.count_rate`.

    Returns
    -------
    xarray.DataArray
        In erg cm-2 ct-1: dims ("logT",) for isothermal plasma, or the DEM batch
        dims ("dem",) / ("dem_0", "dem_1", ...) with ``dem``. NaN where the band records no counts.
    """
    nhv = nh_value(nh)
    if band is None:
        named = list(instrument.bands)
        if len(named) > 1:
            raise InputError(f"band=None is ambiguous: instrument '{instrument.name}' has bands {named}; "
                             "name one")
        band = named[0] if named else "total"
    resp = instrument.temperature_response(table=table, abundances=abundances, density=density, pressure=pressure,
                                           bands=[band], nh=nh, ism_abundances=ism_abundances)
    if flux_band is None:
        lo, hi = float(resp.band_lo.values[0]), float(resp.band_hi.values[0])
    else:
        lo, hi = Band.coerce(flux_band, "flux_band").energy_kev
    prep = prepare(table, abundances, density, pressure)
    kf = absorbed_band_kernel(np.array([[lo, hi]]), prep, nhv if absorbed else None, ism_abundances)[0]  # (T,)
    kr = resp.values[0] * FOUR_PI_PC2                                  # counts cm3 s-1 (no 1/4πd²)
    attrs = {k: v for k, v in resp.attrs.items() if k not in ("units", "quantity", "reference_distance")}
    attrs.update({
        "units": (u.erg / (u.cm**2 * u.ct)).to_string(),
        "quantity": (f"{'absorbed' if absorbed else 'unabsorbed'} energy flux in {lo:.6g}-{hi:.6g} keV per "
                     f"count s-1 in band '{resp.band.values[0]}'"),
        "flux_band_kev": f"{lo:.6g}-{hi:.6g}",
        "count_band": str(resp.band.values[0]),
        "flux": "absorbed" if absorbed else "unabsorbed",
    })
    if dem is None:
        with np.errstate(invalid="ignore", divide="ignore"):
            c = np.where(kr > 0, kf / kr, np.nan)
        attrs["plasma"] = "isothermal at each table temperature"
        return xr.DataArray(c, dims=("logT",), coords={"logT": resp.logT.values}, attrs=attrs,
                            name="counts_to_flux")
    check_dem(dem)
    fr = fold(dem, prep, np.stack([kf, kr]), name="counts-to-flux factors", what_to_change="dem (a smaller batch)")
    f, r = fr[..., 0], fr[..., 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(r > 0, f / r, np.nan)
    dims = ("dem",) if c.ndim == 1 else tuple(f"dem_{i}" for i in range(c.ndim))
    attrs["plasma"] = repr(dem)
    return xr.DataArray(c, dims=dims, attrs=attrs, name="counts_to_flux")
