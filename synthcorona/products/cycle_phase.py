r"""One phase of an activity cycle, and the emission measure that reproduces a measured band flux.

A :class:`CyclePhase` gives the corona at one phase of a cycle in one of three ways:

* a DEM model of :mod:`synthcorona.dem` (``dem=``);
* a list of components (``dem=[comp1, comp2, ...]``, summed into a
  :class:`~synthcorona.dem.MultiComponentDEM`: the usual 2T/3T fits of stellar coronae);
* a measured band flux plus a temperature (``flux=``, ``band=``, ``temperature=``, optionally
  ``width_logT=``): an isothermal DEM (or a Gaussian in log T of that width) whose emission
  measure is solved so that its unabsorbed energy flux in ``band`` at the star's distance equals
  ``flux``. The flux is linear in the EM, so the solution is exact:
  :math:`EM = F_{meas} / F_1` with :math:`F_1` the band flux of the same shape with EM = 1 cm-3
  (:func:`solve_emission_measure`).

:func:`synthcorona.products.cycle.compare_cycle` compares the phases.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import astropy.units as u
import numpy as np

from ..dem import DEM, GaussianDEM, IsothermalDEM, MultiComponentDEM
from ..errors import InputError
from ..instruments.conversion import FLUX_UNIT
from ..spectral import Band
from ..validation import as_quantity, as_scalar, check_range

__all__ = ["CyclePhase", "solve_emission_measure", "coincident_phases", "PHASE_SOURCES"]

#: How a phase's corona was given.
PHASE_SOURCES = ("dem", "components", "flux")


@dataclass(frozen=True)
class CyclePhase:
    """One phase of an activity cycle.

    Parameters
    ----------
    label : str
        Short name ("minimum", "rise", ...), unique within a cycle.
    phase : float or Quantity [time]
        Cycle phase: a fraction in [0, 1), or a time since the reference epoch (e.g. ``3 * u.yr``).
        All phases of a cycle must use the same kind.
    dem : DEM or sequence of DEMs, optional
        The corona (a volume DEM, cm-3). A sequence is summed (multi-component corona).
    flux : Quantity [erg s-1 cm-2], optional
        Instead of ``dem``: a measured unabsorbed energy flux at the observer in ``band``.
    band : Band, text or Quantity pair, optional
        Energy or wavelength limits of ``flux``.
    temperature : Quantity [K], optional
        Temperature of the isothermal DEM (or peak of the Gaussian DEM) solved from ``flux``.
    width_logT : float, optional
        With ``flux``: Gaussian DEM of this width in log10 T (dex, (0, 3]) instead of isothermal.
    """

    label: str
    phase: Any
    dem: Any = None
    flux: u.Quantity | None = None
    band: Any = None
    temperature: u.Quantity | None = None
    width_logT: float | None = None

    def __post_init__(self):
        if not isinstance(self.label, str) or not self.label.strip():
            raise InputError(f"label={self.label!r} must be a non-empty string")
        if isinstance(self.phase, u.Quantity):
            as_scalar(f"phase of '{self.label}'", self.phase, u.yr, lo=-1e4, hi=1e4, unit_label="yr")
        elif isinstance(self.phase, (int, float, np.floating, np.integer)) and not isinstance(self.phase, bool):
            v = float(self.phase)
            if not (0.0 <= v < 1.0):
                raise InputError(f"phase of '{self.label}' = {v:g} is outside the valid range [0, 1) of a cycle "
                                 "fraction; give a time (e.g. 3 * u.yr) for phases in years")
        else:
            raise InputError(f"phase of '{self.label}' = {self.phase!r} must be a fraction in [0, 1) or a time")
        by_dem = self.dem is not None
        by_flux = any(x is not None for x in (self.flux, self.band, self.temperature))
        if by_dem == by_flux:
            raise InputError(f"phase '{self.label}': give either dem= (a DEM or a list of components) or "
                             "flux=, band= and temperature=, not both and not neither")
        if by_dem:
            if isinstance(self.dem, (list, tuple)):
                if not self.dem or not all(isinstance(d, DEM) for d in self.dem):
                    raise InputError(f"phase '{self.label}': dem must be a DEM or a non-empty list of DEMs")
            elif not isinstance(self.dem, DEM):
                raise InputError(f"phase '{self.label}': dem={self.dem!r} is not a DEM model")
            if self.width_logT is not None:
                raise InputError(f"phase '{self.label}': width_logT applies only to a phase given by flux")
        else:
            missing = [k for k in ("flux", "band", "temperature") if getattr(self, k) is None]
            if missing:
                raise InputError(f"phase '{self.label}': a phase given by flux also needs {', '.join(missing)}")
            as_scalar(f"flux of '{self.label}'", self.flux, FLUX_UNIT, lo=0.0, unit_label="erg s-1 cm-2",
                      inclusive=False)
            Band.coerce(self.band, f"band of '{self.label}'")
            as_scalar(f"temperature of '{self.label}'", self.temperature, u.K, lo=1e4, hi=1e9, unit_label="K")
            if self.width_logT is not None:
                check_range(f"width_logT of '{self.label}'", float(self.width_logT), lo=0.0, hi=3.0, unit_label="dex",
                            inclusive=True)
                if float(self.width_logT) == 0.0:
                    raise InputError(f"width_logT of '{self.label}' = 0: omit it for an isothermal DEM "
                                     "(valid range (0, 3] dex)")

    @property
    def source(self) -> str:
        """"dem", "components" or "flux": how the corona was given."""
        if self.dem is None:
            return "flux"
        if isinstance(self.dem, (list, tuple)) or isinstance(self.dem, MultiComponentDEM):
            return "components"
        return "dem"

    @property
    def phase_value(self) -> float:
        """The phase as a float: the cycle fraction, or the time in years."""
        if isinstance(self.phase, u.Quantity):
            return float(self.phase.to_value(u.yr))
        return float(self.phase)

    def resolve(self, distance, abundances="coronal", density=None, table=None) -> DEM:
        """The phase's volume DEM (cm-3); a flux phase is solved with :func:`solve_emission_measure`."""
        if self.dem is not None:
            d = MultiComponentDEM(list(self.dem)) if isinstance(self.dem, (list, tuple)) else self.dem
            if d.batch_shape != ():
                raise InputError(f"phase '{self.label}': the DEM must be a single DEM, not a batch of shape "
                                 f"{d.batch_shape}")
            if not d.em_unit.is_equivalent(u.cm ** -3):
                raise InputError(f"phase '{self.label}': the DEM has units {d.em_unit}; a volume DEM (cm-3) is "
                                 "needed for fluxes and count rates of a star")
            return d
        return solve_emission_measure(self.flux, self.band, self.temperature, distance, width_logT=self.width_logT,
                                      abundances=abundances, density=density, table=table)


