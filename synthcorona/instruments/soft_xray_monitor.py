r"""The long (1-8 Angstrom) channel of the standard solar soft-X-ray flux monitor, built from its physics.

The soft-X-ray class of a flare (A, B, C, M, X) is the peak flux that the long channel of the
operational solar soft-X-ray monitor reports at 1 AU. That channel was, for four decades, a
broadband ionisation chamber: photons cross a beryllium window and ionise the argon inside;
the current is proportional to the energy the gas absorbs. This module models that detector
(:func:`detector_efficiency`), states the convention that turns its current into a reported
flux (:func:`soft_xray_monitor_long`), and folds it with the emissivity table
(:func:`monitor_temperature_response`). The class letters are in :func:`class_flux` and
:func:`class_name`.

Detector
--------
Fraction of the incident photon energy absorbed in the gas (the quantity an ionisation chamber
measures; the mean energy per ion pair is a constant and cancels below):

.. math:: \epsilon(\lambda) = e^{-\mu_{Be}(\lambda)\, t_{Be}}\,
          \left[1 - e^{-(\mu/\rho)_{Ar,photo}(\lambda)\, N_{Ar}}\right],

with the total attenuation of beryllium and the photoabsorption cross-section of argon from
the Chantler tables (Chantler 2000, J. Phys. Chem. Ref. Data 29, 597; via
:mod:`synthcorona.instruments.optics`). Fluorescence escape after argon K-shell absorption
and electron escape are neglected.

The two parameters, window thickness :data:`WINDOW_THICKNESS` = 61 µm and argon mass column
:data:`GAS_COLUMN` = 8.6 mg cm\ :sup:`-2`, are *fitted* (not taken from a drawing): they are
the least-squares fit, in log, of :math:`\epsilon` times a free scale to the published
wavelength-dependent transfer function of the first detector of this kind (Donnelly et al.
1977, the transfer functions also used by Thomas, Starr & Crannell 1985, Sol. Phys., and
White, Thomas & Schwartz 2005, Sol. Phys., doi:10.1007/s11207-005-2445-z), on the 0.2-16
Angstrom points where it exceeds 2 % of its maximum (then rounded). It reproduces that table
to 4 % rms (within 10 % from 0.6 to 10.4 Angstrom; the model falls short below 0.5 Angstrom, where
the emission of flare plasma is negligible) and the jump at the argon K edge (3.87 Angstrom) to
5 %; ``tests/instruments/test_soft_xray_monitor.py`` checks this.

Flux-scaling convention
-----------------------
The monitor reports the current divided by the detector's response averaged over 1-8 Angstrom
in wavelength, i.e. the 1-8 Angstrom energy flux of a *reference spectrum that is flat in
wavelength across 1-8 Angstrom and zero outside* that would give the same current (the
"wavelength-averaged transfer function" of the detectors; "flat-spectrum" fluxes in Neupert
2011, Sol. Phys., doi:10.1007/s11207-011-9825-3). With
:math:`\bar\epsilon = \frac{1}{7\,\AA}\int_{1\AA}^{8\AA}\epsilon\,d\lambda` the reported flux of a
spectrum :math:`S_\lambda` [W m\ :sup:`-2` Å\ :sup:`-1`] is

.. math:: F_{1-8} = \int R(\lambda)\, S_\lambda\, d\lambda, \qquad R = \epsilon / \bar\epsilon,

:func:`soft_xray_monitor_long` being :math:`R`. This is the **true-flux scale** of the newer
monitors. The older monitors (series from 1975 to 2016) reported 0.7 times this in the long
channel: true flux = old / 0.7 (:data:`LEGACY_SCALE` = 0.7; Machol, Codrescu & Peck 2021, the
NOAA user's guide of the L2 products of the photodiode series; Hudson et al. 2024, Sol. Phys.,
arXiv:2310.11457: an old-scale X30 is X43 in true units). Every flux and class in synthcorona
is on the true scale unless it says "legacy".

How far the reported flux is from the true 1-8 Angstrom energy flux of a spectrum depends on
its shape: for isothermal spectra of the embedded table (coronal abundances) the ratio
reported / true is 0.91-1.01 between 4.5 and 12.6 MK and 1.01-1.24 between 12.6 and 300 MK
(``monitor_temperature_response(...).attrs["band_integrated"]`` holds the true flux); it is 1
only for the flat reference spectrum.
"""
from __future__ import annotations

