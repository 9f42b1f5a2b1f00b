"""Tests of light curves from EM time series (synthcorona.dimming.timeseries)."""
import astropy.units as u
import numpy as np
import pytest
import xarray as xr
from dimming_setups import BANDS

from synthcorona.dem import IsothermalDEM, MultiComponentDEM
from synthcorona.dimming import lightcurve_from_em_series
from synthcorona.errors import InputError
from synthcorona.instruments.designs import load_generic

LT = np.array([5.93, 6.1, 6.27, 6.52])
EM = np.array([1e48, 3e49, 2e49, 5e48])


def _series(values, logt=LT, dim="logT", units="cm-3"):
    n = values.shape[0]
    coords = {"time": ("time", np.arange(n) * 60.0, {"units": "s"})}
    if dim == "logT":
        coords["logT"] = logt
    else:
        coords["temperature"] = ("temperature", 10 ** logt, {"units": "K"})
    return xr.DataArray(values, dims=("time", dim), coords=coords, attrs={"units": units}, name="em")


def _no_units():
    da = _series(np.tile(EM, (2, 1)))
    da.attrs = {}
    return da


def test_constant_series_equals_isothermal_count_rates():
    # Hat-weight re-gridding is the projection IsothermalDEM.em_weights uses, so a constant series must give
    # Instrument.count_rate of the equivalent sum of isothermal components to rounding (1e-9).
    ds = lightcurve_from_em_series(_series(np.tile(EM, (5, 1))), BANDS, 1 * u.AU)
    dem = MultiComponentDEM([IsothermalDEM(10 ** x * u.K, e * u.cm ** -3) for x, e in zip(LT, EM)])
    for b in BANDS:
        ref = float(load_generic(b).count_rate(dem, 1 * u.AU)[0].to_value(u.ct / u.s))
        np.testing.assert_allclose(ds.count_rate.sel(band=b).values, ref, rtol=1e-9)
    assert ds.count_rate.attrs["units"] == "ct / s"
    np.testing.assert_allclose(ds.emission_measure.values, EM.sum(), rtol=1e-12)
    np.testing.assert_allclose(ds.em_on_table_grid.sum("logT").values, EM.sum(), rtol=1e-12)  # EM conserved


def test_series_is_linear_in_time_and_with_nh():
    f = np.array([1.0, 0.5, 2.0])
    ds = lightcurve_from_em_series(_series(f[:, None] * EM[None, :]), "sc-fe12", 2 * u.pc, nh=1e18 * u.cm ** -2)
    r = ds.count_rate.values[0]
    np.testing.assert_allclose(r / r[0], f, rtol=1e-12)
    ref = float(load_generic("sc-fe12").count_rate(
        MultiComponentDEM([IsothermalDEM(10 ** x * u.K, e * u.cm ** -3) for x, e in zip(LT, EM)]),
        2 * u.pc, nh=1e18 * u.cm ** -2)[0].value)
    assert r[0] == pytest.approx(ref, rel=1e-9)


def test_netcdf_round_trip(tmp_path):
    vals = np.outer([1.0, 0.9, 0.95], EM)
    da = _series(vals, dim="temperature")
    path = tmp_path / "sim_em.nc"
    da.to_netcdf(path)
    a = lightcurve_from_em_series(da, BANDS, 1 * u.AU)
    b = lightcurve_from_em_series(path, BANDS, 1 * u.AU)
    np.testing.assert_allclose(b.count_rate.values, a.count_rate.values, rtol=1e-12)
    assert "sim_em.nc" in b.attrs["source"]
    np.testing.assert_allclose(b.time.values, [0, 60, 120])


@pytest.mark.parametrize("make_em,distance,error,match", [
    (lambda: _series(np.tile(EM, (2, 1))).rename(logT="energy"), 1 * u.AU, InputError, "dims"),
    (lambda: _series(np.tile(EM, (2, 1)), units="cm-3 / K"), 1 * u.AU, InputError, "DEM per kelvin"),
    (_no_units, 1 * u.AU, InputError, "em has no 'units'"),
    # the embedded table spans log T 4.5-8.5
    (lambda: _series(np.tile(EM, (2, 1)), logt=np.array([5.93, 6.1, 6.27, 8.7])), 1 * u.AU, InputError,
     r"log10 T = 8\.7.*outside.*\[4\.5, 8\.5\]"),
    (lambda: _series(-np.tile(EM, (2, 1))), 1 * u.AU, InputError, "em="),
    (lambda: _series(np.tile(EM, (2, 1)), logt=LT[::-1]), 1 * u.AU, InputError, "strictly increasing"),
    (lambda: _series(np.tile(EM, (2, 1))), 3.0, u.UnitsError, "distance"),
])
def test_series_bad_inputs_are_named(make_em, distance, error, match):
    with pytest.raises(error, match=match):
        lightcurve_from_em_series(make_em(), BANDS, distance)


def test_series_zero_em_outside_the_table_and_missing_file(tmp_path):
    # zero EM outside the table range is fine
    lt = np.array([5.93, 6.1, 6.27, 8.7])
    ok = lightcurve_from_em_series(_series(np.tile(np.array([1e48, 3e49, 2e49, 0.0]), (2, 1)), logt=lt),
                                   "sc-fe9", 1 * u.AU)
    assert np.all(ok.count_rate.values > 0)
    with pytest.raises(InputError, match="no such netCDF"):
        lightcurve_from_em_series(tmp_path / "missing.nc", BANDS, 1 * u.AU)


def test_series_datetime_time_and_explicit_bands():
    # datetime64 times become seconds from the first output; explicit (lo, hi) bands of one instrument.
    t = np.array(["2030-01-01T00:00", "2030-01-01T00:02"], dtype="datetime64[ns]")
    da = xr.DataArray(np.full((2, 2), 1e49), dims=("temperature", "time"),
                      coords={"time": t, "temperature": [1e6, 2e6]}, attrs={"units": "cm-3"})
    ds = lightcurve_from_em_series(da, "sc-fe12", 1 * u.pc, bands=[(0.05 * u.keV, 0.08 * u.keV), "total"])
    np.testing.assert_allclose(ds.time.values, [0.0, 120.0])
    assert list(ds.band.values) == ["sc-fe12:0", "total"]
    assert np.all(ds.count_rate.values[0] <= ds.count_rate.values[1])   # a sub-band never exceeds the total
    with pytest.raises(InputError, match="single instrument"):
        lightcurve_from_em_series(da, BANDS, 1 * u.pc, bands="total")
