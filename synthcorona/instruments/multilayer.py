"""Reflectivity of thin-film stacks: periodic multilayer mirrors and grazing-incidence coatings.

Method
------
Specular reflectivity of a stack of homogeneous layers on a thick substrate, by the recursion of
Parratt (1954, Phys. Rev. 95, 359) with the interface-roughness factor of Névot & Croce (1980,
Rev. Phys. Appl. 15, 761) and the Fresnel amplitudes of Born & Wolf ("Principles of Optics",
sect. 1.5).  Optical constants come from :func:`synthcorona.instruments.optics.refractive_index`
(the Chantler tables served by xraydb).

Conventions
-----------
Refractive index ``n = 1 - delta + i beta`` with fields ``exp(i(k z - w t))``.  Angles of
incidence for stacks are measured from the surface normal; :func:`mirror_reflectivity` takes the
grazing angle (from the surface).  Thicknesses and roughnesses are astropy length Quantities.
"""
from __future__ import annotations

import astropy.units as u
import numpy as np

from ..constants import HC_KEV_ANGSTROM
from ..errors import InputError
from ..validation import as_quantity, check_range
from .optics import checked_energy_ev, material_info, parse_layers, refractive_index_ev

__all__ = ["stack_reflectivity", "multilayer_reflectivity", "mirror_reflectivity"]

_POLARIZATIONS = ("unpolarized", "s", "p")


def _angle_cos2(name: str, angle, lo_deg: float, hi_deg: float, hi_inclusive: bool) -> np.ndarray:
    a = as_quantity(name, angle, u.deg)
    check_range(name, a.value, lo=lo_deg, hi=None, unit_label="deg")
    if np.any(a.value > hi_deg) or (not hi_inclusive and np.any(a.value >= hi_deg)):
        br = "]" if hi_inclusive else ")"
        raise InputError(f"{name}={a} is outside the valid range [{lo_deg:g}, {hi_deg:g}{br} deg")
    return a.to_value(u.rad)


def _parratt(n_layers: list, d_cm: list, n_sub, k0, cos2_inc, sigma_cm: np.ndarray, polarization: str):
    """Parratt recursion for one polarisation; returns the complex amplitude reflectance.

    n_layers : complex arrays (top first), d_cm : thicknesses (cm), n_sub : substrate index,
    k0 : vacuum wavenumber 2 pi / lambda (1/cm), cos2_inc : cos^2 of the incidence angle from
    the normal in vacuum, sigma_cm : rms roughness of each interface (top first, len = layers + 1).
    """
    indices = [np.ones_like(n_sub)] + list(n_layers) + [n_sub]
    # kz_j = k0 sqrt(n_j^2 - sin^2 theta) = k0 sqrt((n_j - 1)(n_j + 1) + cos^2 theta), written so that
    # grazing incidence keeps its precision; principal sqrt has Im >= 0 for Im(n^2) >= 0 (decaying wave).
    kz = [k0 * np.sqrt((n - 1.0) * (n + 1.0) + cos2_inc) for n in indices]

    def interface(j):
        if polarization == "s":
            r = (kz[j] - kz[j + 1]) / (kz[j] + kz[j + 1])
        else:
            a, b = indices[j + 1] ** 2 * kz[j], indices[j] ** 2 * kz[j + 1]
            r = (a - b) / (a + b)
        if sigma_cm[j] > 0:
            # Nevot & Croce (1980), Rev. Phys. Appl. 15, 761: r -> r exp(-2 kz_j kz_j+1 sigma^2)
            r = r * np.exp(-2.0 * kz[j] * kz[j + 1] * sigma_cm[j] ** 2)
        return r

    n_int = len(indices) - 1
    ramp = interface(n_int - 1)  # deepest interface: last layer (or vacuum) / substrate
    for j in range(n_int - 2, -1, -1):  # loop over layers (not over wavelengths)
        phase = np.exp(2j * kz[j + 1] * d_cm[j])
        r = interface(j)
        ramp = (r + ramp * phase) / (1.0 + r * ramp * phase)
    return ramp


def _stack(e_ev, layers, sub, theta_rad_from_normal, sigma, polarization):
    """Reflectivity of a parsed stack on the broadcast of energy and angle."""
    if polarization not in _POLARIZATIONS:
        raise InputError(f"polarization={polarization!r} must be one of {_POLARIZATIONS}")
    e_b, th_b = np.broadcast_arrays(np.asarray(e_ev, float), np.asarray(theta_rad_from_normal, float))
    shape = e_b.shape
    e_flat, th_flat = e_b.ravel(), th_b.ravel()
    uniq_e, inv = np.unique(e_flat, return_inverse=True)
    cache = {}

    def index(formula, rho):  # one optical-constant look-up per distinct material
        if (formula, rho) not in cache:
            cache[(formula, rho)] = refractive_index_ev(uniq_e, formula, rho)[inv]
        return cache[(formula, rho)]

    n_layers = [index(f, r) for f, r, _, _ in layers]
    n_sub = index(sub[0], sub[1])
    d_cm = [t for _, _, _, t in layers]
    k0 = 2.0 * np.pi * e_flat / (HC_KEV_ANGSTROM * 1e3 * 1e-8)  # 1/cm
    cos2 = np.cos(th_flat) ** 2
    pols = ("s", "p") if polarization == "unpolarized" else (polarization,)
    refl = np.zeros(e_flat.shape)
    for pol in pols:
        refl += np.abs(_parratt(n_layers, d_cm, n_sub, k0, cos2, sigma, pol)) ** 2
    refl /= len(pols)
    return refl.reshape(shape)


