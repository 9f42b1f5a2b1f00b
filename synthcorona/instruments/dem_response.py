"""Temperature responses of an instrument and count rates of DEMs.

Method
------
The temperature response of band b folds the emissivity table through the band operator of
the instrument (:meth:`Instrument.band_matrix <synthcorona.instruments.instrument.Instrument.band_matrix>`):

    K_b(T) = S_b @ eps(T) / (4 pi (1 pc)^2)

in counts s^-1 per cm^-3 of emission measure at the reference distance of 1 pc, with
``eps(T)`` the photon emissivity per unit EM in each bin of an input grid (optionally absorbed
by the interstellar medium, :func:`synthcorona.instruments.observables.binned_emissivity`).
This is the discrete form of the standard definition ``K(T) = ∫ A(λ) G(λ, T) dλ`` of a
temperature response, with ``A`` the effective area and ``G`` the contribution function of the
plasma.  The count rate of a whole batch of DEMs is then one matrix product,
``rate = w @ K^T (1 pc / d)^2``, with ``w`` the DEM's emission-measure weights on the table
grid (:meth:`synthcorona.dem.DEM.em_weights`).

The functions take the instrument as first argument; the methods
:meth:`Instrument.temperature_response`, :meth:`Instrument.count_rate` and
:meth:`Instrument.count_rates` call them.
"""
from __future__ import annotations

import json
import weakref
from collections import OrderedDict

import astropy.units as u
import numpy as np
import xarray as xr

from ..batch import broadcast_batch, fold
from ..constants import PARSEC_CM
from ..errors import InputError
from ..spectral import Band, SpectralGrid
from ..synthesis import check_dem, prepare
from ..validation import as_quantity, check_finite
from .binning import EDGE_RTOL, fmt_kev
from .instrument import COUNT_RATE_UNIT
from .observables import (
    FOUR_PI_PC2,
    binned_emissivity,
    distance_cm,
    ism_attrs,
    ism_key,
    ism_range_kev,
    nh_kernels,
    nh_value,
    nh_values,
    refine_edges,
)

__all__ = ["TEMPERATURE_RESPONSE_UNIT", "TOTAL_BAND", "REFERENCE_DISTANCE_PC",
           "REFERENCE_DISTANCE_CM", "temperature_response", "count_rate", "count_rates", "response_bands",
           "is_single_band"]

#: Unit of temperature responses: counts s^-1 per cm^-3 of volume emission measure (at 1 pc).
TEMPERATURE_RESPONSE_UNIT = u.ct * u.cm**3 / u.s
#: Name of the all-channels band of an instrument without named bands.
TOTAL_BAND = "total"
#: Reference distance of temperature responses (1 pc), in pc and cm.
REFERENCE_DISTANCE_PC = 1.0
REFERENCE_DISTANCE_CM = PARSEC_CM
# Number of temperature responses kept per instrument.
_CACHE_SIZE = 32
# instrument -> OrderedDict of temperature responses (weak: an instrument's cache dies with it)
_KERNELS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def is_single_band(band) -> bool:
    """True for one band: a name, a :class:`~synthcorona.spectral.Band`, a (2,) Quantity, or a pair of
    scalar Quantities."""
    if isinstance(band, (str, Band)):
        return True
    if isinstance(band, u.Quantity):
        return band.shape == (2,)
    return (isinstance(band, tuple) and len(band) == 2
            and all(isinstance(b, u.Quantity) and b.isscalar for b in band))


def response_bands(instrument, bands) -> list[tuple[str, float | None, float | None]]:
    """Bands of a response request as (label, lo_keV, hi_keV); (TOTAL_BAND, None, None) = all channels.

    None: all named bands, or the single band "total" if the instrument has none.
    The name "total" always means all channels unless the instrument defines a band of
    that name.  Other bands are resolved by :meth:`Instrument.resolve_bands`.
    """
    named = instrument.bands
    if bands is None:
        return instrument.resolve_bands(None) if named else [(TOTAL_BAND, None, None)]
    if isinstance(bands, dict):
        return instrument.resolve_bands(bands)
    if is_single_band(bands):
        bands = [bands]
    out = []
    for b in bands:
        if isinstance(b, str) and b == TOTAL_BAND and TOTAL_BAND not in named:
            out.append((TOTAL_BAND, None, None))
        else:
            out.extend(instrument.resolve_bands([b]))
    if not out:
        raise InputError("bands is empty")
    return out


