"""How many Monte Carlo realisations a detection threshold needs: one rule for every caller.

A threshold calibrated at false-alarm probability ``alpha`` on ``n`` simulated light curves
without the event is the order statistic exceeded by ``alpha * n`` of them; below
:data:`~synthcorona.dimming.statistics.MIN_EXCEEDANCES` (10) expected exceedances it is too
poorly determined (:func:`synthcorona.dimming.statistics.calibrate_threshold` refuses it). Scenario
files, cycle files, :func:`synthcorona.products.cycle.compare_cycle` and the command line all check
their realisations with :func:`minimum_realisations` before any computation.
"""
from __future__ import annotations

import math

from ..validation import check_range
from .thresholds import MIN_EXCEEDANCES

__all__ = ["MIN_EXCEEDANCES", "minimum_realisations"]


def minimum_realisations(false_alarm: float) -> int:
    """The fewest realisations ``n`` with ``false_alarm * n >= MIN_EXCEEDANCES`` (e.g. 1000 for 0.01).

    The same product, in floating point, as the check of
    :func:`synthcorona.dimming.statistics.calibrate_threshold`, so a count accepted here is never
    refused there.
    """
    check_range("false_alarm", false_alarm, lo=0.0, hi=1.0, inclusive=False)
    alpha = float(false_alarm)
    n = math.ceil(MIN_EXCEEDANCES / alpha)
    while n > 1 and (n - 1) * alpha >= MIN_EXCEEDANCES:
        n -= 1
    while n * alpha < MIN_EXCEEDANCES:
        n += 1
    return n
