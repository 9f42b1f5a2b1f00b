"""Photoelectric absorption by the neutral interstellar medium, from the EUV to 10 keV.

The cross-section per hydrogen nucleus of a gas of given element abundances is

    sigma(E) = (1 - x_H) sigma_HI + A_He [(1 - f2 - f3) sigma_HeI + f2 sigma_HeII] + sum_Z A_Z sigma_Z

with

* ``sigma_HI``, ``sigma_HeI``, ``sigma_HeII``: the analytic ground-state photoionisation
  fits of Verner, Ferland, Korista & Yakovlev (1996, ApJ 465, 487), eq. 1 with the
  parameters of their Table 1 (transcribed below);
* ``sigma_Z`` for the heavier elements (Li..Zn present in the abundance set): the
  photoabsorption cross-sections of the neutral isolated atom from the tables of
  Chantler (1995, J. Phys. Chem. Ref. Data 24, 71; 2000, JPCRD 29, 597), served by
  :func:`xraydb.mu_chantler` (cm^2/g, converted to cm^2 per atom with the atomic mass).
  They are included only at ``E >= METALS_MIN_ENERGY`` (30 eV). Reason: 30 eV lies
  above the first ionisation energy of every element (the largest, He I, is 24.6 eV;
  Ne I, the largest among the metals, 21.6 eV), whereas Chantler's isolated-atom
  tables place absorption below the real outer-shell thresholds (for instance
  sigma_O(10 eV) ~ 2e-17 cm^2 while neutral O cannot be photoionised below 13.6 eV).
  The same 30 eV lower limit is used by the two standard published absorption
  cross-section compilations for X-ray astronomy, Morrison & McCammon (1983, ApJ
  270, 119) and Balucinska-Church & McCammon (1992, ApJ 400, 699), with which this
  model is compared in the tests. With the photospheric abundances the metals supply
  0.6 % of the total cross-section at 30 eV (3 % at 100 eV, computed with this
  module); below 30 eV the H and He cross-sections keep rising roughly as E^-3
  while outer-shell metal cross-sections stay at ~10 Mb, so the metal share
  omitted below 30 eV is of order 1 % or less. One consequence: between 11.3 eV
  (C I threshold) and 13.6 eV the model gas is transparent, whereas neutral C, Mg,
  Si, S and Fe would absorb weakly (in H I regions they are mostly singly ionised).
  Grains, molecules (H2) and ionised metals are not modelled.

Valid range: ``[ISM_ENERGY_MIN, ISM_ENERGY_MAX]`` = [10 eV, 10 keV] (1240 A to 1.24 A).
Below 13.6 eV (longward of 912 A) the model gas has no photoionisation opacity at
all (dust extinction, not included, dominates there). Above 10 keV Compton
scattering by bound electrons (6.65e-25 cm^2 per electron) becomes comparable to
photoabsorption per H and is not included, so the model stops at 10 keV.
"""
from __future__ import annotations

import functools

import astropy.constants as const
import astropy.units as u
import numpy as np
import xraydb

from .abundances import resolve_abundances
from .errors import InputError
from .spectral import to_energy_kev
from .validation import as_quantity, check_range

__all__ = [
    "ISM_ENERGY_MIN",
    "ISM_ENERGY_MAX",
    "METALS_MIN_ENERGY",
    "NH_MAX",
    "VERNER1996_PARAMETERS",
    "photoionization_cross_section",
    "ism_cross_section",
    "ism_transmission",
]

ISM_ENERGY_MIN = 10.0 * u.eV
ISM_ENERGY_MAX = 10.0 * u.keV
METALS_MIN_ENERGY = 30.0 * u.eV
NH_MAX = 1e24 * u.cm**-2

#: Verner, Ferland, Korista & Yakovlev 1996, ApJ 465, 487, Table 1 (ground-state
#: photoionisation fits). Columns: E_th (eV), E_max (eV), E_0 (eV), sigma_0 (Mb),
#: y_a, P, y_w, y_0, y_1. Transcribed from the published table (the H I and He II
#: entries are hydrogenic and differ only by the Z^2 scaling of E_0 and Z^-2 of sigma_0).
VERNER1996_PARAMETERS = {
    "H I": (13.60, 5.0e4, 4.298e-1, 5.475e4, 3.288e1, 2.963, 0.0, 0.0, 0.0),
    "He I": (24.59, 5.0e4, 1.361e1, 9.492e2, 1.469, 3.188, 2.039, 4.434e-1, 2.136),
    "He II": (54.42, 5.0e4, 1.720, 1.369e4, 3.288e1, 2.963, 0.0, 0.0, 0.0),
}

