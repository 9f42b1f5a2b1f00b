"""Tests of synthcorona.instruments.binning (bin conversion and validation, rebinning overlaps).

Expected values are hand calculations written out beside each assertion.
"""
import astropy.units as u
import numpy as np
import pytest

from synthcorona.constants import HC_KEV_ANGSTROM
from synthcorona.errors import InputError
from synthcorona.instruments.binning import (
    bins_kev,
    channel_fractions,
    check_coverage,
    check_redistribution,
    check_sorted_bins,
    rebin_overlaps,
    samples_to_bins,
)


def test_rebin_overlaps_hand_example():
    # instrument bins [1,2], [2,3] keV; input bins [0.5,1.5], [1.5,3.5] keV (hand calculation):
    # O = [[0.5/1, 0.5/2], [0, 1/2]]
    out = rebin_overlaps(np.array([1.0, 2.0]), np.array([2.0, 3.0]), [0.5, 1.5, 3.5] * u.keV)
    np.testing.assert_allclose(out["O"].toarray(), [[0.5, 0.25], [0.0, 0.5]], rtol=1e-14)
    assert out["n_in"] == 2 and out["range"] == (0.5, 3.5)


def test_rebin_overlaps_keeps_the_users_bin_order():
    # the same input bins given as descending energies (ascending wavelength): columns follow the user's order
    out = rebin_overlaps(np.array([1.0, 2.0]), np.array([2.0, 3.0]), [3.5, 1.5, 0.5] * u.keV)
    np.testing.assert_allclose(out["O"].toarray(), [[0.25, 0.5], [0.5, 0.0]], rtol=1e-14)


def test_channel_fractions():
    # channels [1,2], [2,3], [3,3] (zero width) keV; band 1.5-3.25 keV (hand calculation): 0.5, 1, 1
    frac = channel_fractions(np.array([1.0, 2.0, 3.0]), np.array([2.0, 3.0, 3.0]), 1.5, 3.25)
    np.testing.assert_allclose(frac, [0.5, 1.0, 1.0], rtol=1e-14)


def test_bins_in_wavelength_become_ascending_energies():
    lo, hi = bins_kev("lo", [10.0, 20.0] * u.AA, "hi", [20.0, 40.0] * u.AA)
    lo, hi, rev = check_sorted_bins(lo, hi, "test")
    assert rev
    np.testing.assert_allclose(lo, [HC_KEV_ANGSTROM / 40, HC_KEV_ANGSTROM / 20], rtol=1e-14)
    np.testing.assert_allclose(hi, [HC_KEV_ANGSTROM / 20, HC_KEV_ANGSTROM / 10], rtol=1e-14)


def test_samples_to_bins_in_energy_are_trapezoids():
    # samples 1, 2, 4, 4, 5 keV with a step at 4 keV: 3 bins with the mean of the end values (hand calculation)
    x, a, kind, elo, ehi, abin = samples_to_bins([1.0, 2.0, 4.0, 4.0, 5.0] * u.keV,
                                                 [0.0, 10.0, 30.0, 5.0, 5.0] * u.cm**2)
    assert kind == "energy"
    np.testing.assert_allclose(elo, [1.0, 2.0, 4.0])
    np.testing.assert_allclose(abin, [5.0, 20.0, 5.0])


def test_check_redistribution_refuses_non_probabilities():
    with pytest.raises(InputError, match="sums to 2 > 1"):
        check_redistribution(np.ones((2, 1)), 1, False)
    R, colsum = check_redistribution(np.array([[0.25, 0.0], [0.5, 1.0]]), 2, True)   # columns reversed
    np.testing.assert_allclose(R.toarray(), [[0.0, 0.25], [1.0, 0.5]])
    np.testing.assert_allclose(colsum, [1.0, 0.75])


def test_check_coverage_names_the_missing_range():
    check_coverage((0.1, 10.0), (0.5, 2.0), "band 'b'")          # covered: no error
    check_coverage((0.1, 10.0), None, "band 'b'")                 # nothing needed
    with pytest.raises(InputError, match=r"band 'b' from 0\.5 keV .* missing 0\.5 keV .* to 1 keV"):
        check_coverage((1.0, 10.0), (0.5, 2.0), "band 'b'")
