"""Tests of synthcorona.dem: normalisation, EM weights on a log T grid, batches, files, errors."""
import math
import subprocess
import sys

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable
from scipy.integrate import quad

from synthcorona.dem import (
    DEFAULT_LOGT_GRID,
    GaussianDEM,
    IsothermalDEM,
    MultiComponentDEM,
    PowerLawDEM,
    TabulatedDEM,
)
from synthcorona.errors import InputError

GRID = DEFAULT_LOGT_GRID  # log10 T = 4.5 .. 8.5, step 0.05 (81 nodes)
EM = 1e50 * u.cm**-3


def gaussian_per_logT(x, mu, sigma, em):
    """Analytic Gaussian dEM/dlog10T, written independently of the module."""
    return em * np.exp(-0.5 * ((x - mu) / sigma) ** 2) / (math.sqrt(2 * math.pi) * sigma)


def power_law_per_K(t, slope, tp, tmin, em):
    """Analytic power-law DEM per K for dEM/dlog10T ~ T^slope on [tmin, tp].

    DEM = C T^(slope-1); integral C T^(s-1) dT = C (tp^s - tmin^s)/s (analytic integral).
    """
    c = em * slope / (tp**slope - tmin**slope)
    return np.where((t >= tmin) & (t <= tp), c * t ** (slope - 1.0), 0.0)


def test_default_grid():
    assert GRID.shape == (81,)
    assert GRID[0] == 4.5 and GRID[-1] == 8.5
    np.testing.assert_allclose(np.diff(GRID), 0.05, atol=1e-12)


# ----------------------------------------------------------------------------- normalisation
def make_models():
    tt = np.logspace(5.0, 7.5, 26) * u.K
    return {
        "isothermal": IsothermalDEM(10**6.52 * u.K, EM),
        "gaussian": GaussianDEM(6.5, 0.3, EM),
        "power_law": PowerLawDEM(1.5, 10**6.87 * u.K, EM),
        "tabulated": TabulatedDEM(tt, power_law_per_K(tt.value, 1.5, 10**7.5, 1e5, 1e50) / (u.cm**3 * u.K)),
        "multi": MultiComponentDEM.from_temperatures([3e6, 1e7] * u.K, [6e49, 4e49] * u.cm**-3),
    }


@pytest.mark.parametrize("name", ["isothermal", "gaussian", "power_law", "tabulated", "multi"])
def test_weights_sum_to_total_em(name):
    dem = make_models()[name]
    w = dem.em_weights(GRID)
    assert w.shape == (81,)
    assert w.unit == u.cm**-3
    assert np.all(w.value >= 0)
    # Every model here was built with 1e50 cm^-3 in total (tabulated: analytic integral of the
    # sampled power law, which log-log interpolation reproduces exactly).
    assert dem.total_em.to_value(u.cm**-3) == pytest.approx(1e50, rel=1e-3)
    assert w.sum().to_value(u.cm**-3) == pytest.approx(1e50, rel=1e-3)


def test_tabulated_total_em_is_analytic_power_law_integral():
    # DEM = 2e37 T^0.5 cm^-3 K^-1 on [1e5, 10^7.5] K: integral = 2e37 (T2^1.5 - T1^1.5) / 1.5 (analytic integral)
    tt = np.logspace(5.0, 7.5, 11) * u.K
    d = TabulatedDEM(tt, 2e37 * tt.value**0.5 / (u.cm**3 * u.K))
    expected = 2e37 * ((10**7.5) ** 1.5 - (1e5) ** 1.5) / 1.5
    assert d.total_em.to_value(u.cm**-3) == pytest.approx(expected, rel=1e-10)


