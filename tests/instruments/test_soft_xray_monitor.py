"""The long (1-8 Angstrom) channel of the standard solar soft-X-ray monitor (synthcorona.instruments.soft_xray_monitor).

Expected values:
* PUBLISHED: the wavelength-dependent transfer function of the first ionisation-chamber monitor of this kind
  (Donnelly et al. 1977; the table used by Thomas, Starr & Crannell 1985 and White, Thomas & Schwartz 2005,
  Sol. Phys., and distributed with public solar analysis software), in units of 1e-6 A per W m-2: a subset of
  its points, the two values on either side of the argon K edge at 3.87 Angstrom included.
* the class letters: decades of the peak 1-8 Angstrom flux, A1 = 1e-8 ... X1 = 1e-4 W m-2;
* the legacy scale: true = old / 0.7 in the long channel, "an old-scale X30 is X43 in true units"
  (Machol, Codrescu & Peck 2021; Hudson et al. 2024, Sol. Phys., arXiv:2310.11457).
"""
import astropy.units as u
import numpy as np
import pytest

from synthcorona.errors import InputError
from synthcorona.instruments import soft_xray_monitor as sxm

PUBLISHED = {0.6: 0.418, 0.8: 0.887, 1.0: 1.54, 1.4: 3.24, 2.0: 5.49, 2.8: 6.31, 3.6: 5.85, 4.0: 4.02, 4.8: 4.24,
             6.0: 3.42, 6.8: 2.54, 8.0: 1.31, 9.2: 0.527, 10.4: 0.163}
EDGE_BELOW_AA, EDGE_ABOVE_AA, EDGE_RATIO = 3.869, 3.871, 5.63 / 3.92   # published values at 3.869 and 3.871 A


def test_built_efficiency_follows_the_published_transfer_function():
    lam = np.array(list(PUBLISHED))
    pub = np.array(list(PUBLISHED.values()))
    eff = sxm.detector_efficiency(lam * u.AA).value
    scale = np.exp(np.mean(np.log(pub / eff)))          # the absolute scale (area, charge per energy) is free
    np.testing.assert_allclose(eff * scale, pub, rtol=0.10)
    # the jump at the argon K edge: photons just above the edge energy (shorter wavelength) are absorbed more
    below, above = sxm.detector_efficiency([3.86, 3.88] * u.AA).value
    assert below / above == pytest.approx(EDGE_RATIO, rel=0.05)
    assert sxm.gas_edge_wavelength() == pytest.approx(3.870, abs=0.002)


def test_flat_reference_spectrum_is_reported_as_its_1_8_angstrom_flux():
    # the convention: the response is normalised to its 1-8 A wavelength mean, so a spectrum flat in wavelength
    # over 1-8 A (and zero outside) is reported as exactly its 1-8 A energy flux
    lam = np.linspace(1.0, 8.0, 70001)
    r = sxm.soft_xray_monitor_long(lam * u.AA).value
    assert np.trapezoid(r, lam) / 7.0 == pytest.approx(1.0, rel=1e-4)
    assert sxm.soft_xray_monitor_long(4.0 * u.keV).unit == u.dimensionless_unscaled


def test_temperature_response_against_the_band_integrated_flux():
    # reported / true 1-8 A flux of isothermal spectra: 0.91-1.01 at 4.5-12.6 MK, up to 1.24 at 12.6-300 MK
    # (the numbers the module documents; the flat reference spectrum is not a flare spectrum)
    resp = sxm.monitor_temperature_response(density=1e10 * u.cm ** -3)
    assert resp.attrs["units"] == "W m-2 cm3" and resp.dims == ("logT",)
    lt = resp.logT.values
    with np.errstate(divide="ignore", invalid="ignore"):     # no 1-8 A emission at all below ~1 MK
        ratio = resp.values / resp.attrs["band_integrated"]
    mid = (lt >= np.log10(4.5e6)) & (lt <= np.log10(12.6e6))
    hot = (lt > np.log10(12.6e6)) & (lt <= np.log10(3e8))
    assert ratio[mid].min() > 0.90 and ratio[mid].max() < 1.02
    assert ratio[hot].min() > 1.0 and ratio[hot].max() < 1.25
    # the flux of an isothermal plasma is EM x response(T)
    t = 10 ** lt[60]
    assert sxm.monitor_flux(1e48 * u.cm ** -3, t * u.K, resp).to_value(u.W / u.m ** 2) == pytest.approx(
        1e48 * resp.values[60], rel=1e-9)


@pytest.mark.parametrize("text,flux", [("X1", 1e-4), ("m2.5", 2.5e-5), (" C 3.0 ", 3e-6), ("A1", 1e-8),
                                       ("X10", 1e-3)])
def test_class_letters(text, flux):
    assert sxm.class_flux(text).to_value(u.W / u.m ** 2) == pytest.approx(flux, rel=1e-12)


@pytest.mark.parametrize("flux,name", [(1e-4, "X1.0"), (2.34e-5, "M2.3"), (1.47e-2, "X147"), (4.2e-9, "A0.42"),
                                       (9.96e-7, "C1.0"), (1.0e-3, "X10")])
def test_class_names(flux, name):
    assert sxm.class_name(flux * u.W / u.m ** 2) == name


def test_legacy_scale():
    # true = old / 0.7: an old-scale X30 is X43 in true units (Hudson et al. 2024)
    assert sxm.class_name(sxm.class_flux("X30") / sxm.LEGACY_SCALE) == "X43"
    assert sxm.legacy_flux(1e-4 * u.W / u.m ** 2).to_value(u.W / u.m ** 2) == pytest.approx(7e-5, rel=1e-12)


@pytest.mark.parametrize("bad,match", [(2.5, "must be a string"), ("Z3", "is not a flare class"),
                                       ("M0", r"must be in \(0, 1e4\)")])
def test_bad_classes(bad, match):
    with pytest.raises(InputError, match=match) as exc:
        sxm.class_flux(bad)
    assert exc.value.argument == "class"
    with pytest.raises(InputError, match="must be finite and > 0"):
        sxm.class_name(0.0)
