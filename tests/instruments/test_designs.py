"""Physics-built instruments (synthcorona.instruments.designs) and instrument plots.

Outside references are named beside each expected value; "design target" marks numbers
that are choices of our own generic designs, checked for consistency, not physics.
"""
import astropy.units as u
import numpy as np
import pytest

import synthcorona as sc
from synthcorona.errors import InputError
from synthcorona.instruments import (
    GENERIC_EUV_CHANNELS,
    GrazingMirror,
    Instrument,
    MultilayerMirror,
    SiliconDetector,
    build_instrument,
    list_generic,
    load_generic,
    multilayer,
    optics,
)
from synthcorona.plotting.instruments import plot_effective_area, plot_folded_spectrum, plot_temperature_responses

PH = u.ph / (u.s * u.cm**2)


# ----------------------------------------------------------------------------- generic instruments
def test_generic_instruments_are_listed_and_say_they_are_generic():
    names = list_generic()
    assert set(names) == {"sc-softx", "sc-fe9", "sc-fe12", "sc-fe14", "sc-euvphot"}
    assert set(GENERIC_EUV_CHANNELS) <= set(names)
    for name, text in names.items():
        inst = load_generic(name)
        assert isinstance(inst, Instrument) and inst.name == name
        assert "not any real mission" in inst.description and "not any real mission" in text
        assert inst is load_generic(name)                      # built once, cached
        assert inst.provenance["design"]["filters"]


@pytest.mark.parametrize("name, centre", [("sc-fe9", 171.0), ("sc-fe12", 193.0), ("sc-fe14", 211.0)])
def test_euv_channels_peak_at_their_wavelength_and_obey_the_product_rule(name, centre):
    inst = load_generic(name)
    lam = np.linspace(centre - 15.0, centre + 15.0, 3001) * u.AA
    a = inst.effective_area(lam).value
    i = int(np.argmax(a))
    assert abs(lam[i].value - centre) < 1.5                 # design target (periods tuned for these peaks)
    half = lam.value[a > 0.5 * a[i]]
    assert half.max() - half.min() < 10.0                   # a narrow-band channel (design target)
    # Product rule A = A_geom R^2 T_Al^2 QE (the generic first-order throughput model, common
    # practice, no single source), recomputed from the optics functions at the peak
    x = lam[i]
    period = {171.0: 8.775, 193.0: 9.998, 211.0: 11.020}[centre] * u.nm
    r = multilayer.multilayer_reflectivity(x, period, 0.25, 40, roughness=0.5 * u.nm).value
    t = optics.filter_transmission(x, "Al", 150 * u.nm, oxide=[("Al2O3", 6 * u.nm)], mesh_fraction=0.15).value
    qe = optics.silicon_qe(x, 0 * u.nm, 15 * u.um, oxide=5 * u.nm).value
    np.testing.assert_allclose(a[i], 80.0 * r**2 * t**2 * qe, rtol=2e-3)   # 2e-3: linear interpolation of samples


def test_soft_xray_telescope_cuts_off_above_the_critical_angle_energy():
    # Total external reflection below theta_c = sqrt(2 delta) (Attwood 1999, "Soft X-rays and
    # Extreme Ultraviolet Radiation", ch. 3): a gold mirror at 0.7 deg reflects well while
    # sqrt(2 delta) > 0.7 deg and poorly above the energy where sqrt(2 delta) = 0.7 deg.
    sxt = load_generic("sc-softx")
    e = np.geomspace(0.5, 10.0, 400) * u.keV
    delta = 1.0 - optics.refractive_index(e, "Au").real
    theta_c = np.degrees(np.sqrt(2 * delta))
    e_c = e[np.argmax(theta_c < 0.7)].value                  # ~ 6 keV
    assert 4.0 < e_c < 9.0
    a_below = sxt.effective_area(0.5 * e_c * u.keV).value
    a_above = sxt.effective_area(min(1.5 * e_c, 9.9) * u.keV).value
    assert a_above < 0.05 * a_below
    assert sxt.redistribution is not None and sxt.band_axis == "channel energy"


