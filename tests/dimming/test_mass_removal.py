"""Tests of the mass -> emission-measure conversion and the removed EM (synthcorona.dimming.mass_removal)."""
import math

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from dimming_setups import SUN_DEM

from synthcorona.abundances import mean_mass_per_hydrogen
from synthcorona.dimming import expansion_emission_measure_change, mass_to_emission_measure, rtv_density
from synthcorona.errors import InputError


def test_mu_h_photospheric():
    # Asplund, Amarsi & Grevesse 2021 (A&A 653, A141): hydrogen mass fraction X = 0.7438, so mu_H = 1/X = 1.344;
    # "about 1.4" is the common-practice value with older, He-richer compilations (common practice, no source).
    assert mean_mass_per_hydrogen("photospheric") == pytest.approx(1.344, abs=0.01)
    assert 1.3 < mean_mass_per_hydrogen("photospheric") < 1.45


def test_mass_to_emission_measure_hand_value():
    # Delta EM = n_e M / (mu_H m_H) = 1e9 * 1e15 / (1.3445 * 1.6737e-24) = 4.444e47 cm-3 (hand calculation
    # from the formula; m_H = 1.008 u, mu_H from the test above).
    em = mass_to_emission_measure(1e15 * u.g, 1e9 * u.cm ** -3, "photospheric")
    assert em.unit == u.cm ** -3
    assert em.value == pytest.approx(4.444e47, rel=2e-3)
    assert mass_to_emission_measure(1e15 * u.g, 1e9 * u.cm ** -3, "photospheric", escape_fraction=0).value == 0
    with pytest.raises(InputError, match="escape_fraction"):
        mass_to_emission_measure(1e15 * u.g, 1e9 * u.cm ** -3, escape_fraction=-0.1)


def test_rtv_density():
    # Rosner, Tucker & Vaiana 1978 (ApJ 220, 643): T = 1400 (pL)^(1/3). For T = 1.5 MK, L = 1e10 cm:
    # p = (1.5e6/1400)^3 / 1e10 = 0.1230 dyn cm-2, n = p / (2 k T) = 2.970e8 cm-3 (hand calculation).
    n = rtv_density(1.5e6 * u.K, 1e10 * u.cm)
    assert n.value == pytest.approx(2.970e8, rel=2e-3)
    p = 2 * n.value * const.k_B.cgs.value * 1.5e6
    assert 1400 * (p * 1e10) ** (1 / 3) == pytest.approx(1.5e6, rel=1e-12)


def test_expansion_dimming_em_change():
    # Adiabatic expansion by volume factor s (Aschwanden 2009, Ann. Geophys. 27, 3275, from memory): EM ~ N^2/V
    # falls by 1/s, T V^(gamma-1) = const cools by (2/3) log10 s dex (textbook adiabatic law, gamma = 5/3).
    x = np.round(np.linspace(4.5, 8.5, 81), 10)
    q = SUN_DEM.em_weights(x).value
    src = 1.5e6 * u.K
    win = np.abs(x - np.log10(1.5e6)) <= 0.15 + 1e-9
    em_win = q[win].sum()
    assert np.all(expansion_emission_measure_change(x, q, src, 1.0) == 0)
    s, phi = 2.0, 0.5
    d = expansion_emission_measure_change(x, q, src, s, fraction=phi)
    assert d.sum() == pytest.approx(-phi * em_win * (1 - 1 / s), rel=1e-12)
    added = d + np.where(win, phi * q, 0.0)                    # what was put back, at cooler nodes
    mean_before = np.sum(x[win] * q[win]) / em_win
    mean_after = np.sum(x * added) / added.sum()
    assert mean_after - mean_before == pytest.approx(-(2.0 / 3.0) * math.log10(s), abs=1e-9)
    with pytest.raises(InputError, match="volume_factor"):
        expansion_emission_measure_change(x, q, src, 0.5)
