"""Temperature responses and count rates of DEMs (synthcorona.instruments.dem_response).

These tests use only what every emissivity table has: Fe IX, Fe XII, Fe XVIII, O VII/VIII
lines and the H/He continuum. Reference values are named beside each assertion: a
published figure (marked "from memory" where quoted from memory), an independent code
path of this package written out in the test, or "common practice, no source".
"""
import astropy.units as u
import numpy as np
import pytest

import synthcorona as sc
from synthcorona.absorption import ism_cross_section
from synthcorona.errors import InputError
from synthcorona.instruments import Instrument, load_generic
from synthcorona.synthesis import band_kernel, prepare

PC_CM = (1 * u.pc).to_value(u.cm)
PH = u.ph / (u.s * u.cm**2)


@pytest.fixture(scope="module")
def sxt():
    return load_generic("sc-softx")


def _flat(lo=0.1, hi=10.0, area=100.0, n=400, **bands):
    """A perfect-resolution instrument with a constant area on log bins lo-hi keV."""
    e = np.geomspace(lo, hi, n + 1)
    return Instrument("flat", e[:-1] * u.keV, e[1:] * u.keV, np.full(n, area) * u.cm**2, bands=bands or None)


def _peak_logT(t, k):
    """log T of the maximum of k(T), refined by a parabola through the top three nodes in log k."""
    i = int(np.argmax(k))
    y0, y1, y2 = np.log10(k[i - 1:i + 2])
    return t[i] + 0.5 * (t[1] - t[0]) * (y0 - y2) / (y0 - 2 * y1 + y2)


def _photon_flux_per_bin(spec, edges_q):
    return spec.values * np.abs(np.diff(edges_q.value)) * PH


# ----------------------------------------------------------------------------- published shapes
@pytest.mark.parametrize("name, logT_pub", [
    # Peak of the temperature response of multilayer EUV channels at 171 and 193 A:
    # Boerner et al. 2012, Sol. Phys. 275, 41, Fig. 9 and Lemen et al. 2012, Sol. Phys. 275, 17,
    # Table 1 (171 A: Fe IX, log T 5.8-5.9; 193 A: Fe XII, log T 6.2) - values from memory.
    ("sc-fe9", 5.9),
    ("sc-fe12", 6.2),
])
def test_euv_channel_response_peaks(table, name, logT_pub):
    resp = load_generic(name).temperature_response(table=table, abundances="coronal", density=1e9 * u.cm**-3)
    assert resp.dims == ("band", "logT") and list(resp.band.values) == ["total"]
    assert abs(_peak_logT(resp.logT.values, resp.values[0]) - logT_pub) <= 0.15


def test_soft_xray_band_rises_steeply_from_1_to_5_MK(table, sxt):
    # Common practice, no source: a broad 0.2-2 keV band of a CCD telescope sees 1 MK plasma
    # several times less efficiently than 5 MK plasma (the Fe L / O K lines and the exp(-E/kT)
    # continuum move into the band), rising monotonically in between. With the full 20-element
    # table and coronal abundances the C/N/Si/S L-shell lines at 0.2-0.3 keV keep the 1 MK response
    # up; the rise measured is about 8x.
    resp = sxt.temperature_response(table=table, bands=[(0.2, 2.0) * u.keV])
    k = resp.values[0]
    t = resp.logT.values
    ratio = np.interp(6.7, t, k) / np.interp(6.0, t, k)
    assert ratio > 5.0
    sel = (t >= 6.0) & (t <= 6.7)
    assert np.all(np.diff(k[sel]) > 0)


