r"""Mass-loss coronal dimming: the emission measure a CME carries away and the depth it leaves.

Emission measure of the ejected plasma
--------------------------------------
A CME of mass :math:`M` lifted from coronal plasma of electron density :math:`n_e` contains
:math:`N_H = f_{esc} M / (\mu_H m_H)` hydrogen nuclei, with :math:`\mu_H = \sum_X A_X m_X / m_H`
the mean mass per hydrogen atom of the abundance set
(:func:`synthcorona.abundances.mean_mass_per_hydrogen`; about 1.34 for the Asplund et al. 2021
photosphere, 1.4 for He-richer compilations) and :math:`f_{esc} \in [0, 1]` the fraction of the
lifted mass that escapes (0: a confined eruption, no mass-loss dimming). Its volume emission
measure, :math:`EM = \int n_e n_H dV = n_e N_H`, is what the corona loses:

.. math:: \Delta EM = \frac{n_e\, f_{esc}\, M}{\mu_H m_H}.

This is the relation used to estimate dimming masses from EUV images, e.g. Harrison & Lyons
(2000, A&A 358, 1097) and Harrison et al. (2003, A&A 400, 1071), read backwards.

Source density
--------------
Either given, or from the loop scaling law of Rosner, Tucker & Vaiana (1978, ApJ 220, 643):
:math:`T_{max} = 1400\,(p L)^{1/3}` (cgs) gives :math:`p = (T/1400)^3 / L` for loops of
half-length :math:`L` at apex temperature :math:`T`, and :math:`n_e = p / (2 k_B T)`.

Temperature distribution
------------------------
:math:`\Delta EM` is spread over the temperature nodes of the emissivity table with weights
:math:`w_T` (:math:`\sum w_T = 1`):

* ``"window"`` (default): the quiescent DEM's own EM weights inside
  :math:`|\log T - \log T_{src}| \le` ``window`` dex (default 0.15): the CME takes a fixed
  fraction of everything in the window, leaving the DEM's shape elsewhere untouched;
* ``"gaussian"``: a Gaussian in log T (centre, width in dex), evaluated at the nodes;
* an array: user weights on the table grid (normalised here).

The corona cannot lose more than it has: :math:`\Delta EM\, w_T \le EM_T` at every node, i.e.
:math:`\Delta EM \le \min_{w_T > 0} EM_T / w_T` (for the default window this is the EM inside
the window). A larger request raises :class:`~synthcorona.errors.InputError` stating the
largest removable mass at that density.

Depth per band
--------------
With the temperature response :math:`K_b(T)` of band :math:`b`
(:meth:`synthcorona.instruments.instrument.Instrument.temperature_response`, interstellar
absorption included, since :math:`N_H` changes the relative weight of temperatures within the
band), the fractional depth is

.. math:: \delta_b = \frac{\sum_T \Delta EM_T K_b(T)}{\sum_T EM_T K_b(T)},

independent of distance, linear in :math:`M` and :math:`\le 1` by construction. The same
ratio with the band's energy-flux kernel gives the depth in energy flux.

Expansion dimming
-----------------
Optionally (:func:`expansion_emission_measure_change`), a fraction :math:`\phi` of the EM inside the
source window expands adiabatically by a volume factor :math:`s \ge 1` without losing particles
(the expansion dimming of Aschwanden 2009, Ann. Geophys. 27, 3275, from memory): with
:math:`EM \propto N^2 / V` the expanded plasma keeps :math:`EM/s`, and with
:math:`T V^{\gamma - 1}` = const (:math:`\gamma = 5/3`) it cools to :math:`T s^{-(\gamma - 1)}`,
i.e. by :math:`(\gamma - 1)\log_{10} s` dex. The EM is moved onto the table grid with the same
hat-function rule as :meth:`synthcorona.dem.DEM.em_weights` (first moment in log T preserved).
The EM change can raise cooler bands (negative depth). The expansion is assumed to follow the same
time profile as the mass loss.
"""
from __future__ import annotations

import math

import astropy.units as u
import numpy as np
import xarray as xr

from ..abundances import mean_mass_per_hydrogen
from ..constants import K_B_CGS as K_B
from ..constants import M_H_G as M_H
from ..errors import InputError
from ..validation import as_quantity, check_range

