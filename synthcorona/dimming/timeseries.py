r"""Light curves from a user-supplied time series of emission measures EM(T, t).

A hydrodynamic or MHD simulation of an eruption can be exported as the emission measure in
temperature bins at each output time. :func:`lightcurve_from_em_series` folds such a series
through instrument temperature responses:

.. math:: r_b(t) = (1\,\mathrm{pc}/d)^2 \sum_i W_i(t)\, K_b(T_i),

with :math:`K_b` from :meth:`synthcorona.instruments.instrument.Instrument.temperature_response`
(counts s-1 per cm-3 of EM at 1 pc) on the emissivity table's log T grid :math:`T_i`, and
:math:`W_i(t)` the user's EM re-gridded onto that grid.

Input convention: the values are **EM per temperature bin** (units attribute ``"cm-3"``), i.e.
:math:`\int_{\mathrm{bin}} n_e n_H\, dV` of the plasma whose temperature falls in the bin, placed
at the bin's temperature. A DEM per kelvin (``"cm-3 / K"``) is refused with a message saying to
multiply by the bin widths first, because the bin edges are not known from the node list.

Re-gridding: each user node :math:`x_j = \log_{10} T_j` gives its EM to the two table nodes
around it with linear ("hat") weights in log T, :math:`(1 - f, f)` with
:math:`f = (x_j - x_i)/(x_{i+1} - x_i)` -- the projection that
:meth:`synthcorona.dem.IsothermalDEM.em_weights` uses for an isothermal component. It conserves
the total EM exactly, and :math:`\sum_i W_i K(T_i)` equals the response interpolated linearly in
log T at each user node. EM (> 0) at a node outside the table's temperature range is refused;
nodes outside the range holding zero EM are ignored.
"""
from __future__ import annotations

import os
import pathlib

import astropy.units as u
import numpy as np
import xarray as xr

from ..constants import PARSEC_CM
from ..errors import InputError
from ..validation import as_quantity, check_range

__all__ = ["lightcurve_from_em_series", "regrid_weights"]

_SNAP = 1e-6
_TEMPERATURE_DIMS = ("logT", "temperature")


def regrid_weights(logT_user, logT_table) -> np.ndarray:
    """Hat-weight matrix R (n_user, n_table): EM on user nodes ``@ R`` = EM on the table nodes.

    Rows of nodes outside the table range (beyond a 1e-6-cell tolerance) are all zero; use
    :func:`lightcurve_from_em_series` for the check that no EM sits there.
    """
    x = np.asarray(logT_table, dtype=float)
    xu = np.asarray(logT_user, dtype=float)
    dx = np.diff(x)
    inside = (xu >= x[0] - _SNAP * dx[0]) & (xu <= x[-1] + _SNAP * dx[-1])
    xc = np.clip(xu, x[0], x[-1])
    i = np.clip(np.searchsorted(x, xc, side="right") - 1, 0, x.size - 2)
    f = (xc - x[i]) / dx[i]
    f = np.where(f < _SNAP, 0.0, np.where(f > 1.0 - _SNAP, 1.0, f))
    r = np.zeros((xu.size, x.size))
    rows = np.arange(xu.size)
    r[rows, i] = np.where(inside, 1.0 - f, 0.0)
    r[rows, i + 1] += np.where(inside, f, 0.0)
    return r


def _load(em):
    """-> (DataArray, source description)."""
    if isinstance(em, xr.DataArray):
        return em, "xarray.DataArray"
    if isinstance(em, xr.Dataset):
        raise InputError("em is an xarray.Dataset; pass the emission-measure DataArray (e.g. ds['em'])")
    if isinstance(em, (str, os.PathLike)):
        p = pathlib.Path(em)
        if not p.exists():
            raise InputError(f"em={str(em)!r}: no such netCDF file")
        try:
            with xr.open_dataset(p) as ds:
                ds = ds.load()
        except Exception as exc:  # noqa: BLE001 - any reader failure becomes a named input error
            raise InputError(f"em={str(em)!r} could not be read as netCDF: {exc}") from None
        names = list(ds.data_vars)
        if len(names) == 1:
            name = names[0]
        else:
            cand = [n for n in ("emission_measure", "em") if n in names]
            if not cand:
                raise InputError(f"em={str(em)!r} holds variables {names}; name the emission measure "
                                 "'emission_measure' or 'em', or keep a single variable in the file")
            name = cand[0]
        return ds[name], f"netCDF file {p.name}, variable {name!r}"
    raise InputError(f"em={em!r} must be an xarray.DataArray or the path of a netCDF file")


def _unit_of(obj, what):
    s = obj.attrs.get("units")
    if s is None:
        raise InputError(f"{what} has no 'units' attribute; give one (e.g. 'cm-3' for EM per bin, 's' for time)")
    try:
        return u.Unit(str(s))
    except ValueError:
        raise InputError(f"{what} has units {s!r}, which astropy cannot parse") from None


