"""Tests of the dimming add-ons: EM-series light curves, detection grids, plots, huge-count window
test, and the depth-mass numbers quoted in docs/dimming.md."""
import math
import warnings

import astropy.units as u
import numpy as np
import pytest
import xarray as xr
from scipy import special, stats

from synthcorona.dem import GaussianDEM, IsothermalDEM, MultiComponentDEM
from synthcorona.dimming import (
    CME,
    Corona,
    DimmingScenario,
    Observation,
    Star,
    detection_grid,
    lightcurve_from_em_series,
)
from synthcorona.dimming.statistics import WINDOW_NORMAL_LIMIT, window_test
from synthcorona.errors import InputError
from synthcorona.instruments.designs import load_generic
from synthcorona.plotting.dimming import plot_detection_vs_mass, plot_light_curves, plot_min_mass_vs_distance

# Same invented stars as tests/test_dimming.py: a quiet-Sun-like Gaussian DEM (peak log T 6.15, 0.2 dex,
# 5e49 cm-3; from memory, order of magnitude of full-disk quiet-Sun DEMs) and an invented active K dwarf.
SUN_DEM = GaussianDEM(6.15, 0.2, 5e49 * u.cm ** -3)
STAR_DEM = MultiComponentDEM([GaussianDEM(6.3, 0.15, 3e52 * u.cm ** -3), GaussianDEM(6.9, 0.15, 1e52 * u.cm ** -3)])
BANDS = ["sc-fe9", "sc-fe12"]


def _star(mass=1e17 * u.g, distance=2 * u.pc):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(Star(distance, nh=1e17 * u.cm ** -2), Corona(STAR_DEM, density=1e9 * u.cm ** -3),
                               CME(mass, source_temperature=2e6 * u.K), None, BANDS,
                               Observation(10 * u.h, 60 * u.s, 2 * u.h))


@pytest.fixture(scope="module")
def star():
    return _star()


# ----------------------------------------------------------------------------- window test, huge counts
def test_window_test_huge_counts_matches_gaussian_z():
    # Sun at 1 AU: ~1e10 counts per window. Li & Ma (1983, ApJ 272, 317) eq. 5 with alpha = t_on/t_off = 1:
    # S = (N_on - N_off) / sqrt(N_on + N_off) (from memory). Dimming => sigma = -S.
    n1 = np.array([10 ** 10, 10 ** 10, 10 ** 10])
    n2 = n1 - np.array([0, 300_000, 700_000])
    res = window_test(n1, 1 * u.h, n2, 1 * u.h)
    z = (n1 - n2) / np.sqrt(n1 + n2)
    assert np.all(np.isfinite(res.sigma))
    np.testing.assert_allclose(res.sigma, z, atol=1e-3)
    assert res.sigma[1] == pytest.approx(2.1213, abs=1e-3)
    # unequal windows (t_post = 2 t_pre): Li & Ma eq. 5 with alpha = 2 under the null variance
    # alpha (N_on + N_off) (their eq. 9 simple form; from memory)
    a = 2.0
    n_off = 10 ** 10
    n_on = int(a * n_off - 4e5)
    s = (n_on - a * n_off) / math.sqrt(a * (n_on + n_off))
    r2 = window_test(n_off, 1 * u.h, n_on, 2 * u.h)
    assert float(r2.sigma) == pytest.approx(-s, abs=1e-3)


def test_window_normal_branch_agrees_with_exact_binomial_just_above_limit():
    # Just above the switch-over, the normal approximation vs the exact binomial CDF (scipy.stats.binom).
    n_tot = int(1.2 * WINDOW_NORMAL_LIMIT)
    k = n_tot // 2 - 8000
    sig = float(window_test(n_tot - k, 1 * u.s, k, 1 * u.s).sigma)
    exact = -special.ndtri_exp(stats.binom.logcdf(k, n_tot, 0.5))
    assert sig == pytest.approx(exact, abs=1e-3)
    assert sig == pytest.approx(4.6188, abs=2e-3)  # 2*8000/sqrt(1.2e7)


# ----------------------------------------------------------------------------- EM time series
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