__all__ = [
    "DENSITY_RANGE", "rtv_density", "mass_to_emission_measure", "removal_weights",
    "max_removable_emission_measure", "max_removable_mass", "removed_emission_measure", "band_depths",
    "expansion_emission_measure_change",
]

#: Valid range of the source electron density [cm-3] (coronal plasma; common practice, no source).
DENSITY_RANGE = (1e6, 1e13)
#: Valid range of the loop half-length for the RTV density [cm] (1 Mm - 10 R_sun).
LOOP_LENGTH_RANGE = (1e8, 7e11)
#: Valid range of the window half-width [dex].
WINDOW_RANGE = (0.025, 1.0)


def _scalar(name, value, unit, lo=None, hi=None, unit_label=""):
    q = as_quantity(name, value, unit)
    v = np.asarray(q.value, dtype=float)
    if v.ndim != 0:
        raise InputError(f"{name} must be a single value, got shape {v.shape}")
    check_range(name, v, lo=lo, hi=hi, unit_label=unit_label)
    return float(v)


def check_density(name: str, density) -> float:
    """Electron density [cm-3] as a float, inside :data:`DENSITY_RANGE` (named error otherwise)."""
    return _scalar(name, density, u.cm ** -3, *DENSITY_RANGE, unit_label="cm-3")


def check_escape_fraction(value) -> float:
    """Escape fraction as a float in [0, 1] (named error otherwise)."""
    if isinstance(value, u.Quantity):
        value = value.to_value(u.dimensionless_unscaled)
    try:
        f = float(value)
    except (TypeError, ValueError):
        raise InputError(f"escape_fraction={value!r} is not a number; valid range [0, 1]") from None
    check_range("escape_fraction", f, lo=0.0, hi=1.0)
    return f


def check_mass(name: str, mass) -> np.ndarray:
    """Mass [g] as a float array, finite and >= 0."""
    q = as_quantity(name, mass, u.g)
    m = np.asarray(q.value, dtype=float)
    check_range(name, m, lo=0.0, unit_label="g")
    return m


def rtv_density(temperature, loop_half_length) -> u.Quantity:
    r"""Electron density of a static loop from the scaling law of Rosner, Tucker & Vaiana (1978).

    :math:`T_{max} = 1400 (pL)^{1/3}` (Rosner, Tucker & Vaiana 1978, ApJ 220, 643, their eq. 4.3),
    so :math:`p = (T_{max}/1400)^3 / L` and :math:`n_e = p / (2 k_B T_{max})`.

    Parameters
    ----------
    temperature : Quantity [K]
        Loop apex temperature, in [1e5, 1e8] K.
    loop_half_length : Quantity [length]
        Loop half-length L, in [1e8, 7e11] cm.
    """
    t = as_quantity("temperature", temperature, u.K)
    check_range("temperature", t.value, lo=1e5, hi=1e8, unit_label="K")
    length = as_quantity("loop_half_length", loop_half_length, u.cm)
    check_range("loop_half_length", length.value, *LOOP_LENGTH_RANGE, unit_label="cm")
    p = (t.value / 1400.0) ** 3 / length.value
    return u.Quantity(p / (2.0 * K_B * t.value), u.cm ** -3)


def mass_to_emission_measure(mass, density, abundances="coronal", escape_fraction=1.0) -> u.Quantity:
    r"""Volume emission measure removed by a CME, :math:`\Delta EM = n_e f_{esc} M / (\mu_H m_H)` [cm-3].

    ``mass`` may be an array (>= 0 g); ``density`` one value in [1e6, 1e13] cm-3;
    ``escape_fraction`` in [0, 1]; :math:`\mu_H` from ``abundances``
    (:func:`synthcorona.abundances.mean_mass_per_hydrogen`).
    """
    m = check_mass("mass", mass)
    n = check_density("density", density)
    f = check_escape_fraction(escape_fraction)
    mu = mean_mass_per_hydrogen(abundances)
    return u.Quantity(n * f * m / (mu * M_H), u.cm ** -3)


