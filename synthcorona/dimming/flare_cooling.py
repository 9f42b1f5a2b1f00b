r"""Conductive and radiative cooling times of a coronal loop.

Cargill (1994, ApJ 422, 381) and Cargill, Mariska & Antiochos (1995, ApJ 439, 1034):
:math:`\tau_c = 3 n k_B L^2 / (\kappa_0 T^{5/2})` and :math:`\tau_r = 3 k_B T / (n \Lambda(T))`,
the thermal energy :math:`3 n k_B T` over the conductive or the radiative loss rate.
:meth:`synthcorona.dimming.flare.LoopFlareModel.cooling_times` gives both for a model loop.
"""
from __future__ import annotations

from typing import NamedTuple

import astropy.units as u
import numpy as np

from ..constants import K_B_CGS as K_B
from ..emissivity import resolve_table
from ..errors import InputError
from ..validation import as_quantity, check_finite, check_positive
from .flare_loss import LAMBDA_UNIT, analytic_radiative_loss, loss_density

__all__ = ["KAPPA0", "CoolingTimes", "finite_quantity", "conductive_cooling_time", "radiative_cooling_time"]

#: Spitzer parallel conductivity coefficient [erg s-1 cm-1 K-7/2] (the value of Klimchuk, Patsourakos & Cargill
#: 2008, ApJ 682, 1351).
KAPPA0 = 1.0e-6


class CoolingTimes(NamedTuple):
    """Conductive and radiative cooling times [s] (Cargill 1994)."""

    conductive: u.Quantity
    radiative: u.Quantity


def finite_quantity(name, value, unit) -> u.Quantity:
    """``value`` as a Quantity in ``unit`` (scalar or array), all finite; else an error naming ``name``."""
    q = as_quantity(name, value, unit)
    check_finite(name, q)
    return q


def conductive_cooling_time(temperature, density, half_length) -> u.Quantity:
    r"""Conductive cooling time :math:`\tau_c = 3 n k_B L^2 / (\kappa_0 T^{5/2})` [s].

    Cargill (1994, ApJ 422, 381) and Cargill, Mariska & Antiochos (1995, ApJ 439, 1034):
    the thermal energy :math:`3 n k_B T` divided by the conductive loss rate
    :math:`\kappa_0 T^{7/2} / L^2`, with :math:`\kappa_0 = 10^{-6}` cgs; numerically
    :math:`\approx 4.1\times10^{-10}\, n L^2 T^{-5/2}` s (the factor 3 as remembered from those
    papers: thermal energy of electrons plus protons). Arguments broadcast.
    """
    t = finite_quantity("temperature", temperature, u.K)
    n = finite_quantity("density", density, u.cm ** -3)
    length = finite_quantity("half_length", half_length, u.cm)
    check_positive("temperature", t.value, "K")
    check_positive("density", n.value, "cm-3")
    check_positive("half_length", length.value, "cm")
    return u.Quantity(3.0 * n.value * K_B * length.value ** 2 / (KAPPA0 * t.value ** 2.5), u.s)


def radiative_cooling_time(temperature, density, radiative_loss=None, abundances="coronal",
                           table=None) -> u.Quantity:
    r"""Radiative cooling time :math:`\tau_r = 3 k_B T / (n \Lambda(T))` [s].

    Cargill (1994, ApJ 422, 381); Cargill, Mariska & Antiochos (1995, ApJ 439, 1034).
    ``radiative_loss`` is Λ itself (a Quantity in erg cm3 s-1 broadcasting with ``temperature``),
    a function T → Λ, ``"analytic"`` (KPC08 eq. 3) or None / ``"table"`` (the emissivity table
    ``table`` -- default the embedded one, see :func:`synthcorona.emissivity.resolve_table` -- at
    each given density, clipped to the table's density range).
    """
    t = finite_quantity("temperature", temperature, u.K)
    n = finite_quantity("density", density, u.cm ** -3)
    check_positive("temperature", t.value, "K")
    check_positive("density", n.value, "cm-3")
    if isinstance(radiative_loss, u.Quantity):
        lam = as_quantity("radiative_loss", radiative_loss, LAMBDA_UNIT).value
        check_positive("radiative_loss", lam, "erg cm3 s-1")
    elif isinstance(radiative_loss, str) and radiative_loss == "analytic":
        lam = analytic_radiative_loss(t).value
    elif callable(radiative_loss):
        lam = as_quantity("radiative_loss(T)", radiative_loss(t), LAMBDA_UNIT).value
    elif radiative_loss is None or radiative_loss == "table":
        from ..synthesis import radiative_loss as table_loss

        table = resolve_table(table)
        tv, nv = np.broadcast_arrays(t.value, n.value)
        lam = np.empty(tv.shape)
        for dens in np.unique(nv):
            sel = nv == dens
            lam[sel] = table_loss(tv[sel] * u.K, table=table, abundances=abundances,
                                  density=loss_density(dens, table) * u.cm ** -3).to_value(LAMBDA_UNIT)
    else:
        raise InputError(f"radiative_loss={radiative_loss!r}: give a Quantity (erg cm3 s-1), a function, "
                         "'analytic', 'table' or None")
    return u.Quantity(3.0 * K_B * t.value / (n.value * lam), u.s)