def test_series_bad_inputs_are_named(tmp_path):
    good = _series(np.tile(EM, (2, 1)))
    with pytest.raises(InputError, match="dims"):
        lightcurve_from_em_series(good.rename(logT="energy"), BANDS, 1 * u.AU)
    with pytest.raises(InputError, match="DEM per kelvin"):
        lightcurve_from_em_series(_series(np.tile(EM, (2, 1)), units="cm-3 / K"), BANDS, 1 * u.AU)
    no_units = good.copy()
    no_units.attrs = {}
    with pytest.raises(InputError, match="em has no 'units'"):
        lightcurve_from_em_series(no_units, BANDS, 1 * u.AU)
    # the embedded table spans log T 4.5-8.5
    with pytest.raises(InputError, match=r"log10 T = 8\.7.*outside.*\[4\.5, 8\.5\]"):
        lightcurve_from_em_series(_series(np.tile(EM, (2, 1)), logt=np.array([5.93, 6.1, 6.27, 8.7])),
                                  BANDS, 1 * u.AU)
    # zero EM outside the table range is fine
    lt = np.array([5.93, 6.1, 6.27, 8.7])
    ok = lightcurve_from_em_series(_series(np.tile(np.array([1e48, 3e49, 2e49, 0.0]), (2, 1)), logt=lt),
                                   "sc-fe9", 1 * u.AU)
    assert np.all(ok.count_rate.values > 0)
    with pytest.raises(InputError, match="em="):
        lightcurve_from_em_series(_series(-np.tile(EM, (2, 1))), BANDS, 1 * u.AU)
    with pytest.raises(InputError, match="strictly increasing"):
        lightcurve_from_em_series(_series(np.tile(EM, (2, 1)), logt=LT[::-1]), BANDS, 1 * u.AU)
    with pytest.raises(u.UnitsError, match="distance"):
        lightcurve_from_em_series(good, BANDS, 3.0)
    with pytest.raises(InputError, match="no such netCDF"):
        lightcurve_from_em_series(tmp_path / "missing.nc", BANDS, 1 * u.AU)


# ----------------------------------------------------------------------------- detection grid
def test_detection_grid_reproducible_and_consistent(star):
    kw = dict(distance=[2, 4] * u.pc, mass=[1e17, 4e17, 1.5e18] * u.g, n_realisations=1000, seed=3)
    a = detection_grid(star, **kw)
    b = detection_grid(star, **kw)
    assert a.probability.dims == ("distance", "mass", "band")
    np.testing.assert_array_equal(a.probability.values, b.probability.values)
    assert a.mass.attrs["units"] == "g" and a.distance.attrs["units"] == "pc"
    # common random numbers: monotone in mass
    assert np.all(np.diff(a.probability.values, axis=1) >= 0)
    # a nearer star is easier to detect (more counts, same depth)
    assert np.all(a.probability.sel(distance=2).values >= a.probability.sel(distance=4).values)
    # depth is linear in mass (delta = M * d(delta)/dM for pure mass loss) and independent of distance
    d = a.depth.sel(distance=2, band="sc-fe12").values
    np.testing.assert_allclose(d / d[0], [1, 4, 15], rtol=1e-12)
    np.testing.assert_allclose(a.depth.sel(distance=4).values, a.depth.sel(distance=2).values, rtol=1e-12)
    # one grid point equals the scenario's own calculation with the same seed
    p = star.detection_probability(1000, seed=3, band="sc-fe12", mass=4e17 * u.g).probability.values[0]
    assert float(a.probability.sel(distance=2, mass=4e17, band="sc-fe12")) == p


def test_detection_grid_min_mass_scales_with_distance(star):
    # Gaussian limit: S/N = delta q sqrt(t) / sqrt(q) so the minimum depth scales as q^-1/2 ~ d: doubling the
    # distance doubles the minimum detectable mass (standard Poisson counting argument; common practice, no source).
    ds = detection_grid(star, distance=[2, 4] * u.pc, instrument=[("sc-fe12")], n_realisations=2000, seed=1,
                        min_mass=True, bracket=(1e16 * u.g, 1e19 * u.g))
    m = ds.minimum_detectable_mass.values[:, 0]
    assert np.all(np.isfinite(m))
    assert m[1] / m[0] == pytest.approx(2.0, rel=0.25)
    assert ds.minimum_detectable_mass.attrs["units"] == "g"
    assert ds.attrs["min_mass_notes"] == "all grid points bracketed"


def test_detection_grid_bad_input(star):
    with pytest.raises(u.UnitsError, match="distance"):
        detection_grid(star, distance=[1, 2])
    with pytest.raises(InputError, match="band"):
        detection_grid(star, band="nope")
    with pytest.raises(InputError, match="base_scenario"):
        detection_grid("scenario")


