"""Red-noise variability of the source in a DimmingScenario (Observation.red_noise, the [variability] table).

The scenario is tests/data/small_forecast.toml (an invented star, false-alarm probability 0.05) with and
without a damped random walk of rms 0.1 and damping time 1 h (Kelly, Bechtold & Siemiginowska 2009,
ApJ 698, 895). Expected behaviour: variability adds scatter that the dimming must stand out against, so the
detection threshold rises and P(detect) falls; the threshold is calibrated on event-free light curves with
the same variability, so the false-alarm rate stays at the requested value (binomial error
sqrt(alpha (1 - alpha) / n)).
"""
import math
import pathlib
import warnings

import astropy.units as u
import numpy as np
import pytest

from synthcorona.dimming import Observation
from synthcorona.dimming.noise import RedNoise
from synthcorona.errors import InputError
from synthcorona.io.forecast_file import read_forecast_file

DATA = pathlib.Path(__file__).parent.parent / "data"
VARIABILITY = '\n[variability]\namplitude = 0.1\ntimescale = "1 h"\n'


@pytest.fixture(scope="module")
def scenarios():
    """(scenario without, scenario with variability), both read from the same file."""
    text = (DATA / "small_forecast.toml").read_text()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        plain = read_forecast_file(text=text, name="small.toml").scenario
        varied = read_forecast_file(text=text + VARIABILITY, name="small.toml").scenario
    assert plain.observation.red_noise is None
    assert varied.observation.red_noise == RedNoise(0.1, 3600 * u.s)
    return plain, varied


@pytest.mark.parametrize("statistic", ["window", "likelihood"])
def test_variability_lowers_the_detection_probability(scenarios, statistic):
    plain, varied = scenarios
    n = 2000
    p0 = plain.detection_probability(n, statistic=statistic, seed=1, mass=5e17 * u.g)
    p1 = varied.detection_probability(n, statistic=statistic, seed=1, mass=5e17 * u.g)
    a, b = float(p0["probability"].values[0]), float(p1["probability"].values[0])
    sigma = math.sqrt(a * (1 - a) / n + b * (1 - b) / n)
    assert b < a - 5 * sigma, (a, b)
    assert float(p1["threshold"].values[0]) > float(p0["threshold"].values[0])
    assert p1.attrs["red_noise"] == "damped random walk, amplitude 0.1, timescale 3600 s"
    assert p0.attrs["red_noise"] == "none"


def test_false_alarm_rate_stays_at_the_requested_value_with_variability(scenarios):
    _, varied = scenarios
    n, alpha = 4000, varied.observation.false_alarm
    # no CME mass: the light curves "with the event" are event-free light curves drawn with independent random
    # numbers, so the fraction above the calibrated threshold is the false-alarm rate
    res = varied.detection_probability(n, seed=2, mass=0 * u.g)
    rate = float(res["probability"].values[0])
    assert abs(rate - alpha) < 3 * math.sqrt(alpha * (1 - alpha) / n), rate


def test_light_curve_realisations_carry_the_variability(scenarios):
    plain, varied = scenarios
    # Counts ~ Poisson(mu (1 + delta)) with delta of rms 0.1 have variance mu + (0.1 mu)^2 (law of total variance;
    # the clip at delta = -1 is a 1e-23 effect at 10 sigma); 4000 realisations measure it to ~3 %
    n = 4000
    c0 = plain.light_curve(n_realisations=n, seed=5)["counts"].values[:, 0, :8]
    c1 = varied.light_curve(n_realisations=n, seed=5)["counts"].values[:, 0, :8]
    mu = plain.light_curve()["expected"].values[0, :8] * plain.bin_width
    excess = c1.var(axis=0).mean() - c0.var(axis=0).mean()
    assert excess / np.mean((0.1 * mu) ** 2) == pytest.approx(1.0, abs=0.3)


def test_observation_red_noise_is_checked():
    obs = Observation(8 * u.h, 300 * u.s, 2 * u.h, red_noise=(0.05, 2 * u.h))
    assert obs.red_noise == RedNoise(0.05, 7200 * u.s)
    with pytest.raises(InputError, match="red_noise.amplitude"):
        Observation(8 * u.h, 300 * u.s, 2 * u.h, red_noise=(1.5, 2 * u.h))