def coincident_phases(phases) -> tuple[int, int] | None:
    """Positions ``(i, j)``, ``i < j``, of the first two phases at the same time, or None if all differ.

    Phases of one kind are compared by :attr:`CyclePhase.phase_value` (cycle fraction, or time in
    years), equal to within 1e-12 relative (so "3 yr" and "1095.75 d" coincide). A cycle's phases
    index its results, so each needs its own time.
    """
    values = [p.phase_value for p in phases]
    order = sorted(range(len(values)), key=lambda k: values[k])
    for a, b in zip(order, order[1:]):
        if abs(values[b] - values[a]) <= 1e-12 * max(1.0, abs(values[a])):
            return min(a, b), max(a, b)
    return None


def _shape_dem(temperature, width_logT, em) -> DEM:
    t = as_quantity("temperature", temperature, u.K)
    if width_logT is None:
        return IsothermalDEM(temperature=t, total_em=em)
    return GaussianDEM(peak_logT=float(np.log10(t.to_value(u.K))), width_logT=float(width_logT), total_em=em)


def solve_emission_measure(flux, band, temperature, distance, width_logT=None, abundances="coronal", density=None,
                           table=None) -> DEM:
    """The isothermal (or Gaussian, ``width_logT``) DEM whose band flux equals a measured flux.

    The unabsorbed band flux of a DEM of fixed shape is linear in its total emission measure,
    :math:`F = EM\\,F_1` with :math:`F_1` the flux for EM = 1 cm-3
    (:func:`synthcorona.synthesis.band_flux`), so :math:`EM = F_{meas}/F_1` exactly.

    Parameters
    ----------
    flux : Quantity [erg s-1 cm-2]
        Measured unabsorbed energy flux at the observer, > 0.
    band : Band, text or Quantity pair
        Energy or wavelength limits of the flux.
    temperature : Quantity [K]
        Temperature of the isothermal plasma (peak temperature of the Gaussian DEM).
    distance : Quantity [length]
        Distance of the star.
    width_logT : float, optional
        Gaussian width in log10 T (dex); None: isothermal.
    abundances, density, table
        As for :func:`synthcorona.synthesis.band_flux`.

    Returns
    -------
    IsothermalDEM or GaussianDEM with the solved ``total_em`` (cm-3).
    """
    from ..synthesis import band_flux

    f = as_scalar("flux", flux, FLUX_UNIT, lo=0.0, unit_label="erg s-1 cm-2", inclusive=False)
    band = Band.coerce(band, "band")
    unit_dem = _shape_dem(temperature, width_logT, 1.0 * u.cm ** -3)
    f1 = float(band_flux(unit_dem, band, distance, table=table, abundances=abundances,
                         density=density).to_value(FLUX_UNIT))
    if not f1 > 0:
        raise InputError(f"band={band.range_text}: plasma at temperature={temperature} emits nothing in this band "
                         "(no lines or continuum of the table), so no emission measure can give flux="
                         f"{f:g} erg s-1 cm-2", argument="band")
    return _shape_dem(temperature, width_logT, (f / f1) * u.cm ** -3)
