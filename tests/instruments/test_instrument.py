"""Tests of synthcorona.instruments.instrument (Instrument: folding, rebinning, bands).

Reference values are analytic integrals computed in the test (named beside each
assertion) or hand calculations written out in comments.
"""
import subprocess
import sys

import astropy.units as u
import numpy as np
import pytest
import scipy.sparse as sp

from synthcorona.constants import HC_KEV_ANGSTROM
from synthcorona.errors import InputError
from synthcorona.instruments.instrument import Instrument
from synthcorona.spectral import Band

PH = u.ph / (u.s * u.cm**2)


def _stepped_instrument(rmf=None, **kw):
    """50 log-spaced bins 0.1-10 keV with a piecewise-constant area of 100(1.5 + sin(3 ln E)) cm^2."""
    edges = np.geomspace(0.1, 10.0, 51)
    lo, hi = edges[:-1], edges[1:]
    area = 100.0 * (1.5 + np.sin(3.0 * np.log(np.sqrt(lo * hi))))
    if rmf is not None:
        kw.update(redistribution=rmf, channel_lo=lo * u.keV, channel_hi=hi * u.keV)
    return Instrument("stepped", lo * u.keV, hi * u.keV, area * u.cm**2, **kw), lo, hi, area


def _flat(edges_kev):
    """1 photon s^-1 cm^-2 keV^-1 as photons per bin on the given (ascending) edges."""
    return np.diff(edges_kev) * PH


FINE = np.geomspace(0.05, 20.0, 20001)   # does not align with the instrument edges


# ---------------------------------------------------------------- photon conservation
def test_flat_spectrum_without_rmf_gives_area_integral():
    inst, lo, hi, area = _stepped_instrument()
    # outside reference: analytic integral of a piecewise-constant function, sum A_i (E_hi,i - E_lo,i)
    expected_total = np.sum(area * (hi - lo))
    counts = inst.fold(_flat(FINE), FINE * u.keV)
    assert counts.unit == u.ct / u.s
    assert counts.shape == (50,)
    np.testing.assert_allclose(counts.sum().value, expected_total, rtol=1e-10)
    np.testing.assert_allclose(counts.value, area * (hi - lo), rtol=1e-10)   # per bin, same analytic integral
    total = inst.count_rate_from_spectrum(_flat(FINE), FINE * u.keV)
    np.testing.assert_allclose(total.value, expected_total, rtol=1e-10)


def test_flat_spectrum_with_diagonal_rmf_is_unchanged():
    inst, lo, hi, area = _stepped_instrument(rmf=sp.identity(50, format="csr"))
    expected_total = np.sum(area * (hi - lo))   # analytic integral of the piecewise-constant area
    counts = inst.fold(_flat(FINE), FINE * u.keV)
    np.testing.assert_allclose(counts.value, area * (hi - lo), rtol=1e-10)
    np.testing.assert_allclose(counts.sum().value, expected_total, rtol=1e-10)


def test_normalised_rmf_conserves_total_counts():
    rng = np.random.default_rng(1)
    R = rng.random((70, 50)) ** 4                       # dense, arbitrary, 70 channels
    R /= R.sum(axis=0, keepdims=True)                    # each energy bin's probabilities sum to 1
    edges = np.geomspace(0.1, 10.0, 51)
    inst_r = Instrument("r", edges[:-1] * u.keV, edges[1:] * u.keV,
                        100.0 * (1.5 + np.sin(3.0 * np.log(np.sqrt(edges[:-1] * edges[1:])))) * u.cm**2,
                        redistribution=R, channel_lo=np.linspace(0.05, 12, 70) * u.keV,
                        channel_hi=np.linspace(0.05, 12, 71)[1:] * u.keV + 0.1 * u.keV)
    inst0, lo, hi, area = _stepped_instrument()
    flux = rng.random(FINE.size - 1) * PH
    c_r = inst_r.fold(flux, FINE * u.keV)
    c_0 = inst0.fold(flux, FINE * u.keV)
    assert c_r.shape == (70,)
    np.testing.assert_allclose(c_r.sum().value, c_0.sum().value, rtol=1e-10)   # sum_c R_ci = 1 (common practice)


