"""Tests of the loop cooling times (synthcorona.dimming.flare_cooling).

Cargill 1994, ApJ 422, 381: tau_c = 3 n k L^2 / (kappa0 T^5/2), tau_r = 3 k T / (n Lambda); the values below
are hand calculations from these formulas (k_B = 1.380649e-16 erg/K, CODATA 2018, exact).
"""
import astropy.units as u
import pytest

from synthcorona.dimming.flare_cooling import conductive_cooling_time, radiative_cooling_time
from synthcorona.dimming.flare_loss import LAMBDA_UNIT
from synthcorona.errors import InputError
from synthcorona.synthesis import radiative_loss


def test_cooling_time_formulas():
    # tau_c = 3 n k L^2 / (kappa0 T^2.5): 3 * 1.380649e-16 * 1e9 * 1e18 / (1e-6 * 1e15) = 414.19 s
    tc = conductive_cooling_time(1e6 * u.K, 1e9 * u.cm ** -3, 1e9 * u.cm)
    assert tc.unit == u.s
    assert tc.value == pytest.approx(414.1947, rel=1e-6)
    # tau_r = 3 k T / (n Lambda): 3 * 1.380649e-16 * 1e6 / (1e9 * 1e-22) = 4141.947 s
    tr = radiative_cooling_time(1e6 * u.K, 1e9 * u.cm ** -3, 1e-22 * u.erg * u.cm ** 3 / u.s)
    assert tr.to_value(u.s) == pytest.approx(4141.947, rel=1e-6)
    # KPC08 eq. 3 at 1 MK (flat segment 10^5.67-10^6.18): Lambda = 1.90e-22
    tr2 = radiative_cooling_time(1e6 * u.K, 1e9 * u.cm ** -3, "analytic")
    assert tr2.to_value(u.s) == pytest.approx(4141.947 / 1.9, rel=1e-6)
    # arrays broadcast
    tcs = conductive_cooling_time([1e6, 2e6] * u.K, 1e9 * u.cm ** -3, 1e9 * u.cm)
    assert tcs.value == pytest.approx([414.1947, 414.1947 / 2 ** 2.5], rel=1e-6)


def test_radiative_cooling_time_with_the_table(table):
    # The table Lambda at each density (1e9, 1e11 cm-3 are inside the embedded table's range), by the formula.
    lam = [radiative_loss(1e6 * u.K, table=table, density=n * u.cm ** -3).to_value(LAMBDA_UNIT) for n in (1e9, 1e11)]
    tr = radiative_cooling_time([1e6, 1e6] * u.K, [1e9, 1e11] * u.cm ** -3, table=table)
    assert tr.to_value(u.s) == pytest.approx([3 * 1.380649e-16 * 1e6 / (n * x) for n, x in zip((1e9, 1e11), lam)],
                                             rel=1e-12)
    assert radiative_cooling_time(1e6 * u.K, 1e9 * u.cm ** -3).value == pytest.approx(tr.value[0], rel=1e-12)
    with pytest.raises(InputError, match="table=42"):
        radiative_cooling_time(1e6 * u.K, 1e9 * u.cm ** -3, table=42)


def test_bad_inputs():
    with pytest.raises(InputError, match="density"):
        conductive_cooling_time(1e6 * u.K, -1e9 * u.cm ** -3, 1e9 * u.cm)
    with pytest.raises(InputError, match="radiative_loss="):
        radiative_cooling_time(1e6 * u.K, 1e9 * u.cm ** -3, "steep")