def test_gaussian_dem_values_and_normalisation():
    g = GaussianDEM(6.5, 0.3, EM)
    t = np.array([1e6, 10**6.5, 1e7]) * u.K
    x = np.log10(t.value)
    expected = gaussian_per_logT(x, 6.5, 0.3, 1e50) / (t.value * math.log(10))  # per K = per logT / (T ln 10)
    np.testing.assert_allclose(g(t).to_value(u.cm**-3 / u.K), expected, rtol=1e-12)
    # scipy quad over T of the model's DEM gives total_em (outside reference: scipy.integrate.quad in log T)
    total = quad(lambda lt: g(10**lt * u.K).value * 10**lt * math.log(10), 3.0, 10.0, points=[6.5])[0]
    assert total == pytest.approx(1e50, rel=1e-8)


def test_power_law_dem_values():
    p = PowerLawDEM(1.5, 1e7 * u.K, EM, min_temperature=1e5 * u.K)
    t = np.array([5e4, 1e5, 1e6, 1e7, 2e7]) * u.K
    expected = power_law_per_K(t.value, 1.5, 1e7, 1e5, 1e50)  # analytic integral normalisation
    np.testing.assert_allclose(p(t).to_value(u.cm**-3 / u.K), expected, rtol=1e-12)
    assert p(5e4 * u.K).value == 0.0 and p(2e7 * u.K).value == 0.0
    # slope 0 per log T: flat in log T -> DEM per K ~ 1/T, EM per dex = EM / 2 over 2 dex
    flat = PowerLawDEM(0.0, 1e7 * u.K, EM)
    w = flat.em_weights(GRID).value
    inner = (GRID > 5.01) & (GRID < 6.99)
    np.testing.assert_allclose(w[inner], 1e50 / 2.0 * 0.05, rtol=1e-9)  # (EM / 2 dex) * 0.05 dex


def test_power_law_negative_slope():
    # dEM/dlog10T ~ T^-2 on [1e6, 1e8] K: fraction below 1e7 K = (1 - 10^-2)/(1 - 10^-4) (analytic integral)
    p = PowerLawDEM(-2.0, 1e8 * u.K, EM, min_temperature=1e6 * u.K)
    w = p.em_weights(GRID).value
    below = w[GRID < 7.0].sum() + 0.5 * w[GRID == 7.0].sum()
    assert below / 1e50 == pytest.approx((1 - 1e-2) / (1 - 1e-4), rel=1e-3)
    assert w.sum() == pytest.approx(1e50, rel=1e-12)


# ----------------------------------------------------------------------------- moments and kernels
def test_gaussian_mean_and_variance_from_weights():
    g = GaussianDEM(6.43, 0.3, EM)  # peak between nodes
    w = g.em_weights(GRID).value
    mean = (w * GRID).sum() / w.sum()
    assert mean == pytest.approx(6.43, abs=1e-3)
    # Hat-function projection: sum w x^2 integrates the linear interpolant of x^2, which
    # exceeds x^2 by (x - x_i)(x_i+1 - x), on average dx^2/6 (analytic): var = sigma^2 + dx^2/6
    var = (w * (GRID - mean) ** 2).sum() / w.sum()
    assert var == pytest.approx(0.3**2 + 0.05**2 / 6.0, abs=1e-6)


def test_isothermal_on_a_node_gives_one_weight():
    iso = IsothermalDEM(10**6.5 * u.K, EM)
    w = iso.em_weights(GRID).value
    assert np.count_nonzero(w) == 1
    assert w[40] == 1e50 and GRID[40] == 6.5
    # also at the grid ends
    assert np.count_nonzero(IsothermalDEM(10**8.5 * u.K, EM).em_weights(GRID).value) == 1
    assert IsothermalDEM(10**4.5 * u.K, EM).em_weights(GRID).value[0] == 1e50


