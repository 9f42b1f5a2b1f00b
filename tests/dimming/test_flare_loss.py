"""Tests of the radiative loss function of the flare loop (synthcorona.dimming.flare_loss).

Reference values: the piecewise power law of Klimchuk, Patsourakos & Cargill (2008, ApJ 682, 1351, eq. 3)
as written in the module, and synthesis.radiative_loss of the embedded table for the table Lambda.
"""
import astropy.units as u
import numpy as np
import pytest

from synthcorona.dimming.flare_loss import (
    LAMBDA_UNIT,
    analytic_radiative_loss,
    loss_density,
    resolve_loss,
    table_loss,
)
from synthcorona.errors import InputError
from synthcorona.synthesis import radiative_loss


def test_analytic_loss_values():
    # KPC08 eq. 3 at 1 MK (flat segment 10^5.67-10^6.18): Lambda = 1.90e-22
    assert analytic_radiative_loss(1e6 * u.K).value == pytest.approx(1.90e-22, rel=1e-12)
    # T > 10^7.63 K: 1.96e-27 T^(1/2)
    assert analytic_radiative_loss(1e8 * u.K).value == pytest.approx(1.96e-27 * 1e4, rel=1e-12)
    with pytest.raises(InputError, match="temperature"):
        analytic_radiative_loss(1e3 * u.K)


def test_table_loss_interpolates_the_table(table):
    loss = table_loss(1e9, "coronal", table)
    t = np.array([1e6, 3e6, 1e7])
    ref = radiative_loss(t * u.K, table=table, density=1e9 * u.cm ** -3).to_value(LAMBDA_UNIT)
    np.testing.assert_allclose(loss(t), ref, rtol=1e-9)
    assert loss.t_min == pytest.approx(10 ** table.logT[0]) and loss.t_max == pytest.approx(10 ** table.logT[-1])
    assert "CHIANTI table" in loss.label and "1e+09" in loss.label
    assert table_loss(1e9, "coronal").label.startswith("embedded CHIANTI table")


def test_loss_density_clips_to_the_table(table):
    lo, hi = 10 ** table.log_density[0], 10 ** table.log_density[-1]
    assert loss_density(1e3, table) == pytest.approx(lo) and loss_density(1e20, table) == pytest.approx(hi)
    assert loss_density(1e10) == 1e10


def test_resolve_loss_choices(table):
    def flat(temperature):
        return np.full(np.shape(temperature), 1e-22) * LAMBDA_UNIT

    user = resolve_loss(flat, 1e9, "coronal")
    assert user(2e6) == pytest.approx(1e-22, rel=1e-12) and "flat" in user.label
    assert "Klimchuk" in resolve_loss("analytic", 1e9, "coronal").label
    np.testing.assert_allclose(resolve_loss("table", 1e9, "coronal", table)(2e6),
                               resolve_loss(None, 1e9, "coronal")(2e6), rtol=1e-12)
    with pytest.raises(InputError, match="radiative_loss="):
        resolve_loss("steep", 1e9, "coronal")
    with pytest.raises(InputError, match="finite values > 0"):
        resolve_loss(lambda temperature: -flat(temperature), 1e9, "coronal")
