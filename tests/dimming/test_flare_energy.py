"""Tests of the flare heating profile, energy budget and class -> energy rule (synthcorona.dimming.flare_energy).

Expected values: the energy input of the heating profile by construction (the whole flare energy is
deposited at t >= 0); the standard soft-X-ray class fluxes (A 1e-8 ... X 1e-4 W m-2). The class -> energy
rule itself is tested in tests/dimming/test_flare_class.py.
"""
import astropy.units as u
import numpy as np
import pytest
from dimming_setups import flare_model, flare_model_run

from synthcorona.dimming.flare_energy import (
    FLARE_CLASS_FLUX,
    HeatingProfile,
    energy_budget,
    flare_em_temperature,
    flare_energy_from_class,
)
from synthcorona.errors import InputError


@pytest.fixture
def flare_run():
    """A 3e9 cm, 1 MK active-region loop hit by 1e29 erg over 200 s (triangular), run for 4500 s."""
    return flare_model_run()


def test_energy_conserved(flare_run):
    """Heating = change of thermal energy + coronal radiation + net loss through the bases (to 1 %)."""
    b = energy_budget(flare_run)
    # the triangular profile is piecewise linear and its corners are output times: exact input
    q_bg = flare_model().background_heating.value
    vol = 2 * 3e9 * 1e17
    t_end = float(flare_run["time"].values[-1])  # the run may stop early when T leaves the table
    assert b.heating.to_value(u.erg) == pytest.approx(1e29 + q_bg * vol * t_end, rel=1e-9)
    assert abs(b.relative_residual) < 0.01
    # the net base loss (conduction - returned enthalpy) is what the TR radiates
    assert b.through_base.value == pytest.approx(b.transition_region_radiation.value, rel=1e-6)
    assert b.conducted_through_base.value > b.through_base.value > 0
    assert b.enthalpy_through_base.value < 0  # net evaporation brings energy back into the corona


@pytest.mark.parametrize("profile,peak", [("gaussian", 300.0), ("triangular", 20.0), ("gaussian", 0.0)])
def test_flare_energy_deposited(profile, peak):
    """The whole flare_energy is deposited at t >= 0, also for profiles truncated at t = 0."""
    m = flare_model(profile=profile, peak_time=peak * u.s, flare_energy=3e28 * u.erg)
    ds = m.run(1500 * u.s, n_output=3001)
    b = energy_budget(ds)
    vol = m.volume.to_value(u.cm ** 3)
    flare_part = b.heating.value - m.background_heating.value * vol * 1500
    assert flare_part == pytest.approx(3e28, rel=2e-3)
    assert abs(b.relative_residual) < 0.01


@pytest.mark.parametrize("kind,peak", [("triangular", 300.0), ("triangular", 50.0), ("gaussian", 300.0),
                                       ("gaussian", 0.0)])
def test_heating_profile_is_normalised_after_zero(kind, peak):
    """g(t) integrates to 1 over t >= 0 (trapezoidal rule on 0.1 s steps) and its cumulative integral reaches 1."""
    g = HeatingProfile(kind, peak, 200.0)
    t = np.arange(0.0, peak + 2000.0, 0.1)
    assert np.trapezoid(g.rate(t), t) == pytest.approx(1.0, rel=1e-4)
    assert float(g.cumulative(t[-1])) == pytest.approx(1.0, rel=1e-12)
    assert float(g.cumulative(0.0)) == 0.0 and float(g.rate(-1.0)) == 0.0


def test_flare_em_temperature(flare_run):
    out = flare_em_temperature(flare_run)
    assert out.emission_measure.unit == u.cm ** -3 and out.temperature.unit == u.K and out.time.unit == u.s
    assert out.emission_measure.value == pytest.approx(flare_run["emission_measure"].values)


def test_energy_budget_needs_a_run():
    with pytest.raises(InputError, match="result"):
        energy_budget({"temperature": 1})


def test_flare_energy_from_class_is_the_class_rule():
    # the heating energy of the class rule (synthcorona.dimming.flare_class) for the default strands; the class
    # letters are decades of flux (A 1e-8 ... X 1e-4 W m-2), so a higher class needs more energy
    energies = [flare_energy_from_class(c).to_value(u.erg) for c in ("C1", "M1", "X1")]
    assert energies[0] < energies[1] < energies[2]
    assert FLARE_CLASS_FLUX["X"] == 1e-4 and FLARE_CLASS_FLUX["A"] == 1e-8


@pytest.mark.parametrize("flare_class,match", [(2.5, "must be a string"), ("Z3", "is not a flare class"),
                                               ("M", "is not a flare class"), ("M0", r"must be in \(0, 1e4\)")])
def test_flare_class_bad_inputs(flare_class, match):
    with pytest.raises(InputError, match=match):
        flare_energy_from_class(flare_class)