_MEGABARN_CM2 = 1e-18
_AVOGADRO = const.N_A.to_value(1 / u.mol)


def _verner_cm2(ion: str, e_ev: np.ndarray) -> np.ndarray:
    """Verner et al. (1996) eq. 1: sigma = sigma_0 F(y), zero below threshold (cm^2)."""
    e_th, e_max, e0, s0, ya, p, yw, y0, y1 = VERNER1996_PARAMETERS[ion]
    if np.any(e_ev > e_max):
        raise InputError(f"energy {np.max(e_ev):g} eV is above the {e_max:g} eV validity limit of the "
                         f"Verner et al. (1996) fit for {ion}")
    x = e_ev / e0 - y0
    y = np.sqrt(x**2 + y1**2)
    f = ((x - 1.0) ** 2 + yw**2) * y ** (0.5 * p - 5.5) * (1.0 + np.sqrt(y / ya)) ** (-p)
    return np.where(e_ev >= e_th, s0 * f * _MEGABARN_CM2, 0.0)


def _energy_ev(name: str, energy_or_wavelength) -> np.ndarray:
    e_kev = to_energy_kev(name, energy_or_wavelength)
    check_range(f"{name} (as photon energy)", e_kev, lo=ISM_ENERGY_MIN.to_value(u.keV),
                hi=ISM_ENERGY_MAX.to_value(u.keV), unit_label="keV")
    return e_kev * 1e3


def photoionization_cross_section(energy_or_wavelength, ion: str) -> u.Quantity:
    """Ground-state photoionisation cross-section of H I, He I or He II (cm^2 per ion).

    Analytic fit of Verner, Ferland, Korista & Yakovlev (1996, ApJ 465, 487), eq. 1::

        sigma(E) = sigma_0 [(x - 1)^2 + y_w^2] y^(0.5 P - 5.5) (1 + sqrt(y / y_a))^(-P),
        x = E / E_0 - y_0,  y = sqrt(x^2 + y_1^2),

    with the Table 1 parameters in :data:`VERNER1996_PARAMETERS`; zero below the
    threshold (13.60, 24.59, 54.42 eV = 911.7, 504.2, 227.8 A).

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths, in [10 eV, 10 keV].
    ion : {"H I", "He I", "He II"}

    Returns
    -------
    `~astropy.units.Quantity`
        cm^2, same shape as the grid.
    """
    if ion not in VERNER1996_PARAMETERS:
        raise InputError(f"ion={ion!r} must be one of {tuple(VERNER1996_PARAMETERS)}")
    e_ev = _energy_ev("energy_or_wavelength", energy_or_wavelength)
    return _verner_cm2(ion, e_ev) * u.cm**2


@functools.lru_cache(maxsize=None)
def _cm2_per_gram_to_per_atom(element: str) -> float:
    return float(xraydb.atomic_mass(element)) / _AVOGADRO


def _metal_cm2(element: str, e_ev: np.ndarray) -> np.ndarray:
    """Photoabsorption cross-section (cm^2 per neutral atom) from the Chantler tables, zero below 30 eV."""
    out = np.zeros(e_ev.shape)
    use = e_ev >= METALS_MIN_ENERGY.to_value(u.eV)
    if np.any(use):
        sel = e_ev[use].astype(float).copy()
        mu = np.atleast_1d(xraydb.mu_chantler(element, sel, photo=True))
        out[use] = mu * _cm2_per_gram_to_per_atom(element)
    return out


def _fraction(name: str, value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}={value!r} must be a number in [0, 1]") from None
    check_range(name, v, lo=0.0, hi=1.0)
    return v


