"""Observables of a corona through an instrument and the interstellar medium (synthcorona.instruments.observables).

Reference values are named beside each assertion: an independent code path of this package
written out in the test (synthcorona.synthesis band fluxes and band kernels), a hand bound, or
"common practice, no source".
"""
import astropy.units as u
import numpy as np
import pytest

import synthcorona as sc
from synthcorona.instruments import (
    Instrument,
    band_luminosity,
    counts_to_flux,
    hardness_ratio,
    hardness_ratio_curve,
    load_generic,
    observed_flux,
)
from synthcorona.instruments.observables import binned_emissivity
from synthcorona.spectral import Band
from synthcorona.synthesis import PreparedTable, band_kernel, prepare

PC_CM = (1 * u.pc).to_value(u.cm)


@pytest.fixture(scope="module")
def sxt():
    return load_generic("sc-softx")


def _flat(lo=0.1, hi=10.0, area=100.0, n=400, **bands):
    """A perfect-resolution instrument with a constant area on log bins lo-hi keV."""
    e = np.geomspace(lo, hi, n + 1)
    return Instrument("flat", e[:-1] * u.keV, e[1:] * u.keV, np.full(n, area) * u.cm**2, bands=bands or None)


def test_observed_flux_without_absorption_equals_band_flux(table):
    dem = sc.GaussianDEM(np.array([6.2, 6.8]), 0.2, 1e51 * u.cm**-3)
    band = (0.2, 2.4) * u.keV
    f = observed_flux(dem, band, 10 * u.pc, table=table)
    ref = sc.band_flux(dem, band, 10 * u.pc, table=table)    # synthesis path (exact kernel)
    np.testing.assert_allclose(f.value, ref.value, rtol=1e-9)
    fa = observed_flux(dem, band, 10 * u.pc, nh=1e20 * u.cm**-2, table=table)
    assert np.all(fa < f) and np.all(fa > 0.5 * f)
    # several bands; luminosity = 4 pi d^2 F (unabsorbed)
    fb = observed_flux(dem, {"s": (0.2, 1.0) * u.keV, "h": (1.0, 2.4) * u.keV}, 10 * u.pc, table=table)
    np.testing.assert_allclose(fb.sum(axis=-1).value, f.value, rtol=1e-9)
    lum = band_luminosity(dem, band, table=table)
    np.testing.assert_allclose(lum.to_value(u.erg / u.s), 4 * np.pi * (10 * PC_CM) ** 2 * f.value, rtol=1e-9)


def test_hardness_ratio_grows_with_temperature(table, sxt):
    dem = sc.GaussianDEM(np.array([6.2, 6.6, 7.0]), 0.1, 1e51 * u.cm**-3)
    hr = hardness_ratio(sxt, dem, hard="hard", soft="soft", table=table)
    assert hr.shape == (3,) and np.all(np.abs(hr.value) <= 1)
    # common practice, no source: hotter coronae are harder
    assert hr[0] < hr[1] < hr[2]
    curve = hardness_ratio_curve(sxt, "hard", "soft", table=table)
    t = curve.logT.values
    sel = (t >= 6.0) & (t <= 7.2)
    assert np.all(np.diff(curve.values[sel]) > 0)
    # absorption hardens the spectrum (soft band absorbed more)
    hr_abs = hardness_ratio(sxt, dem, "hard", "soft", nh=1e21 * u.cm**-2, table=table)
    assert np.all(hr_abs > hr)


def test_counts_to_flux_factor(table, sxt):
    c = counts_to_flux(sxt, "broad", nh=1e19 * u.cm**-2, table=table)
    assert u.Unit(c.attrs["units"]) == u.erg / (u.cm**2 * u.ct)
    sel = (c.logT.values >= 6.0) & (c.logT.values <= 7.5)
    assert np.all(np.isfinite(c.values[sel])) and np.all(c.values[sel] > 0)
    # hand bound for a flat 100 cm2 instrument without absorption: F / R = <E> / A with the
    # mean photon energy inside the band, 0.2 keV <= <E> <= 2.4 keV
    flat = _flat(area=100.0, broad=[0.2, 2.4] * u.keV)
    cf = counts_to_flux(flat, "broad", table=table).values[sel]
    kev = (1 * u.keV).to_value(u.erg)
    assert np.all(cf >= 0.2 * kev / 100.0) and np.all(cf <= 2.4 * kev / 100.0)
    # exact for the flat instrument: energy / photon band kernels of synthcorona.synthesis
    prep = prepare(table, "coronal", None, None)
    b = np.array([[0.2, 2.4]])
    with np.errstate(divide="ignore", invalid="ignore"):
        ref = band_kernel(b, prep)[0] / (100.0 * band_kernel(b, prep, photons=True)[0])
    np.testing.assert_allclose(cf, ref[sel], rtol=1e-9)
    # for DEMs: factor x count rate = unabsorbed flux
    dem = sc.GaussianDEM(np.array([6.3, 6.9]), 0.2, 1e51 * u.cm**-3)
    cd = counts_to_flux(sxt, "broad", nh=1e19 * u.cm**-2, dem=dem, table=table)
    rate = sxt.count_rate(dem, distance=10 * u.pc, band="broad", nh=1e19 * u.cm**-2, table=table)
    flux = sc.band_flux(dem, (0.2, 2.4) * u.keV, 10 * u.pc, table=table)
    np.testing.assert_allclose(cd.values * rate.value, flux.value, rtol=1e-9)