def test_rebinning_conserves_photons_on_non_aligned_grids():
    rng = np.random.default_rng(7)
    inst_edges = np.sort(np.concatenate([[1.0, 10.0], rng.uniform(1, 10, 37)]))
    inst = Instrument("unit", inst_edges[:-1] * u.keV, inst_edges[1:] * u.keV, np.ones(38) * u.cm**2)
    in_edges = np.sort(np.concatenate([[1.0, 10.0], rng.uniform(1, 10, 501)]))
    flux = rng.random(502)
    counts = inst.fold(flux * PH, in_edges * u.keV)
    # conservation (common practice, no source): with A = 1 cm^2 over the whole input range, counts = photons
    np.testing.assert_allclose(counts.sum().value, flux.sum(), rtol=1e-12)


def test_rebinning_hand_example():
    # instrument bins [1,2], [2,3] keV with A = 1 cm^2; input bins [0.5,1.5], [1.5,3.5] with 2 and 4 photons.
    # hand calculation: bin 1 = 2*(0.5/1) + 4*(0.5/2) = 2; bin 2 = 4*(1/2) = 2 (photons outside 1-3 keV are lost)
    inst = Instrument("two", [1.0, 2.0] * u.keV, [2.0, 3.0] * u.keV, [1.0, 1.0] * u.cm**2)
    counts = inst.fold([2.0, 4.0] * PH, [0.5, 1.5, 3.5] * u.keV)
    np.testing.assert_allclose(counts.value, [2.0, 2.0], rtol=1e-14)


def test_wavelength_grid_gives_same_counts_as_energy_grid():
    inst, lo, hi, area = _stepped_instrument()
    rng = np.random.default_rng(3)
    flux = rng.random(FINE.size - 1)
    c_e = inst.fold(flux * PH, FINE * u.keV)
    # same bins expressed as wavelength edges, ascending in wavelength (so bin order reversed)
    lam_edges = (HC_KEV_ANGSTROM / FINE)[::-1]
    c_l = inst.fold(flux[::-1] * PH, lam_edges * u.AA)
    np.testing.assert_allclose(c_l.value, c_e.value, rtol=1e-10)


def test_instrument_bins_given_in_wavelength_order():
    edges_e = np.array([1.0, 2.0, 4.0])
    lam = HC_KEV_ANGSTROM / edges_e            # descending
    inst = Instrument("w", lam[1:][::-1] * u.AA, lam[:-1][::-1] * u.AA, [30.0, 10.0] * u.cm**2)
    # ascending wavelength -> bins [2,4] keV (30 cm^2) then [1,2] keV (10 cm^2); stored in ascending energy
    np.testing.assert_allclose(inst.energy_lo.value, [1.0, 2.0], rtol=1e-12)
    np.testing.assert_allclose(inst.area.value, [10.0, 30.0])
    counts = inst.fold(_flat(np.array([0.5, 5.0])), [0.5, 5.0] * u.keV)
    # flat 1 ph/s/cm2/keV: 10*1 + 30*2 = 70 counts/s (hand calculation)
    np.testing.assert_allclose(counts.sum().value, 70.0, rtol=1e-12)


def test_batch_dimensions():
    inst, *_ = _stepped_instrument()
    rng = np.random.default_rng(5)
    flux = rng.random((3, 4, FINE.size - 1))
    out = inst.fold(flux * PH, FINE * u.keV)
    assert out.shape == (3, 4, 50)
    np.testing.assert_allclose(out[2, 1].value, inst.fold(flux[2, 1] * PH, FINE * u.keV).value, rtol=1e-13)
    tot = inst.count_rate_from_spectrum(flux * PH, FINE * u.keV)
    assert tot.shape == (3, 4)
    np.testing.assert_allclose(tot.value, out.value.sum(-1), rtol=1e-12)


def test_flux_accepts_dimensionless_photon_count():
    inst, *_ = _stepped_instrument()
    f = np.ones(FINE.size - 1)
    a = inst.fold(f * PH, FINE * u.keV)
    b = inst.fold(f / (u.s * u.cm**2), FINE * u.keV)
    np.testing.assert_allclose(a.value, b.value, rtol=0)


# ---------------------------------------------------------------- coverage
def test_grid_not_covering_the_response_raises():
    inst, *_ = _stepped_instrument()
    edges = np.geomspace(0.5, 20, 200)
    with pytest.raises(InputError, match=r"missing 0\.1 keV .* to 0\.5 keV"):
        inst.fold(_flat(edges), edges * u.keV)
    edges = np.geomspace(0.05, 8, 200)
    with pytest.raises(InputError, match=r"missing 8 keV .* to 10 keV"):
        inst.count_rate_from_spectrum(_flat(edges), edges * u.keV)


