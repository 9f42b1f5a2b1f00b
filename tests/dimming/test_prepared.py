"""Tests of the prepared state of a scenario (synthcorona.dimming.prepared).

Expected values are those of the scenario itself (its public results), the definitions of the fields
(docstrings of PreparedScenario's parts) and hand values stated in place.
"""
import dataclasses
import warnings

import astropy.units as u
import numpy as np
import pytest
from dimming_setups import BANDS, SUN_DEM, sun_scenario

import synthcorona.synthesis as synthesis
from synthcorona.constants import PARSEC_CM
from synthcorona.dimming import CME, Corona, DimmingScenario, Flare, Observation, Star
from synthcorona.dimming.prepared import FlareExcess, PreparedScenario


@pytest.fixture
def sun():
    """Sun-as-a-star at 1 AU with a 1e15 g CME and a flare."""
    return sun_scenario()


def test_parts_shapes_and_units(sun):
    p = sun.prepared
    assert isinstance(p, PreparedScenario)
    n_t, n_b = p.source.logT.size, len(BANDS)
    assert p.kernels.labels == tuple(BANDS) and sun.labels == BANDS
    assert p.source.quiescent_weights.shape == p.source.removal_weights.shape == (n_t,)
    assert p.source.removal_weights.sum() == pytest.approx(1.0, rel=1e-12)
    assert p.kernels.kernel.shape == p.kernels.flux_kernel.shape == (n_b, n_t)
    assert p.kernels.band_limits.shape == (n_b, 2)
    # (1 pc / 1 AU)^2 = (1 AU / 1 pc)^2 inverted: 206264.8^2
    assert p.kernels.scale == pytest.approx((PARSEC_CM / u.AU.to(u.cm)) ** 2, rel=1e-12)
    for field in dataclasses.fields(p.rates):
        assert getattr(p.rates, field.name).shape == (n_b,)
    # 12 h of 60 s bins, onset at 2 h
    assert (p.timing.n_bins, p.timing.bin_width, p.timing.t0) == (720, 60.0, 7200.0)
    assert p.timing.edges.shape == (721,) and p.timing.edges[-1] == 43200.0
    assert p.flare.cumulative.shape == (n_b, p.flare.times.size)
    assert p.flare.result is not None and sun.flare_termination == p.flare.termination
    # the removed EM per gram: n_e f_esc / (mu_H m_H), with m_H = 1.008 u
    assert p.source.em_per_gram == pytest.approx(1e9 / (p.source.mu_h * 1.008 * 1.66053907e-24), rel=1e-8)


def test_parts_are_frozen(sun):
    for part, name in [(sun.prepared, "flare"), (sun.prepared.timing, "onset"), (sun.prepared.rates, "background")]:
        with pytest.raises(dataclasses.FrozenInstanceError):
            setattr(part, name, None)


def test_prepared_values_give_the_public_results(sun):
    p = sun.prepared
    d = sun.depth(mass=[1e14, 1e15] * u.g)
    np.testing.assert_allclose(d.depth.values, np.array([1e14, 1e15])[:, None] * p.rates.depth_per_gram,
                               rtol=1e-12)
    np.testing.assert_array_equal(d.quiescent_rate.values, p.rates.quiescent_rate)
    # quiescent rate = (1 pc/d)^2 sum_T K EM
    np.testing.assert_allclose(p.rates.quiescent_rate, p.kernels.scale * (p.kernels.kernel @ p.source.quiescent_weights),
                               rtol=1e-12)
    lc = sun.light_curve()
    np.testing.assert_array_equal(lc.flare_excess.values, p.flare.binned(p.timing.edges, p.timing.t0))


def test_no_flare_has_zero_excess():
    excess = FlareExcess("no flare", np.array([0.0, 1.0]), np.zeros((2, 2)))
    np.testing.assert_array_equal(excess.binned(np.arange(5) * 60.0, 120.0), np.zeros((2, 4)))
    assert excess.result is None and excess.warnings == ()


def test_flare_radiative_loss_uses_the_scenario_table(table, monkeypatch):
    """Every call of synthesis.radiative_loss made for the flare gets the scenario's table."""
    seen = []
    original = synthesis.radiative_loss

    def spy(*args, **kwargs):
        seen.append(kwargs.get("table"))
        return original(*args, **kwargs)

    monkeypatch.setattr(synthesis, "radiative_loss", spy)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = DimmingScenario(Star(1 * u.AU), Corona(SUN_DEM, density=1e9 * u.cm ** -3), CME(1e15 * u.g),
                            Flare(1e31 * u.erg), ["sc-fe9"], Observation(2 * u.h, 60 * u.s, 1 * u.h), table=table)
    assert s.table is table
    assert seen and all(t is table for t in seen)
    assert "table_loss_at_source_density" in s.prepared.flare.result.attrs["radiative_loss"]