# ----------------------------------------------------------------------------- input grid
def _check_band_inside(instrument, blist, lim, limit_txt):
    """Photon-energy ranges needed by each band, refusing any outside ``lim`` (keV)."""
    needs = []
    for label, lo, hi in blist:
        need = instrument.band_support(lo, hi)
        if need is None:
            continue
        if need[0] < lim[0] * (1 - EDGE_RTOL) or need[1] > lim[1] * (1 + EDGE_RTOL):
            where = ("in all channels" if lo is None
                     else f"in band '{label}' ({lo:.6g}-{hi:.6g} keV {instrument.band_axis})")
            raise InputError(
                f"instrument '{instrument.name}' responds {where} to photons from {fmt_kev(need[0])} to "
                f"{fmt_kev(need[1])}, outside {limit_txt}; choose a band inside "
                f"{lim[0]:.6g}-{lim[1]:.6g} keV (nothing is extrapolated)")
        needs.append(need)
    if not needs:
        raise InputError(f"instrument '{instrument.name}' has no response in the requested bands "
                         f"{[b[0] for b in blist]}")
    return needs


def _response_edges(instrument, prep, blist, nh: float | None, input_grid):
    """Input energy grid (ascending keV edges) for the temperature responses, and its description.

    The automatic grid is the instrument's own energy-bin edges plus the band edges, over the photon
    energies that contribute to the requested bands; with ``nh`` its bins are split to relative
    width <= 0.1 %.
    """
    if input_grid is not None:
        g = SpectralGrid("input_grid", input_grid, edges=True)
        e = np.asarray(g.energy_edges, dtype=float)
        return (e if e[-1] > e[0] else e[::-1].copy()), "user input_grid"
    e_tab = prep.table.energy
    lim = [float(e_tab[0]), float(e_tab[-1])]
    limit_txt = f"the emissivity table's continuum grid ({lim[0]:.6g}-{lim[1]:.6g} keV)"
    if nh:
        ilo, ihi = ism_range_kev()
        lim = [max(lim[0], ilo), min(lim[1], ihi)]
        limit_txt += f" and the interstellar absorption model ({ilo:.6g}-{ihi:.6g} keV, needed with nh)"
    needs = _check_band_inside(instrument, blist, lim, limit_txt)
    lo = min(n[0] for n in needs)
    hi = max(n[1] for n in needs)
    extra = ([] if instrument.redistribution is not None
             else [x for _, a, b in blist if a is not None for x in (a, b)])
    e = np.unique(np.concatenate([instrument.energy_lo.value, instrument.energy_hi.value,
                                  np.asarray(extra, dtype=float)]))
    e = np.concatenate([[lo], e[(e > lo) & (e < hi)], [hi]])
    desc = f"the instrument's own energy bins and band edges, {lo:.6g}-{hi:.6g} keV"
    if nh:
        e = refine_edges(e)
        desc += " (split to relative bin width <= 0.1 % for the absorption)"
    return e, desc


# ----------------------------------------------------------------------------- kernel
def _band_rows(instrument, eq, blist, input_grid) -> np.ndarray:
    """Band operator (n_bands, n_in) in cm^2 on the energy edges ``eq``; "total" rows sum all channels."""
    try:
        rows = []
        named = [(lo, hi) for _, lo, hi in blist if lo is not None]
        bm = instrument.band_matrix(eq, [np.array(p) * u.keV for p in named]) if named else None
        k = 0
        for _, lo, _hi in blist:
            if lo is None:
                rows.append(instrument.total_band_row(eq))
            else:
                rows.append(bm[k])
                k += 1
    except InputError as exc:
        if input_grid is not None:
            raise InputError(f"input_grid: {exc}") from None
        raise
    return np.vstack(rows)