def test_ccd_resolution_is_fano_limited_gaussian():
    # FWHM = 2.3548 w sqrt(F E / w + N^2), w = 3.65 eV, F = 0.115 (silicon; Fano 1947, Phys. Rev.
    # 72, 26; values from memory of Janesick 2001, "Scientific CCDs", SPIE), N = 4 e- (design).
    sxt = load_generic("sc-softx")
    e0 = 1.4
    fwhm_per_sigma = 2 * np.sqrt(2 * np.log(2))                                      # 2.3548
    expected_fwhm_ev = fwhm_per_sigma * 3.65 * np.sqrt(0.115 * e0 * 1e3 / 3.65 + 4.0**2)   # 66.6 eV
    edges = np.geomspace(0.1, 10.0, 20001)
    flux = np.zeros(edges.size - 1)
    flux[np.searchsorted(edges, e0) - 1] = 1.0                # a line: 1 ph s-1 cm-2 in one 0.02 % bin
    counts = sxt.fold(flux * PH, edges * u.keV).value
    c = 0.5 * (sxt.channel_lo.value + sxt.channel_hi.value)
    mean = np.sum(counts * c) / counts.sum()
    sd = np.sqrt(np.sum(counts * (c - mean) ** 2) / counts.sum())
    sd_expected = np.sqrt((expected_fwhm_ev / fwhm_per_sigma / 1e3) ** 2 + 0.010**2 / 12)   # + 10 eV channel binning
    assert abs(mean - e0) < 2e-3
    np.testing.assert_allclose(sd, sd_expected, rtol=0.03)
    np.testing.assert_allclose(counts.sum(), sxt.effective_area(e0 * u.keV).value, rtol=2e-3)  # photons conserved
    np.testing.assert_allclose(SiliconDetector(read_noise=4.0).fwhm(e0 * u.keV).to_value(u.eV), expected_fwhm_ev,
                               rtol=1e-12)


def test_photometer_passband():
    # design target: Zr/C-filtered photodiode responding mainly at 60-300 A (Zr transmits
    # between its M edge near 69 A... and ~300 A; X-ray data booklet edges, from memory)
    p = load_generic("sc-euvphot")
    a = p.effective_area([40.0, 100.0, 200.0, 400.0] * u.AA).value
    assert a[1] > 0.4 and a[2] > 0.15                       # cm2 for a 1 cm2 diode
    assert a[0] < 0.5 * a[1] and a[3] < 1e-3 * a[1]


# ----------------------------------------------------------------------------- build_instrument
def test_build_instrument_is_the_product_of_its_components():
    grid = np.geomspace(0.2, 8.0, 500) * u.keV
    inst = build_instrument(mirror={"material": "Ir", "grazing_angle": 0.5 * u.deg, "n_reflections": 2},
                            filters=[("Al", 100 * u.nm), ("C8H8", 150 * u.nm, {"density": 1.05 * u.g / u.cm**3})],
                            detector={"dead_layer": 50 * u.nm, "depletion_depth": 30 * u.um},
                            geometric_area=50 * u.cm**2, energy_grid=grid, name="test",
                            bands={"soft": [0.3, 1.0] * u.keV})
    expected = (50.0 * multilayer.mirror_reflectivity(grid, "Ir", 0.5 * u.deg, roughness=0.5 * u.nm).value ** 2
                * optics.filter_transmission(grid, "Al", 100 * u.nm).value
                * optics.filter_transmission(grid, "C8H8", 150 * u.nm, density=1.05 * u.g / u.cm**3).value
                * optics.silicon_qe(grid, 50 * u.nm, 30 * u.um, oxide=10 * u.nm).value)
    np.testing.assert_allclose(inst.effective_area(grid).value, expected, rtol=1e-10)
    assert inst.redistribution is None and list(inst.bands) == ["soft"]
    # the same design from spec objects
    spec = build_instrument(mirror=GrazingMirror("Ir", 0.5 * u.deg, n_reflections=2),
                            filters=[("Al", 100 * u.nm), ("C8H8", 150 * u.nm, {"density": 1.05 * u.g / u.cm**3})],
                            detector=SiliconDetector(dead_layer=50 * u.nm, depletion_depth=30 * u.um),
                            geometric_area=50 * u.cm**2, energy_grid=grid)
    np.testing.assert_allclose(spec.area.value, inst.area.value, rtol=1e-12)


def test_build_instrument_multilayer_from_dict():
    lam = np.linspace(120.0, 150.0, 301) * u.AA
    inst = build_instrument(mirror={"period": 6.9 * u.nm, "gamma": 0.4, "n_bilayers": 50, "n_reflections": 1},
                            energy_grid=lam, geometric_area=1 * u.cm**2)
    r = multilayer.multilayer_reflectivity(lam, 6.9 * u.nm, 0.4, 50, roughness=0.5 * u.nm).value
    np.testing.assert_allclose(inst.effective_area(lam).value, r, rtol=1e-10)
    # Mo/Si near 13.5 nm: peak reflectivity 0.55-0.7 (Bajt et al. 2002, Opt. Eng. 41, 1797:
    # ~0.70 measured; lower with the Chantler constants, see multilayer.multilayer_reflectivity)
    assert 0.5 < r.max() < 0.75