def test_response_attrs_units_and_reference_distance(table, sxt):
    resp = sxt.temperature_response(table=table, density=1e10 * u.cm**-3)
    assert list(resp.band.values) == ["soft", "hard", "broad", "full"]
    assert u.Unit(resp.attrs["units"]) == u.ct * u.cm**3 / u.s
    assert resp.attrs["reference_distance"] == "1 pc"
    assert resp.attrs["instrument"] == "sc-softx"
    assert resp.attrs["table_content_hash"] == table.provenance["content_hash"]
    assert resp.attrs["abundance_name"] and "1e+10" in resp.attrs["density_model"]
    assert resp.attrs["ism_absorption"] == "none"
    np.testing.assert_allclose(resp.band_lo.values, [0.2, 1.0, 0.2, 0.2])
    np.testing.assert_allclose(resp.logT.values, table.logT)


def test_flat_instrument_response_equals_table_band_kernel(table):
    # Independent path: for a constant area A and no redistribution, K(T) = A * (photon band
    # kernel of synthcorona.synthesis.band_kernel) / (4 pi (1 pc)^2) exactly.
    inst = _flat(area=100.0, soft=[0.2, 1.0] * u.keV, hard=[1.0, 2.4] * u.keV)
    resp = inst.temperature_response(table=table)
    prep = prepare(table, "coronal", None, None)
    ref = 100.0 * band_kernel(np.array([[0.2, 1.0], [1.0, 2.4]]), prep, photons=True) / (4 * np.pi * PC_CM**2)
    # 1e-4: the two paths integrate the piecewise-linear continuum with different cumulative sums, which
    # differ by rounding (~1e-5 relative) where the continuum is 1e-7 of its peak
    np.testing.assert_allclose(resp.values, ref, rtol=1e-4, atol=1e-12 * ref.max())


def test_instrument_without_bands_has_total_band(table):
    inst = _flat(lo=0.3, hi=3.0)
    resp = inst.temperature_response(table=table)
    assert list(resp.band.values) == ["total"]
    np.testing.assert_allclose(resp.band_lo.values, [0.3], rtol=1e-12)
    np.testing.assert_allclose(resp.band_hi.values, [3.0], rtol=1e-12)
    dem = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm**-3)
    r = inst.count_rate(dem, distance=5 * u.pc, table=table)
    assert r.shape == (1,) and r.unit == u.ct / u.s


def test_user_input_grid_agrees_with_automatic_grid(table):
    inst = _flat(soft=[0.2, 1.0] * u.keV)
    auto = inst.temperature_response(table=table, bands="soft")
    grid = np.geomspace(0.09, 11.0, 40001) * u.keV           # 0.012 % bins, not aligned with the instrument
    user = inst.temperature_response(table=table, bands="soft", input_grid=grid)
    sel = auto.logT.values >= 5.8
    # lines spread over one input bin and band edges cut input bins: differences ~ bin width
    np.testing.assert_allclose(user.values[0, sel], auto.values[0, sel], rtol=1e-3)
    assert "user input_grid" in user.attrs["input_grid"]


# ----------------------------------------------------------------------------- count rates
def test_count_rate_equals_fold_of_synthesized_spectrum(table, sxt):
    # Independent path: synthesize() the photon spectrum at the observer on a fine energy grid,
    # then fold it with count_rate_from_spectrum (rebinning + area + redistribution matrix).
    dem = sc.GaussianDEM(peak_logT=6.6, width_logT=0.25, total_em=3e51 * u.cm**-3)
    d = 8 * u.pc
    edges = np.linspace(0.05, 12.0, 24001) * u.keV
    spec = sc.synthesize(dem, energy=edges, edges=True, photons=True, distance=d, table=table)
    flux = _photon_flux_per_bin(spec, edges)
    rates = sxt.count_rate(dem, distance=d, table=table)
    for k, b in enumerate(sxt.bands):
        folded = sxt.count_rate_from_spectrum(flux, edges, band=b)
        np.testing.assert_allclose(rates[k].value, folded.value, rtol=1e-3)
    # the EUV channel (no redistribution), on a wavelength grid
    euv = load_generic("sc-fe9")
    wl = np.linspace(3.0, 650.0, 300001) * u.AA
    spec = sc.synthesize(dem, wavelength=wl, edges=True, photons=True, distance=d, table=table)
    folded = euv.count_rate_from_spectrum(_photon_flux_per_bin(spec, wl), wl)
    np.testing.assert_allclose(euv.count_rate(dem, distance=d, band="total", table=table).value, folded.value,
                               rtol=1e-3)


