r"""Radiative loss function Λ(T) of the flare loop model (:mod:`synthcorona.dimming.flare`).

:math:`\Lambda(T)` [erg cm\ :sup:`3` s\ :sup:`-1`, per :math:`n_e n_H`] is by default the
CHIANTI emissivity table (:func:`synthcorona.synthesis.radiative_loss`; the embedded table unless
``table`` is given) evaluated once, on the table's temperature nodes, at one density (clipped to
the table's density range, :func:`loss_density`) and interpolated linearly in log Λ–log T
(exactly what ``radiative_loss`` does between nodes). Λ depends only weakly on density (≲ 10 %
between 10\ :sup:`9` and 10\ :sup:`11` cm\ :sup:`-3` for the embedded table at coronal
temperatures), so the loop model does not re-evaluate it as the density changes during a run.
Its valid temperature range is the table's (10\ :sup:`4.5`–10\ :sup:`8.5` K for the embedded table).

``"analytic"`` selects the piecewise power law of Klimchuk, Patsourakos & Cargill (2008, ApJ
682, 1351, their eq. 3; hereafter KPC08), valid over 10\ :sup:`4`–10\ :sup:`9` K (coefficients
from memory, checked by their continuity to 0.1 % at every break point); a callable
``f(T: Quantity) -> Quantity`` is sampled once on a 0.01-dex grid over
10\ :sup:`4.5`–10\ :sup:`8.5` K. :func:`resolve_loss` turns any of these choices into a
:class:`LossFunction`.
"""
from __future__ import annotations

from typing import Callable

import astropy.units as u
import numpy as np

from ..emissivity import resolve_table
from ..errors import InputError
from ..validation import as_quantity, check_range

__all__ = ["LAMBDA_UNIT", "LossFunction", "AnalyticLoss", "analytic_radiative_loss", "table_loss", "callable_loss",
           "is_table_loss", "resolve_loss", "loss_density"]

#: Unit of the radiative loss function Λ(T).
LAMBDA_UNIT = u.erg * u.cm ** 3 / u.s

# KPC08 eq. 3: Λ = chi T^alpha on [10^lo, 10^hi) (log10 chi given); continuous to 0.1 %.
_KPC08_LOG_T = np.array([4.0, 4.97, 5.67, 6.18, 6.55, 6.90, 7.63, 9.0])
_KPC08_CHI = np.array([1.09e-31, 8.87e-17, 1.90e-22, 3.53e-13, 3.46e-25, 5.49e-16, 1.96e-27])
_KPC08_ALPHA = np.array([2.0, -1.0, 0.0, -1.5, 1.0 / 3.0, -1.0, 0.5])


class LossFunction:
    """Λ(T) on plain floats [K → erg cm3 s-1], with its valid temperature range and a label.

    Interpolates ``log_lam`` (log10 Λ) linearly in ``log_t`` (log10 T, increasing); ``t_min`` and
    ``t_max`` [K] are the ends of ``log_t``; ``label`` says where Λ came from (run attributes).
    """

    def __init__(self, log_t: np.ndarray, log_lam: np.ndarray, label: str):
        self.log_t = np.asarray(log_t, dtype=float)
        self.log_lam = np.asarray(log_lam, dtype=float)
        self.t_min = float(10 ** self.log_t[0])
        self.t_max = float(10 ** self.log_t[-1])
        self.label = label

    def __call__(self, temperature):
        return 10.0 ** np.interp(np.log10(temperature), self.log_t, self.log_lam)


class AnalyticLoss(LossFunction):
    """KPC08 piecewise power law (:func:`analytic_radiative_loss`), evaluated exactly on each segment."""

    def __init__(self):
        self.t_min = float(10 ** _KPC08_LOG_T[0])
        self.t_max = float(10 ** _KPC08_LOG_T[-1])
        self.label = "analytic piecewise power law (Klimchuk, Patsourakos & Cargill 2008, ApJ 682, 1351, eq. 3)"

    def __call__(self, temperature):
        t = np.clip(temperature, self.t_min, self.t_max)
        k = np.clip(np.searchsorted(_KPC08_LOG_T, np.log10(t), side="right") - 1, 0, _KPC08_CHI.size - 1)
        return _KPC08_CHI[k] * t ** _KPC08_ALPHA[k]