def _response_kernel(instrument, prep, blist, nh: float | None, ism_abundances, input_grid):
    """Temperature responses (n_bands, n_T) in counts s^-1 per cm^-3 of EM at 1 pc, the grid text and edges.

    Cached per instrument and (prepared table's content key, N_H, ISM abundances, band limits)
    unless ``input_grid`` is given or the prepared table has no key.
    """
    cache = kkey = None
    if input_grid is None and prep.key is not None:
        cache = _KERNELS.setdefault(instrument, OrderedDict())
        kkey = (prep.key, nh, ism_key(ism_abundances) if nh else None, tuple((b[1], b[2]) for b in blist))
        hit = cache.get(kkey)
        if hit is not None:
            cache.move_to_end(kkey)
            return hit
    edges, grid_desc = _response_edges(instrument, prep, blist, nh, input_grid)
    B = _band_rows(instrument, edges * u.keV, blist, input_grid)                          # (n_b, n_in) cm^2
    E = binned_emissivity(edges, prep, photons=True, nh=nh, ism_abundances=ism_abundances)   # (n_T, n_in)
    # einsum, not B @ E.T: OpenBLAS takes ~100x longer on this short-wide product on some machines
    K = np.einsum("bi,ti->bt", B, E) / FOUR_PI_PC2
    K.setflags(write=False)
    if cache is not None:
        cache[kkey] = (K, grid_desc, edges)
        if len(cache) > _CACHE_SIZE:
            cache.popitem(last=False)
    return K, grid_desc, edges


def _response_attrs(instrument, prep, nh, ism_abundances, grid_desc, edges) -> dict:
    """attrs shared by temperature responses and count rates."""
    attrs = prep.attrs()
    attrs.update(ism_attrs(nh, ism_abundances))
    attrs.update({
        "instrument": instrument.name,
        "instrument_description": instrument.description,
        "instrument_provenance": json.dumps(instrument.provenance, default=str, sort_keys=True),
        "band_axis": instrument.band_axis,
        "input_grid": f"{grid_desc}; {edges.size - 1} bins",
    })
    return attrs


# ----------------------------------------------------------------------------- temperature response
def temperature_response(instrument, table=None, abundances="coronal", density=None, pressure=None, bands=None,
                         nh=None, ism_abundances="photospheric", input_grid=None) -> xr.DataArray:
    """Temperature response K_b(T) of each band: counts s^-1 per unit emission measure at 1 pc.

    ``rate_b = sum_T EM(T) K_b(T) (1 pc / d)^2`` for a volume DEM at distance d, EM =
    integral n_e n_H dV in cm^-3.

    Parameters
    ----------
    instrument : Instrument
    table : EmissivityTable, optional
        Default: the embedded table (:func:`synthcorona.load_emissivity`).
    abundances : str, dict or AbundanceSet
        Named set or {symbol: n_X/n_H}; elements missing from a dict are zero and are listed
        in ``attrs["abundance_note"]``.
    density, pressure : Quantity, optional
        Electron density [cm^-3] (default 1e10) or constant pressure n_e T [K cm^-3].
    bands : None, str, Band, Quantity pair, dict or list of these
        None: every named band, or a single band "total" (all channels) if the instrument
        has none. "total" always selects all channels unless a band has that name. Limits
        are channel energies with a redistribution matrix, photon energies without.
    nh : Quantity [cm^-2], optional
        Interstellar hydrogen column in [0, 1e24]; default: no absorption. Needs the
        response inside the absorption model's 10 eV-10 keV.
    ism_abundances : str or dict
        Abundances of the absorbing gas.
    input_grid : Quantity, optional
        Bin edges (energy or wavelength) of the photon spectrum to fold instead of the
        automatic grid (see Method).

    Returns
    -------
    xarray.DataArray
        Dims ("band", "logT"), units ``attrs["units"]`` = "cm3 ct / s"
        (counts s^-1 per cm^-3 of EM at the reference distance 1 pc); coordinates ``band_lo``,
        ``band_hi`` (keV; the instrument's response range for "total"). ``attrs`` carry the
        reference distance, absorption, abundances (with the note on missing elements),
        density model, table provenance and the instrument's name and provenance.

    Method
    ------
    ``K_b(T) = S_b @ eps(T) / (4 pi (1 pc)^2)`` with ``S_b = band_matrix(edges)`` (cm^2 per
    input bin, including the redistribution and channel selection) and ``eps`` the photon
    emissivity per unit EM in each input bin, absorbed by ``exp(-sigma N_H)``
    (:func:`synthcorona.instruments.observables.binned_emissivity`). The automatic input
    grid is the instrument's own energy-bin edges plus the band edges, over the photon
    energies that contribute to the requested bands. On that grid the result is exact for
    the instrument's piecewise-constant effective area: the continuum is integrated
    exactly over each bin and each line falls in the one bin holding its energy. With
    ``nh`` the bins are split to a relative width <= 0.1 % and the continuum takes the
    transmission at each bin's log-centre, the lines at their own energy. If a band needs
    photons outside the table's continuum grid (or outside 10 eV-10 keV with ``nh``)
    :class:`InputError` says so. Emissivity matrices are cached per (abundances/density,
    grid, N_H).
    """
    nhv = nh_value(nh)
    prep = prepare(table, abundances, density, pressure)
    blist = response_bands(instrument, bands)
    K, grid_desc, edges = _response_kernel(instrument, prep, blist, nhv, ism_abundances, input_grid)
    rng = instrument.energy_range.value
    lo = np.array([rng[0] if a is None else a for _, a, _ in blist])
    hi = np.array([rng[1] if b is None else b for _, _, b in blist])
    attrs = _response_attrs(instrument, prep, nhv, ism_abundances, grid_desc, edges)
    attrs.update({
        "units": TEMPERATURE_RESPONSE_UNIT.to_string(),
        "quantity": ("count rate per unit volume emission measure (EM = integral n_e n_H dV, cm-3) of "
                     "isothermal plasma at the reference distance"),
        "reference_distance": f"{REFERENCE_DISTANCE_PC:g} pc",
    })
    return xr.DataArray(
        K, dims=("band", "logT"),
        coords={"band": [b[0] for b in blist], "logT": prep.table.logT.copy(),
                "band_lo": ("band", lo, {"units": "keV"}), "band_hi": ("band", hi, {"units": "keV"})},
        attrs=attrs, name="temperature_response")