def test_isothermal_count_rate_is_em_times_response(table, sxt):
    it = 40
    em = 2e50 * u.cm**-3
    iso = sc.IsothermalDEM(10 ** table.logT[it] * u.K, em)
    resp = sxt.temperature_response(table=table)
    r = sxt.count_rate(iso, distance=1 * u.pc, table=table)
    # definition of K: counts s-1 per cm-3 of EM at 1 pc
    np.testing.assert_allclose(r.value, 2e50 * resp.values[:, it], rtol=1e-12)


def test_count_rate_linear_in_em_and_inverse_square(table, sxt):
    dem = sc.GaussianDEM(6.4, 0.2, 1e51 * u.cm**-3)
    r1 = sxt.count_rate(dem, distance=10 * u.pc, table=table)
    r3 = sxt.count_rate(dem.scaled(3.0), distance=10 * u.pc, table=table)
    r_far = sxt.count_rate(dem, distance=30 * u.pc, table=table)
    np.testing.assert_allclose(r3.value, 3.0 * r1.value, rtol=1e-12)       # linear in EM
    np.testing.assert_allclose(r_far.value, r1.value / 9.0, rtol=1e-12)    # d^-2 (flux 1/(4 pi d^2))
    # distance in other units is converted
    np.testing.assert_allclose(sxt.count_rate(dem, distance=(10 * u.pc).to(u.lyr), table=table).value, r1.value,
                               rtol=1e-12)


def test_absorption_reduces_soft_band_more_than_hard(table, sxt):
    dem = sc.GaussianDEM(6.6, 0.2, 1e51 * u.cm**-3)
    free = sxt.count_rate(dem, distance=10 * u.pc, band=["soft", "hard"], table=table)
    absd = sxt.count_rate(dem, distance=10 * u.pc, band=["soft", "hard"], nh=3e20 * u.cm**-2, table=table)
    frac = (absd / free).value
    assert 0 < frac[0] < frac[1] < 1
    # nh = 0 is no absorption (same numbers as nh=None, through the absorption code path)
    zero = sxt.count_rate(dem, distance=10 * u.pc, band=["soft", "hard"], nh=0 * u.cm**-2, table=table)
    np.testing.assert_allclose(zero.value, free.value, rtol=1e-12)


def test_narrow_band_absorption_equals_exp_sigma_nh(table):
    # A 1 % wide band at 1 keV: the count rate drops by exp(-sigma(1 keV) N_H) with sigma from
    # synthcorona.absorption (the cross-section itself is checked in test_absorption.py);
    # sigma(1 keV) ~ 2.4e-22 cm^2 per H in Morrison & McCammon 1983, ApJ 270, 119, Fig. 1
    # (from memory), lower with the Asplund et al. 2021 photospheric abundances.
    inst = _flat(line=[0.995, 1.005] * u.keV)
    dem = sc.GaussianDEM(6.8, 0.2, 1e51 * u.cm**-3)
    nh = 1e21
    ratio = (inst.count_rate(dem, distance=10 * u.pc, band="line", nh=nh * u.cm**-2, table=table)
             / inst.count_rate(dem, distance=10 * u.pc, band="line", table=table)).value
    sigma = ism_cross_section(1.0 * u.keV).to_value(u.cm**2)
    assert 1.5e-22 < sigma < 2.8e-22
    np.testing.assert_allclose(ratio, np.exp(-sigma * nh), rtol=5e-3)