def ism_cross_section(energy_or_wavelength, abundances="photospheric", he_ionized_fraction=(0.0, 0.0),
                      h_ionized_fraction: float = 0.0) -> u.Quantity:
    """Photoelectric absorption cross-section of interstellar gas per H nucleus (cm^2).

    ``sigma = (1 - x_H) sigma_HI + A_He [(1 - f2 - f3) sigma_HeI + f2 sigma_HeII] + sum_Z A_Z sigma_Z``
    with the H I / He I / He II fits of Verner, Ferland, Korista & Yakovlev (1996,
    ApJ 465, 487) and the neutral-atom photoabsorption of heavier elements from the
    Chantler tables (Chantler 2000, J. Phys. Chem. Ref. Data 29, 597) at
    E >= 30 eV (see the module docstring for why not below). The result is the same
    kind of quantity as the published compilations of Morrison & McCammon (1983,
    ApJ 270, 119) and Balucinska-Church & McCammon (1992, ApJ 400, 699), computed
    here from newer atomic data and a user-chosen abundance set; grains are not modelled.

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths, in [10 eV, 10 keV] (1240 A to 1.24 A).
    abundances : str, dict or AbundanceSet
        Anything :func:`synthcorona.abundances.resolve_abundances` accepts (default
        "photospheric" = Asplund, Amarsi & Grevesse 2021, A&A 653, A141). Number
        abundances relative to H; elements absent are zero.
    he_ionized_fraction : (float, float)
        Fractions (f2, f3) of helium as He II and He III, each in [0, 1], sum <= 1.
    h_ionized_fraction : float
        Fraction x_H of hydrogen that is ionised, in [0, 1].

    Returns
    -------
    `~astropy.units.Quantity`
        cm^2 per H nucleus (neutral + ionised), same shape as the grid.
    """
    e_ev = _energy_ev("energy_or_wavelength", energy_or_wavelength)
    ab = resolve_abundances(abundances).values
    try:
        f2, f3 = he_ionized_fraction
    except (TypeError, ValueError):
        raise InputError(f"he_ionized_fraction={he_ionized_fraction!r} must be a pair "
                         "(He II fraction, He III fraction)") from None
    f2 = _fraction("he_ionized_fraction[0] (He II)", f2)
    f3 = _fraction("he_ionized_fraction[1] (He III)", f3)
    if f2 + f3 > 1.0 + 1e-12:
        raise InputError(f"he_ionized_fraction={he_ionized_fraction!r}: the He II and He III fractions add up "
                         f"to {f2 + f3:g}, above the valid maximum 1")
    x_h = _fraction("h_ionized_fraction", h_ionized_fraction)

    sigma = (1.0 - x_h) * _verner_cm2("H I", e_ev)
    a_he = ab.get("He", 0.0)
    if a_he > 0:
        f1 = max(0.0, 1.0 - f2 - f3)
        sigma = sigma + a_he * (f1 * _verner_cm2("He I", e_ev) + f2 * _verner_cm2("He II", e_ev))
    for el, a in ab.items():
        if el in ("H", "He") or a <= 0:
            continue
        sigma = sigma + a * _metal_cm2(el, e_ev)
    return sigma * u.cm**2


def ism_transmission(energy_or_wavelength, nh, abundances="photospheric", he_ionized_fraction=(0.0, 0.0),
                     h_ionized_fraction: float = 0.0) -> u.Quantity:
    """Transmission ``exp(-sigma(E) N_H)`` of an interstellar column (dimensionless Quantity).

    ``sigma`` from :func:`ism_cross_section` (Verner et al. 1996, ApJ 465, 487 for
    H and He; Chantler 2000, JPCRD 29, 597 for heavier elements); compare Morrison &
    McCammon (1983, ApJ 270, 119) and Balucinska-Church & McCammon (1992, ApJ 400, 699).

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths, in [10 eV, 10 keV].
    nh : `~astropy.units.Quantity`
        Hydrogen column density (all H nuclei), scalar, in [0, 1e24] cm^-2.
    abundances, he_ionized_fraction, h_ionized_fraction
        As in :func:`ism_cross_section`.

    Returns
    -------
    `~astropy.units.Quantity`
        Dimensionless transmission, same shape as the grid.
    """
    col = as_quantity("nh", nh, u.cm**-2)
    if np.ndim(col) != 0:
        raise InputError(f"nh must be a single column density, got shape {np.shape(col)}")
    check_range("nh", float(col.value), lo=0.0, hi=NH_MAX.to_value(u.cm**-2), unit_label="cm^-2")
    sigma = ism_cross_section(energy_or_wavelength, abundances, he_ionized_fraction, h_ionized_fraction)
    return np.exp(-sigma.to_value(u.cm**2) * float(col.value)) * u.dimensionless_unscaled