def _temperature_axis(da):
    tdims = [d for d in da.dims if d in _TEMPERATURE_DIMS]
    if "time" not in da.dims or len(tdims) != 1 or da.ndim != 2:
        raise InputError(f"em has dims {tuple(da.dims)}; expected exactly ('time', 'logT') or ('time', "
                         "'temperature') (either order)")
    td = tdims[0]
    if td not in da.coords:
        raise InputError(f"em has no coordinate values for its '{td}' axis")
    vals = np.asarray(da[td].values, dtype=float)
    if td == "logT":
        check_range("em logT coordinate", vals, lo=0.0, hi=10.0, unit_label="(log10 K)")
        x = vals
    else:
        unit = _unit_of(da[td], "em temperature coordinate") if "units" in da[td].attrs else u.K
        if not unit.is_equivalent(u.K):
            raise InputError(f"em temperature coordinate has units '{unit}', not a temperature (K)")
        t = (vals * unit).to_value(u.K)
        check_range("em temperature coordinate", t, lo=0.0, unit_label="K", inclusive=False)
        x = np.log10(t)
    if x.size < 1 or (x.size > 1 and not np.all(np.diff(x) > 0)):
        raise InputError(f"em '{td}' coordinate must be strictly increasing")
    return td, x


def _time_axis(da):
    if "time" not in da.coords:
        raise InputError("em has no coordinate values for its 'time' axis")
    tv = da["time"].values
    if np.issubdtype(tv.dtype, np.datetime64):
        secs = (tv - tv[0]) / np.timedelta64(1, "s")
        origin = str(tv[0])
    else:
        unit = _unit_of(da["time"], "em time coordinate")
        if not unit.is_equivalent(u.s):
            raise InputError(f"em time coordinate has units '{unit}', not a time")
        secs = (np.asarray(tv, dtype=float) * unit).to_value(u.s)
        origin = "as given"
    secs = np.asarray(secs, dtype=float)
    check_range("em time coordinate", secs, unit_label="s")
    if secs.size > 1 and not np.all(np.diff(secs) > 0):
        raise InputError("em time coordinate must be strictly increasing")
    return secs, origin


def lightcurve_from_em_series(em, instrument, distance, nh=None, bands=None, table=None, abundances="coronal",
                              density=None) -> xr.Dataset:
    """Count-rate light curves of a time series of emission measures EM(T, t).

    Parameters
    ----------
    em : xarray.DataArray or path of a netCDF file
        Dims ``("time", "logT")`` or ``("time", "temperature")`` (either order) with coordinate
        values; ``attrs["units"]`` = ``"cm-3"`` (volume EM **per temperature bin**, see the module
        docstring). The time coordinate is numeric with a ``units`` attribute (e.g. "s") or
        datetime64. A temperature coordinate without units is taken in K. A netCDF file must
        hold one variable or one named "emission_measure" or "em".
    instrument : Instrument, generic instrument name, list of these, or dict label -> instrument
        Every named band of each instrument (or "total") is used unless ``bands`` is given.
    distance : Quantity [length]
        Distance of the star, > 0.
    nh : Quantity [cm-2], optional
        Interstellar hydrogen column.
    bands : str, (lo, hi) Quantity pair, or list of these, optional
        Bands of a single instrument (as for ``Instrument.temperature_response``).
    table, abundances, density
        Emissivity table, abundances and electron density of the emissivities, as for
        ``Instrument.temperature_response``.

    Returns
    -------
    xarray.Dataset
        With ``count_rate`` (band, time) [ct/s], ``emission_measure`` (time) [cm-3],
        the re-gridded EM ``em_on_table_grid`` (time, logT) [cm-3], coordinates ``time`` (s from the
        first output time or as given) and ``band``; attrs give the provenance.

    Raises
    ------
    InputError
        Bad dims/coordinates/units, negative or non-finite EM, or EM outside the table's
        temperature range (the message names the node and the range).
    """
    from ..emissivity import resolve_table

    da, source = _load(em)
    td, x_user = _temperature_axis(da)
    values = _em_values(da, td)
    secs, origin = _time_axis(da)

    d_cm = float(np.asarray(as_quantity("distance", distance, u.cm).value))
    check_range("distance", d_cm, lo=0.0, unit_label="cm", inclusive=False)
    table = resolve_table(table)
    x = np.asarray(table.logT, dtype=float)
    w = _on_table_grid(values, x_user, x, td)                          # (n_time, n_T)
    resolved = _resolve_bands(instrument, bands)
    kern, los, his, names, attrs_k = _band_kernels(resolved, table, abundances, density, nh)   # kern (n_b, n_T)
    scale = (PARSEC_CM / d_cm) ** 2
    rates = (w @ kern.T).T * scale                                     # (n_b, n_time)
    labels = [lab for lab, _, _ in resolved]

    attrs = {
        "source": source,
        "em_convention": "emission measure per temperature bin (cm-3), re-gridded with linear hat weights in log T",
        "instruments": ", ".join(f"{lab}={n}" for lab, n in zip(labels, names)),
        "distance_pc": d_cm / PARSEC_CM,
        "nh_cm-2": float(as_quantity("nh", nh, u.cm ** -2).value) if nh is not None else 0.0,
        "abundances": str(abundances),
        "density": str(density) if density is not None else "table default",
        "time_origin": origin,
        "method": "rate_b(t) = (1 pc/d)^2 sum_i W_i(t) K_b(T_i) (synthcorona.dimming.timeseries)",
    }
    for key in ("table_chianti_version", "table_content_hash", "table_path", "abundance_name", "abundance_note",
                "density_model", "ism_absorption"):
        if attrs_k and key in attrs_k:
            attrs[key] = str(attrs_k[key])
    return xr.Dataset(
        {
            "count_rate": (("band", "time"), rates, {"units": "ct / s", "long_name": "expected source count rate"}),
            "emission_measure": (("time",), values.sum(axis=1), {"units": "cm-3"}),
            "em_on_table_grid": (("time", "logT"), w, {"units": "cm-3"}),
        },
        coords={"time": ("time", secs, {"units": "s"}), "band": labels, "logT": ("logT", x, {"units": "log10(K)"}),
                "band_lo": ("band", np.array(los), {"units": "keV"}),
                "band_hi": ("band", np.array(his), {"units": "keV"})},
        attrs=attrs)


