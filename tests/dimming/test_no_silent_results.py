"""Inputs inside the documented ranges that used to give a physically meaningless result without a word:
each is now a named error (or handled), and each test fails on the code before the change."""
import pathlib
import warnings

import astropy.units as u
import numpy as np
import pytest
from dimming_setups import star_scenario

from synthcorona.dimming import CME, Flare, Observation
from synthcorona.dimming.noise import MAX_EXPECTED_COUNTS, CountSampler
from synthcorona.errors import InputError, MemoryBudgetError

DATA = pathlib.Path(__file__).resolve().parents[1] / "data"


def test_onset_longer_than_the_observation_after_the_cme_is_refused():
    # 10 h exposure with the CME at 2 h leaves 8 h = 28,800 s: a 9 h onset never reaches the full depth
    with pytest.raises(InputError, match=r"onset time 3.24e\+04 s is not shorter than the observation after the "
                                         r"CME \(2.88e\+04 s") as err:
        star_scenario().__class__(*_parts(onset=9 * u.h))
    assert err.value.argument == "onset"


def _parts(onset):
    s = star_scenario()
    cme = CME(1e18 * u.g, source_temperature=2e6 * u.K, onset=onset)
    return s.star, s.corona, cme, None, dict((lab, (ins, b)) for lab, ins, b in s.channels), s.observation


def test_a_billion_bins_are_refused_before_allocating():
    # 1e9 s in 1 s bins: tens of GiB of light curves and work arrays (8 bytes x 48 per bin) -- beyond any budget here
    with pytest.raises(MemoryBudgetError, match=r"light curves of 1,000,000,000 bins") as err:
        Observation(1e9 * u.s, 1 * u.s, 1 * u.h)
    assert err.value.argument == "bin_width"


def test_expected_counts_beyond_the_poisson_generator_are_a_named_error():
    # numpy's Generator.poisson raises "lam value too large" near 1e19 (numpy documentation of poisson)
    with pytest.raises(InputError, match=r"expected counts per bin reach 1e\+19 \(bin 1\), above the 1e\+18") as err:
        CountSampler([1.0, 1e19, 1.0] * u.ct / u.s, 1 * u.s)
    assert err.value.argument == "rate"
    CountSampler([1.0, MAX_EXPECTED_COUNTS, 1.0] * u.ct / u.s, 1 * u.s)      # the limit itself is accepted


def test_a_flare_hotter_than_the_table_is_refused_not_zeroed():
    # one strand given 1e37 erg runs past the table's 10^8.5 K within seconds; the old model set its excess to zero
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        with pytest.raises(InputError, match=r"3.16e\+08 K") as err:
            star_scenario(flare=Flare(1e37 * u.erg, n_strands=1))
    assert err.value.argument == "energy" or "energy=1e+37 erg" in str(err.value)


def test_zero_in_the_mass_grid_keeps_the_minimum_detectable_mass():
    from synthcorona.io.forecast_file import read_forecast_file
    from synthcorona.products.forecast import run_forecast

    text = (DATA / "small_forecast.toml").read_text().replace(
        'mass_grid = { min = "1e17 g", max = "1e18 g", points = 3 }', 'mass_grid = ["0 g", "1e17 g", "1e18 g"]')
    assert "0 g" in text
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ds = run_forecast(read_forecast_file(text=text, name="zero.toml"), realisations=200)
    lo, hi = (float(x) for x in ds.attrs["min_mass_bracket_g"].split())
    assert lo == pytest.approx(1e15) and hi > lo          # 1/100 of the smallest positive grid mass
    assert np.all(np.isfinite(ds["minimum_detectable_mass"].values) | (ds["minimum_detectable_mass_note"].values != ""))
    assert float(ds["mass"].values[0]) == 0.0