import functools
import math
import re

import astropy.units as u
import numpy as np
import xarray as xr

from ..constants import AU_CM, HC_KEV_ANGSTROM
from ..errors import InputError
from ..spectral import Band
from .optics import filter_transmission, linear_attenuation

__all__ = ["WINDOW_MATERIAL", "WINDOW_THICKNESS", "GAS", "GAS_COLUMN", "CLASS_BAND", "LEGACY_SCALE",
           "CLASS_LETTER_FLUX", "detector_efficiency", "gas_edge_wavelength", "flat_spectrum_mean", "soft_xray_monitor_long",
           "monitor_temperature_response", "monitor_flux", "class_flux", "class_name", "legacy_flux"]

#: Window material of the ionisation chamber.
WINDOW_MATERIAL = "Be"
#: Window thickness (fitted to the published transfer function; see the module docstring).
WINDOW_THICKNESS = 61.0 * u.um
#: Absorbing gas of the chamber.
GAS = "Ar"
#: Mass column of the gas along the photon path (fitted; see the module docstring).
GAS_COLUMN = 8.6e-3 * u.g / u.cm ** 2
#: The class band, 1-8 Angstrom.
CLASS_BAND = Band(1.0 * u.AA, 8.0 * u.AA, "1-8 Angstrom")
#: Old-scale flux / true flux of the long channel of the monitors of 1975-2016 (Machol et al. 2021).
LEGACY_SCALE = 0.7
#: True-scale flux [W m-2] of class letter x 1.0 (A1 = 1e-8 ... X1 = 1e-4 W m-2 at 1 AU).
CLASS_LETTER_FLUX = {"A": 1e-8, "B": 1e-7, "C": 1e-6, "M": 1e-5, "X": 1e-4}

_CLASS_RE = re.compile(r"^\s*([ABCMX])\s*([0-9]+(?:\.[0-9]*)?)\s*$", re.IGNORECASE)
#: Response grid: 0.248-20 Angstrom (the table's top energy, 50 keV, to where the window is opaque).
_GRID_KEV = (HC_KEV_ANGSTROM / 20.0, 50.0)
_REL_WIDTH = 1e-3
#: W m-2 per erg s-1 cm-2.
_W_M2 = 1e-3


def detector_efficiency(energy_or_wavelength) -> u.Quantity:
    """Fraction of the incident photon energy absorbed in the gas behind the window (dimensionless Quantity).

    window transmission x (1 - exp(-(mu/rho)_photo,Ar N_Ar)); see the module docstring. Energies or
    wavelengths (any shape) inside the Chantler tables' range (about 10 eV to 0.97 MeV).
    """
    window = filter_transmission(energy_or_wavelength, WINDOW_MATERIAL, WINDOW_THICKNESS).value
    # mass attenuation coefficient: the linear coefficient at unit density
    mu_rho = linear_attenuation(energy_or_wavelength, GAS, density=1.0 * u.g / u.cm ** 3, kind="photo").value
    absorbed = -np.expm1(-mu_rho * GAS_COLUMN.to_value(u.g / u.cm ** 2))
    return (window * absorbed) * u.dimensionless_unscaled


