"""Physical constants and fixed conventions used across synthcorona, each defined once.

Values come from :mod:`astropy.constants` (CODATA 2018, IAU 2015) and are stored here as plain
floats in the units the numerical code uses (cgs, keV, Angstrom).
"""
from __future__ import annotations

import astropy.constants as const
import astropy.units as u
import numpy as np

__all__ = ["PARSEC_CM", "AU_CM", "K_B_CGS", "K_B_KEV", "HC_KEV_ANGSTROM", "KEV_TO_ERG", "M_H_G", "M_P_G", "M_E_G", "AMU_G", "C_CGS",
           "DEFAULT_LOGT_GRID"]

#: One parsec in cm (IAU 2015, through astropy.units).
PARSEC_CM = float((1.0 * u.pc).to_value(u.cm))
#: One astronomical unit in cm (IAU 2012 exact definition, through astropy.units).
AU_CM = float((1.0 * u.AU).to_value(u.cm))
#: Boltzmann constant in erg K^-1 (CODATA 2018).
K_B_CGS = float(const.k_B.cgs.value)
#: Boltzmann constant in keV K^-1 (CODATA 2018).
K_B_KEV = float(const.k_B.to_value(u.keV / u.K))
#: h c in keV Angstrom (CODATA 2018): E [keV] = HC_KEV_ANGSTROM / lambda [Angstrom].
HC_KEV_ANGSTROM = float((const.h * const.c).to_value(u.keV * u.AA))
#: One keV in erg.
KEV_TO_ERG = float((1 * u.keV).to_value(u.erg))
#: Mass of a hydrogen atom in g: the standard atomic weight of H, 1.008 u (IUPAC 2021 abridged value).
M_H_G = float((1.008 * u.u).to_value(u.g))
#: Proton mass in g (CODATA 2018).
M_P_G = float(const.m_p.cgs.value)
#: Electron mass in g (CODATA 2018).
M_E_G = float(const.m_e.cgs.value)
#: Atomic mass unit in g (CODATA 2018).
AMU_G = float(const.u.cgs.value)
#: Speed of light in cm s^-1.
C_CGS = float(const.c.cgs.value)

#: The default log10(T/K) grid of DEMs and of the embedded table: 4.5 to 8.5 in steps of 0.05 dex
#: (common practice for coronal DEMs, no single source; it spans the transition region to flare plasma).
DEFAULT_LOGT_GRID = np.round(np.linspace(4.5, 8.5, 81), 10)
DEFAULT_LOGT_GRID.flags.writeable = False
