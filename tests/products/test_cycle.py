"""Activity-cycle comparison (synthcorona.products.cycle).

References: direct calls of the already-tested band_flux / count_rate API, and thermal free-free
emission (Rybicki & Lightman 1979, eq. 5.14b) for the temperature dependence of hardness.
"""
import astropy.units as u
import numpy as np
import pytest
from scipy.special import k0e

from synthcorona.dem import GaussianDEM, IsothermalDEM
from synthcorona.dimming import Star
from synthcorona.errors import InputError
from synthcorona.instruments import Instrument, load_generic
from synthcorona.products.cycle import compare_cycle, cycle_tables, hardness_pairs
from synthcorona.products.cycle_phase import CyclePhase
from synthcorona.synthesis import band_flux

FLUX = u.erg / u.s / u.cm ** 2
KB_KEV = 8.617333262e-8  # Boltzmann constant in keV/K (CODATA 2018)
# N_H and density of the example cycle file: tests using them share its cached instrument responses.
NH, DENSITY = 3e17 * u.cm ** -2, 2e9 * u.cm ** -3


def test_hardness_and_amplitude_equal_direct_computation():
    star = Star(distance=4 * u.pc, nh=NH)
    dems = [GaussianDEM(6.2, 0.2, 5e50 * u.cm ** -3),
            [GaussianDEM(6.4, 0.15, 2e51 * u.cm ** -3), IsothermalDEM(9 * u.MK, 3e50 * u.cm ** -3)],
            GaussianDEM(6.3, 0.2, 1e51 * u.cm ** -3)]
    phases = [CyclePhase(f"p{k}", k * 2.5 * u.yr, dem=d) for k, d in enumerate(dems)]
    band = [0.5, 2.0] * u.keV
    ds = compare_cycle(phases, star, bands={"b": band}, instruments=["sc-softx"], density=DENSITY)
    sxt = load_generic("sc-softx")
    resolved = [p.resolve(star.distance) for p in phases]
    h = np.array([sxt.count_rate(d, distance=star.distance, nh=star.nh, band="hard", density=DENSITY).value
                  for d in resolved])
    s = np.array([sxt.count_rate(d, distance=star.distance, nh=star.nh, band="soft", density=DENSITY).value
                  for d in resolved])
    np.testing.assert_allclose(ds["hardness_ratio"].values[:, 0], (h - s) / (h + s), rtol=1e-10)
    np.testing.assert_allclose(ds["band_ratio"].values[:, 0], h / s, rtol=1e-10)
    f = np.array([band_flux(d, band, star.distance, density=DENSITY).to_value(FLUX) for d in resolved])
    assert ds["flux_amplitude"].values[0] == pytest.approx(f.max() / f.min(), rel=1e-10)
    assert ds["flux_log_amplitude"].values[0] == pytest.approx(np.log10(f.max() / f.min()), rel=1e-10)
    rate_h = ds["count_rate"].sel(channel="sc-softx:hard").values
    assert ds["count_rate_amplitude"].sel(channel="sc-softx:hard").values == pytest.approx(h.max() / h.min(), rel=1e-10)
    np.testing.assert_allclose(rate_h, h, rtol=1e-10)
    # Amplitude of isothermal phases differing only in EM is the EM ratio (flux linear in EM).
    iso = [CyclePhase("a", 0.1, dem=IsothermalDEM(3 * u.MK, 2e50 * u.cm ** -3)),
           CyclePhase("b", 0.6, dem=IsothermalDEM(3 * u.MK, 7e50 * u.cm ** -3))]
    assert compare_cycle(iso, star, bands={"b": band})["flux_amplitude"].values[0] == pytest.approx(3.5, rel=1e-9)


def test_minimum_detectable_mass_per_phase_is_consistent_with_detection_probability():
    from synthcorona.dimming import CME, Corona, DimmingScenario, Observation
    from synthcorona.products.cycle import phase_scenario

    star = Star(distance=3 * u.pc, nh=NH)
    ref = DimmingScenario(star, Corona(GaussianDEM(6.3, 0.2, 1e51 * u.cm ** -3), density=DENSITY),
                          CME(1e17 * u.g, source_temperature=2 * u.MK), None, "sc-fe12",
                          Observation(12 * u.h, 120 * u.s, 3 * u.h))
    phases = [CyclePhase("quiet", 0.0, dem=GaussianDEM(6.2, 0.2, 6e50 * u.cm ** -3)),
              CyclePhase("active", 0.5, dem=GaussianDEM(6.4, 0.15, 2.5e51 * u.cm ** -3))]
    ds = compare_cycle(phases, star, reference=ref, n_realisations=1000, seed=3, minimum_mass=True, density=DENSITY)
    p = ds["detection_probability"].values[:, 0]
    m = ds["minimum_detectable_mass"].values
    assert list(ds["dimming_note"].values) == ["", ""]
    # P(detect) of the 1e17 g reference CME above 0.5 <=> the mass detected with P = 0.5 is below 1e17 g.
    for k in range(2):
        assert (p[k] > 0.5) == (m[k] < 1e17), (p[k], m[k])
    assert m[1] > m[0]   # brighter corona: a fixed decrement has S/N ~ 1/sqrt(quiescent rate) (Poisson counting)
    with pytest.raises(InputError, match="n_realisations=500.*>= 1000"):
        compare_cycle(phases, star, reference=ref, n_realisations=500, density=DENSITY)
    direct = phase_scenario(ref, phases[1].resolve(star.distance), star).minimum_detectable_mass(
        n_realisations=1000, seed=3)
    assert m[1] == pytest.approx(float(direct["mass"].values), rel=1e-12)