def test_isothermal_between_nodes_integrates_linear_kernel_exactly():
    t0 = 10**6.5371
    iso = IsothermalDEM(t0 * u.K, EM)
    w = iso.em_weights(GRID).value
    assert np.count_nonzero(w) == 2
    kernel = 3.0 + 2.0 * GRID  # linear in log T
    assert (w * kernel).sum() == pytest.approx(1e50 * (3.0 + 2.0 * 6.5371), rel=1e-12)
    np.testing.assert_allclose(w[40:42] / 1e50, [1 - 0.742, 0.742], rtol=1e-9)  # (6.5371 - 6.5)/0.05


def test_continuous_weights_integrate_linear_kernel_exactly():
    # exactness for a kernel linear in log T holds for every model (first moment preserved)
    p = PowerLawDEM(1.5, 10**6.87 * u.K, EM)
    w = p.em_weights(GRID).value
    # mean log T of dEM/dlogT ~ T^1.5 = 10^(1.5 x) on [5, 6.87]: analytic
    b = 1.5 * math.log(10)
    lo, hi = 5.0, 6.87
    mean = ((hi - 1 / b) * math.exp(b * hi) - (lo - 1 / b) * math.exp(b * lo)) / (math.exp(b * hi) - math.exp(b * lo))
    assert (w * GRID).sum() / w.sum() == pytest.approx(mean, abs=1e-10)


def test_non_uniform_grid():
    x = np.array([4.5, 5.0, 5.8, 6.0, 6.1, 6.45, 7.0, 7.9, 8.5])
    for dem in (GaussianDEM(6.3, 0.3, EM), PowerLawDEM(1.5, 10**6.7 * u.K, EM), IsothermalDEM(10**6.2 * u.K, EM)):
        w = dem.em_weights(x).value
        assert w.sum() == pytest.approx(1e50, rel=1e-9)
    # isothermal log T = 6.2 between 6.1 and 6.45: linear weights (6.2 - 6.1)/0.35 on 6.45
    w = IsothermalDEM(10**6.2 * u.K, EM).em_weights(x).value
    np.testing.assert_allclose(w[4:6] / 1e50, [1 - 0.1 / 0.35, 0.1 / 0.35], rtol=1e-9)
    # Gaussian first moment preserved on any grid (hat functions reproduce linear kernels)
    w = GaussianDEM(6.3, 0.3, EM).em_weights(x).value
    assert (w * x).sum() / w.sum() == pytest.approx(6.3, abs=1e-6)


KERNEL = lambda t: t**0.5  # noqa: E731  smooth kernel K = T^0.5


def test_gaussian_kernel_integral_matches_quad():
    g = GaussianDEM(6.8, 0.25, EM)
    got = (g.em_weights(GRID).value * KERNEL(10**GRID)).sum()
    ref = quad(lambda x: gaussian_per_logT(x, 6.8, 0.25, 1e50) * KERNEL(10**x), 3, 10, points=[6.8])[0]  # scipy quad
    assert got == pytest.approx(ref, rel=1e-3)


def test_power_law_kernel_integral_matches_quad():
    tp = 10**6.87  # cut-off between grid nodes
    p = PowerLawDEM(1.5, tp * u.K, EM)
    got = (p.em_weights(GRID).value * KERNEL(10**GRID)).sum()
    ref = quad(lambda t: power_law_per_K(t, 1.5, tp, 1e5, 1e50) * KERNEL(t), 1e5, tp, limit=200)[0]  # scipy quad
    assert got == pytest.approx(ref, rel=1e-3)


def test_tabulated_kernel_integral_matches_quad():
    tt = np.logspace(5.3, 7.7, 17) * u.K
    dem = 1e50 * np.exp(-0.5 * ((np.log10(tt.value) - 6.6) / 0.35) ** 2) / tt.value  # arbitrary smooth table
    tab = TabulatedDEM(tt, dem / (u.cm**3 * u.K))
    got = (tab.em_weights(GRID).value * KERNEL(10**GRID)).sum()
    ref = quad(lambda t: tab(t * u.K).value * KERNEL(t), tt.value[0], tt.value[-1], points=tt.value[1:-1], limit=200)[0]
    assert got == pytest.approx(ref, rel=1e-3)  # scipy quad of the tabulated (interpolated) DEM
    assert tab.em_weights(GRID).sum().value == pytest.approx(tab.total_em.value, rel=1e-12)