def analytic_radiative_loss(temperature) -> u.Quantity:
    r"""Piecewise power-law radiative loss function of Klimchuk, Patsourakos & Cargill (2008, ApJ 682, 1351, eq. 3).

    :math:`\Lambda = 1.09\times10^{-31} T^2` (T ≤ 10^4.97 K), :math:`8.87\times10^{-17} T^{-1}`
    (≤ 10^5.67), :math:`1.90\times10^{-22}` (≤ 10^6.18), :math:`3.53\times10^{-13} T^{-3/2}`
    (≤ 10^6.55), :math:`3.46\times10^{-25} T^{1/3}` (≤ 10^6.90), :math:`5.49\times10^{-16} T^{-1}`
    (≤ 10^7.63), :math:`1.96\times10^{-27} T^{1/2}` above; erg cm3 s-1, for 10^4–10^9 K.
    """
    t = as_quantity("temperature", temperature, u.K)
    check_range("temperature", t.value, lo=1e4, hi=1e9, unit_label="K")
    return u.Quantity(AnalyticLoss()(t.value), LAMBDA_UNIT)


def loss_density(density_cm3: float, table=None) -> float:
    """Density [cm-3] at which the table's Λ is evaluated: ``density_cm3`` clipped to the table's density range.

    ``table``: EmissivityTable or path (default the embedded table; see
    :func:`synthcorona.emissivity.resolve_table`).
    """
    table = resolve_table(table)
    return float(np.clip(density_cm3, 10 ** table.log_density[0], 10 ** table.log_density[-1]))


def table_loss(density_cm3: float, abundances, table=None) -> LossFunction:
    """Λ(T) of an emissivity table on its temperature nodes at ``density_cm3`` (clipped to the table's range).

    ``table``: EmissivityTable or path (default the embedded table; see
    :func:`synthcorona.emissivity.resolve_table`).
    """
    from ..synthesis import radiative_loss

    source = "embedded CHIANTI table" if table is None else "CHIANTI table"
    table = resolve_table(table)
    lo, hi = 10 ** table.log_density[0], 10 ** table.log_density[-1]
    n_eval = float(np.clip(density_cm3, lo, hi))
    lam = radiative_loss(10 ** table.logT * u.K, table=table, abundances=abundances,
                         density=n_eval * u.cm ** -3).to_value(LAMBDA_UNIT)
    label = (f"{source} ({table.provenance.get('chianti_version', '?')}), abundances "
             f"{abundances!r}, evaluated at n_e = {n_eval:.4g} cm-3, log-log interpolation in T")
    return LossFunction(table.logT, np.log10(np.maximum(lam, 1e-300)), label)


def callable_loss(func: Callable) -> LossFunction:
    """Λ(T) of a user function ``func(T: Quantity) -> Quantity [erg cm3 s-1]``, sampled every 0.01 dex on
    10^4.5–10^8.5 K; a failing function or values that are not finite and positive are refused."""
    log_t = np.round(np.arange(4.5, 8.5 + 1e-9, 0.01), 6)
    try:
        lam = func(10 ** log_t * u.K)
        lam = as_quantity("radiative_loss(T)", lam, LAMBDA_UNIT).value
    except InputError:
        raise
    except u.UnitsError:
        raise
    except Exception as exc:  # the user's function failed: say where
        raise InputError(f"radiative_loss: calling the function on T = 10^4.5-10^8.5 K failed: {exc!r}") from exc
    lam = np.broadcast_to(np.asarray(lam, dtype=float), log_t.shape)
    if not np.all(np.isfinite(lam)) or np.any(lam <= 0):
        raise InputError("radiative_loss: the function must return finite values > 0 erg cm3 s-1 on 10^4.5-10^8.5 K")
    name = getattr(func, "__name__", type(func).__name__)
    return LossFunction(log_t, np.log10(lam), f"user function {name} sampled every 0.01 dex on 10^4.5-10^8.5 K")


def is_table_loss(spec) -> bool:
    """Whether the ``radiative_loss`` choice ``spec`` is the emissivity table's Λ (None or ``"table"``)."""
    return spec is None or (isinstance(spec, str) and spec == "table")


def resolve_loss(spec, density_cm3: float, abundances, table=None) -> LossFunction:
    """The :class:`LossFunction` of a ``radiative_loss`` choice: None or ``"table"`` (:func:`table_loss` at
    ``density_cm3`` with ``abundances`` and ``table``), ``"analytic"`` (KPC08) or a callable
    (:func:`callable_loss`)."""
    if is_table_loss(spec):
        return table_loss(density_cm3, abundances, table)
    if isinstance(spec, str) and spec == "analytic":
        return AnalyticLoss()
    if callable(spec):
        return callable_loss(spec)
    raise InputError(f"radiative_loss={spec!r}: give None or 'table' (embedded CHIANTI table), 'analytic' "
                     "(KPC08 power law) or a function T [Quantity] -> Lambda [erg cm3 s-1]")
