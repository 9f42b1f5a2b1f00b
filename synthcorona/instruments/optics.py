"""Physics-built bandpass components: optical constants, filters, silicon detectors, and their product.

Mirrors (multilayer and grazing-incidence reflectivity) are in :mod:`synthcorona.instruments.multilayer`,
built on :func:`refractive_index` from here.

Every component is computed from tabulated atomic optical constants served by
:mod:`xraydb`, which holds the Chantler tables:

* C. T. Chantler (1995), J. Phys. Chem. Ref. Data 24, 71;
  C. T. Chantler (2000), J. Phys. Chem. Ref. Data 29, 597 ("FFAST":
  form factors f1, f2 and photoabsorption / total attenuation coefficients of
  isolated neutral atoms, Z = 1-92).

Why Chantler and not the Elam tables behind :func:`xraydb.material_mu`: the Elam
tables start at 100 eV and :func:`xraydb.material_mu` silently clamps lower
energies to 100 eV, which would make every EUV filter wrong (171 A = 72.5 eV).
The Chantler tables held by xraydb start at 1.01 eV.

Energy range
------------
Every function accepts photon energies in ``[OPTICS_ENERGY_MIN, top of the
Chantler table]`` (the top is about 0.97 MeV for every element) and raises
:class:`~synthcorona.errors.InputError` outside it. The lower limit of
10 eV is our choice: the tables start at 1 eV, but they describe isolated atoms,
and below ~10 eV the optical response of a solid (band structure, plasmons)
is not an atomic property any more. Even at 10-100 eV the isolated-atom constants
can differ from measured thin-film constants by tens of per cent near absorption
edges (for example the Chantler Mo absorption index at 13.5 nm, beta = 0.016, is
about 2.5 times the value beta ~ 0.0064 of Henke, Gullikson & Davis 1993, ADNDT 54,
181 -- the Henke number quoted from memory), so EUV
multilayer peak reflectivities come out lower than measured ones (see
:func:`synthcorona.instruments.multilayer.multilayer_reflectivity`).

Conventions
-----------
Refractive index ``n = 1 - delta + i beta`` with fields ``exp(i(k z - w t))``, so an
absorbing medium has ``Im(n) > 0``. Thicknesses are astropy length Quantities.
"""
from __future__ import annotations

import functools
from collections.abc import Mapping, Sequence

import astropy.units as u
import numpy as np
import xraydb

from ..errors import InputError
from ..spectral import to_energy_kev
from ..validation import as_quantity, check_range

__all__ = [
    "OPTICS_ENERGY_MIN",
    "material_info",
    "optics_energy_range",
    "linear_attenuation",
    "refractive_index",
    "refractive_index_ev",
    "checked_energy_ev",
    "parse_layers",
    "filter_transmission",
    "silicon_qe",
    "design_throughput",
]

#: Lowest photon energy accepted by this module (see the module docstring).
OPTICS_ENERGY_MIN = 10.0 * u.eV

#: Densities above this (g/cm^3) are refused as typing errors (osmium, the densest element, is 22.6).
_MAX_DENSITY = 30.0


# --------------------------------------------------------------------------- materials
@functools.lru_cache(maxsize=None)
def _chantler_span_ev(element: str) -> tuple[float, float]:
    """First and last tabulated energy (eV) of the Chantler table of ``element``."""
    e = xraydb.chantler_energies(element)
    return float(np.min(e)), float(np.max(e))


