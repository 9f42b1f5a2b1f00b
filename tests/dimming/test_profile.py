"""Tests of the dimming time profile and the recovery times (synthcorona.dimming.profile)."""
import math

import astropy.units as u
import numpy as np
import pytest

from synthcorona.dimming import recovery_time, refill_time
from synthcorona.dimming.profile import binned_profile, dimming_profile, profile_integral


def test_profile_shape_and_integral():
    t0, a, tau = 100.0, 50.0, 1000.0
    t = np.array([0.0, 99.0, 125.0, 150.0, 1150.0])
    np.testing.assert_allclose(dimming_profile(t, t0, a, tau), [0, 0, 0.5, 1.0, math.exp(-1)], rtol=1e-12)
    # integral to infinity = a/2 + tau (closed form)
    assert profile_integral(1e9, t0, a, tau) == pytest.approx(a / 2 + tau, rel=1e-12)
    edges = np.linspace(0, 1e5, 2001)
    p = binned_profile(edges, t0, a, tau)
    assert np.sum(p * np.diff(edges)) == pytest.approx(a / 2 + tau, rel=1e-9)


def test_recovery_times():
    # hand value: c_s = sqrt(5/3 * 2 k 1.5e6 / m_p) = 2.035e7 cm/s; tau = 1e10 / (0.05 c_s) = 9828 s
    assert refill_time(1e10 * u.cm, 1.5e6 * u.K).value == pytest.approx(9828, rel=2e-3)
    tc = recovery_time("cooling", loop_half_length=1e10 * u.cm, temperature=1.5e6 * u.K, density=1e9 * u.cm ** -3)
    assert 1e2 < tc.to_value(u.s) < 1e6
    assert recovery_time(2 * u.h).to_value(u.s) == 7200