def test_multicomponent_kernel_integral():
    m = MultiComponentDEM([IsothermalDEM(10**6.5 * u.K, EM), GaussianDEM(7.0, 0.2, 2 * EM)])
    got = (m.em_weights(GRID).value * KERNEL(10**GRID)).sum()
    ref = 1e50 * KERNEL(10**6.5) + quad(lambda x: gaussian_per_logT(x, 7.0, 0.2, 2e50) * KERNEL(10**x), 4, 10)[0]
    assert got == pytest.approx(ref, rel=1e-3)
    assert m.total_em.value == pytest.approx(3e50)


def test_narrow_gaussian_tends_to_isothermal():
    narrow = GaussianDEM(6.5371, 1e-4, EM).em_weights(GRID).value
    iso = IsothermalDEM(10**6.5371 * u.K, EM).em_weights(GRID).value
    np.testing.assert_allclose(narrow, iso, rtol=1e-6, atol=1e50 * 1e-12)


# ----------------------------------------------------------------------------- batches
def test_batch_of_10000_gaussians():
    rng = np.random.default_rng(1)
    mu = rng.uniform(6.0, 7.2, 10000)
    sigma = rng.uniform(0.02, 0.25, 10000)  # at most 1e-7 of any EM beyond log T = 8.5
    em = rng.uniform(1e49, 1e51, 10000) * u.cm**-3
    g = GaussianDEM(mu, sigma, em)
    assert g.batch_shape == (10000,)
    w = g.em_weights(GRID)
    assert w.shape == (10000, 81)
    np.testing.assert_allclose(w.sum(axis=-1).value, em.value, rtol=1e-6)
    single = GaussianDEM(mu[123], sigma[123], em[123]).em_weights(GRID)
    np.testing.assert_allclose(w[123].value, single.value, rtol=1e-12)


def test_batch_broadcasting_and_call_shape():
    g = GaussianDEM(np.array([6.0, 6.5, 7.0])[:, None], np.array([0.1, 0.2]), EM)
    assert g.batch_shape == (3, 2)
    assert g.total_em.shape == (3, 2)
    t = np.logspace(5, 8, 7) * u.K
    assert g(t).shape == (3, 2, 7)
    assert g.em_weights(GRID).shape == (3, 2, 81)
    p = PowerLawDEM(np.array([1.0, 1.5, 2.0]), 1e7 * u.K, EM)
    assert p.em_weights(GRID).shape == (3, 81)
    tt = np.logspace(6, 7, 5) * u.K
    tab = TabulatedDEM(tt, np.array([[1e40] * 5, [2e40] * 5]) * u.cm**-3 / u.K)
    assert tab.batch_shape == (2,)
    np.testing.assert_allclose(tab.total_em.value, [1e40 * 9e6, 2e40 * 9e6], rtol=1e-12)  # constant DEM x 9e6 K
    np.testing.assert_allclose(tab.em_weights(GRID).sum(-1).value, tab.total_em.value, rtol=1e-12)
    assert tab(np.array([2e6, 3e6]) * u.K).shape == (2, 2)
    p2 = PowerLawDEM(1.5, np.array([1e6, 1e7]) * u.K, EM)
    np.testing.assert_allclose(p2.peak_temperature.to_value(u.K), [1e6, 1e7])
    iso = IsothermalDEM(np.array([1e6, 2e6]) * u.K, EM)
    np.testing.assert_allclose(iso.em_weights(GRID).sum(-1).value, [1e50, 1e50])