def test_ten_thousand_dems_at_once(table, sxt):
    rng = np.random.default_rng(1)
    peaks = rng.uniform(6.0, 7.2, 10000)
    dem = sc.GaussianDEM(peaks, 0.15, 1e51 * u.cm**-3)
    r = sxt.count_rate(dem, distance=10 * u.pc, table=table)
    assert r.shape == (10000, 4)
    # the batch equals one-at-a-time calls
    for i in (0, 4321, 9999):
        one = sxt.count_rate(sc.GaussianDEM(peaks[i], 0.15, 1e51 * u.cm**-3), distance=10 * u.pc, table=table)
        np.testing.assert_allclose(r[i].value, one.value, rtol=1e-10)
    # 2-D batch, a single band and a distance per DEM
    dem2 = sc.GaussianDEM(peaks.reshape(100, 100), 0.15, 1e51 * u.cm**-3)
    d = np.full((100, 100), 10.0) * u.pc
    r2 = sxt.count_rate(dem2, distance=d, band="soft", table=table)
    assert r2.shape == (100, 100)
    np.testing.assert_allclose(r2.ravel().value, r[:, 0].value, rtol=1e-12)
    da = sxt.count_rates(dem2, distance=10 * u.pc, table=table)
    assert da.dims == ("dem_0", "dem_1", "band") and da.shape == (100, 100, 4)


def test_column_dem_needs_a_solid_angle(table):
    # Independent path: the intensity of a column DEM is EM_col eps / (4 pi sr); seen over a
    # solid angle Omega it gives the same photon flux as a volume EM_col * Omega [cm-3] at
    # a distance of 1 cm. That flux comes from synthesize() and is folded through the instrument.
    # (synthesize() of the column DEM itself is not used: it fails on the unit of the
    # intensity, cm-4 instead of cm-2, in synthcorona.synthesis._output_scale.)
    euv = load_generic("sc-fe12")
    col = sc.GaussianDEM(6.2, 0.1, 1e27 * u.cm**-5)
    omega = (0.6 * u.arcsec) ** 2
    r = euv.count_rate(col, solid_angle=omega, band="total", table=table)
    vol = sc.GaussianDEM(6.2, 0.1, 1e27 * omega.to_value(u.sr) * u.cm**-3)
    edges = np.geomspace(0.0199, 3.8, 60001) * u.keV
    spec = sc.synthesize(vol, energy=edges, edges=True, photons=True, distance=1 * u.cm, table=table)
    folded = euv.count_rate_from_spectrum(_photon_flux_per_bin(spec, edges), edges)
    np.testing.assert_allclose(r.value, folded.value, rtol=1e-3)


# ----------------------------------------------------------------------------- attrs
def test_dict_abundances_missing_elements_are_stated(table, sxt):
    ab = {"H": 1.0, "He": 0.085, "Fe": 3.2e-5}            # no O
    resp = sxt.temperature_response(table=table, abundances=ab)
    assert "taken as zero" in resp.attrs["abundance_note"] and "O" in resp.attrs["abundance_note"].split(": ")[-1]
    dem = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm**-3)
    da = sxt.count_rates(dem, distance=10 * u.pc, abundances=ab, table=table)
    assert "O" in da.attrs["abundance_note"].split(": ")[-1]
    assert da.dims == ("band",) and u.Unit(da.attrs["units"]) == u.ct / u.s
    # zero O really is zero: adding O raises the soft-band rate (O VII/VIII lines at 0.57-0.65 keV)
    with_o = sxt.count_rate(dem, distance=10 * u.pc, band="soft", table=table, abundances={**ab, "O": 4.9e-4})
    assert with_o > da.sel(band="soft").item() * u.ct / u.s


# ----------------------------------------------------------------------------- bad input
DEM = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm**-3)


