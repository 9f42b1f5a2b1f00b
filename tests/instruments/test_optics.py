"""Tests of synthcorona.instruments.optics (optical constants, filters, silicon QE, throughput).

Outside references are named beside each expected value. Where the reference is
xraydb's own tabulated data (Chantler 2000, J. Phys. Chem. Ref. Data 29, 597) the
test recomputes the physics formula directly from the raw table so that the
composition, unit handling and formula of the library are checked.
"""
import astropy.units as u
import numpy as np
import pytest
import xraydb

from synthcorona.errors import InputError
from synthcorona.instruments import optics
from synthcorona.instruments.multilayer import multilayer_reflectivity
from synthcorona.instruments.optics import design_throughput, filter_transmission, silicon_qe


def _ev(q):
    return q.to_value(u.eV, equivalencies=u.spectral())


# ----------------------------------------------------------------------------- filters
@pytest.mark.parametrize("thickness_nm", [100.0, 150.0])
def test_al_filter_is_beer_lambert_on_chantler_data(thickness_nm):
    grid = [171.0, 193.0, 304.0, 120.0, 200.0] * u.AA  # 171/193/304 A and 12 nm, 20 nm
    t = filter_transmission(grid, "Al", thickness_nm * u.nm)
    assert t.unit == u.dimensionless_unscaled and t.shape == (5,)
    # outside reference: Beer-Lambert exp(-(mu/rho) rho t) with (mu/rho) straight from
    # xraydb.mu_chantler (Chantler 2000) and rho from xraydb's material list (Al: 2.7 g/cm^3)
    rho = xraydb.get_material("Al")[1]
    assert rho == pytest.approx(2.7)
    expected = np.exp(-xraydb.mu_chantler("Al", _ev(grid)) * rho * thickness_nm * 1e-7)
    np.testing.assert_allclose(t.value, expected, rtol=1e-6)
    # Al is the classic EUV bandpass filter: it transmits well at 171 A (below the L edge)
    assert 0.7 < t[0].value < 0.95


def test_filter_energy_and_wavelength_grids_agree():
    lam = [171.0, 304.0] * u.AA
    e = lam.to(u.eV, equivalencies=u.spectral())
    np.testing.assert_allclose(filter_transmission(lam, "Al", 150 * u.nm).value,
                               filter_transmission(e, "Al", 150 * u.nm).value, rtol=1e-12)


def test_al_l_edge_near_17_nm():
    # Al L2,3 edge: L3 72.55 eV, L2 72.95 eV (X-ray Data Booklet, Thompson et al. 2009, Table 1-1;
    # Henke, Gullikson & Davis 1993, ADNDT 54, 181) = 17.1 nm.
    t_long = filter_transmission(17.5 * u.nm, "Al", 150 * u.nm).value
    t_short = filter_transmission(16.5 * u.nm, "Al", 150 * u.nm).value
    assert t_long / t_short > 5.0  # 0.85 -> 0.03 with the Chantler data
    e = np.linspace(70.0, 76.0, 601) * u.eV
    logt = np.log(filter_transmission(e, "Al", 150 * u.nm).value)
    i = np.argmax(np.abs(np.diff(logt)))
    # tolerance 0.8 eV: the Chantler tables are coarse across the edge
    assert abs(0.5 * (e[i] + e[i + 1]).value - 72.75) < 0.8


def test_elam_and_chantler_attenuation_agree_above_100_ev():
    # Two independent tabulations held by xraydb: Elam, Ravel & Sieber (2002) via
    # xraydb.material_mu (valid >= 100 eV only) and Chantler (2000). Agreement to 15 %
    # (measured spread 0.96-1.14 at 0.15-10 keV; common practice: tabulations differ by ~10 %
    # away from edges).
    e = np.array([300.0, 500.0, 1000.0, 2000.0, 5000.0, 10000.0])
    for material in ("Al", "Si", "kapton"):
        ours = optics.linear_attenuation(e * u.eV, material).to_value(1 / u.cm)
        elam = xraydb.material_mu(material, e)
        np.testing.assert_allclose(ours, elam, rtol=0.15)


def test_oxide_layers_and_mesh_multiply():
    grid = [171.0, 304.0] * u.AA
    e = _ev(grid)
    t = filter_transmission(grid, "Al", 100 * u.nm, oxide=[("Al2O3", 5 * u.nm)], mesh_fraction=0.2)
    # Al2O3 by the mixture rule of mass attenuation coefficients (Chantler data), density 4.0 g/cm^3
    # as listed by xraydb (sapphire 3.98 g/cm^3, CRC Handbook)
    m_al, m_o = xraydb.atomic_mass("Al"), xraydb.atomic_mass("O")
    w_al = 2 * m_al / (2 * m_al + 3 * m_o)
    mu_ox = 4.0 * (w_al * xraydb.mu_chantler("Al", e) + (1 - w_al) * xraydb.mu_chantler("O", e))
    expected = 0.8 * np.exp(-xraydb.mu_chantler("Al", e) * 2.7 * 100e-7) * np.exp(-mu_ox * 5e-7)
    np.testing.assert_allclose(t.value, expected, rtol=1e-6)


def test_plastic_filter_by_formula_and_density():
    e = [0.3, 1.0] * u.keV
    t = filter_transmission(e, "C22H10N2O5", 1 * u.um, density=1.42 * u.g / u.cm**3)
    t_named = filter_transmission(e, "kapton", 1 * u.um)  # xraydb lists kapton as C22H10N2O5, 1.42 g/cm^3
    np.testing.assert_allclose(t.value, t_named.value, rtol=1e-12)
    assert np.all(np.diff(t.value) > 0)  # more transparent at 1 keV than at 0.3 keV


