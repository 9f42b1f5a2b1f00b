"""Activity-cycle comparison (synthcorona.products.cycle), cycle files, and the 'cycle' and 'list' subcommands.

References: exact algebraic identities (flux and count rate are linear in EM, so conversions must
invert to rounding), direct calls of the already-tested band_flux / count_rate API, and thermal
free-free emission (Rybicki & Lightman 1979, eq. 5.14b) for the temperature dependence of hardness.
"""
import pathlib

import astropy.units as u
import numpy as np
import pytest
from scipy.special import k0e

from synthcorona.dem import GaussianDEM, IsothermalDEM
from synthcorona.dimming import Star
from synthcorona.errors import InputError, ScenarioError
from synthcorona.instruments import Instrument, load_generic
from synthcorona.io.cycle_file import read_cycle_file
from synthcorona.products.cycle import CyclePhase, compare_cycle, convert_count_rate, cycle_tables
from synthcorona.synthesis import band_flux

EXAMPLE = pathlib.Path(__file__).parent.parent / "examples" / "cycle" / "corvanne_cycle.toml"
FLUX = u.erg / u.s / u.cm ** 2
KB_KEV = 8.617333262e-8  # Boltzmann constant in keV/K (CODATA 2018)
# N_H and density of the example cycle file: tests using them share its cached instrument responses.
NH, DENSITY = 3e17 * u.cm ** -2, 2e9 * u.cm ** -3


def test_count_rate_conversion_round_trip_and_direct_rates():
    dem = GaussianDEM(6.4, 0.2, 1e51 * u.cm ** -3) + IsothermalDEM(8 * u.MK, 1e50 * u.cm ** -3)
    nh, dens = NH, DENSITY
    rate = 2.0 * u.ct / u.s
    fwd = convert_count_rate(rate, dem, "sc-softx:broad", "sc-fe12", nh=nh, density=dens)
    back = convert_count_rate(fwd.rate, dem, "sc-fe12", "sc-softx:broad", nh=nh, density=dens)
    assert back.rate.to_value(u.ct / u.s) == pytest.approx(2.0, rel=1e-6)
    # The target rate is what the instrument itself predicts for the DEM scaled to the source rate.
    r_src = load_generic("sc-softx").count_rate(dem, distance=5 * u.pc, nh=nh, band="broad", density=dens).value
    r_tgt = load_generic("sc-fe12").count_rate(dem, distance=5 * u.pc, nh=nh, band="total", density=dens).value
    assert fwd.rate.value == pytest.approx(2.0 * r_tgt / r_src, rel=1e-9)
    # The flux is the DEM's unabsorbed flux in the target band scaled the same way.
    lo, hi = load_generic("sc-fe12").energy_range
    f = band_flux(dem, u.Quantity([lo, hi]), 5 * u.pc, density=dens).to_value(FLUX)
    assert fwd.flux.to_value(FLUX) == pytest.approx(2.0 * f / r_src, rel=1e-6)