def _born_band(band_kev, temperature_k):
    """Photon count of thermal free-free emission in a band, up to a T-independent constant.

    Spectrum per unit energy: T^-1/2 g(E, T) exp(-E/kT) / E (Rybicki & Lightman 1979, eq. 5.14b,
    divided by the photon energy), with the Born-approximation thermally averaged Gaunt factor
    g = (sqrt(3)/pi) exp(u/2) K0(u/2), u = E/kT (Rybicki & Lightman 1979, sect. 5.3; the closed form
    is from memory).
    """
    e = np.linspace(band_kev[0], band_kev[1], 801)
    x = e / (KB_KEV * temperature_k)
    spec = temperature_k ** -0.5 * np.sqrt(3.0) / np.pi * k0e(x / 2.0) * np.exp(-x) / e
    return np.trapezoid(spec, e)


def test_hardness_follows_bremsstrahlung_exponential(table):
    """Hard/soft ratio of two narrow continuum bands of isothermal plasma vs T against thermal free-free."""
    soft, hard = (4.4, 4.6), (7.2, 7.4)   # above the Ar XVIII edge, no strong lines in the table (< 7 %)
    grid = np.linspace(1e-3, 12.0, 12001) * u.keV
    flat = Instrument.from_samples("flat", grid, np.ones(grid.size) * u.cm ** 2,
                                   bands={"soft": soft * u.keV, "hard": hard * u.keV})
    temps = 10 ** np.array([7.5, 7.7, 8.0, 8.2])                       # table nodes
    phases = [CyclePhase(f"T{k}", k / 4, dem=IsothermalDEM(t * u.K, 1e52 * u.cm ** -3)) for k, t in enumerate(temps)]
    ds = compare_cycle(phases, Star(distance=10 * u.pc), instruments=[flat], hardness=["flat:hard/flat:soft"],
                       table=table)
    ratio = ds["band_ratio"].values[:, 0]
    hr = ds["hardness_ratio"].values[:, 0]
    np.testing.assert_allclose(hr, (ratio - 1) / (ratio + 1), rtol=1e-12)
    born = np.array([_born_band(hard, t) / _born_band(soft, t) for t in temps])
    # The change of ln(H/S) between two temperatures is dominated by exp(-(E_h - E_s)/kT)
    # (Rybicki & Lightman 1979, eq. 5.14b). The table also holds free-bound continua and weak
    # lines, which pure free-free does not: tolerance 4 % of the change.
    for a, b in ((0, 2), (1, 3)):
        api = np.log(ratio[b] / ratio[a])
        ref = np.log(born[b] / born[a])
        assert api == pytest.approx(ref, rel=0.04)
        pure_exp = np.mean(np.subtract(hard, soft)).item() * (1 / (KB_KEV * temps[a]) - 1 / (KB_KEV * temps[b]))
        assert api == pytest.approx(pure_exp, rel=0.08)   # Gaunt factor ignored: a few per cent more


@pytest.mark.parametrize("hardness, labels, pairs", [
    (None, ["x:hard", "x:soft", "y:broad"], [("x:hard", "x:soft")]),
    (None, ["x:hard", "y:soft"], []),
    (["y:broad/x:soft"], ["x:hard", "x:soft", "y:broad"], [("y:broad", "x:soft")]),
    ([("x:soft", "x:hard")], ["x:hard", "x:soft"], [("x:soft", "x:hard")]),
])
def test_hardness_pairs(hardness, labels, pairs):
    assert hardness_pairs(hardness, labels) == pairs


@pytest.mark.parametrize("hardness", [["x:hard"], ["x:hard/z:soft"], [("x:hard",)]])
def test_bad_hardness_pairs_name_the_argument(hardness):
    with pytest.raises(InputError) as exc:
        hardness_pairs(hardness, ["x:hard", "x:soft"])
    assert exc.value.argument == "hardness"


def test_cycle_tables_carry_units_and_every_phase():
    star = Star(distance=4 * u.pc)
    phases = [CyclePhase("a", 0.1, dem=IsothermalDEM(3 * u.MK, 2e50 * u.cm ** -3)),
              CyclePhase("b", 0.6, dem=IsothermalDEM(3 * u.MK, 7e50 * u.cm ** -3))]
    ds = compare_cycle(phases, star, bands={"b": [0.5, 2.0] * u.keV})
    per, amp = cycle_tables(ds)
    assert list(per["label"]) == ["a", "b"]
    np.testing.assert_allclose(per["flux[b]"].to_value(FLUX), ds["flux"].values[:, 0], rtol=1e-15)
    assert per["luminosity[b]"].unit == u.erg / u.s
    # flux linear in EM (same temperature): amplitude 7/2
    assert list(amp["quantity"]) == ["flux"] and amp["amplitude"][0] == pytest.approx(3.5, rel=1e-9)
    assert per.meta["table_content_hash"] == ds.attrs["table_content_hash"]


@pytest.mark.parametrize("when, other, text", [
    (0.25, 0.25, "cycle fraction 0.25"),
    (3 * u.yr, 1095.75 * u.day, "3 yr"),
])
def test_two_phases_at_the_same_time_are_refused(when, other, text):
    # Before: accepted, giving a dataset whose phase coordinate repeats a value (a non-unique index).
    star = Star(distance=4 * u.pc)
    dem = IsothermalDEM(3 * u.MK, 2e50 * u.cm ** -3)
    later = 0.75 if not isinstance(when, u.Quantity) else 5 * u.yr
    phases = [CyclePhase("min", when, dem=dem), CyclePhase("max", later, dem=dem.scaled(2.0)),
              CyclePhase("again", other, dem=dem.scaled(3.0))]
    with pytest.raises(InputError, match=rf"phases 'min' and 'again' are both at {text}") as err:
        compare_cycle(phases, star)
    assert err.value.argument == "phases"