# ----------------------------------------------------------------------------- plots
def test_plot_light_curves(tmp_path, star):
    lc = star.light_curve(n_realisations=3, seed=2, mass=1e18 * u.g)
    fig = plot_light_curves(lc, n_show=2)
    out = tmp_path / "lc.png"
    fig.savefig(out)
    assert out.stat().st_size > 1000
    ax = fig.axes[1]
    lines = ax.get_lines()
    assert len(lines) == 2 + 2 + 1          # 2 realisations, 2 expected curves, the onset marker
    red = [ln for ln in lines if ln.get_label() == "expected with CME"][0]
    np.testing.assert_allclose(red.get_ydata(), lc.expected.sel(band="sc-fe12").values, rtol=1e-12)
    # the realisations drawn are counts / bin width
    np.testing.assert_allclose(lines[0].get_ydata(), lc.counts.sel(band="sc-fe12").values[0] / 60.0)
    # the with-CME curve sits below the without-CME curve after onset: a 1e18 g dimming of depth ~1.3 %
    blue = [ln for ln in lines if ln.get_label() == "expected without CME"][0]
    assert np.min(red.get_ydata() - blue.get_ydata()) < -0.005 * blue.get_ydata()[0]


def test_plot_detection_and_min_mass(tmp_path, star):
    ds = detection_grid(star, mass=[1e17, 4e17, 1.5e18] * u.g, band="sc-fe12", n_realisations=1000, seed=3)
    fig = plot_detection_vs_mass(ds)
    fig.savefig(tmp_path / "p.png")
    line = fig.axes[0].get_lines()[0]
    np.testing.assert_allclose(line.get_xdata(), [1e17, 4e17, 1.5e18])
    np.testing.assert_allclose(line.get_ydata(), ds.probability.sel(band="sc-fe12").values)
    mm = detection_grid(star, distance=[2, 3] * u.pc, band="sc-fe12", n_realisations=1000, seed=3,
                        min_mass=True, bracket=(1e16 * u.g, 1e19 * u.g))
    fig2 = plot_min_mass_vs_distance(mm)
    fig2.savefig(tmp_path / "m.png")
    assert (tmp_path / "m.png").stat().st_size > 1000
    ln = fig2.axes[0].get_lines()[0]
    np.testing.assert_allclose(ln.get_ydata(), mm.minimum_detectable_mass.values)
    assert fig2.axes[0].get_xscale() == "log"
    with pytest.raises(InputError, match="minimum_detectable_mass"):
        plot_min_mass_vs_distance(ds)


# ----------------------------------------------------------------------------- docs numbers (Mason et al. 2016)
def test_depth_mass_numbers_in_docs():
    """Numbers of the table in docs/dimming.md: Sun-as-a-star at 1 AU, quiet-Sun-like DEM, n_e = 1e9 cm-3,
    1.5 MK source, no flare. Mason et al. (2016, ApJ 830, 20) report M ~ depth^(1/2) empirically (from memory);
    the model is linear, depth ~ M."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e9 * u.cm ** -3),
                            CME(1e14 * u.g, source_temperature=1.5e6 * u.K), None, BANDS,
                            Observation(12 * u.h, 60 * u.s, 2 * u.h))
    d = s.depth(mass=[1e14, 1e15, 1e16] * u.g)
    depth = d.depth.values                                   # (mass, band)
    np.testing.assert_allclose(depth[:, 0], [4.806e-4, 4.806e-3, 4.806e-2], rtol=1e-3)
    np.testing.assert_allclose(depth[:, 1], [1.312e-3, 1.312e-2, 1.312e-1], rtol=1e-3)
    np.testing.assert_allclose(depth[1:] / depth[:-1], 10.0, rtol=1e-12)   # slope 1 in log-log
    np.testing.assert_allclose(d.removed_emission_measure.values, [4.417e46, 4.417e47, 4.417e48], rtol=1e-3)


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


def test_source_density_outside_the_table_is_said_not_silent():
    # The table holds log n_e 8-12 (docs/table_format.md); a 1e7 cm-3 source keeps its own density in
    # Delta EM = n_e M / (mu_H m_H) but its emissivities come from the 1e8 plane, with a warning.
    with pytest.warns(UserWarning, match=r"source density 1e\+07 cm-3 is outside the emissivity table"):
        s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e7 * u.cm ** -3),
                            CME(1e14 * u.g, source_temperature=1.5e6 * u.K), None, ["sc-fe9"],
                            Observation(12 * u.h, 60 * u.s, 2 * u.h))
    assert s.density == 1e7 and s.emissivity_density == pytest.approx(1e8)
