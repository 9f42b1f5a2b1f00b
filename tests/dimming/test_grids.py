"""Tests of detection grids over scenario parameters (synthcorona.dimming.grids)."""
import astropy.units as u
import numpy as np
import pytest
from dimming_setups import star_1e17_scenario

from synthcorona.dimming import detection_grid
from synthcorona.errors import InputError


@pytest.fixture
def star_1e17():
    """The K dwarf with a 1e17 g CME, no flare."""
    return star_1e17_scenario()


def test_detection_grid_reproducible_and_consistent(star_1e17):
    star = star_1e17
    kw = dict(distance=[2, 4] * u.pc, mass=[1e17, 4e17, 1.5e18] * u.g, n_realisations=1000, seed=3)
    a = detection_grid(star, **kw)
    b = detection_grid(star, **kw)
    assert a.probability.dims == ("distance", "mass", "band")
    np.testing.assert_array_equal(a.probability.values, b.probability.values)
    assert a.mass.attrs["units"] == "g" and a.distance.attrs["units"] == "pc"
    # common random numbers: monotone in mass
    assert np.all(np.diff(a.probability.values, axis=1) >= 0)
    # a nearer star is easier to detect (more counts, same depth)
    assert np.all(a.probability.sel(distance=2).values >= a.probability.sel(distance=4).values)
    # depth is linear in mass (delta = M * d(delta)/dM for pure mass loss) and independent of distance
    d = a.depth.sel(distance=2, band="sc-fe12").values
    np.testing.assert_allclose(d / d[0], [1, 4, 15], rtol=1e-12)
    np.testing.assert_allclose(a.depth.sel(distance=4).values, a.depth.sel(distance=2).values, rtol=1e-12)
    # one grid point equals the scenario's own calculation with the same seed
    p = star.detection_probability(1000, seed=3, band="sc-fe12", mass=4e17 * u.g).probability.values[0]
    assert float(a.probability.sel(distance=2, mass=4e17, band="sc-fe12")) == p


def test_detection_grid_min_mass_scales_with_distance(star_1e17):
    # Gaussian limit: S/N = delta q sqrt(t) / sqrt(q) so the minimum depth scales as q^-1/2 ~ d: doubling the
    # distance doubles the minimum detectable mass (standard Poisson counting argument; common practice, no source).
    ds = detection_grid(star_1e17, distance=[2, 4] * u.pc, instrument=[("sc-fe12")], n_realisations=2000, seed=1,
                        min_mass=True, bracket=(1e16 * u.g, 1e19 * u.g))
    m = ds.minimum_detectable_mass.values[:, 0]
    assert np.all(np.isfinite(m))
    assert m[1] / m[0] == pytest.approx(2.0, rel=0.25)
    assert ds.minimum_detectable_mass.attrs["units"] == "g"
    assert ds.attrs["min_mass_notes"] == "all grid points bracketed"


@pytest.mark.parametrize("kwargs,error,match", [
    (dict(distance=[1, 2]), u.UnitsError, "distance"),
    (dict(band="nope"), InputError, "band"),
])
def test_detection_grid_bad_input(star_1e17, kwargs, error, match):
    with pytest.raises(error, match=match):
        detection_grid(star_1e17, **kwargs)


def test_detection_grid_needs_a_scenario():
    with pytest.raises(InputError, match="base_scenario"):
        detection_grid("scenario")


def test_grid_points_use_the_base_scenario_table(star_1e17, monkeypatch):
    """Every grid point is built with the base scenario's emissivity table (given by its file)."""
    from synthcorona.dimming.scenario import DimmingScenario

    seen = []
    original = DimmingScenario.__init__

    def spy(self, *args, **kwargs):
        seen.append(kwargs.get("table"))
        original(self, *args, **kwargs)

    monkeypatch.setattr(DimmingScenario, "__init__", spy)
    detection_grid(star_1e17, distance=[2, 4] * u.pc, band="sc-fe12", n_realisations=1000, seed=3)
    assert len(seen) == 2 and all(t == star_1e17.table.path for t in seen)