def _em_values(da, td) -> np.ndarray:
    """EM values (n_time, n_nodes) [cm-3] of the series ``da`` with temperature dim ``td``; units and signs checked."""
    unit = _unit_of(da, "em")
    if unit.is_equivalent(u.cm ** -3 / u.K):
        raise InputError(f"em has units '{unit}' (a DEM per kelvin); this function takes EM per temperature bin "
                         "(units 'cm-3'): multiply each node by its bin width in K first")
    if not unit.is_equivalent(u.cm ** -3):
        raise InputError(f"em has units '{unit}'; expected a volume emission measure per temperature bin, 'cm-3'")
    values = (np.asarray(da.transpose("time", td).values, dtype=float) * unit).to_value(u.cm ** -3)
    check_range("em", values, lo=0.0, unit_label="cm-3")
    return values


def _on_table_grid(values, x_user, x, td) -> np.ndarray:
    """EM (n_time, n_T) re-gridded from the user's nodes ``x_user`` onto the table's ``x`` (log10 K); EM at a
    node outside the table range is refused."""
    r = regrid_weights(x_user, x)
    outside = ~r.any(axis=1)
    if np.any(outside):
        em_out = values[:, outside]
        if np.any(em_out > 0):
            j = np.flatnonzero(outside)[np.argmax(em_out.max(axis=0) > 0)]
            raise InputError(
                f"em has emission measure at {td} node log10 T = {x_user[j]:.4g} (T = {10 ** x_user[j]:.4g} K), "
                f"outside the emissivity table's range log10 T = [{x[0]:g}, {x[-1]:g}] "
                f"([{10 ** x[0]:.4g}, {10 ** x[-1]:.4g}] K); drop or fold that emission first")
    return values @ r


def _resolve_bands(instrument, bands) -> list:
    """(label, Instrument, band) of every band to fold: ``bands`` of a single instrument, or every named band of
    each instrument (:func:`synthcorona.instruments.channels.resolve_channels`)."""
    from ..instruments.channels import resolve_channels

    if bands is None:
        return resolve_channels(instrument)
    from ..instruments.designs import load_generic
    from ..instruments.instrument import Instrument

    if isinstance(instrument, str):
        instrument = load_generic(instrument)
    if not isinstance(instrument, Instrument):
        raise InputError("bands= needs a single instrument (Instrument or generic name); for several "
                         "instruments pass a dict label -> (instrument, band)")
    blist = [bands] if (isinstance(bands, str) or isinstance(bands, u.Quantity)
                        or (isinstance(bands, tuple) and len(bands) == 2
                            and isinstance(bands[0], u.Quantity))) else list(bands)
    return [(b if isinstance(b, str) else f"{instrument.name}:{i}", instrument, b) for i, b in enumerate(blist)]


def _band_kernels(resolved, table, abundances, density, nh):
    """Temperature responses of the resolved bands: (kernel (n_b, n_T) [ct s-1 cm3 at 1 pc], band lower and
    upper limits [keV], instrument names, attrs of the first response)."""
    rows, los, his, names = [], [], [], []
    attrs_k = None
    for _, ins, band in resolved:
        k = ins.temperature_response(table=table, abundances=abundances, density=density, bands=band, nh=nh)
        rows.append(np.asarray(k.values[0], dtype=float))
        los.append(float(k.band_lo.values[0]))
        his.append(float(k.band_hi.values[0]))
        names.append(ins.name)
        attrs_k = attrs_k or dict(k.attrs)
    return np.array(rows), los, his, names, attrs_k