def test_band_arguments_are_bands(table):
    # A Band, its text and the (2,) Quantity give the same flux; a list of Bands gives one per band;
    # reversed limits in the unit given are refused (synthcorona.spectral.Band).
    dem = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm**-3)
    ref = observed_flux(dem, [0.2, 2.4] * u.keV, 10 * u.pc, table=table)
    for band in (Band(0.2 * u.keV, 2.4 * u.keV), "0.2-2.4 keV", (0.2 * u.keV, 2.4 * u.keV)):
        np.testing.assert_allclose(observed_flux(dem, band, 10 * u.pc, table=table).value, ref.value, rtol=1e-12)
    two = observed_flux(dem, [Band(0.2 * u.keV, 1.0 * u.keV), Band(1.0 * u.keV, 2.4 * u.keV)], 10 * u.pc,
                        table=table)
    assert two.shape == (2,)
    np.testing.assert_allclose(two.sum().value, ref.value, rtol=1e-9)   # the two bands tile 0.2-2.4 keV
    with pytest.raises(sc.InputError, match="not below the upper limit"):
        observed_flux(dem, [2.4, 0.2] * u.keV, 10 * u.pc, table=table)


def test_emissivity_cache_is_keyed_on_the_table_content(table):
    # Caches key on PreparedTable.key (table content hash, abundances, density): a table prepared
    # again with the same key reuses the cached matrix; one without a key is computed afresh.
    prep = prepare(table, "coronal", None, None)
    edges = np.geomspace(0.2, 2.0, 101)
    first = binned_emissivity(edges, prep)
    again = PreparedTable(table, "coronal", key=prep.key)
    assert binned_emissivity(edges, again) is first
    fresh = PreparedTable(table, "coronal", key=None)
    recomputed = binned_emissivity(edges, fresh)
    assert recomputed is not first
    np.testing.assert_array_equal(recomputed, first)


def test_observed_flux_broadcasts_distance_and_nh(table):
    # Reference: a loop of scalar calls (one DEM, one distance, one column).
    from synthcorona.errors import InputError

    mus = [6.3, 6.8]
    pair = sc.GaussianDEM(np.array(mus), 0.2, 1e51 * u.cm**-3)
    d = [[4.0], [8.0], [16.0]] * u.pc
    nh = [1e19, 3e20] * u.cm**-2
    band = (0.2, 2.0) * u.keV
    f = observed_flux(pair, band, distance=d, nh=nh, table=table)
    assert f.shape == (3, 2)
    for i in range(3):
        for j in range(2):
            ref = observed_flux(sc.GaussianDEM(mus[j], 0.2, 1e51 * u.cm**-3), band, distance=d[i, 0], nh=nh[j],
                                table=table)
            assert f.value[i, j] == pytest.approx(ref.value, rel=1e-13)
    # one DEM, several distances and columns, several bands
    one = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm**-3)
    bands = {"a": band, "b": (2.0, 8.0) * u.keV}
    f = observed_flux(one, bands, distance=[5.0, 10.0] * u.pc, nh=[[0.0], [1e20], [1e21]] * u.cm**-2, table=table)
    assert f.shape == (3, 2, 2)
    for i, col in enumerate([0.0, 1e20, 1e21]):
        for j, x in enumerate([5.0, 10.0]):
            ref = observed_flux(one, bands, distance=x * u.pc, nh=col * u.cm**-2, table=table)
            np.testing.assert_allclose(f.value[i, j], ref.value, rtol=1e-13)
    with pytest.raises(InputError, match=r"nh has shape \(3,\), which does not broadcast") as err:
        observed_flux(pair, band, distance=5 * u.pc, nh=[1e19, 1e20, 1e21] * u.cm**-2, table=table)
    assert err.value.argument == "nh"
    with pytest.raises(InputError, match=r"nh=.*outside the valid range \[0, 1e\+24\]"):
        observed_flux(pair, band, distance=5 * u.pc, nh=[1e19, -1.0] * u.cm**-2, table=table)


def test_observed_flux_in_chunks_equals_one_block(table, monkeypatch):
    from synthcorona.settings import MEMORY_BUDGET_ENV

    rng = np.random.default_rng(5)
    n = 600
    dem = sc.GaussianDEM(rng.uniform(6.0, 7.0, n), 0.2, 1e51 * u.cm**-3)
    kw = dict(distance=rng.uniform(3, 30, n) * u.pc, nh=rng.choice([1e19, 1e20, 1e21], n) * u.cm**-2, table=table)
    monkeypatch.delenv(MEMORY_BUDGET_ENV, raising=False)
    whole = observed_flux(dem, (0.2, 2.0) * u.keV, **kw)
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "200 kB")               # about 14 DEMs per chunk
    np.testing.assert_array_equal(observed_flux(dem, (0.2, 2.0) * u.keV, **kw).value, whole.value)