def test_band_only_needs_its_own_energies():
    inst, lo, hi, area = _stepped_instrument(bands={"mid": [1.0, 2.0] * u.keV})
    edges = np.linspace(0.9, 2.1, 1201)
    rate = inst.count_rate_from_spectrum(_flat(edges), edges * u.keV, band="mid")
    # analytic integral of the piecewise-constant area over 1-2 keV
    expected = np.sum(area * np.clip(np.minimum(hi, 2.0) - np.maximum(lo, 1.0), 0, None))
    np.testing.assert_allclose(rate.value, expected, rtol=1e-10)
    with pytest.raises(InputError, match="band 'mid'"):
        e2 = np.linspace(1.2, 2.1, 50)
        inst.count_rate_from_spectrum(_flat(e2), e2 * u.keV, band="mid")


def test_zero_area_ends_need_no_coverage():
    # area is zero in the first and last bin, so the spectrum need only cover 2-3 keV
    inst = Instrument("z", [1.0, 2.0, 3.0] * u.keV, [2.0, 3.0, 4.0] * u.keV, [0.0, 5.0, 0.0] * u.cm**2)
    np.testing.assert_allclose(inst.energy_range.value, [2.0, 3.0])
    c = inst.count_rate_from_spectrum([1.0] * PH, [2.0, 3.0] * u.keV)
    np.testing.assert_allclose(c.value, 5.0)   # 1 photon * 5 cm^2 (hand calculation)


# ---------------------------------------------------------------- bands
def test_photon_band_cuts_bins_exactly():
    # one instrument bin 1-3 keV, 10 cm^2; flat 1 ph/s/cm2/keV on one input bin 0.5-4 keV.
    # band 2.0-2.5 keV: 10 cm^2 * 0.5 keV = 5 counts/s (hand calculation)
    inst = Instrument("one", [1.0] * u.keV, [3.0] * u.keV, [10.0] * u.cm**2)
    rate = inst.count_rate_from_spectrum([3.5] * PH, [0.5, 4.0] * u.keV, band=[2.0, 2.5] * u.keV)
    np.testing.assert_allclose(rate.value, 5.0, rtol=1e-14)
    # same band in wavelength (Angstrom, short to long wavelength), as a Quantity and as a Band
    lam = [HC_KEV_ANGSTROM / 2.5, HC_KEV_ANGSTROM / 2.0] * u.AA
    for band in (lam, Band(lam[0], lam[1])):
        rate_l = inst.count_rate_from_spectrum([3.5] * PH, [0.5, 4.0] * u.keV, band=band)
        np.testing.assert_allclose(rate_l.value, 5.0, rtol=1e-12)
    # reversed limits (in the unit given) are an error, not swapped (synthcorona.spectral.Band)
    with pytest.raises(InputError, match="not below the upper limit"):
        inst.count_rate_from_spectrum([3.5] * PH, [0.5, 4.0] * u.keV, band=lam[::-1])


def test_channel_band_takes_overlap_fraction():
    # energy bins [1,2],[2,3] keV, areas 10, 20 cm^2, diagonal RMF, channels = same edges.
    # flat 1 ph/s/cm2/keV -> channel counts 10 and 20. Band 1.5-2.25 keV (channel energy):
    # 0.5*10 + 0.25*20 = 10 counts/s (hand calculation; fraction of channel width in band)
    inst = Instrument("ch", [1.0, 2.0] * u.keV, [2.0, 3.0] * u.keV, [10.0, 20.0] * u.cm**2,
                      redistribution=np.eye(2), channel_lo=[1.0, 2.0] * u.keV, channel_hi=[2.0, 3.0] * u.keV)
    assert inst.band_axis == "channel energy"
    edges = np.array([1.0, 2.0, 3.0])
    rate = inst.count_rate_from_spectrum(_flat(edges), edges * u.keV, band=[1.5, 2.25] * u.keV)
    np.testing.assert_allclose(rate.value, 10.0, rtol=1e-14)


def test_band_matrix_is_the_linear_operator_and_cached():
    inst, lo, hi, area = _stepped_instrument(bands={"soft": [0.2, 1.0] * u.keV, "hard": [1.0, 8.0] * u.keV})
    rng = np.random.default_rng(11)
    flux = rng.random(FINE.size - 1)
    B = inst.band_matrix(FINE * u.keV)
    assert B.shape == (2, FINE.size - 1)
    for k, name in enumerate(["soft", "hard"]):
        direct = inst.count_rate_from_spectrum(flux * PH, FINE * u.keV, band=name).value
        np.testing.assert_allclose(B[k] @ flux, direct, rtol=1e-12)
    # the two bands tile 0.2-8 keV: rows add to the 0.2-8 keV band (linearity, common practice)
    B2 = inst.band_matrix(FINE * u.keV, bands=[[0.2, 8.0] * u.keV])
    np.testing.assert_allclose(B.sum(axis=0), B2[0], rtol=1e-12, atol=1e-14)
    # cached: the same read-only array comes back
    assert inst.band_matrix(FINE * u.keV) is B
    assert not B.flags.writeable
    # a temperature-response style product: (n_bands, n_in) @ (n_in, n_T)
    eps = rng.random((FINE.size - 1, 7))
    assert (B @ eps).shape == (2, 7)