@pytest.mark.parametrize("width", [None, 0.2])
def test_flux_phase_reproduces_measured_flux(width):
    star = Star(distance=7 * u.pc)
    band = [0.1, 2.4] * u.keV
    p = CyclePhase("rise", 0.3, flux=4.2e-12 * FLUX, band=band, temperature=2.7 * u.MK, width_dex=width)
    dem = p.resolve(star.distance)
    assert isinstance(dem, GaussianDEM if width else IsothermalDEM)
    assert band_flux(dem, band, star.distance).to_value(FLUX) == pytest.approx(4.2e-12, rel=1e-6)
    q = CyclePhase("min", 0.0, dem=GaussianDEM(6.2, 0.2, 3e50 * u.cm ** -3))
    ds = compare_cycle([q, p], star, bands={"rosat-like": band})
    assert ds["flux"].sel(band="rosat-like").values[1] == pytest.approx(4.2e-12, rel=1e-6)
    assert list(ds["phase_source"].values) == ["dem", "flux"]


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
    from synthcorona.products.cycle import _phase_scenario

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
    direct = _phase_scenario(ref, phases[1].resolve(star.distance), star).minimum_detectable_mass(
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


def test_cli_end_to_end_matches_api(tmp_path, capsys):
    import xarray as xr
    from astropy.table import QTable

    from synthcorona.cli import main
    from synthcorona.products.cycle import _phase_scenario

    out = tmp_path / "out"
    assert main(["cycle", str(EXAMPLE), "--out", str(out), "--realisations", "1000"]) == 0
    text = capsys.readouterr().out
    assert "Corvanne" in text and "P(detect)" in text
    for name in ("cycle.nc", "cycle_phases.ecsv", "cycle_phases.csv", "cycle_amplitudes.ecsv", "cycle_fluxes.png",
                 "cycle_count_rates.png", "cycle_hardness.png", "cycle_conversion.png", "cycle_dimming.png"):
        assert (out / name).stat().st_size > 0, name
    ds = xr.load_dataset(out / "cycle.nc", engine="h5netcdf")
    per = QTable.read(out / "cycle_phases.ecsv")
    inputs = read_cycle_file(EXAMPLE)
    star, dens = inputs.star, inputs.density
    assert ds.sizes["phase"] == 6 and list(ds["label"].values) == [p.label for p in inputs.phases]
    # Independent numbers for the first phase (a Gaussian DEM in the file).
    dem0 = GaussianDEM(np.log10(1.6e6), 0.2, 6e50 * u.cm ** -3)
    f0 = band_flux(dem0, [0.1, 2.4] * u.keV, 3 * u.pc, density=2e9 * u.cm ** -3).to_value(FLUX)
    assert ds["flux"].sel(band="0.1-2.4 keV").values[0] == pytest.approx(f0, rel=1e-9)
    assert per["flux[0.1-2.4 keV]"][0].to_value(FLUX) == pytest.approx(f0, rel=1e-9)
    sxt = load_generic("sc-softx")
    r0 = sxt.count_rate(dem0, distance=3 * u.pc, nh=3e17 * u.cm ** -2, band="broad", density=2e9 * u.cm ** -3).value
    assert ds["count_rate"].sel(channel="sc-softx:broad").values[0] == pytest.approx(r0, rel=1e-9)
    assert per["count_rate[sc-softx:broad]"][0].to_value(u.ct / u.s) == pytest.approx(r0, rel=1e-9)
    # The 'early rise' phase is a measured flux: reproduced.
    assert ds["flux"].sel(band="0.1-2.4 keV").values[1] == pytest.approx(2.0e-11, rel=1e-6)
    # Conversion: 1.5 ct/s in sc-softx:broad -> sc-fe12, as convert_count_rate gives for that phase's DEM.
    dems = [p.resolve(star.distance, abundances=inputs.abundances, density=dens) for p in inputs.phases]
    conv = convert_count_rate(1.5 * u.ct / u.s, dems[3], "sc-softx:broad", "sc-fe12", nh=star.nh, density=dens)
    assert ds["converted_rate"].values[3] == pytest.approx(conv.rate.value, rel=1e-9)
    assert per["converted_flux"][3].to_value(FLUX) == pytest.approx(conv.flux.to_value(FLUX), rel=1e-9)
    # Dimming at the first phase: the reference scenario with the phase DEM, same seed.
    scen = _phase_scenario(inputs.reference, dems[0], star)
    det = scen.detection_probability(n_realisations=1000, seed=inputs.seed)
    assert ds["detection_probability"].values[0, 0] == pytest.approx(float(det["probability"].values[0]), abs=0)
    assert ds["dimming_depth"].values[0, 0] == pytest.approx(float(scen.depth()["depth"].values[0]), rel=1e-12)
    assert ds.attrs["table_content_hash"] and ds.attrs["table_chianti_version"]
    amp = QTable.read(out / "cycle_amplitudes.ecsv")
    row = [r for r in amp if r["quantity"] == "flux" and r["item"] == "0.1-2.4 keV"][0]
    assert row["amplitude"] == pytest.approx(float(ds["flux_amplitude"].sel(band="0.1-2.4 keV")), rel=1e-12)


_MINIMAL = """
title = "t"
[star]
distance = "5 pc"
[[phase]]
label = "a"
phase = 0.0
[phase.dem]
model = "isothermal"
temperature = "2 MK"
emission_measure = "1e50 cm-3"
[[phase]]
label = "b"
phase = 0.5
flux = "1e-12 erg s-1 cm-2"
band = "0.1-2.4 keV"
temperature = "3 MK"
"""


@pytest.mark.parametrize("change, key", [
    (("[star]\n", "[star]\ncolour = \"yellow\"\n"), "colour"),                     # unknown key
    (("distance = \"5 pc\"\n", ""), "distance"),                                    # missing key
    (("temperature = \"3 MK\"", "temperature = \"3 pc\""), "temperature"),          # bad unit
    (("flux = \"1e-12 erg s-1 cm-2\"", "flux = \"1e-12 W\""), "flux"),               # bad unit
    (("phase = 0.5", "phase = 1.5"), "phase"),                                      # out of range
    (("label = \"b\"", "label = \"a\""), "label"),                                  # duplicate
])
def test_malformed_cycle_files_name_the_key(tmp_path, capsys, change, key):
    from synthcorona.cli import main

    text = _MINIMAL.replace(*change, 1)
    assert text != _MINIMAL
    with pytest.raises(ScenarioError, match=key):
        read_cycle_file(text, name="bad.toml")
    f = tmp_path / "bad.toml"
    f.write_text(text)
    assert main(["cycle", str(f), "--out", str(tmp_path / "o"), "--no-figures"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and key in err and "bad.toml" in err and "Traceback" not in err


def test_phase_outside_the_table_names_file_and_phase(tmp_path, capsys):
    from synthcorona.cli import main

    f = tmp_path / "hot.toml"
    f.write_text(_MINIMAL.replace('temperature = "3 MK"', 'temperature = "5e8 K"'))
    assert main(["cycle", str(f), "--out", str(tmp_path / "o"), "--no-figures"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "hot.toml" in err and "phase 'b'" in err and "temperature" in err


def test_minimal_cycle_file_runs_without_instruments():
    ds = read_cycle_file(_MINIMAL, name="ok.toml").run()
    assert ds["flux"].sel(band="0.1-2.4 keV").values[1] == pytest.approx(1e-12, rel=1e-6)
    assert "count_rate" not in ds and ds["phase"].attrs["units"] == "1"
    per, amp = cycle_tables(ds)
    assert len(per) == 2 and len(amp) == 2


def test_response_file_path_relative_to_cycle_file(tmp_path, monkeypatch):
    from synthcorona.instruments import load_instrument, write_arf

    e = np.geomspace(0.1, 10.0, 201)
    write_arf(tmp_path / "flat.arf", e[:-1] * u.keV, e[1:] * u.keV, np.full(200, 10.0) * u.cm ** 2)
    text = _MINIMAL + '\n[report]\ninstruments = ["flat.arf"]\n'
    (tmp_path / "files").mkdir()
    f = tmp_path / "c.toml"
    f.write_text(text)
    monkeypatch.chdir(tmp_path / "files")          # the path is relative to the cycle file, not the cwd
    ds = read_cycle_file(f).run()
    ins = load_instrument(str(tmp_path / "flat.arf"))
    dem = IsothermalDEM(2 * u.MK, 1e50 * u.cm ** -3)
    assert ds["count_rate"].values[0, 0] == pytest.approx(ins.count_rate(dem, distance=5 * u.pc).value[0], rel=1e-12)


def test_list_command_runs(capsys):
    from synthcorona.cli import main

    assert main(["list"]) == 0
    text = capsys.readouterr().out
    for word in ("sc-softx:hard", "sc-fe9", "coronal", "gaussian", "CHIANTI", "content_hash"):
        assert word in text, word
    assert main(["list", "abundances"]) == 0
    assert "sc-softx" not in capsys.readouterr().out