def test_zero_thickness_transmits_everything():
    np.testing.assert_allclose(filter_transmission([20.0, 1000.0] * u.eV, "Zr", 0 * u.nm).value, 1.0)


# ----------------------------------------------------------------------------- detector
def test_silicon_qe_limits():
    e = [0.1, 1.0, 5.0] * u.keV
    np.testing.assert_allclose(silicon_qe(e, 0 * u.nm, np.inf * u.um).value, 1.0, rtol=0, atol=0)
    qe = silicon_qe(e, 50 * u.nm, np.inf * u.um).value
    # Beer-Lambert through 50 nm of Si with (mu/rho) from xraydb.mu_chantler and rho = 2.329 g/cm^3
    # (xraydb material list; CRC Handbook 2.329)
    np.testing.assert_allclose(qe, np.exp(-xraydb.mu_chantler("Si", _ev(e)) * 2.329 * 50e-7), rtol=1e-9)


def test_silicon_qe_depletion_and_oxide():
    e = [1.0, 5.0, 10.0] * u.keV
    ev = _ev(e)
    qe = silicon_qe(e, 0 * u.nm, 30 * u.um, oxide=10 * u.nm).value
    mu_photo = xraydb.mu_chantler("Si", ev, photo=True) * 2.329
    m_si, m_o = xraydb.atomic_mass("Si"), xraydb.atomic_mass("O")
    w_si = m_si / (m_si + 2 * m_o)
    mu_ox = 2.2 * (w_si * xraydb.mu_chantler("Si", ev) + (1 - w_si) * xraydb.mu_chantler("O", ev))
    np.testing.assert_allclose(qe, np.exp(-mu_ox * 10e-7) * (1 - np.exp(-mu_photo * 30e-4)), rtol=1e-9)
    assert qe[2] < qe[1]  # hard X-rays pass through 30 um of silicon


def test_silicon_k_edge():
    # Si K edge 1.839 keV (X-ray Data Booklet, Table 1-1)
    e = np.linspace(1.80, 1.88, 801) * u.keV
    thin = silicon_qe(e, 0 * u.nm, 5 * u.um).value  # thin depletion: QE jumps up at the edge
    i = np.argmax(np.abs(np.diff(np.log(thin))))
    assert abs(e[i].value - 1.839) < 0.005 and thin[i + 1] > thin[i]
    dead = silicon_qe(e, 0.5 * u.um, np.inf * u.um).value  # dead layer: QE drops at the edge
    j = np.argmax(np.abs(np.diff(np.log(dead))))
    assert abs(e[j].value - 1.839) < 0.005 and dead[j + 1] < dead[j]


# ----------------------------------------------------------------------------- composition
def test_design_throughput_is_product():
    lam = [171.0, 193.0, 211.0] * u.AA
    mirror = multilayer_reflectivity(lam, 8.85 * u.nm, 0.4, 50) ** 2
    det = dict(dead_layer=10 * u.nm, depletion_depth=20 * u.um)
    area = design_throughput(lam, 100 * u.cm**2, mirror=mirror,
                             filters=[("Al", 150 * u.nm), ("Al", 150 * u.nm, {"mesh_fraction": 0.15})],
                             detector=det)
    assert area.unit == u.cm**2
    expected = (100 * mirror.value * filter_transmission(lam, "Al", 150 * u.nm).value ** 2 * 0.85
                * silicon_qe(lam, **det).value)
    np.testing.assert_allclose(area.value, expected, rtol=1e-12)


# ----------------------------------------------------------------------------- bad input
E171 = [171.0] * u.AA


@pytest.mark.parametrize("exc, fragment, fn, args, kwargs", [
    (InputError, "thickness", filter_transmission, (E171, "Al", -1 * u.nm), {}),
    (InputError, "material", filter_transmission, (E171, "Xx", 10 * u.nm), {}),
    (InputError, "material", filter_transmission, (E171, "aluminiumfoil", 10 * u.nm), {}),
    (InputError, "density", filter_transmission, (E171, "C13H22", 10 * u.nm), {}),
    (InputError, "energy_or_wavelength", filter_transmission, (5 * u.eV, "Al", 10 * u.nm), {}),
    (InputError, "energy_or_wavelength", filter_transmission, (2 * u.MeV, "Al", 10 * u.nm), {}),
    (InputError, "mesh_fraction", filter_transmission, (E171, "Al", 10 * u.nm), {"mesh_fraction": 1.0}),
    (InputError, "oxide", filter_transmission, (E171, "Al", 10 * u.nm), {"oxide": [("Al2O3",)]}),
    (u.UnitsError, "thickness", filter_transmission, (E171, "Al", 10.0), {}),
    (u.UnitsError, "energy_or_wavelength", filter_transmission, (171.0, "Al", 10 * u.nm), {}),
    (InputError, "depletion_depth", silicon_qe, (E171, 0 * u.nm, 0 * u.um), {}),
    (InputError, "dead_layer", silicon_qe, (E171, -5 * u.nm, 1 * u.um), {}),
    (InputError, "geometric_area", design_throughput, (E171, -1 * u.cm**2), {}),
    (InputError, "mirror", design_throughput, (E171, 1 * u.cm**2), {"mirror": [1.5]}),
])
def test_bad_inputs_named(exc, fragment, fn, args, kwargs):
    with pytest.raises(exc) as info:
        fn(*args, **kwargs)
    assert fragment in str(info.value), str(info.value)