def test_band_matrix_with_rmf_equals_channel_selection_of_fold():
    rng = np.random.default_rng(2)
    R = rng.random((50, 50)) ** 6
    R /= R.sum(axis=0, keepdims=True)
    edges = np.geomspace(0.1, 10.0, 51)
    inst, lo, hi, area = _stepped_instrument(rmf=R, bands={"b": [edges[10], edges[30]] * u.keV})
    flux = rng.random(FINE.size - 1)
    counts = inst.fold(flux * PH, FINE * u.keV).value
    B = inst.band_matrix(FINE * u.keV)
    # band edges coincide with channel edges: the band is channels 10..29 exactly
    np.testing.assert_allclose(B[0] @ flux, counts[10:30].sum(), rtol=1e-12)


def test_with_bands_returns_copy():
    inst, *_ = _stepped_instrument()
    new = inst.with_bands(soft=(0.3 * u.keV, 1 * u.keV), euv=[50, 100] * u.AA, text="2-4 keV")
    assert inst.bands == {}
    assert set(new.bands) == {"soft", "euv", "text"}
    np.testing.assert_allclose(new.bands["euv"].to_value(u.keV), [HC_KEV_ANGSTROM / 100, HC_KEV_ANGSTROM / 50])
    np.testing.assert_allclose(new.bands["text"].to_value(u.keV), [2.0, 4.0])
    assert new.bands["soft"].unit == u.keV
    # reversed limits are refused, naming the band
    with pytest.raises(InputError, match="band 'euv'.*not below the upper limit"):
        inst.with_bands(euv=[100, 50] * u.AA)


# ---------------------------------------------------------------- effective area
def test_effective_area_of_binned_instrument():
    inst = Instrument("lin", [1.0, 2.0, 3.0] * u.keV, [2.0, 3.0, 4.0] * u.keV, [10.0, 20.0, 40.0] * u.cm**2)
    # bin values at bin centres, linear between (hand calculation): 1.5 -> 10, 2.0 -> 15, 3.0 -> 30,
    # and the end value in the outer half-bins: 1.2 -> 10, 3.9 -> 40
    got = inst.effective_area([1.5, 2.0, 3.0, 1.2, 3.9] * u.keV)
    np.testing.assert_allclose(got.to_value(u.cm**2), [10, 15, 30, 10, 40], rtol=1e-12)
    got_l = inst.effective_area((HC_KEV_ANGSTROM / 2.0) * u.AA)
    np.testing.assert_allclose(got_l.value, 15.0, rtol=1e-9)
    with pytest.raises(InputError, match="outside the effective-area grid"):
        inst.effective_area([0.9] * u.keV)
    with pytest.raises(InputError, match="outside"):
        inst.effective_area(4.1 * u.keV)


def test_from_samples_in_energy_integrates_trapezoid():
    e = np.array([1.0, 2.0, 4.0, 4.0, 5.0])          # a step at 4 keV
    a = np.array([0.0, 10.0, 30.0, 5.0, 5.0])
    inst = Instrument.from_samples("s", e * u.keV, a * u.cm**2)
    assert inst.energy_lo.size == 3                    # the zero-width step interval is dropped
    # analytic integral of the piecewise-linear curve: 5 + 40 + 5 = 50 cm^2 keV
    edges = np.array([1.0, 5.0])
    c = inst.count_rate_from_spectrum(_flat(edges), edges * u.keV)
    np.testing.assert_allclose(c.value, 50.0, rtol=1e-13)
    np.testing.assert_allclose(inst.effective_area([1.5, 3.0] * u.keV).value, [5.0, 20.0], rtol=1e-13)


