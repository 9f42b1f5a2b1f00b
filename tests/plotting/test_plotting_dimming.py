"""Tests of the dimming figures (synthcorona.plotting.dimming)."""
import warnings

import astropy.units as u
import numpy as np
import pytest

from synthcorona.dem import GaussianDEM, MultiComponentDEM
from synthcorona.dimming import CME, Corona, DimmingScenario, Observation, Star, detection_grid
from synthcorona.errors import InputError
from synthcorona.plotting.dimming import plot_detection_vs_mass, plot_light_curves, plot_min_mass_vs_distance

# The invented active K dwarf of tests/dimming/dimming_setups.py (two Gaussian DEM components, 2 pc).
STAR_DEM = MultiComponentDEM([GaussianDEM(6.3, 0.15, 3e52 * u.cm ** -3), GaussianDEM(6.9, 0.15, 1e52 * u.cm ** -3)])


@pytest.fixture(scope="module")
def star():
    """The K dwarf with a 1e17 g CME from 2 MK plasma, no flare, two generic EUV channels."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return DimmingScenario(Star(2 * u.pc, nh=1e17 * u.cm ** -2), Corona(STAR_DEM, density=1e9 * u.cm ** -3),
                               CME(1e17 * u.g, source_temperature=2e6 * u.K), None, ["sc-fe9", "sc-fe12"],
                               Observation(10 * u.h, 60 * u.s, 2 * u.h))


def test_plot_light_curves(tmp_path, star):
    lc = star.light_curve(n_realisations=3, seed=2, mass=1e18 * u.g)
    fig = plot_light_curves(lc, n_show=2)
    out = tmp_path / "lc.png"
    fig.savefig(out)
    assert out.stat().st_size > 1000
    ax = fig.axes[1]
    lines = ax.get_lines()
    assert len(lines) == 2 + 2 + 1          # 2 realisations, 2 expected curves, the onset marker
    red = [ln for ln in lines if ln.get_label() == "expected with CME"][0]
    np.testing.assert_allclose(red.get_ydata(), lc.expected.sel(band="sc-fe12").values, rtol=1e-12)
    # the realisations drawn are counts / bin width
    np.testing.assert_allclose(lines[0].get_ydata(), lc.counts.sel(band="sc-fe12").values[0] / 60.0)
    # the with-CME curve sits below the without-CME curve after onset: a 1e18 g dimming of depth ~1.3 %
    blue = [ln for ln in lines if ln.get_label() == "expected without CME"][0]
    assert np.min(red.get_ydata() - blue.get_ydata()) < -0.005 * blue.get_ydata()[0]


def test_plot_detection_and_min_mass(tmp_path, star):
    ds = detection_grid(star, mass=[1e17, 4e17, 1.5e18] * u.g, band="sc-fe12", n_realisations=1000, seed=3)
    fig = plot_detection_vs_mass(ds)
    fig.savefig(tmp_path / "p.png")
    line = fig.axes[0].get_lines()[0]
    np.testing.assert_allclose(line.get_xdata(), [1e17, 4e17, 1.5e18])
    np.testing.assert_allclose(line.get_ydata(), ds.probability.sel(band="sc-fe12").values)
    mm = detection_grid(star, distance=[2, 3] * u.pc, band="sc-fe12", n_realisations=1000, seed=3,
                        min_mass=True, bracket=(1e16 * u.g, 1e19 * u.g))
    fig2 = plot_min_mass_vs_distance(mm)
    fig2.savefig(tmp_path / "m.png")
    assert (tmp_path / "m.png").stat().st_size > 1000
    ln = fig2.axes[0].get_lines()[0]
    np.testing.assert_allclose(ln.get_ydata(), mm.minimum_detectable_mass.values)
    assert fig2.axes[0].get_xscale() == "log"
    with pytest.raises(InputError, match="minimum_detectable_mass"):
        plot_min_mass_vs_distance(ds)
