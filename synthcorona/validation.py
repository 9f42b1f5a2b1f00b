"""Argument checking shared by every public function.

Every check raises :class:`InputError` (a ``ValueError``) or :class:`UnitsError`
(a ``TypeError``-like ``astropy.units.UnitsError``) whose message names the
argument, the offending value and the valid range, so that a user mistake never
surfaces as a bare traceback from deep inside numpy.
"""
from __future__ import annotations

import re

import astropy.units as u
import numpy as np

from .errors import InputError

__all__ = ["as_quantity", "as_scalar", "check_finite", "check_range", "check_positive", "argument_name"]

_IDENTIFIER = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


def argument_name(name: str) -> str:
    """The argument an error is about: the identifier at the start of ``name``.

    ``name`` as passed to the checks below may describe the value more closely
    (``"background[sc-fe9]"``, ``"density (from the RTV scaling law)"``, ``"phase of 'rise'"``);
    the :attr:`~synthcorona.errors.InputError.argument` of the error is the plain argument
    (``"background"``, ``"density"``, ``"phase"``).
    """
    m = _IDENTIFIER.match(str(name))
    return m.group(0) if m else str(name)


def _short(value) -> str:
    """Compact text form of a (possibly array) value for error messages."""
    arr = np.asanyarray(value)
    if arr.size <= 4:
        return str(value)
    return f"array of shape {arr.shape} (min {np.nanmin(arr)!s}, max {np.nanmax(arr)!s})"


def as_quantity(name: str, value, unit, equivalencies=None) -> u.Quantity:
    """Return ``value`` converted to ``unit``; raise a named error if it has no or wrong units.

    Parameters
    ----------
    name : str
        Argument name used in the error message.
    value : `~astropy.units.Quantity`
        The user's value. Plain numbers are refused: units are required at every
        public boundary.
    unit : str or `~astropy.units.UnitBase`
        Target unit.
    equivalencies : list, optional
        astropy equivalencies (e.g. ``u.spectral()``) allowed in the conversion.
    """
    unit = u.Unit(unit)
    if not isinstance(value, u.Quantity):
        raise u.UnitsError(
            f"{name}={_short(value)!s} has no units; give an astropy Quantity convertible to '{unit}'"
            + (" (or an equivalent spectral unit)" if equivalencies else "")
        )
    try:
        return value.to(unit, equivalencies=equivalencies or [])
    except u.UnitConversionError:
        raise u.UnitsError(
            f"{name} has units '{value.unit}', which cannot be converted to '{unit}'"
        ) from None


def check_finite(name: str, value) -> None:
    """Raise :class:`InputError` if any element of ``value`` is NaN or infinite."""
    arr = np.asanyarray(getattr(value, "value", value), dtype=float)
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{name} contains NaN or infinite values: {_short(value)}", argument=argument_name(name))


def check_range(name: str, value, lo=None, hi=None, unit_label: str = "", inclusive=True) -> None:
    """Raise :class:`InputError` unless ``lo <= value <= hi`` everywhere (finite values required).

    ``lo``/``hi`` are plain numbers in the same units as ``value`` (already converted);
    ``unit_label`` is appended to the numbers in the message.
    """
    check_finite(name, value)
    arr = np.asanyarray(getattr(value, "value", value), dtype=float)
    bad = np.zeros(arr.shape, dtype=bool)
    if lo is not None:
        bad |= (arr < lo) if inclusive else (arr <= lo)
    if hi is not None:
        bad |= (arr > hi) if inclusive else (arr >= hi)
    if np.any(bad):
        lo_s = "-inf" if lo is None else f"{lo:g}"
        hi_s = "inf" if hi is None else f"{hi:g}"
        br = "[]" if inclusive else "()"
        offending = arr[bad]
        raise InputError(
            f"{name}={_short(offending)}{(' ' + unit_label) if unit_label else ''} is outside the valid range "
            f"{br[0]}{lo_s}, {hi_s}{br[1]}{(' ' + unit_label) if unit_label else ''}",
            argument=argument_name(name),
        )


def check_positive(name: str, value, unit_label: str = "", allow_zero=False) -> None:
    """Raise :class:`InputError` unless every element is > 0 (or >= 0 with ``allow_zero``)."""
    check_range(name, value, lo=0.0, hi=None, unit_label=unit_label, inclusive=allow_zero)


def as_scalar(name: str, value, unit, lo=None, hi=None, unit_label: str = "", inclusive: bool = True) -> float:
    """One value of ``value`` in ``unit`` as a float; raise a named error if it is an array or out of range."""
    q = as_quantity(name, value, unit)
    v = np.asarray(q.value, dtype=float)
    if v.ndim != 0:
        raise InputError(f"{name} must be a single value, got shape {v.shape}", argument=argument_name(name))
    check_range(name, v, lo=lo, hi=hi, unit_label=unit_label, inclusive=inclusive)
    return float(v)