def material_info(material: str, density=None, name: str = "material") -> tuple[str, float, dict]:
    """Resolve a material name or chemical formula to (formula, density in g/cm^3, composition).

    Parameters
    ----------
    material : str
        Element symbol ("Al"), chemical formula ("C8H8", "Al2O3", "C22H10N2O5") or a
        material name known to xraydb's material list ("kapton", "mylar", ...).
    density : `~astropy.units.Quantity`, optional
        Mass density (g/cm^3 or any mass/volume unit). Required for formulas that
        are neither an element nor in xraydb's material list; otherwise the listed
        bulk density is used.
    name : str
        Argument name used in error messages.

    Returns
    -------
    formula : str
    density : float
        g/cm^3.
    composition : dict
        {element symbol: atoms per formula unit}.

    Raises
    ------
    InputError
        Unknown material, unparsable formula, element outside Z = 1-92 (the span of
        the Chantler tables), missing or out-of-range density.
    """
    if not isinstance(material, str) or not material.strip():
        raise InputError(f"{name}={material!r} must be a non-empty element symbol, chemical formula or material name")
    known = xraydb.get_material(material.strip())
    if known is not None:
        formula, listed_density = known
    else:
        formula, listed_density = material.strip(), None
    try:
        composition = {str(k): float(v) for k, v in xraydb.chemparse(formula).items()}
    except Exception:
        raise InputError(
            f"{name}={material!r} is neither a material known to xraydb nor a chemical formula "
            "made of element symbols (e.g. 'Al', 'C8H8', 'Al2O3')"
        ) from None
    if not composition or any(v <= 0 for v in composition.values()):
        raise InputError(f"{name}={material!r} does not parse to a composition with positive atom counts")
    for el in composition:
        try:
            z = xraydb.atomic_number(el)
        except Exception:
            raise InputError(f"{name}={material!r}: '{el}' is not an element symbol") from None
        if not 1 <= z <= 92:
            raise InputError(f"{name}={material!r}: element '{el}' (Z={z}) is outside the range Z = 1-92 "
                             "covered by the Chantler optical-constant tables")
    if density is None:
        if listed_density is None and len(composition) == 1:
            listed_density = float(xraydb.atomic_density(next(iter(composition))))
        if listed_density is None:
            raise InputError(
                f"density is required for material {material!r}: it is not an element or a material "
                "known to xraydb; give e.g. density=1.4*u.g/u.cm**3"
            )
        rho = float(listed_density)
    else:
        rho = float(as_quantity(f"density of {material}", density, u.g / u.cm**3).value)
    check_range(f"density of {material}", rho, lo=0.0, hi=_MAX_DENSITY, unit_label="g/cm^3", inclusive=True)
    if rho <= 0:
        raise InputError(f"density of {material}={rho:g} g/cm^3 must be > 0 (valid range (0, {_MAX_DENSITY:g}] g/cm^3)")
    return formula, rho, composition


def optics_energy_range(composition) -> tuple[float, float]:
    """Photon-energy range (keV) over which the optical constants of all given elements are tabulated.

    The lower end is ``max(OPTICS_ENERGY_MIN, first Chantler energy)``; the upper end is
    the smallest last Chantler energy over the elements (Chantler 2000, JPCRD 29, 597).
    """
    lo = OPTICS_ENERGY_MIN.to_value(u.eV)
    hi = np.inf
    for el in composition:
        a, b = _chantler_span_ev(el)
        lo, hi = max(lo, a), min(hi, b)
    return lo / 1e3, hi / 1e3


def checked_energy_ev(name: str, energy_or_wavelength, compositions) -> np.ndarray:
    """Photon energies (eV) of a grid of energies or wavelengths (Quantity), checked against the tables.

    Every value must lie inside :func:`optics_energy_range` of every composition in
    ``compositions`` (dicts element -> atoms); :class:`InputError` names ``name`` otherwise.
    """
    e_kev = to_energy_kev(name, energy_or_wavelength)
    lo, hi = 0.0, np.inf
    for comp in compositions:
        a, b = optics_energy_range(comp)
        lo, hi = max(lo, a), min(hi, b)
    check_range(f"{name} (as photon energy)", e_kev, lo=lo, hi=hi, unit_label="keV")
    return e_kev * 1e3


def _mass_fractions(composition: dict) -> dict:
    masses = {el: n * float(xraydb.atomic_mass(el)) for el, n in composition.items()}
    total = sum(masses.values())
    return {el: m / total for el, m in masses.items()}


def _mu_per_cm(e_ev: np.ndarray, composition: dict, rho: float, photo: bool = False) -> np.ndarray:
    """Linear attenuation coefficient (1/cm): rho * sum_i w_i (mu/rho)_i from the Chantler tables."""
    flat = np.atleast_1d(e_ev).astype(float).ravel()
    mu = np.zeros(flat.shape)
    for el, w in _mass_fractions(composition).items():
        # copy: xraydb may edit the array it is handed
        mu += w * np.atleast_1d(xraydb.mu_chantler(el, flat.copy(), photo=photo))
    return (rho * mu).reshape(np.shape(e_ev))


def _thickness_cm(name: str, thickness) -> float:
    t = as_quantity(name, thickness, u.cm)
    if np.ndim(t) != 0:
        raise InputError(f"{name} must be a single length, got shape {np.shape(t)}")
    check_range(name, t.to_value(u.nm), lo=0.0, hi=None, unit_label="nm")
    return float(t.value)