def removal_weights(logT, quiescent_weights=None, *, distribution="window", source_temperature=None,
                    window=0.15, width=None) -> np.ndarray:
    """Normalised temperature weights w_T (sum 1) of the removed EM on the grid ``logT``.

    Parameters
    ----------
    logT : array
        log10(T/K) grid of the emissivity table.
    quiescent_weights : array (n_T,), optional
        EM weights of the quiescent DEM on ``logT`` (required for ``"window"``).
    distribution : "window", "gaussian" or array (n_T,)
        See the module docstring.
    source_temperature : Quantity [K]
        Centre of the window or Gaussian (inside the grid).
    window : float
        Half-width of the window in dex, [0.025, 1].
    width : float
        Gaussian sigma in dex (> 0; default equal to ``window``).
    """
    x = np.asarray(logT, dtype=float)
    if isinstance(distribution, str):
        t = as_quantity("source_temperature", source_temperature, u.K)
        lt = np.asarray(np.log10(t.value), dtype=float) if np.all(t.value > 0) else np.array(-np.inf)
        if lt.ndim != 0:
            raise InputError("source_temperature must be a single value")
        check_range("source_temperature", t.value, lo=10 ** x[0], hi=10 ** x[-1], unit_label="K")
        if distribution == "window":
            if quiescent_weights is None:
                raise InputError("distribution='window' needs the quiescent DEM weights")
            check_range("window", window, *WINDOW_RANGE, unit_label="dex")
            inside = np.abs(x - lt) <= float(window) + 1e-9
            w = np.where(inside, np.asarray(quiescent_weights, dtype=float), 0.0)
            if not w.sum() > 0:
                raise InputError(f"the quiescent DEM has no emission measure within +-{window:g} dex of "
                                 f"source_temperature={t.value:.4g} K: no plasma there to remove")
        elif distribution == "gaussian":
            sig = float(window if width is None else width)
            check_range("width", sig, lo=0.0, hi=2.0, unit_label="dex", inclusive=False)
            w = np.exp(-0.5 * ((x - lt) / sig) ** 2)
        else:
            raise InputError(f"distribution={distribution!r} must be 'window', 'gaussian' or an array of weights "
                             f"on the table's {x.size} temperature nodes")
    else:
        w = np.asarray(distribution, dtype=float)
        if w.shape != x.shape:
            raise InputError(f"distribution has shape {w.shape}; give one weight per table node, shape {x.shape}")
        check_range("distribution", w, lo=0.0)
        if not w.sum() > 0:
            raise InputError("distribution: the weights are all zero")
    return w / w.sum()


def max_removable_emission_measure(quiescent_weights, weights) -> float:
    r"""Largest :math:`\Delta EM` [cm-3] with :math:`\Delta EM\, w_T \le EM_T` at every node."""
    q = np.asarray(quiescent_weights, dtype=float)
    w = np.asarray(weights, dtype=float)
    pos = w > 0
    return float(np.min(q[pos] / w[pos]))


def max_removable_mass(quiescent_weights, weights, density, abundances="coronal", escape_fraction=1.0) -> u.Quantity:
    """Largest CME mass [g] the corona can supply at ``density`` (inf for ``escape_fraction`` = 0)."""
    em = max_removable_emission_measure(quiescent_weights, weights)
    n = check_density("density", density)
    f = check_escape_fraction(escape_fraction)
    mu = mean_mass_per_hydrogen(abundances)
    return u.Quantity(math.inf if f == 0 else em * mu * M_H / (n * f), u.g)