def test_scaled_is_linear_in_em():
    g = GaussianDEM(6.5, 0.3, EM)
    w = g.em_weights(GRID)
    np.testing.assert_allclose(g.scaled(2.5).em_weights(GRID).value, 2.5 * w.value, rtol=1e-14)
    s = g.scaled(np.array([0.0, 1.0, 3.0]))
    assert s.batch_shape == (3,)
    np.testing.assert_allclose(s.total_em.value, [0.0, 1e50, 3e50])
    np.testing.assert_allclose(s.em_weights(GRID).value[2], 3 * w.value, rtol=1e-14)
    assert g.total_em.value == 1e50  # original unchanged
    m = MultiComponentDEM.from_temperatures([3e6, 1e7] * u.K, [1e51, 5e50] * u.cm**-3).scaled(0.5)
    assert m.total_em.value == pytest.approx(7.5e50)
    tab = make_models()["tabulated"].scaled(2.0)
    assert tab.total_em.value == pytest.approx(2e50, rel=1e-9)
    assert tab.em_weights(GRID).sum().value == pytest.approx(2e50, rel=1e-9)


def test_add_makes_multicomponent():
    a = IsothermalDEM(3e6 * u.K, EM)
    b = GaussianDEM(7.0, 0.1, 5e49 * u.cm**-3)
    m = a + b
    assert isinstance(m, MultiComponentDEM) and len(m.components) == 2
    assert m.total_em.value == pytest.approx(1.5e50)
    m3 = sum([a, b, a])
    assert len(m3.components) == 3 and m3.total_em.value == pytest.approx(2.5e50)
    np.testing.assert_allclose(m3(1e7 * u.K).value, b(1e7 * u.K).value)  # isothermal has no density


def test_from_temperatures():
    m = MultiComponentDEM.from_temperatures([3e6, 1e7] * u.K, [1e51, 5e50] * u.cm**-3)
    w = m.em_weights(GRID).value
    # log10(1e7) = 7 is a node (index 50); log10(3e6) = 6.4771 lies between 6.45 and 6.5
    assert w[50] == pytest.approx(5e50, rel=1e-12)
    assert w[39] + w[40] == pytest.approx(1e51, rel=1e-12)
    assert w[40] / 1e51 == pytest.approx((math.log10(3e6) - 6.45) / 0.05, rel=1e-9)


def test_column_em_unit_is_carried():
    g = GaussianDEM(6.3, 0.2, 1e28 * u.cm**-5)
    assert g.em_unit == u.cm**-5
    assert g.em_weights(GRID).unit == u.cm**-5
    assert g(1e6 * u.K).unit == u.cm**-5 / u.K
    v = IsothermalDEM(1e6 * u.K, 1.0 * u.m**-3)  # converted to cm^-3: 1 m^-3 = 1e-6 cm^-3
    assert v.em_unit == u.cm**-3 and v.total_em.value == pytest.approx(1e-6)


# ----------------------------------------------------------------------------- files
def test_tabulated_from_text_file_round_trip(tmp_path):
    tt = np.logspace(5.2, 7.4, 23)
    dem = 3e21 * (tt / 1e6) ** 0.5 * np.exp(-tt / 2e7)  # cm^-5 K^-1
    path = tmp_path / "dem.dat"
    np.savetxt(path, np.column_stack([np.log10(tt), np.log10(dem)]), header="em_unit: cm-5\nlog10 T   log10 DEM")
    tab = TabulatedDEM.from_file(path)
    ref = TabulatedDEM(tt * u.K, dem * u.cm**-5 / u.K)
    assert tab.em_unit == u.cm**-5
    assert tab.total_em.value == pytest.approx(ref.total_em.value, rel=1e-12)
    np.testing.assert_allclose(tab.em_weights(GRID).value, ref.em_weights(GRID).value, rtol=1e-10, atol=1e-300)
    # decreasing order and em_unit given as argument instead of header
    path2 = tmp_path / "dem_desc.txt"
    np.savetxt(path2, np.column_stack([np.log10(tt), np.log10(dem)])[::-1])
    tab2 = TabulatedDEM.from_file(path2, em_unit="cm-5")
    assert tab2.total_em.value == pytest.approx(ref.total_em.value, rel=1e-12)