def linear_attenuation(energy_or_wavelength, material: str, density=None, kind: str = "total") -> u.Quantity:
    """Linear attenuation coefficient mu (1/cm) of a material from the Chantler tables.

    ``mu = rho * sum_i w_i (mu/rho)_i`` (mixture rule for mass attenuation coefficients,
    e.g. Hubbell 1969; the Bragg additivity of atomic cross-sections), with ``w_i`` the
    mass fractions and ``(mu/rho)_i`` from :func:`xraydb.mu_chantler`
    (Chantler 2000, J. Phys. Chem. Ref. Data 29, 597).

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths (any shape).
    material : str
        Element, chemical formula or xraydb material name (see :func:`material_info`).
    density : `~astropy.units.Quantity`, optional
        Mass density; default: xraydb's listed bulk density.
    kind : {"total", "photo"}
        "total" = photoabsorption + coherent + incoherent scattering (narrow-beam
        attenuation); "photo" = photoabsorption only.

    Returns
    -------
    `~astropy.units.Quantity`
        1/cm, same shape as the input grid.
    """
    if kind not in ("total", "photo"):
        raise InputError(f"kind={kind!r} must be 'total' or 'photo'")
    _, rho, comp = material_info(material, density)
    e_ev = checked_energy_ev("energy_or_wavelength", energy_or_wavelength, [comp])
    return _mu_per_cm(e_ev, comp, rho, photo=(kind == "photo")) / u.cm


def refractive_index(energy_or_wavelength, material: str, density=None) -> np.ndarray:
    """Complex refractive index ``n = 1 - delta + i beta`` of a material (dimensionless ndarray).

    ``delta`` and ``beta`` come from :func:`xraydb.xray_delta_beta`, i.e. from the
    atomic scattering factors f1, f2 of the Chantler tables combined by the
    standard dilute-atom relation ``n = 1 - (r_e lambda^2 / 2 pi) sum_j N_j (f1_j + i f2_j)``
    (Henke, Gullikson & Davis 1993, At. Data Nucl. Data Tables 54, 181; Attwood 1999, "Soft X-rays
    and Extreme Ultraviolet Radiation", ch. 3). ``beta`` is the photoabsorption part.

    Returns a complex ndarray of the same shape as the grid.
    """
    formula, rho, comp = material_info(material, density)
    e_ev = checked_energy_ev("energy_or_wavelength", energy_or_wavelength, [comp])
    return refractive_index_ev(e_ev, formula, rho)


def refractive_index_ev(e_ev: np.ndarray, formula: str, rho: float) -> np.ndarray:
    """Complex refractive index ``1 - delta + i beta`` at photon energies ``e_ev`` (eV, already checked with
    :func:`checked_energy_ev`) of a chemical formula of density ``rho`` (g/cm^3); see :func:`refractive_index`."""
    flat = np.atleast_1d(e_ev).astype(float).ravel()
    delta, beta, _ = xraydb.xray_delta_beta(formula, rho, flat.copy())
    delta = np.broadcast_to(np.asarray(delta, dtype=float), flat.shape)
    beta = np.broadcast_to(np.asarray(beta, dtype=float), flat.shape)
    return (1.0 - delta + 1j * beta).reshape(np.shape(e_ev))


# --------------------------------------------------------------------------- filters
def parse_layers(name: str, layers) -> list[tuple[str, float, dict]]:
    """Validate ``[(material, thickness[, density]), ...]`` -> ``[(formula, rho, composition, thickness_cm), ...]``.

    ``name`` is the argument named in errors; None gives an empty list.
    """
    if layers is None:
        return []
    if isinstance(layers, (str, bytes)) or not isinstance(layers, Sequence):
        raise InputError(f"{name} must be a list of (material, thickness) or (material, thickness, density) "
                         f"tuples; got {layers!r}")
    out = []
    for k, layer in enumerate(layers):
        if isinstance(layer, (str, bytes)) or not isinstance(layer, Sequence) or len(layer) not in (2, 3):
            raise InputError(f"{name}[{k}]={layer!r} must be (material, thickness) or (material, thickness, density)")
        mat, thick = layer[0], layer[1]
        dens = layer[2] if len(layer) == 3 else None
        formula, rho, comp = material_info(mat, dens, name=f"{name}[{k}] material")
        out.append((formula, rho, comp, _thickness_cm(f"{name}[{k}] thickness", thick)))
    return out