def _roughness_cm(roughness, n_interfaces: int) -> np.ndarray:
    r = as_quantity("roughness", roughness, u.cm)
    check_range("roughness", r.to_value(u.nm), lo=0.0, hi=None, unit_label="nm")
    vals = np.atleast_1d(r.value).astype(float)
    if vals.size == 1:
        return np.full(n_interfaces, vals[0])
    if vals.size != n_interfaces or np.ndim(r) != 1:
        raise InputError(f"roughness must be one length or one per interface ({n_interfaces}); got shape {np.shape(r)}")
    return vals


def stack_reflectivity(energy_or_wavelength, layers, substrate: str, angle=0 * u.deg, roughness=0 * u.nm,
                       polarization: str = "unpolarized", substrate_density=None) -> u.Quantity:
    """Specular reflectivity of an arbitrary stack of thin films on a thick substrate.

    Computed with the recursive method of Parratt (1954, Phys. Rev. 95, 359): starting
    from the Fresnel amplitude of the deepest interface, each layer ``j`` above it
    updates the amplitude as ``R_j = (r_j + R_{j+1} e^{2 i k_z d}) / (1 + r_j R_{j+1} e^{2 i k_z d})``
    with ``k_z = (2 pi / lambda) sqrt(n^2 - sin^2 theta)``. Interface roughness (rms
    ``sigma``) multiplies each Fresnel amplitude by the Névot-Croce factor
    ``exp(-2 k_z,j k_z,j+1 sigma^2)`` (Névot & Croce 1980, Rev. Phys. Appl. 15, 761).
    Fresnel amplitudes for s and p polarisation follow Born & Wolf, "Principles of
    Optics", sect. 1.5; optical constants from :func:`refractive_index`.

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths; broadcast against ``angle``.
    layers : list of tuple
        ``[(material, thickness), ...]`` or ``(material, thickness, density)``, listed from
        the vacuum side downwards. May be empty (bare substrate: a single interface).
    substrate : str
        Substrate material (semi-infinite).
    angle : `~astropy.units.Quantity`
        Angle of incidence measured from the surface normal, in [0, 90) deg; broadcast
        against the grid.
    roughness : `~astropy.units.Quantity`
        rms interface roughness: one length for every interface, or one per interface
        (len(layers) + 1 values, top first). >= 0.
    polarization : {"unpolarized", "s", "p"}
        "unpolarized" averages the s and p reflectivities.
    substrate_density : `~astropy.units.Quantity`, optional
        Substrate density; default xraydb's bulk density.

    Returns
    -------
    `~astropy.units.Quantity`
        Dimensionless reflectivity (broadcast shape of grid and angle).
    """
    parsed = parse_layers("layers", list(layers) if layers is not None else [])
    sub_formula, sub_rho, sub_comp = material_info(substrate, substrate_density, name="substrate")
    comps = [c for _, _, c, _ in parsed] + [sub_comp]
    e_ev = checked_energy_ev("energy_or_wavelength", energy_or_wavelength, comps)
    theta = _angle_cos2("angle", angle, 0.0, 90.0, hi_inclusive=False)
    sigma = _roughness_cm(roughness, len(parsed) + 1)
    refl = _stack(e_ev, parsed, (sub_formula, sub_rho), theta, sigma, polarization)
    return refl * u.dimensionless_unscaled