def test_from_samples_in_wavelength_bin_average_is_exact():
    lam = np.array([10.0, 20.0, 40.0])
    a = np.array([100.0, 50.0, 0.0])
    inst = Instrument.from_samples("wl", lam * u.AA, a * u.cm**2)
    # independent reference: numerical integral over energy of the curve linear in wavelength
    E = np.linspace(HC_KEV_ANGSTROM / 40.0, HC_KEV_ANGSTROM / 10.0, 2_000_001)
    A_of_E = np.interp(HC_KEV_ANGSTROM / E, lam, a)
    expected = np.trapezoid(A_of_E, E)
    edges = np.array([HC_KEV_ANGSTROM / 40.0, HC_KEV_ANGSTROM / 10.0])
    c = inst.count_rate_from_spectrum(_flat(edges), edges * u.keV)
    np.testing.assert_allclose(c.value, expected, rtol=1e-9)
    # interpolation is linear in wavelength: 15 A -> 75 cm^2
    np.testing.assert_allclose(inst.effective_area(15.0 * u.AA).value, 75.0, rtol=1e-12)


# ---------------------------------------------------------------- bad input
@pytest.mark.parametrize("lo,hi,area,match", [
    ([1.0, 2.0], [2.0, 3.0], [1.0, -1.0], r"area must be >= 0 cm\^2; got -1"),
    ([1.0, 3.0, 2.0], [2.0, 4.0, 3.0], [1.0, 1.0, 1.0], "not sorted"),
    ([1.0, 1.5], [2.0, 3.0], [1.0, 1.0], "overlap"),
    ([1.0, 2.0], [1.0, 3.0], [1.0, 1.0], "zero or negative width"),
    ([1.0, 2.0], [2.0, 3.0], [0.0, 0.0], "zero in every bin"),
    ([1.0, 2.0], [2.0, 3.0], [1.0], "area has shape"),
])
def test_bad_instrument_definitions(lo, hi, area, match):
    with pytest.raises(InputError, match=match):
        Instrument("bad", lo * u.keV, hi * u.keV, area * u.cm**2)


_STEPPED = _stepped_instrument()[0]


@pytest.mark.parametrize("exc, match, call", [
    (u.UnitsError, "area", lambda inst: Instrument("x", [1.0] * u.keV, [2.0] * u.keV, [1.0])),
    (u.UnitsError, "photon_flux has no units", lambda inst: inst.fold(np.ones(FINE.size - 1), FINE * u.keV)),
    (u.UnitsError, "multiplied by the bin widths",
     lambda inst: inst.fold(np.ones(FINE.size - 1) * PH / u.keV, FINE * u.keV)),
    (InputError, "last axis must have 20000", lambda inst: inst.fold(np.ones(10) * PH, FINE * u.keV)),
    (InputError, ">= 0", lambda inst: inst.fold(-np.ones(FINE.size - 1) * PH, FINE * u.keV)),
    (u.UnitsError, "energy_edges", lambda inst: inst.fold(np.ones(FINE.size - 1) * PH, FINE * u.s)),
    (InputError, "not defined", lambda inst: inst.count_rate_from_spectrum(_flat(FINE), FINE * u.keV, band="nope")),
    (InputError, "does not overlap", lambda inst: inst.with_bands(far=[50, 60] * u.keV)),
    (InputError, "no named bands", lambda inst: inst.band_matrix(FINE * u.keV)),
])
def test_bad_units_and_shapes(exc, match, call):
    with pytest.raises(exc, match=match):
        call(_STEPPED)


def test_bad_redistribution():
    edges = np.array([1.0, 2.0, 3.0])
    kw = dict(channel_lo=[1.0, 2.0, 3.0] * u.keV, channel_hi=[2.0, 3.0, 4.0] * u.keV)
    with pytest.raises(InputError, match=r"redistribution has shape \(2, 3\)"):
        Instrument("r", edges[:-1] * u.keV, edges[1:] * u.keV, [1, 1] * u.cm**2, redistribution=np.ones((2, 3)), **kw)
    with pytest.raises(InputError, match="sums to 3 > 1"):
        Instrument("r", edges[:-1] * u.keV, edges[1:] * u.keV, [1, 1] * u.cm**2, redistribution=np.ones((3, 2)), **kw)
    with pytest.raises(InputError, match="channel_lo and channel_hi"):
        Instrument("r", edges[:-1] * u.keV, edges[1:] * u.keV, [1, 1] * u.cm**2, redistribution=np.eye(2))


def test_modules_do_not_import_fiasco():
    code = ("import sys, synthcorona.instruments.instrument, synthcorona.instruments.dem_response, "
            "synthcorona.instruments.readers; assert 'fiasco' not in sys.modules")
    subprocess.run([sys.executable, "-c", code], check=True)