def filter_transmission(energy_or_wavelength, material: str, thickness, density=None, oxide=None,
                        mesh_fraction: float = 0.0) -> u.Quantity:
    """Transmission of a thin free-standing filter (dimensionless Quantity).

    Beer-Lambert attenuation ``T = (1 - f_mesh) * exp(-mu t) * prod_k exp(-mu_k t_k)``
    of the main film (thickness ``t``) and of any extra surface layers ``k`` (oxide,
    plastic backing), with ``mu`` the narrow-beam linear attenuation coefficient
    (photoabsorption + scattering) from the Chantler tables
    (Chantler 2000, J. Phys. Chem. Ref. Data 29, 597) via :func:`xraydb.mu_chantler`.
    Interference inside the film is neglected (valid when the film is many
    absorption lengths thick or when reflectivity at the surfaces is negligible,
    as at near-normal incidence for EUV/X-ray indices ``|n - 1| << 1``).

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths (any shape), in [10 eV, ~0.97 MeV].
    material : str
        Element symbol ("Al", "Zr"), chemical formula ("C8H8", "C22H10N2O5") or a
        material name in xraydb's list ("kapton", "mylar").
    thickness : `~astropy.units.Quantity`
        Film thickness (length, >= 0).
    density : `~astropy.units.Quantity`, optional
        Film density; default xraydb's bulk density (required for unlisted formulas).
    oxide : list of tuple, optional
        Extra layers ``[(material, thickness), ...]`` or ``(material, thickness, density)``,
        e.g. ``[("Al2O3", 5 * u.nm)]`` for the native oxide on both faces of an Al foil
        (give the summed thickness).
    mesh_fraction : float
        Fraction of the area blocked by an opaque supporting mesh, in [0, 1).

    Returns
    -------
    `~astropy.units.Quantity`
        Dimensionless transmission, same shape as the grid.

    Raises
    ------
    InputError
        Energy outside the tabulated range, unknown material, negative thickness,
        mesh fraction outside [0, 1).
    """
    formula, rho, comp = material_info(material, density)
    t_cm = _thickness_cm("thickness", thickness)
    extra = parse_layers("oxide", oxide)
    check_range("mesh_fraction", float(mesh_fraction), lo=0.0, hi=1.0, inclusive=True)
    if float(mesh_fraction) >= 1.0:
        raise InputError(f"mesh_fraction={mesh_fraction} must be in [0, 1): a mesh blocking everything transmits nothing")
    e_ev = checked_energy_ev("energy_or_wavelength", energy_or_wavelength, [comp] + [c for _, _, c, _ in extra])
    optical_depth = _mu_per_cm(e_ev, comp, rho) * t_cm
    for _, r_k, c_k, t_k in extra:
        optical_depth = optical_depth + _mu_per_cm(e_ev, c_k, r_k) * t_k
    return ((1.0 - float(mesh_fraction)) * np.exp(-optical_depth)) * u.dimensionless_unscaled


# --------------------------------------------------------------------------- detector
def silicon_qe(energy_or_wavelength, dead_layer, depletion_depth, oxide=0 * u.nm) -> u.Quantity:
    """Quantum efficiency of a silicon detector (CCD or CMOS), dimensionless Quantity.

    The standard slab model (Janesick 2001, "Scientific Charge-Coupled Devices", SPIE
    Press, ch. 2): a photon is detected if it crosses the insulating layers and is
    photoabsorbed inside the depleted (charge-collecting) silicon::

        QE = exp(-mu_SiO2 t_ox) exp(-mu_Si t_dead) [1 - exp(-mu_Si,photo t_depl)]

    with total attenuation ``mu`` in the dead layers and the photoabsorption part
    ``mu_photo`` in the depletion region (only photoabsorption frees charge), all from the
    Chantler tables (Chantler 2000, J. Phys. Chem. Ref. Data 29, 597). Field-free
    regions, charge diffusion and the EUV quantum yield (more than one electron per
    photon above 3.65 eV) are outside this model.

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths, in [10 eV, ~0.97 MeV].
    dead_layer : `~astropy.units.Quantity`
        Thickness of inactive silicon in front of the depletion region (>= 0).
    depletion_depth : `~astropy.units.Quantity`
        Depleted silicon thickness (> 0); ``np.inf * u.um`` for a thick detector.
    oxide : `~astropy.units.Quantity`
        SiO2 passivation thickness in front of the silicon (>= 0; density 2.2 g/cm^3
        from xraydb's material list).

    Returns
    -------
    `~astropy.units.Quantity`
        Dimensionless QE, same shape as the grid.
    """
    _, rho_si, si = material_info("Si")
    _, rho_ox, ox = material_info("SiO2")
    t_dead = _thickness_cm("dead_layer", dead_layer)
    t_ox = _thickness_cm("oxide", oxide)
    dep = as_quantity("depletion_depth", depletion_depth, u.cm)
    if np.ndim(dep) != 0:
        raise InputError(f"depletion_depth must be a single length, got shape {np.shape(dep)}")
    dep_cm = float(dep.value)
    if np.isnan(dep_cm) or dep_cm <= 0:
        raise InputError(f"depletion_depth={depletion_depth} must be > 0 (valid range (0, inf] um)")
    e_ev = checked_energy_ev("energy_or_wavelength", energy_or_wavelength, [si, ox])
    window = np.exp(-_mu_per_cm(e_ev, ox, rho_ox) * t_ox - _mu_per_cm(e_ev, si, rho_si) * t_dead)
    if np.isinf(dep_cm):
        collected = np.ones_like(window)
    else:
        collected = -np.expm1(-_mu_per_cm(e_ev, si, rho_si, photo=True) * dep_cm)
    return (window * collected) * u.dimensionless_unscaled