@pytest.mark.parametrize("exc, match, dem, kwargs", [
    (InputError, r"distance=.*valid range \(0, inf\) pc", DEM, {"distance": 0 * u.pc}),
    (InputError, "distance is required", DEM, {}),
    (u.UnitsError, "distance", DEM, {"distance": 10}),
    (InputError, r"nh=\[-1\.e\+20\] cm\^-2 is outside the valid range \[0, 1e\+24\]", DEM,
     {"distance": 10 * u.pc, "nh": -1e20 * u.cm**-2}),
    (InputError, r"band 'ultra' is not defined .*defined bands: \['broad', 'full', 'hard', 'soft'\]", DEM,
     {"distance": 10 * u.pc, "band": "ultra"}),
    (InputError, "solid_angle", sc.GaussianDEM(6.5, 0.2, 1e27 * u.cm**-5), {}),
    (InputError, "solid_angle applies to a column DEM", DEM, {"distance": 10 * u.pc, "solid_angle": 1 * u.sr}),
    (InputError, "not a DEM", "hot", {"distance": 10 * u.pc}),
])
def test_bad_count_rate_inputs_name_the_argument(table, sxt, exc, match, dem, kwargs):
    with pytest.raises(exc, match=match):
        sxt.count_rate(dem, table=table, **kwargs)


def test_bad_band_and_instrument_names(table, sxt):
    with pytest.raises(InputError, match="band 'ultra'"):
        sxt.temperature_response(table=table, bands=["soft", "ultra"])
    with pytest.raises(InputError, match="name='sc-nothing' is not a generic instrument; available: sc-softx"):
        load_generic("sc-nothing")


def test_responses_outside_table_or_absorption_range_are_refused(table):
    hard = _flat(lo=0.5, hi=60.0)                          # beyond the 50 keV continuum grid
    with pytest.raises(InputError, match="outside the emissivity table's continuum grid"):
        hard.temperature_response(table=table)
    ok = hard.temperature_response(table=table, bands=[(0.5, 10.0) * u.keV])   # a band inside is fine
    assert ok.shape == (1, table.logT.size)
    mid = _flat(lo=0.5, hi=20.0)                           # beyond the 10 keV absorption model
    with pytest.raises(InputError, match="interstellar absorption model"):
        mid.temperature_response(table=table, nh=1e20 * u.cm**-2)
    with pytest.raises(InputError, match="input_grid: energy_edges cover"):
        mid.temperature_response(table=table, input_grid=np.geomspace(1.0, 20.0, 100) * u.keV)


def test_count_rates_broadcast_distance_and_nh(table, sxt):
    # Reference: a loop of scalar count_rate calls (one DEM, one distance, one column).
    mus = [6.3, 6.8, 7.0]
    dems = sc.GaussianDEM(np.array(mus), 0.2, 1e51 * u.cm**-3)
    d = [[5.0], [20.0]] * u.pc
    nh = [1e19, 1e20, 1e19] * u.cm**-2
    rates = sxt.count_rate(dems, distance=d, nh=nh, table=table)
    assert rates.shape == (2, 3, len(sxt.bands))
    for i in range(2):
        for j in range(3):
            ref = sxt.count_rate(sc.GaussianDEM(mus[j], 0.2, 1e51 * u.cm**-3), distance=d[i, 0], nh=nh[j], table=table)
            np.testing.assert_allclose(rates.value[i, j], ref.value, rtol=1e-13)
    da = sxt.count_rates(dems, distance=d, nh=nh, table=table)
    assert da.dims == ("dem_0", "dem_1", "band")
    np.testing.assert_array_equal(da.values, rates.value)
    assert da.attrs["ism_nh_cm-2"] == "[1e+19, 1e+20, 1e+19]" and "1e+19-1e+20 cm-2" in da.attrs["ism_absorption"]
    one = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm**-3)
    r = sxt.count_rate(one, distance=[5.0, 10.0] * u.pc, band="soft", table=table)
    assert r.shape == (2,) and r.value[0] / r.value[1] == pytest.approx(4.0, rel=1e-13)
    with pytest.raises(InputError, match=r"distance has shape \(2,\), which does not broadcast") as err:
        sxt.count_rate(dems, distance=[5.0, 10.0] * u.pc, table=table)
    assert err.value.argument == "distance"