def test_build_instrument_bad_inputs():
    grid = np.geomspace(0.2, 2.0, 50) * u.keV
    with pytest.raises(InputError, match=r"unknown key\(s\) \['materail'\]; valid keys"):
        build_instrument(mirror={"kind": "grazing", "materail": "Au"}, energy_grid=grid)
    with pytest.raises(InputError, match=r"kind='lens' is not known; valid kinds: \['grazing', 'multilayer'\]"):
        build_instrument(mirror={"kind": "lens"}, energy_grid=grid)
    with pytest.raises(InputError, match="give kind='grazing' or kind='multilayer'"):
        build_instrument(mirror={"focal_length": 1 * u.m}, energy_grid=grid)
    with pytest.raises(InputError, match=r"n_reflections=\[0\.\] is outside the valid range \[1, 100\]"):
        GrazingMirror("Au", n_reflections=0)
    with pytest.raises(InputError, match="read_noise"):
        SiliconDetector(read_noise=-1.0)
    with pytest.raises(u.UnitsError, match="energy_grid"):
        build_instrument(energy_grid=np.linspace(0.1, 1.0, 10))
    with pytest.raises(InputError, match="unobtainium"):
        build_instrument(filters=[("unobtainium", 10 * u.nm)], energy_grid=grid)
    with pytest.raises(InputError, match="geometric_area"):
        build_instrument(geometric_area=0 * u.cm**2, energy_grid=grid)
    # below ~17 eV the isolated-atom constants give Mo/Si reflectivities above 1: refused
    with pytest.raises(InputError, match="exceeds 1"):
        build_instrument(mirror=MultilayerMirror(period=8.8 * u.nm), energy_grid=np.geomspace(10, 100, 50) * u.eV)


# ----------------------------------------------------------------------------- plots
def test_plot_effective_area(tmp_path):
    insts = [load_generic(n) for n in GENERIC_EUV_CHANNELS]
    fig = plot_effective_area(*insts, axis="wavelength")
    ax = fig.axes[0]
    assert [line.get_label() for line in ax.get_lines()] == list(GENERIC_EUV_CHANNELS)
    assert ax.get_xlabel() == "Wavelength [Å]" and "cm$^2$" in ax.get_ylabel()
    # the plotted maximum of each curve is the instrument's largest bin area
    for line, inst in zip(ax.get_lines(), insts):
        assert np.nanmax(line.get_ydata()) == pytest.approx(inst.area.value.max())
    fig.savefig(tmp_path / "area.png")
    assert (tmp_path / "area.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_plot_temperature_responses(tmp_path, table):
    r1 = load_generic("sc-softx").temperature_response(table=table, bands=["soft", "hard"])
    r2 = load_generic("sc-fe9").temperature_response(table=table)
    fig = plot_temperature_responses(r1, r2)
    ax = fig.axes[0]
    assert [line.get_label() for line in ax.get_lines()] == ["sc-softx: soft", "sc-softx: hard", "sc-fe9: total"]
    assert "cm3 ct / s" in ax.get_ylabel() and "1 pc" in ax.get_ylabel() and ax.get_xlabel() == "Temperature [K]"
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    np.testing.assert_allclose(ax.get_lines()[2].get_xdata(), 10 ** table.logT)
    fig.savefig(tmp_path / "resp.png")
    assert (tmp_path / "resp.png").stat().st_size > 1000
    norm = plot_temperature_responses([r1, r2], normalize=True)
    assert max(np.nanmax(line.get_ydata()) for line in norm.axes[0].get_lines()) == pytest.approx(1.0)


def test_plot_folded_spectrum(tmp_path, table):
    sxt = load_generic("sc-softx")
    dem = sc.GaussianDEM(6.6, 0.2, 1e52 * u.cm**-3)
    edges = np.linspace(0.05, 10.5, 10451) * u.keV
    spec = sc.synthesize(dem, energy=edges, edges=True, photons=True, distance=10 * u.pc, table=table)
    fig = plot_folded_spectrum(sxt, spec, edges=edges)
    assert len(fig.axes) == 2
    bottom = fig.axes[1]
    assert bottom.get_xlabel() == "Channel energy [keV]" and "keV$^{-1}$" in bottom.get_ylabel()
    # the drawn count spectrum integrates to the total count rate of the fold
    (patch,) = bottom.patches
    values, x = patch.get_data()[:2]
    drawn = np.nansum(values * np.diff(x))
    flux = spec.values * np.diff(edges.value) * PH
    np.testing.assert_allclose(drawn, sxt.count_rate_from_spectrum(flux, edges).value, rtol=1e-10)
    fig.savefig(tmp_path / "folded.png")
    assert (tmp_path / "folded.png").stat().st_size > 1000
    with pytest.raises(InputError, match="photon flux density"):
        plot_folded_spectrum(sxt, sc.synthesize(dem, energy=edges, edges=True, distance=10 * u.pc, table=table),
                             edges=edges)