@functools.lru_cache(maxsize=1)
def flat_spectrum_mean() -> float:
    """The efficiency averaged over 1-8 Angstrom in wavelength (the flat reference spectrum), dimensionless.

    Trapezoidal rule on 0.0005 Angstrom steps, split at the argon K edge (the efficiency jumps there).
    """
    edge_aa = gas_edge_wavelength()
    pieces = [np.linspace(1.0, edge_aa * (1 - 1e-7), 6001), np.linspace(edge_aa * (1 + 1e-7), 8.0, 8261)]
    total = 0.0
    for lam in pieces:
        eff = detector_efficiency(lam * u.AA).value
        total += float(np.trapezoid(eff, lam))
    return total / 7.0


@functools.lru_cache(maxsize=1)
def gas_edge_wavelength() -> float:
    """Wavelength [Angstrom] of the K edge of the gas (the jump of its photoabsorption cross-section in the
    Chantler tables), found on a 0.00005 Angstrom grid between 3.80 and 3.95 Angstrom (argon: 3.87)."""
    lam = np.linspace(3.80, 3.95, 3001)
    mu = linear_attenuation(lam * u.AA, GAS, density=1.0 * u.g / u.cm ** 3, kind="photo").value
    k = int(np.argmax(mu[:-1] / mu[1:]))
    return float(0.5 * (lam[k] + lam[k + 1]))


def soft_xray_monitor_long(energy_or_wavelength) -> u.Quantity:
    """Relative spectral response R of the long channel: detector efficiency / its 1-8 Angstrom mean.

    The reported (true-scale) flux of a spectrum S_lambda is the integral of R S_lambda over
    wavelength (module docstring). Dimensionless Quantity of the grid's shape.
    """
    return detector_efficiency(energy_or_wavelength) / flat_spectrum_mean()


def _grid_edges() -> np.ndarray:
    """Energy bin edges [keV] of the response kernel: log steps of 0.1 %, an edge on the argon K edge."""
    lo, hi = _GRID_KEV
    n = int(math.ceil(math.log(hi / lo) / math.log1p(_REL_WIDTH)))
    edges = np.geomspace(lo, hi, n + 1)
    return np.unique(np.concatenate([edges, [HC_KEV_ANGSTROM / gas_edge_wavelength()]]))


@functools.lru_cache(maxsize=1)
def _grid_response() -> tuple[np.ndarray, np.ndarray]:
    edges = _grid_edges()
    centres = np.sqrt(edges[:-1] * edges[1:])
    return edges, soft_xray_monitor_long(centres * u.keV).value


def monitor_temperature_response(table=None, abundances="coronal", density=None) -> xr.DataArray:
    """Reported long-channel flux at 1 AU per unit emission measure of isothermal plasma, on the table's log T.

    ``sum over energy bins of R(E) eps_bin(T) / (4 pi (1 AU)^2)`` with ``eps_bin`` the table's energy
    emissivity per bin (lines and continuum; :func:`~synthcorona.instruments.observables.binned_emissivity`),
    no interstellar absorption (the class is defined at 1 AU). Units W m-2 per cm-3 (true scale).
    ``attrs["band_integrated"]`` holds the true 1-8 Angstrom energy flux per unit EM on the same grid,
    for comparison with the reported one.

    Parameters
    ----------
    table : EmissivityTable or path, optional
        Default: the embedded table (see :func:`synthcorona.emissivity.resolve_table`).
    abundances, density
        As for :func:`synthcorona.synthesis.prepare` (density default: the table's own profile).
    """
    from ..emissivity import resolve_table
    from ..synthesis import band_kernel, prepare
    from .observables import binned_emissivity

    tab = resolve_table(table)
    prep = prepare(tab, abundances, density)
    edges, resp = _grid_response()
    if tab.energy[-1] < edges[-1] * (1 - 1e-9):
        raise InputError(f"table: the monitor response needs the emission up to {edges[-1]:g} keV "
                         f"({HC_KEV_ANGSTROM / edges[-1]:.3g} Angstrom) but the table stops at {tab.energy[-1]:g} keV",
                         argument="table")
    emis = binned_emissivity(edges, prep, photons=False)                   # (n_T, n_bins) erg cm3 s-1
    scale = _W_M2 / (4.0 * np.pi * AU_CM ** 2)
    reported = (emis @ resp) * scale
    lo, hi = CLASS_BAND.energy_kev
    band = band_kernel(np.array([[lo, hi]]), prep)[0] * scale
    return xr.DataArray(
        reported, dims=("logT",), coords={"logT": ("logT", np.asarray(tab.logT, dtype=float), {"units": "log10(K)"})},
        name="monitor_response",
        attrs={"units": "W m-2 cm3", "long_name": "reported 1-8 Angstrom flux at 1 AU per unit emission measure "
                                                   "(true scale)",
               "band_integrated": band, "band_integrated_units": "W m-2 cm3",
               "convention": "flat reference spectrum over 1-8 Angstrom; true scale (legacy = 0.7 x true)",
               "window": f"{WINDOW_MATERIAL} {WINDOW_THICKNESS.to_value(u.um):g} um",
               "gas": f"{GAS} {GAS_COLUMN.to_value(u.mg / u.cm ** 2):g} mg cm-2",
               "abundances": str(getattr(prep.abund, "name", abundances)), "density": prep.density_label})