# --------------------------------------------------------------------------- composition
def _as_factor(name: str, value, shape) -> np.ndarray:
    if isinstance(value, u.Quantity):
        value = value.to_value(u.dimensionless_unscaled)
    arr = np.asarray(value, dtype=float)
    try:
        arr = np.broadcast_to(arr, shape)
    except ValueError:
        raise InputError(f"{name} has shape {arr.shape}, which does not match the energy grid shape {shape}") from None
    check_range(name, arr, lo=0.0, hi=1.0)
    return arr


def design_throughput(energy_or_wavelength, geometric_area, mirror=None, filters=(), detector=None) -> u.Quantity:
    """Effective area of a simple telescope design: ``A_geom * mirror * prod(filters) * QE``.

    A product of independent transmission/reflection factors on one spectral grid: the
    generic first-order model of an instrument's throughput (common practice, no single
    source), neglecting scattering out of the beam, vignetting and contamination.

    Parameters
    ----------
    energy_or_wavelength : `~astropy.units.Quantity`
        Photon energies or wavelengths.
    geometric_area : `~astropy.units.Quantity`
        Unobstructed collecting area (area units, > 0).
    mirror : array-like or Quantity, optional
        Dimensionless mirror factor on the grid, e.g. the square of
        :func:`~synthcorona.instruments.multilayer.multilayer_reflectivity` for two reflections. Default 1.
    filters : list of tuple
        ``[(material, thickness), ...]`` or ``(material, thickness, kwargs_dict)`` with
        keyword arguments for :func:`filter_transmission` (``density``, ``oxide``,
        ``mesh_fraction``).
    detector : dict or array-like, optional
        Keyword arguments of :func:`silicon_qe` (``dead_layer``, ``depletion_depth``,
        ``oxide``), or a dimensionless QE array on the grid. Default 1.

    Returns
    -------
    `~astropy.units.Quantity`
        Effective area in cm^2, same shape as the grid.
    """
    area = as_quantity("geometric_area", geometric_area, u.cm**2)
    check_range("geometric_area", area.value, lo=0.0, hi=None, unit_label="cm^2", inclusive=False)
    shape = np.shape(to_energy_kev("energy_or_wavelength", energy_or_wavelength))
    total = np.ones(shape)
    if mirror is not None:
        total = total * _as_factor("mirror", mirror, shape)
    if isinstance(filters, (str, bytes)) or not isinstance(filters, Sequence):
        raise InputError(f"filters={filters!r} must be a list of (material, thickness[, kwargs]) tuples")
    for k, f in enumerate(filters):
        if isinstance(f, (str, bytes)) or not isinstance(f, Sequence) or len(f) not in (2, 3):
            raise InputError(f"filters[{k}]={f!r} must be (material, thickness) or (material, thickness, kwargs)")
        kwargs = dict(f[2]) if len(f) == 3 else {}
        if len(f) == 3 and not isinstance(f[2], Mapping):
            raise InputError(f"filters[{k}][2] must be a dict of filter_transmission keyword arguments")
        total = total * filter_transmission(energy_or_wavelength, f[0], f[1], **kwargs).value
    if detector is not None:
        if isinstance(detector, Mapping):
            total = total * silicon_qe(energy_or_wavelength, **detector).value
        else:
            total = total * _as_factor("detector", detector, shape)
    return (area * total).to(u.cm**2)