# ----------------------------------------------------------------------------- count rates
def _geometry(em_unit, distance, solid_angle):
    """Scale from temperature response to count rate (an array of the distance's shape), and the geometry attrs."""
    if em_unit.is_equivalent(u.cm**-3):
        if solid_angle is not None:
            raise InputError("solid_angle applies to a column DEM (cm^-5); this DEM is a volume DEM (cm^-3): "
                             "give distance= instead", argument="solid_angle")
        scale = (REFERENCE_DISTANCE_CM / distance_cm(distance)) ** 2
        return scale, {"distance_pc": np.asarray(as_quantity("distance", distance, u.pc).value).tolist()}
    if distance is not None:
        raise InputError("distance is meaningless for a column DEM (cm^-5), which gives an intensity; "
                         "give solid_angle= (the solid angle observed, e.g. one pixel) instead")
    if solid_angle is None:
        raise InputError("a column DEM (cm^-5) needs solid_angle= (e.g. the solid angle of one pixel, "
                         "in sr or arcsec^2) to give a count rate")
    om = as_quantity("solid_angle", solid_angle, u.sr)
    check_finite("solid_angle", om)
    if np.ndim(om) != 0 or not om.value > 0:
        raise InputError(f"solid_angle={solid_angle} must be a single value > 0 sr (valid range (0, 4 pi] sr)")
    return np.asarray(REFERENCE_DISTANCE_CM**2 * float(om.value)), {"solid_angle_sr": float(om.value)}


def _count_rate_values(instrument, dem, distance, nh, band, table, abundances, density, pressure, ism_abundances,
                       solid_angle):
    """Count rates (shape + (n_bands,)) in counts s^-1, the band list, and attrs pieces.

    ``shape`` is the broadcast of the DEM batch, the distance and ``nh``; one temperature response per
    distinct column of ``nh``.
    """
    prep = prepare(table, abundances, density, pressure)
    em_unit = check_dem(dem)
    blist = response_bands(instrument, band)
    scale, geometry = _geometry(em_unit, distance, solid_angle)
    grids = {}

    def kernel(col):
        K, grid_desc, edges = _response_kernel(instrument, prep, blist, col, ism_abundances, None)
        grids[col or 0.0] = (grid_desc, edges)
        return K

    kernels, select, nh_shape = nh_kernels(nh, kernel)
    shape = broadcast_batch(dem.batch_shape, distance=scale.shape, nh=nh_shape)
    vals = fold(dem, prep, kernels, select=select, shape=shape, name="count rates",
                what_to_change="dem (a smaller batch), distance or nh")
    vals = vals * scale[..., None]
    grid_desc, edges = grids[max(grids)]            # the finest grid (split for the largest column)
    nhv = nh_values(nh)
    nhv = float(nhv) if nhv is not None and nhv.ndim == 0 else nhv
    return vals, blist, (prep, nhv, grid_desc, edges, geometry)