def removed_emission_measure(mass, logT, quiescent_weights, weights, density, abundances="coronal",
                             escape_fraction=1.0) -> xr.DataArray:
    """Removed EM per temperature node, DataArray (mass, logT) [cm-3].

    Raises :class:`InputError` if any mass needs more EM than the corona has (message gives the
    largest removable mass at this density).
    """
    m = np.atleast_1d(check_mass("mass", mass))
    dem_total = mass_to_emission_measure(m * u.g, density, abundances, escape_fraction).value
    em_max = max_removable_emission_measure(quiescent_weights, weights)
    if np.any(dem_total > em_max * (1 + 1e-12)):
        mmax = max_removable_mass(quiescent_weights, weights, density, abundances, escape_fraction)
        raise InputError(
            f"mass={m[dem_total > em_max].max():.4g} g needs Delta EM = {dem_total.max():.4g} cm-3, more than the "
            f"corona holds at the source temperatures ({em_max:.4g} cm-3): the largest removable mass at "
            f"density={float(as_quantity('density', density, u.cm ** -3).value):.4g} cm-3 is {mmax.value:.4g} g "
            f"(valid range of mass: [0, {mmax.value:.4g}] g)")
    return xr.DataArray(dem_total[:, None] * np.asarray(weights)[None, :], dims=("mass", "logT"),
                        coords={"mass": ("mass", m, {"units": "g"}), "logT": np.asarray(logT, dtype=float)},
                        attrs={"units": "cm-3", "quantity": "emission measure removed by the CME per table node",
                               "method": "Delta EM = n_e f_esc M / (mu_H m_H)"}, name="removed_emission_measure")


def band_depths(removed, quiescent_weights, kernel, names=None) -> np.ndarray:
    r"""Fractional depths :math:`\delta_b = \sum \Delta EM_T K_{bT} / \sum EM_T K_{bT}`, shape (..., n_bands).

    ``removed`` (..., n_T), ``quiescent_weights`` (n_T,), ``kernel`` (n_bands, n_T). A band whose
    quiescent signal is zero raises :class:`InputError` naming it.
    """
    k = np.asarray(kernel, dtype=float)
    base = k @ np.asarray(quiescent_weights, dtype=float)
    if np.any(~(base > 0)):
        bad = [names[i] if names is not None else i for i in np.flatnonzero(~(base > 0))]
        raise InputError(f"band {bad} has no counts from the quiescent corona (sum EM K = 0): its dimming depth "
                         "is undefined; choose a band where the corona emits", argument="band")
    return (np.asarray(removed, dtype=float) @ k.T) / base


def expansion_emission_measure_change(logT, quiescent_weights, source_temperature, volume_factor, fraction=1.0,
                                      window=0.15, gamma=5.0 / 3.0) -> np.ndarray:
    r"""EM change per table node [cm-3] from adiabatic expansion of plasma near the source temperature.

    A fraction ``fraction`` (in [0, 1]) of the quiescent EM within +-``window`` dex of
    ``source_temperature`` expands by ``volume_factor`` s (in [1, 1e3]): it is removed from its nodes
    and re-added as EM/s at log T - (gamma - 1) log10 s (see the module docstring). Returns an array
    (n_T,) summing to -fraction EM_window (1 - 1/s); negative where EM is lost. Raises
    :class:`InputError` if the cooled plasma would fall below the table's lowest temperature.
    """
    x = np.asarray(logT, dtype=float)
    q = np.asarray(quiescent_weights, dtype=float)
    check_range("volume_factor", volume_factor, lo=1.0, hi=1e3)
    check_range("fraction", fraction, lo=0.0, hi=1.0)
    check_range("gamma", gamma, lo=1.0, hi=5.0 / 3.0)
    check_range("window", window, *WINDOW_RANGE, unit_label="dex")
    t = as_quantity("source_temperature", source_temperature, u.K)
    check_range("source_temperature", t.value, lo=10 ** x[0], hi=10 ** x[-1], unit_label="K")
    lt = float(np.log10(t.value))
    s = float(volume_factor)
    em = np.where(np.abs(x - lt) <= float(window) + 1e-9, q * float(fraction), 0.0)
    shift = (float(gamma) - 1.0) * math.log10(s)
    xn = x - shift
    moving = em > 0
    if np.any(xn[moving] < x[0] - 1e-12):
        raise InputError(f"volume_factor={s:g}: the expanded plasma would cool by {shift:.3g} dex, below the table's "
                         f"lowest temperature 10^{x[0]:g} K")
    xn = np.clip(xn, x[0], x[-1])
    i = np.clip(np.searchsorted(x, xn) - 1, 0, x.size - 2)
    f = np.clip((xn - x[i]) / (x[i + 1] - x[i]), 0.0, 1.0)
    add = np.zeros_like(em)
    np.add.at(add, i, em / s * (1.0 - f))
    np.add.at(add, i + 1, em / s * f)
    return add - em