def test_tabulated_from_ecsv(tmp_path):
    tt = np.logspace(5.5, 7.0, 7) * u.K
    dem = 1e44 / tt.value * u.cm**-3 / u.K  # flat per log T: EM = 1e44 ln10 * 1.5 dex (analytic integral)
    path = tmp_path / "dem.ecsv"
    QTable({"temperature": tt, "dem": dem}).write(path, format="ascii.ecsv")
    tab = TabulatedDEM.from_file(path)
    assert tab.em_unit == u.cm**-3
    assert tab.total_em.value == pytest.approx(1e44 * math.log(10) * 1.5, rel=1e-12)


def test_tabulated_is_zero_outside_table():
    tt = np.logspace(6.0, 7.0, 5) * u.K
    tab = TabulatedDEM(tt, np.full(5, 1e40) * u.cm**-3 / u.K)
    vals = tab(np.array([9.9e5, 1e6, 1e7, 1.01e7]) * u.K).value
    np.testing.assert_allclose(vals, [0.0, 1e40, 1e40, 0.0], rtol=1e-12)
    assert tab.total_em.value == pytest.approx(1e40 * (1e7 - 1e6), rel=1e-12)  # constant DEM: analytic


# ----------------------------------------------------------------------------- errors
@pytest.mark.parametrize(
    "bad, exc, pattern",
    [
        (-1e50 * u.cm**-3, InputError, r"total_em=.*outside the valid range \[0, inf\]"),
        (np.nan * u.cm**-3, InputError, r"total_em contains NaN"),
        (1e50 * u.g, u.UnitsError, r"total_em has units 'g'.*cm-3.*cm-5"),
        (1e50, u.UnitsError, r"total_em=1e\+50 has no units"),
    ],
)
def test_bad_total_em(bad, exc, pattern):
    with pytest.raises(exc, match=pattern):
        GaussianDEM(6.5, 0.3, bad)
    with pytest.raises(exc, match=pattern):
        IsothermalDEM(1e6 * u.K, bad)


def test_bad_temperatures():
    with pytest.raises(InputError, match=r"temperature contains NaN"):
        IsothermalDEM(np.nan * u.K, EM)
    with pytest.raises(InputError, match=r"temperature=.*outside the valid range \(0, inf\) K"):
        IsothermalDEM(-5 * u.K, EM)
    with pytest.raises(u.UnitsError, match=r"temperature has units 'cm'"):
        IsothermalDEM(1 * u.cm, EM)
    with pytest.raises(InputError, match=r"temperature contains NaN"):
        GaussianDEM(6.5, 0.3, EM)(np.array([1e6, np.nan]) * u.K)


def test_bad_gaussian_parameters():
    for w in (0.0, -0.1):
        with pytest.raises(InputError, match=r"width_logT=.*\(0, inf\) dex"):
            GaussianDEM(6.5, w, EM)
    with pytest.raises(InputError, match=r"peak_logT=.*\[1, 10\]"):
        GaussianDEM(3.16e6, 0.3, EM)  # linear T given by mistake
    with pytest.raises(InputError, match=r"peak_logT contains NaN"):
        GaussianDEM(np.nan, 0.3, EM)
    with pytest.raises(u.UnitsError, match=r"peak_logT .*units 'K'"):
        GaussianDEM(6.5 * u.K, 0.3, EM)
    with pytest.raises(InputError, match=r"do not broadcast"):
        GaussianDEM(np.ones(3) * 6.5, np.ones(4) * 0.3, EM)


def test_bad_power_law_parameters():
    with pytest.raises(InputError, match=r"peak_temperature=1e\+05 K must be greater than min_temperature=1e\+06 K"):
        PowerLawDEM(1.5, 1e5 * u.K, EM, min_temperature=1e6 * u.K)
    with pytest.raises(InputError, match=r"slope contains NaN"):
        PowerLawDEM(np.nan, 1e7 * u.K, EM)


