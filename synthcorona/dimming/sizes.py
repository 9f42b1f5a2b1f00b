r"""How many Monte Carlo realisations a detection needs: one rule for every caller.

Floor. A threshold calibrated at false-alarm probability ``alpha`` on ``n`` simulated light
curves without the event is an order statistic with about ``alpha * n`` values above it; below
:data:`MIN_EXCEEDANCES` (10) expected exceedances it is too poorly determined
(:func:`synthcorona.dimming.thresholds.calibrate_threshold` refuses it). Scenario files, cycle files,
:func:`synthcorona.products.cycle.compare_cycle` and the command line all check their realisations
with :func:`minimum_realisations` before any computation.

Precision. :func:`realisations_for_precision` gives the realisations for a requested standard error
of P(detect). The error has two parts (:func:`synthcorona.dimming.detection.detection_probability`):
the binomial error of the injected simulations, :math:`P(1 - P)/n \le 1/(4n)`, and the scatter of
P caused by the calibrated threshold. A threshold calibrated on n null values has variance
:math:`\alpha(1 - \alpha)/(n f_0^2)` (f_0: null density of the statistic at the threshold; the
asymptotic variance of a sample quantile), which moves P by :math:`f_1` times as much (f_1: density
of the statistic with the event at the threshold):

.. math:: \sigma_P^2 = \frac{1}{n}\left[P(1 - P) + \alpha(1 - \alpha)\left(\frac{f_1}{f_0}\right)^2\right].

For a statistic that is Gaussian with unit width under both hypotheses (the event shifting it)
at P = 1/2 the event density at the threshold is :math:`\varphi(0)` and the null density is
:math:`\alpha\,h(z)`, with h the Gaussian hazard :math:`\varphi/Q` at the threshold z
(:math:`\varphi(z_\alpha)` for a single test; the same form for the maximum of a scan, whose
null tail is ~K Q(z)); h grows with z, so the single test, :math:`z_\alpha = \Phi^{-1}(1 - \alpha)`,
is the worst case: :math:`(f_1/f_0)^2 \le e^{z_\alpha^2}`. Hence

.. math:: n = \left\lceil \frac{1/4 + \alpha(1 - \alpha)\,e^{z_\alpha^2}}{\sigma_P^2} \right\rceil

(6171 for alpha = 0.01 and sigma_P = 0.02: the calibration dominates; 625 when the threshold is
exact), and at least :func:`minimum_realisations`. The minimum detectable mass inherits
sigma_M / M = sigma_P / (dP/d ln M); at P = 1/2 the slope is about phi(0) times the threshold in
sigma (> 0.9 for alpha <= 0.01), so sigma_P = 0.02 gives the mass to within ~2 %.
"""
from __future__ import annotations

import math

from scipy import stats

from ..validation import check_range
from .thresholds import MIN_EXCEEDANCES

__all__ = ["MIN_EXCEEDANCES", "DEFAULT_PRECISION", "PRECISION_RANGE", "minimum_realisations",
           "realisations_for_precision"]

#: Default standard error of P(detect) that forecasts are sized for.
DEFAULT_PRECISION = 0.02
#: Precisions (standard errors of P(detect)) that :func:`realisations_for_precision` accepts.
PRECISION_RANGE = (1e-3, 0.25)


def minimum_realisations(false_alarm: float) -> int:
    """The fewest realisations ``n`` with ``false_alarm * n >= MIN_EXCEEDANCES`` (e.g. 1000 for 0.01).

    The same product, in floating point, as the check of
    :func:`synthcorona.dimming.thresholds.check_false_alarm`, so a count accepted here is never
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


def realisations_for_precision(precision: float, false_alarm: float, exact_threshold: bool = False) -> int:
    """Realisations per probability for a standard error ``precision`` of P(detect) (see the module notes).

    ``n = ceil((1/4 + alpha (1 - alpha) exp(z_alpha^2)) / precision^2)``, the calibration term left
    out when the threshold is exact (``exact_threshold``: the window test with a known onset and
    Poisson noise only), and at least :func:`minimum_realisations` (``false_alarm``). E.g. 6171 for
    precision 0.02 at false-alarm probability 0.01 (1000 with an exact threshold).
    """
    check_range("precision", precision, lo=PRECISION_RANGE[0], hi=PRECISION_RANGE[1])
    check_range("false_alarm", false_alarm, lo=0.0, hi=1.0, inclusive=False)
    alpha, sig = float(false_alarm), float(precision)
    var = 0.25
    if not exact_threshold:
        z = float(stats.norm.isf(alpha))
        var += alpha * (1.0 - alpha) * math.exp(z * z)
    return max(int(math.ceil(var / sig ** 2 - 1e-9)), minimum_realisations(alpha))