def multilayer_reflectivity(energy_or_wavelength, period, gamma: float, n_bilayers: int,
                            materials=("Mo", "Si"), substrate: str = "Si", roughness=0 * u.nm,
                            angle=0 * u.deg, polarization: str = "unpolarized",
                            densities=None) -> u.Quantity:
    """Reflectivity of a periodic two-material multilayer mirror (dimensionless Quantity).

    The stack, from the substrate upwards, is ``[absorber, spacer] x n_bilayers`` with
    absorber = ``materials[0]`` of thickness ``gamma * period`` and spacer =
    ``materials[1]`` of thickness ``(1 - gamma) * period``; the top layer (facing
    vacuum) is therefore the spacer, as in Si-terminated Mo/Si EUV mirrors. The
    reflectivity is computed with the recursion of Parratt (1954, Phys. Rev. 95, 359)
    and Névot-Croce roughness factors (Névot & Croce 1980, Rev. Phys. Appl. 15, 761),
    see :func:`stack_reflectivity`. The first-order peak lies near the refraction-corrected
    Bragg wavelength ``lambda = 2 d cos(theta) sqrt(1 - 2 delta_mean / cos^2 theta)``
    (e.g. Spiller 1994, "Soft X-ray Optics", SPIE Press).

    Limitation: with the Chantler optical constants held by xraydb, an ideal Mo/Si
    mirror for 13.5 nm peaks at about 0.60-0.62, below the ~0.70 measured for real
    mirrors (Bajt et al. 2002, Opt. Eng. 41, 1797) and the ~0.74 predicted with
    Henke constants (both figures from memory), because Chantler's isolated-atom Mo
    absorption index near 13.5 nm is about 2.5 times larger than Henke's.

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths; broadcast against ``angle``.
    period : `~astropy.units.Quantity`
        Bilayer period d (length, > 0).
    gamma : float
        Absorber thickness fraction of a period, in (0, 1).
    n_bilayers : int
        Number of periods, >= 1.
    materials : tuple of str
        (absorber, spacer), e.g. ("Mo", "Si").
    substrate : str
        Substrate material.
    roughness : `~astropy.units.Quantity`
        rms roughness applied to every interface (>= 0).
    angle : `~astropy.units.Quantity`
        Angle of incidence from the surface normal, [0, 90) deg.
    polarization : {"unpolarized", "s", "p"}
    densities : tuple of Quantity, optional
        (absorber density, spacer density); default bulk densities.

    Returns
    -------
    `~astropy.units.Quantity`
        Dimensionless reflectivity.
    """
    d = as_quantity("period", period, u.cm)
    if np.ndim(d) != 0:
        raise InputError(f"period must be a single length, got shape {np.shape(d)}")
    check_range("period", d.to_value(u.nm), lo=0.0, hi=None, unit_label="nm", inclusive=False)
    try:
        g = float(gamma)
    except (TypeError, ValueError):
        raise InputError(f"gamma={gamma!r} must be a number in (0, 1)") from None
    check_range("gamma", g, lo=0.0, hi=1.0, inclusive=False)
    try:
        is_int = not isinstance(n_bilayers, bool) and int(n_bilayers) == n_bilayers
    except (TypeError, ValueError, OverflowError):
        is_int = False
    if not is_int:
        raise InputError(f"n_bilayers={n_bilayers!r} must be an integer in [1, 10000]")
    nb = int(n_bilayers)
    check_range("n_bilayers", nb, lo=1, hi=10000)
    if isinstance(materials, str) or len(materials) != 2:
        raise InputError(f"materials={materials!r} must be a pair (absorber, spacer)")
    dens = (None, None) if densities is None else tuple(densities)
    if len(dens) != 2:
        raise InputError(f"densities={densities!r} must be a pair (absorber density, spacer density) or None")
    absorber = (materials[0], g * d, dens[0]) if dens[0] is not None else (materials[0], g * d)
    spacer = (materials[1], (1.0 - g) * d, dens[1]) if dens[1] is not None else (materials[1], (1.0 - g) * d)
    layers = [spacer, absorber] * nb
    return stack_reflectivity(energy_or_wavelength, layers, substrate, angle=angle, roughness=roughness,
                              polarization=polarization)


def mirror_reflectivity(energy_or_wavelength, material: str, grazing_angle, roughness=0 * u.nm,
                        density=None, polarization: str = "unpolarized") -> u.Quantity:
    """Grazing-incidence reflectivity of a thick single-material mirror coating.

    Fresnel reflectivity of one interface vacuum/coating (Born & Wolf, "Principles of
    Optics", sect. 1.5) with the Névot-Croce roughness factor
    ``exp(-2 k_z0 k_z1 sigma^2)`` (Névot & Croce 1980, Rev. Phys. Appl. 15, 761),
    computed by :func:`stack_reflectivity` with no layers. Below the critical angle
    ``theta_c ~ sqrt(2 delta)`` the reflectivity is high (total external reflection).

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths; broadcast against ``grazing_angle``.
    material : str
        Coating (e.g. "Au", "Ir", "Pt", "Ni").
    grazing_angle : `~astropy.units.Quantity`
        Angle between ray and surface, in (0, 90] deg.
    roughness : `~astropy.units.Quantity`
        rms surface roughness (>= 0).
    density : `~astropy.units.Quantity`, optional
        Coating density; default bulk density.
    polarization : {"unpolarized", "s", "p"}

    Returns
    -------
    `~astropy.units.Quantity`
        Dimensionless reflectivity.
    """
    g = as_quantity("grazing_angle", grazing_angle, u.deg)
    check_range("grazing_angle", g.value, lo=0.0, hi=90.0, unit_label="deg")
    if np.any(g.value <= 0):
        raise InputError(f"grazing_angle={g} must be in (0, 90] deg")
    return stack_reflectivity(energy_or_wavelength, [], material, angle=90 * u.deg - g, roughness=roughness,
                              polarization=polarization, substrate_density=density)