def test_em_outside_grid_raises():
    with pytest.raises(InputError, match=r"GaussianDEM\(peak_logT=8.3.*outside logT_grid \[4.5, 8.5\].*peak_logT, width_logT"):
        GaussianDEM(8.3, 0.3, EM).em_weights(GRID)
    with pytest.raises(InputError, match=r"PowerLawDEM.*outside logT_grid \[5, 8.5\].*min_temperature"):
        PowerLawDEM(1.5, 1e7 * u.K, EM, min_temperature=1e4 * u.K).em_weights(GRID[10:])
    with pytest.raises(InputError, match=r"temperature=1e\+09 K.*outside the logT_grid range.*\[4.5, 8.5\]"):
        IsothermalDEM(1e9 * u.K, EM).em_weights(GRID)
    with pytest.raises(InputError, match=r"components\[1\]: temperature=1e\+09 K"):
        MultiComponentDEM.from_temperatures([1e6, 1e9] * u.K, [EM, EM]).em_weights(GRID)
    with pytest.raises(InputError, match=r"batch index \(1,\)"):
        GaussianDEM(np.array([6.5, 8.4]), 0.3, EM).em_weights(GRID)
    tab = TabulatedDEM(np.logspace(4.0, 6.0, 5) * u.K, np.full(5, 1e40) * u.cm**-3 / u.K)
    with pytest.raises(InputError, match=r"TabulatedDEM\(temperature=1e\+04 to 1e\+06 K.*outside logT_grid \[4.5, 8.5\]"):
        tab.em_weights(GRID)
    # zero EM outside the grid loses nothing: allowed
    assert GaussianDEM(8.4, 0.3, 0 * u.cm**-3).em_weights(GRID).sum().value == 0.0


def test_bad_grid():
    g = GaussianDEM(6.5, 0.3, EM)
    with pytest.raises(InputError, match=r"logT_grid must be strictly increasing"):
        g.em_weights(GRID[::-1])
    with pytest.raises(InputError, match=r"logT_grid must be a 1-D array"):
        g.em_weights(np.array([6.5]))
    with pytest.raises(InputError, match=r"logT_grid contains NaN"):
        g.em_weights(np.array([5.0, np.nan, 7.0]))
    with pytest.raises(u.UnitsError, match=r"logT_grid .*units 'K'"):
        g.em_weights(GRID * u.K)


def test_bad_multicomponent_and_scaling():
    with pytest.raises(InputError, match=r"components mix volume \(cm-3\) and column \(cm-5\)"):
        IsothermalDEM(1e6 * u.K, EM) + IsothermalDEM(1e6 * u.K, 1e28 * u.cm**-5)
    with pytest.raises(InputError, match=r"components is empty"):
        MultiComponentDEM([])
    with pytest.raises(InputError, match=r"components\[1\] is a str"):
        MultiComponentDEM([IsothermalDEM(1e6 * u.K, EM), "hot"])
    with pytest.raises(InputError, match=r"temperatures has 2 components but ems has 3"):
        MultiComponentDEM.from_temperatures([3e6, 1e7] * u.K, [1, 2, 3] * EM)
    with pytest.raises(InputError, match=r"factor=.*outside the valid range \[0, inf\]"):
        GaussianDEM(6.5, 0.3, EM).scaled(-1.0)


