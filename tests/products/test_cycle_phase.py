"""One phase of an activity cycle (synthcorona.products.cycle_phase): a measured flux solved for its EM.

Reference: the band flux is linear in the emission measure, so the solved DEM must reproduce the
measured flux to rounding (checked with the already-tested band_flux).
"""
import re

import astropy.units as u
import pytest

from synthcorona.dem import GaussianDEM, IsothermalDEM
from synthcorona.dimming import Star
from synthcorona.errors import InputError
from synthcorona.products.cycle import compare_cycle
from synthcorona.products.cycle_phase import CyclePhase, solve_emission_measure
from synthcorona.synthesis import band_flux

FLUX = u.erg / u.s / u.cm ** 2


@pytest.mark.parametrize("width", [None, 0.2])
def test_flux_phase_reproduces_measured_flux(width):
    star = Star(distance=7 * u.pc)
    band = [0.1, 2.4] * u.keV
    p = CyclePhase("rise", 0.3, flux=4.2e-12 * FLUX, band=band, temperature=2.7 * u.MK, width_logT=width)
    dem = p.resolve(star.distance)
    assert isinstance(dem, GaussianDEM if width else IsothermalDEM)
    assert band_flux(dem, band, star.distance).to_value(FLUX) == pytest.approx(4.2e-12, rel=1e-6)
    q = CyclePhase("min", 0.0, dem=GaussianDEM(6.2, 0.2, 3e50 * u.cm ** -3))
    ds = compare_cycle([q, p], star, bands={"rosat-like": band})
    assert ds["flux"].sel(band="rosat-like").values[1] == pytest.approx(4.2e-12, rel=1e-6)
    assert list(ds["phase_source"].values) == ["dem", "flux"]


def test_solve_emission_measure_takes_any_band_form():
    # the same band as a Quantity pair, a text and in wavelength (12.398419843320026 keV Angstrom, CODATA 2018 hc)
    forms = [[0.5, 2.0] * u.keV, "0.5-2 keV", [12.398419843320026 / 2.0, 12.398419843320026 / 0.5] * u.AA]
    ems = [solve_emission_measure(1e-12 * FLUX, b, 3 * u.MK, 10 * u.pc).total_em.to_value(u.cm ** -3) for b in forms]
    assert ems[1] == pytest.approx(ems[0], rel=1e-12) and ems[2] == pytest.approx(ems[0], rel=1e-9)


@pytest.mark.parametrize("kwargs, text", [
    (dict(phase=1.2, dem=IsothermalDEM(2 * u.MK, 1e50 * u.cm ** -3)), "valid range [0, 1)"),
    (dict(phase=0.1), "either dem="),
    (dict(phase=0.1, flux=1e-12 * FLUX, band=[0.1, 2.4] * u.keV), "temperature"),
    (dict(phase=0.1, flux=1e-12 * FLUX, band=[2.4, 0.1] * u.keV, temperature=2 * u.MK), "not below"),
    (dict(phase=0.1, dem=IsothermalDEM(2 * u.MK, 1e50 * u.cm ** -3), width_logT=0.2), "width_logT"),
])
def test_bad_phases_are_refused(kwargs, text):
    with pytest.raises(InputError, match=re.escape(text)):
        CyclePhase("p", **kwargs)