def monitor_flux(emission_measure, temperature, response: xr.DataArray) -> u.Quantity:
    """Reported flux [W m-2 at 1 AU] of isothermal plasma: EM x response(T), the response interpolated
    linearly in log T (clipped to the grid's ends). Arrays broadcast."""
    em = u.Quantity(emission_measure, u.cm ** -3).value
    t = u.Quantity(temperature, u.K).value
    lt = np.clip(np.log10(t), float(response.logT[0]), float(response.logT[-1]))
    return em * np.interp(lt, response.logT.values, response.values) * u.W / u.m ** 2


def class_flux(flare_class: str) -> u.Quantity:
    """True-scale peak flux [W m-2 at 1 AU] of a class such as ``"M2.5"`` (letter x number)."""
    if not isinstance(flare_class, str):
        raise InputError(f"class={flare_class!r} must be a string like \"M2.5\"", argument="class")
    m = _CLASS_RE.match(flare_class)
    if not m:
        raise InputError(f"class=\"{flare_class}\" is not a flare class; write a letter A, B, C, M or X and a "
                         "number, e.g. \"M2.5\" or \"X10\"", argument="class")
    mult = float(m.group(2))
    if not 0 < mult < 1e4:
        raise InputError(f"class=\"{flare_class}\": the number must be in (0, 1e4)", argument="class")
    return CLASS_LETTER_FLUX[m.group(1).upper()] * mult * u.W / u.m ** 2


def class_name(flux) -> str:
    """The class of a true-scale peak flux [W m-2 at 1 AU]: ``"M2.3"``, ``"X12"``; below A1 ``"A0.42"``.

    Two significant digits below 10 times the letter's flux, whole numbers above (X12, X147).
    """
    f = float(u.Quantity(flux, u.W / u.m ** 2).value)
    if not (np.isfinite(f) and f > 0):
        raise InputError(f"flux={f!r} W m-2 must be finite and > 0 to have a class", argument="flux")
    letter = "A"
    for name, base in CLASS_LETTER_FLUX.items():
        if f >= base * (1 - 1e-12):
            letter = name
    mult = f / CLASS_LETTER_FLUX[letter]
    if mult >= 9.95 and letter == "X":
        return f"X{mult:.0f}"
    if mult >= 9.95:                     # rounds up into the next letter
        nxt = "ABCMX"["ABCMX".index(letter) + 1]
        return f"{nxt}1.0"
    return f"{letter}{mult:.2g}" if mult < 1 else f"{letter}{mult:.1f}"


def legacy_flux(true_flux) -> u.Quantity:
    """Old-scale flux of the long channel (series of 1975-2016) of a true-scale flux: 0.7 x true."""
    return LEGACY_SCALE * u.Quantity(true_flux, u.W / u.m ** 2)