def count_rate(instrument, dem, distance=None, nh=None, band=None, table=None, abundances="coronal", density=None,
               pressure=None, ism_abundances="photospheric", solid_angle=None) -> u.Quantity:
    """Count rate (counts s^-1) of a DEM or a batch of DEMs, with interstellar absorption.

    Parameters
    ----------
    instrument : Instrument
    dem : synthcorona.dem.DEM
        ``dem.em_weights(table.logT)`` has shape batch + (n_T,). A volume DEM (cm^-3) needs
        ``distance``; a column DEM (cm^-5) needs ``solid_angle`` instead.
    distance : Quantity [length]
        Distance of the star, > 0; an array broadcasts against the DEM batch shape (numpy rules).
    nh : Quantity [cm^-2], optional
        Interstellar hydrogen column, [0, 1e24] cm^-2; an array broadcasts against the DEM batch
        and the distance (one temperature response per distinct column).
    band : None, str, Band, Quantity pair, or list/dict of these
        None: all named bands (or "total"), result has a last axis of bands in definition
        order. A single band name or (lo, hi) Quantity: no band axis. A list or dict: a
        last axis in that order. (lo, hi) limits are channel energies with a
        redistribution matrix, photon energies otherwise.
    table, abundances, density, pressure, ism_abundances
        As for :func:`temperature_response`.
    solid_angle : Quantity [sr], optional
        Solid angle observed, for a column DEM (e.g. one pixel).

    Returns
    -------
    Quantity
        In counts s^-1, shape = broadcast of the DEM batch, distance and nh shapes (+ (n_bands,)).
        Shapes that do not broadcast raise :class:`InputError` naming the argument. See
        :func:`count_rates` for the same numbers as a labelled xarray.DataArray with provenance.

    Method
    ------
    ``rate = w @ K^T (1 pc / d)^2`` with ``w`` the EM weights of the DEM on the table grid
    and ``K`` from :func:`temperature_response` (:func:`synthcorona.batch.fold`: chunks of the batch
    that fit the memory budget).
    For a column DEM, ``rate = w @ (S @ eps)^T / (4 pi sr) * Omega``.
    """
    vals, blist, _ = _count_rate_values(instrument, dem, distance, nh, band, table, abundances, density, pressure,
                                        ism_abundances, solid_angle)
    q = vals * COUNT_RATE_UNIT
    if band is not None and is_single_band(band):
        return q[..., 0]
    return q


def count_rates(instrument, dem, distance=None, nh=None, band=None, table=None, abundances="coronal", density=None,
                pressure=None, ism_abundances="photospheric", solid_angle=None) -> xr.DataArray:
    """Count rates per band as an xarray.DataArray with units and provenance.

    Same arguments and numbers as :func:`count_rate`; dims are the batch dims (of the DEM batch
    broadcast with distance and nh: "dem" for 1-D, "dem_0", "dem_1", ... otherwise; none for one value) followed
    by "band" (always present). ``attrs`` give units (counts s^-1), distance or solid
    angle, absorption, abundances (including which elements were taken as zero),
    density model, table and instrument provenance.
    """
    vals, blist, (prep, nhv, grid_desc, edges, geometry) = _count_rate_values(
        instrument, dem, distance, nh, band, table, abundances, density, pressure, ism_abundances, solid_angle)
    nb = vals.ndim - 1
    dims = (() if nb == 0 else ("dem",) if nb == 1 else tuple(f"dem_{i}" for i in range(nb))) + ("band",)
    attrs = _response_attrs(instrument, prep, nhv, ism_abundances, grid_desc, edges)
    attrs.update({"units": COUNT_RATE_UNIT.to_string(), "quantity": "count rate", "dem": repr(dem)})
    attrs.update({k: json.dumps(v) for k, v in geometry.items()})
    return xr.DataArray(vals, dims=dims, coords={"band": [b[0] for b in blist]}, attrs=attrs, name="count_rate")