def test_bad_tabulated_input(tmp_path):
    tt = np.logspace(6, 7, 5) * u.K
    with pytest.raises(InputError, match=r"temperature must be strictly increasing"):
        TabulatedDEM(tt[::-1], np.ones(5) * u.cm**-3 / u.K)
    with pytest.raises(InputError, match=r"dem must have shape \(\.\.\., 5\)"):
        TabulatedDEM(tt, np.ones(4) * u.cm**-3 / u.K)
    with pytest.raises(InputError, match=r"dem=.*outside the valid range \[0, inf\]"):
        TabulatedDEM(tt, -np.ones(5) * u.cm**-3 / u.K)
    with pytest.raises(u.UnitsError, match=r"dem has units '1 / cm3'.*cm-3 / K"):
        TabulatedDEM(tt, np.ones(5) * u.cm**-3)
    with pytest.raises(InputError, match=r"path=.*missing\.dat.*not found"):
        TabulatedDEM.from_file(tmp_path / "missing.dat")
    p = tmp_path / "nounit.dat"
    p.write_text("6.0 20.0\n7.0 21.0\n")
    with pytest.raises(InputError, match=r"nounit\.dat.*em_unit"):
        TabulatedDEM.from_file(p)
    with pytest.raises(u.UnitsError, match=r"em_unit='g'"):
        TabulatedDEM.from_file(p, em_unit="g")
    p = tmp_path / "nan.dat"
    p.write_text("# em_unit: cm-3\n6.0 nan\n7.0 21.0\n")
    with pytest.raises(InputError, match=r"nan\.dat.*NaN"):
        TabulatedDEM.from_file(p)
    p = tmp_path / "cols.dat"
    p.write_text("# em_unit: cm-3\n6.0 20.0 1\n7.0 21.0 1\n")
    with pytest.raises(InputError, match=r"cols\.dat.*two columns"):
        TabulatedDEM.from_file(p)


def test_modules_never_import_fiasco():
    code = "import synthcorona.dem, synthcorona.abundances, sys; assert 'fiasco' not in sys.modules"
    subprocess.run([sys.executable, "-c", code], check=True)


def test_take_selects_members_of_the_flattened_batch():
    # Reference: the rows of em_weights of the whole batch (C-order flattening), for every model.
    x = np.linspace(5.0, 8.0, 61)
    rng = np.random.default_rng(7)
    gauss = GaussianDEM(rng.uniform(6.0, 7.0, (3, 4)), 0.2, 1e50 * u.cm**-3)
    iso = IsothermalDEM(rng.uniform(2e6, 9e6, 5) * u.K, rng.uniform(1, 2, 5) * 1e50 * u.cm**-3)
    power = PowerLawDEM(slope=rng.uniform(1, 3, (2, 3)), peak_temperature=3e6 * u.K, total_em=1e50 * u.cm**-3)
    tab = TabulatedDEM(np.geomspace(1e6, 2e7, 9) * u.K, rng.uniform(0, 1, (4, 9)) * 1e44 * u.cm**-3 / u.K)
    multi = MultiComponentDEM([GaussianDEM(rng.uniform(6.0, 7.0, (3, 1)), 0.2, 1e50 * u.cm**-3),
                               IsothermalDEM(rng.uniform(2e6, 9e6, 4) * u.K, 1e50 * u.cm**-3), tab.scaled(np.ones(4))])
    single = GaussianDEM(6.5, 0.3, 1e50 * u.cm**-3)
    for dem in (gauss, iso, power, tab, multi, single):
        whole = dem.em_weights(x).value.reshape(-1, x.size)
        idx = np.array([whole.shape[0] - 1, 0, whole.shape[0] // 2, 0])
        part = dem.take(idx)
        assert part.batch_shape == (4,) and part.em_unit == dem.em_unit
        np.testing.assert_array_equal(part.em_weights(x).value, whole[idx])
        np.testing.assert_array_equal(part.total_em.value, np.broadcast_to(dem.total_em.value, dem.batch_shape or (1,))
                                      .reshape(-1)[idx])
    with pytest.raises(InputError, match=r"indices must lie in \[0, 12\)"):
        gauss.take(np.array([12]))
    with pytest.raises(InputError, match="1-D array of integers"):
        gauss.take(np.array([0.5]))
