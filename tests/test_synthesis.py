"""Checks of spectra, band fluxes and Λ(T) computed from the embedded table against published physics."""
import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest

import synthcorona as sc
from synthcorona.synthesis import band_kernel, prepare


def _ff_per_kev(table, element="H"):
    """Free-free emissivity of one element per unit abundance (erg cm3 s-1 keV-1), (T, E)."""
    i = table.elements.index(element)
    return table.continuum_components()["ff"][i]


def _gaunt_born_elwert(T, e_kev, Z=1):
    """Thermally averaged free-free Gaunt factor in the Born approximation with the Elwert factor.

    Non-relativistic Born cross-section g_B = sqrt(3)/pi ln[(k_i + k_f)/(k_i - k_f)] (Karzas & Latter
    1961, ApJS 6, 167, eq. 35 limit; Rybicki & Lightman 1979, sect. 5.2) times the Coulomb correction of
    Elwert (1939, Ann. Phys. 426, 178), f_E = (k_i/k_f) (1 - exp(-2 pi eta_i)) / (1 - exp(-2 pi eta_f)),
    eta = Z / (k a0), averaged over a Maxwellian of final electron energies.
    """
    from scipy.integrate import quad

    ry = 13.605693  # eV, Rydberg energy (CODATA)
    kT = (const.k_B * T * u.K).to_value(u.eV)
    hv = e_kev * 1e3

    def integrand(ef):
        ki, kf = np.sqrt((ef + hv) / ry), np.sqrt(ef / ry)
        gb = np.sqrt(3) / np.pi * np.log((ki + kf) / (ki - kf))
        fe = (ki / kf) * (-np.expm1(-2 * np.pi * Z / ki)) / (-np.expm1(-2 * np.pi * Z / kf))
        return gb * fe * np.exp(-ef / kT) / kT

    return quad(integrand, 0, 50 * kT, limit=200, points=[1e-3 * kT, kT])[0]


@pytest.mark.parametrize("logT, energies_kev, tol", [
    (7.0, [0.3, 0.5, 1.0, 2.0, 4.0], 0.03),
    (8.0, [1.0, 3.0, 10.0, 20.0], 0.08),
])
def test_hydrogen_bremsstrahlung_against_rybicki_lightman(table, logT, energies_kev, tol):
    # Rybicki & Lightman 1979, eq. 5.14b: eps_nu = 6.8e-38 Z^2 n_e n_i T^-1/2 exp(-h nu/kT) g_ff
    #   [erg s-1 cm-3 Hz-1]; pure H, fully ionised (n_i = n_H, Z = 1), per n_e n_H.
    # Gaunt factor: Born-Elwert thermal average (above), accurate to a few per cent for
    #   gamma^2 = Z^2 Ry / kT << 1 (0.016 at 10 MK, 0.0016 at 100 MK; van Hoof et al. 2014, MNRAS 444,
    #   420, Fig. 1 - from memory). At 100 MK relativistic corrections (Itoh et al. 2000, ApJS 128, 125)
    #   add several per cent at 10-20 keV, hence the wider tolerance there. The constant 6.8e-38 is
    #   rounded (6.84e-38 exactly), a 0.6 % effect.
    it = int(np.argmin(np.abs(table.logT - logT)))
    assert abs(table.logT[it] - logT) < 1e-6
    T = 10 ** logT
    kT_kev = (const.k_B * T * u.K).to_value(u.keV)
    e = np.asarray(energies_kev)
    x = np.log(table.energy)
    ff = np.exp(np.interp(np.log(e), x, np.log(_ff_per_kev(table)[it])))
    uu = e / kT_kev
    gaunt = np.array([_gaunt_born_elwert(T, ei) for ei in e])
    hz_per_kev = (1 * u.keV / const.h).to_value(u.Hz)
    expected = 6.8e-38 * T ** -0.5 * np.exp(-uu) * gaunt * hz_per_kev
    np.testing.assert_allclose(ff, expected, rtol=tol)


def test_radiative_loss_shape(table):
    # Published CHIANTI radiative-loss curves (e.g. Dere et al. 2009, A&A 498, 915, Fig. 13, coronal
    # abundances; Landi & Landini 1999, A&A 347, 401) show: the global maximum at 1-3e5 K (C, O lines),
    # a hump from Fe VIII-XIV near 1 MK, a shoulder from Fe XVII-XX near 1e7 K, and a bremsstrahlung
    # tail ~ T^0.5 above ~4e7 K; peak value a few 1e-22 erg cm3 s-1.
    T = np.logspace(4.5, 8.5, 161) * u.K
    lam = sc.radiative_loss(T, table=table, abundances="coronal", density=1e10 * u.cm ** -3).value
    logT = np.log10(T.value)
    ipk = np.argmax(lam)
    assert 1e5 <= 10 ** logT[ipk] <= 3e5
    assert 1e-22 < lam[ipk] < 2e-21  # Dere et al. 2009 Fig. 13 (read off the figure)
    # iron hump near 1 MK: a local maximum between 0.6 and 2 MK
    sel = (logT >= np.log10(6e5)) & (logT <= np.log10(2e6))
    j = np.argmax(lam[sel])
    assert 0 < j < sel.sum() - 1, "Λ has no local maximum near 1 MK"
    # Fe XVII-XX shoulder: Λ(1e7 K) above the power-law line joining 4e6 and 3e7 K (local excess)
    def at(t):
        return np.interp(np.log10(t), logT, np.log10(lam))
    chord = at(4e6) + (at(3e7) - at(4e6)) * (np.log10(1e7) - np.log10(4e6)) / (np.log10(3e7) - np.log10(4e6))
    assert at(1e7) > chord
    # bremsstrahlung-dominated regime (common practice: Λ_ff ∝ T^0.5 g_ff): Λ keeps rising above 4e7 K,
    # the continuum carries > 80 % of it above 1e8 K, and the local slope approaches 0.5 at the hottest T
    # (Fe XXV-XXVI lines still add ~10 % at 1e8 K with coronal abundances, which flattens it there).
    assert at(4e7) < at(8e7) < at(1.5e8) < at(3e8)
    prep = prepare(table, "coronal", 1e10 * u.cm ** -3)
    i = int(np.argmin(np.abs(table.logT - 8.0)))
    lines_1e8 = prep.line_power[:, i].sum()
    assert lines_1e8 < 0.2 * sc.radiative_loss(1e8 * u.K, table=table).value
    slope = (at(3e8) - at(2e8)) / (np.log10(3e8) - np.log10(2e8))
    assert 0.35 < slope < 0.6


@pytest.mark.parametrize("element, stage, wavelength, logT_pub", [
    # Peak formation temperatures (log T of the maximum of G(T)) with CHIANTI ionization equilibrium:
    # Del Zanna & Mason 2018, Living Rev. Sol. Phys. 15, 5, line tables (values from memory):
    ("Fe", 9, 171.073, 5.85),
    ("Fe", 12, 195.119, 6.15),
    ("Fe", 18, 93.932, 6.85),
    ("O", 7, 21.602, 6.30),
])
def test_peak_formation_temperatures(table, element, stage, wavelength, logT_pub):
    z = sc.abundances.ELEMENTS.index(element) + 1
    m = (table.line_Z == z) & (table.line_ion == stage) & (np.abs(table.line_wavelength - wavelength) < 0.01)
    assert m.sum() >= 1, f"{element} {stage} {wavelength} not in the table"
    g = table.line_emissivity(np.full(table.logT.size, 9.0))[m].sum(axis=0)
    i = int(np.argmax(g))
    # parabola through the maximum and its neighbours in log G
    y0, y1, y2 = np.log10(g[i - 1: i + 2])
    dx = table.logT[1] - table.logT[0]
    peak = table.logT[i] + 0.5 * dx * (y0 - y2) / (y0 - 2 * y1 + y2)
    assert abs(peak - logT_pub) <= 0.1


def test_flux_linear_in_em_and_isothermal_equals_table(table):
    band = (0.1, 2.4) * u.keV
    d = 10 * u.pc
    dem = sc.GaussianDEM(peak_logT=6.3, width_logT=0.15, total_em=1e51 * u.cm ** -3)
    f1 = sc.band_flux(dem, band=band, distance=d, table=table)
    f3 = sc.band_flux(dem.scaled(3.0), band=band, distance=d, table=table)
    assert f3.unit.is_equivalent(u.erg / u.s / u.cm ** 2)
    np.testing.assert_allclose(f3.value, 3 * f1.value, rtol=1e-12)
    # an isothermal DEM on a grid node reproduces the table kernel at that node exactly
    it = 30
    iso = sc.IsothermalDEM(temperature=10 ** table.logT[it] * u.K, total_em=1e50 * u.cm ** -3)
    lum = sc.luminosity(iso, band=band, table=table)
    k = band_kernel(np.array([[0.1, 2.4]]), prepare(table, "coronal", 1e10 * u.cm ** -3))[0, it]
    np.testing.assert_allclose(lum.to_value(u.erg / u.s), 1e50 * k, rtol=1e-10)


def test_spectrum_conserves_flux_under_rebinning(table):
    dem = sc.GaussianDEM(peak_logT=6.5, width_logT=0.2, total_em=1e51 * u.cm ** -3)
    fine = sc.synthesize(dem, wavelength=np.linspace(5.0, 300.0, 29501) * u.AA, edges=True, table=table)
    coarse = sc.synthesize(dem, wavelength=np.linspace(5.0, 300.0, 119) * u.AA, edges=True, table=table)
    assert fine.attrs["units"] == "erg / (Angstrom s)"
    tot_f = np.sum(fine.values * 0.01)
    tot_c = np.sum(coarse.values * 2.5)
    lum = sc.luminosity(dem, band=(5.0, 300.0) * u.AA, table=table).to_value(u.erg / u.s)
    np.testing.assert_allclose(tot_f, lum, rtol=1e-9)
    np.testing.assert_allclose(tot_c, lum, rtol=1e-9)
    # energy grid gives the same band total
    e_edges = np.sort((np.linspace(5.0, 300.0, 119) * u.AA).to_value(u.keV, equivalencies=u.spectral()))
    espec = sc.synthesize(dem, energy=e_edges * u.keV, edges=True, table=table)
    np.testing.assert_allclose(np.sum(espec.values * np.diff(e_edges)), lum, rtol=1e-9)


def test_broadened_lines_conserve_flux(table):
    dem = sc.IsothermalDEM(temperature=1.5e6 * u.K, total_em=1e50 * u.cm ** -3)
    grid = np.arange(150.0, 220.0, 0.002) * u.AA
    sharp = sc.synthesize(dem, wavelength=grid, table=table)
    broad = sc.synthesize(dem, wavelength=grid, table=table, thermal_broadening=True, fwhm=0.05 * u.AA)
    inner = (sharp.wavelength > 160) & (sharp.wavelength < 210)
    np.testing.assert_allclose(broad.values[inner].sum(), sharp.values[inner].sum(), rtol=2e-3)
    # thermal Doppler FWHM of Fe IX 171 at 1.5 MK: lambda/c sqrt(8 ln2 kT/m) = 0.0127 A
    # (Rybicki & Lightman 1979, eq. 10.73) -> the 0.05 A instrumental width dominates
    assert broad.values.max() < sharp.values.max()


def test_bad_inputs_raise_clear_errors(table, tmp_path):
    dem = sc.GaussianDEM(peak_logT=6.3, width_logT=0.15, total_em=1e51 * u.cm ** -3)
    with pytest.raises(sc.InputError, match="total_em"):
        sc.GaussianDEM(peak_logT=6.3, width_logT=0.15, total_em=-1e51 * u.cm ** -3)
    with pytest.raises(sc.InputError, match="temperature"):
        sc.radiative_loss(np.array([1e6, np.nan]) * u.K, table=table)
    with pytest.raises(sc.InputError, match="outside the table range"):
        sc.radiative_loss(np.array([1e9]) * u.K, table=table)
    with pytest.raises(u.UnitsError, match="distance"):
        sc.band_flux(dem, band=(0.1, 2.4) * u.keV, distance=10 * u.g, table=table)
    with pytest.raises(u.UnitsError, match="band"):
        sc.band_flux(dem, band=(0.1, 2.4) * u.s, distance=10 * u.pc, table=table)
    with pytest.raises(sc.InputError, match="martian.*not a known abundance set"):
        sc.band_flux(dem, band=(0.1, 2.4) * u.keV, distance=10 * u.pc, table=table, abundances="martian")
    with pytest.raises(sc.InputError, match="Xx"):
        sc.band_flux(dem, band=(0.1, 2.4) * u.keV, distance=10 * u.pc, table=table, abundances={"Xx": 1e-4})
    with pytest.raises(sc.InputError, match="density"):
        sc.band_flux(dem, band=(0.1, 2.4) * u.keV, distance=10 * u.pc, table=table, density=1e14 * u.cm ** -3)
    with pytest.raises(sc.InputError, match="continuum grid"):
        sc.synthesize(dem, energy=np.linspace(40, 80, 10) * u.keV, table=table)
    with pytest.raises(u.UnitsError, match="wavelength"):
        sc.synthesize(dem, wavelength=np.arange(1, 10) * u.keV, table=table)


def test_corrupted_table_file_is_refused(table, tmp_path):
    src = table.path.read_bytes()
    bad = tmp_path / "cut.nc"
    bad.write_bytes(src[: len(src) // 2])
    with pytest.raises(sc.TableFileError, match="cut.nc"):
        sc.load_emissivity(bad)
    junk = tmp_path / "junk.nc"
    junk.write_text("not a table")
    with pytest.raises(sc.TableFileError, match="junk.nc"):
        sc.load_emissivity(junk)
    with pytest.raises(sc.TableFileError, match="no such file"):
        sc.load_emissivity(tmp_path / "absent.nc")


def test_altered_numbers_fail_the_hash(table, tmp_path):
    import xarray as xr

    ds = xr.open_dataset(table.path, engine="h5netcdf", mask_and_scale=False, decode_cf=False).load()
    v = ds["line_emissivity"].values.copy()
    v.flat[np.flatnonzero(v != -32768)[0]] += 1
    ds["line_emissivity"].values = v
    out = tmp_path / "altered.nc"
    ds.to_netcdf(out, engine="h5netcdf")
    with pytest.raises(sc.TableFileError, match="content-hash"):
        sc.load_emissivity(out)


# ----------------------------------------------------------------------------- batches, distances, memory
# Reference for every batch result below: a loop of scalar calls (one DEM, one distance) of the same function.
SOFT = (0.1, 2.4) * u.keV


def test_distance_broadcasts_against_the_dem_batch(table):
    one = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm ** -3)
    d = [5.0, 10.0] * u.pc
    f = sc.band_flux(one, SOFT, distance=d, table=table)
    loop = [sc.band_flux(one, SOFT, distance=x, table=table).value for x in d]
    assert f.shape == (2,)
    np.testing.assert_allclose(f.value, loop, rtol=1e-13)
    assert f.value[0] / f.value[1] == pytest.approx(4.0, rel=1e-13)  # inverse square law
    pair = sc.GaussianDEM([6.3, 6.8], 0.2, 1e51 * u.cm ** -3)
    f = sc.band_flux(pair, SOFT, distance=d, table=table)
    loop = [sc.band_flux(sc.GaussianDEM(mu, 0.2, 1e51 * u.cm ** -3), SOFT, distance=x, table=table).value
            for mu, x in zip([6.3, 6.8], d)]
    np.testing.assert_allclose(f.value, loop, rtol=1e-13)
    # numpy rules: batch (2,) against distance (3, 1) -> (3, 2); several bands add a last axis
    d31 = [[4.0], [8.0], [16.0]] * u.pc
    bands = {"soft": SOFT, "hard": (2.0, 10.0) * u.keV}
    f = sc.band_flux(pair, bands, distance=d31, table=table)
    assert f.shape == (3, 2, 2)
    for i, x in enumerate(d31[:, 0]):
        for j, mu in enumerate([6.3, 6.8]):
            ref = sc.band_flux(sc.GaussianDEM(mu, 0.2, 1e51 * u.cm ** -3), bands, distance=x, table=table)
            np.testing.assert_allclose(f.value[i, j], ref.value, rtol=1e-13)
    with pytest.raises(sc.InputError, match=r"distance has shape \(3,\).*batch shape \(2,\)") as err:
        sc.band_flux(pair, SOFT, distance=[1, 2, 3] * u.pc, table=table)
    assert err.value.argument == "distance"


def test_synthesize_takes_one_dem_and_one_distance(table):
    grid = np.linspace(10, 20, 50) * u.AA
    one = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm ** -3)
    with pytest.raises(sc.InputError, match=r"distance has shape \(2,\): synthesize takes one distance") as err:
        sc.synthesize(one, wavelength=grid, table=table, distance=[5, 10] * u.pc)
    assert err.value.argument == "distance"
    with pytest.raises(sc.InputError, match=r"synthesize takes one DEM; got a batch of shape \(2,\)") as err:
        sc.synthesize(sc.GaussianDEM([6.3, 6.8], 0.2, 1e51 * u.cm ** -3), wavelength=grid, table=table)
    assert err.value.argument == "dem"


def test_batches_in_chunks_equal_one_block(table, monkeypatch):
    """A budget forced small through the setting splits the batch; the numbers stay identical."""
    import synthcorona.batch as batch
    from synthcorona.dem import MultiComponentDEM, TabulatedDEM
    from synthcorona.settings import MEMORY_BUDGET_ENV

    rng = np.random.default_rng(3)
    n = 700
    gauss = sc.GaussianDEM(rng.uniform(6.0, 7.0, n), rng.uniform(0.1, 0.3, n), rng.uniform(1e50, 1e51, n) * u.cm ** -3)
    temp = np.geomspace(1e6, 2e7, 12) * u.K
    tab = TabulatedDEM(temp, rng.uniform(0.0, 1.0, (n, 12)) * 1e44 * u.cm ** -3 / u.K)
    multi = MultiComponentDEM([gauss, sc.IsothermalDEM(rng.uniform(2e6, 9e6, (3, 1)) * u.K, 5e50 * u.cm ** -3)])
    d = rng.uniform(3.0, 30.0, n) * u.pc
    monkeypatch.delenv(MEMORY_BUDGET_ENV, raising=False)
    whole = {k: (sc.band_flux(dem, {"a": SOFT, "b": (150, 200) * u.AA}, distance=d, table=table),
                 sc.luminosity(dem, SOFT, table=table)) for k, dem in (("g", gauss), ("t", tab), ("m", multi))}
    steps = []
    real_chunk_length = batch.chunk_length

    def spy(*args, **kwargs):
        steps.append(real_chunk_length(*args, **kwargs))
        return steps[-1]

    monkeypatch.setattr(batch, "chunk_length", spy)
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "1 MB")
    for k, dem in (("g", gauss), ("t", tab), ("m", multi)):
        f = sc.band_flux(dem, {"a": SOFT, "b": (150, 200) * u.AA}, distance=d, table=table)
        lum = sc.luminosity(dem, SOFT, table=table)
        np.testing.assert_array_equal(f.value, whole[k][0].value)
        np.testing.assert_array_equal(lum.value, whole[k][1].value)
    assert max(steps) < n and min(steps) >= 1          # the batches were split
    # the result itself is checked too: (40, 700, 2) floats = 448 kB
    monkeypatch.setenv(MEMORY_BUDGET_ENV, "100 kB")
    with pytest.raises(sc.errors.MemoryBudgetError, match=r"band flux of shape \(40, 700, 2\) would need about "
                                                          r"448 kB, more than the memory budget of 100 kB") as err:
        sc.band_flux(gauss, {"a": SOFT, "b": (150, 200) * u.AA}, distance=np.ones((40, 1)) * d, table=table)
    assert err.value.budget == 100_000 and err.value.estimate == 448_000 and err.value.argument == "dem"


def test_spectrum_grid_checked_against_the_budget(table, monkeypatch):
    from synthcorona.errors import MemoryBudgetError
    from synthcorona.settings import MEMORY_BUDGET_ENV
    from synthcorona.synthesis import spectrum_nbytes

    one = sc.GaussianDEM(6.5, 0.2, 1e51 * u.cm ** -3)
    grid = np.linspace(10, 20, 1000) * u.AA
    need = spectrum_nbytes(1000, prepare(table))
    monkeypatch.setenv(MEMORY_BUDGET_ENV, str(int(need)))
    assert sc.synthesize(one, wavelength=grid, table=table).size == 1000
    monkeypatch.setenv(MEMORY_BUDGET_ENV, str(int(need) - 1))
    with pytest.raises(MemoryBudgetError, match=r"spectrum of 1,000 bins would need about .* change wavelength "
                                                r"\(fewer bins\)") as err:
        sc.synthesize(one, wavelength=grid, table=table)
    assert err.value.estimate == int(need) and err.value.budget == int(need) - 1
    assert err.value.argument == "wavelength"


def test_strongest_lines_names_the_dominant_ion_of_a_band(table):
    # Reference (from memory, textbook EUV spectroscopy, e.g. the 171 Angstrom passbands of solar EUV imagers):
    # at T ~ 0.8 MK (log T = 5.9) the 165-180 Angstrom range is dominated by Fe IX 171.07 Angstrom, and the
    # 190-200 Angstrom range at log T = 6.2 by Fe XII 193.5/195.1 Angstrom.
    import synthcorona as sc
    from synthcorona.synthesis import ion_label, strongest_lines

    fe9 = strongest_lines(sc.IsothermalDEM(10 ** 5.9 * u.K, 1e50 * u.cm ** -3), "165-180 Angstrom", table=table,
                          density=1e9 * u.cm ** -3, n=5)
    assert str(fe9["ion"].values[0]) == "Fe IX" and float(fe9["wavelength"].values[0]) == pytest.approx(171.07, abs=0.02)
    assert np.all(np.diff(fe9["luminosity"].values) <= 0) and fe9.sizes["line"] == 5
    fe12 = strongest_lines(sc.IsothermalDEM(10 ** 6.2 * u.K, 1e50 * u.cm ** -3), "190-200 Angstrom", table=table,
                           density=1e9 * u.cm ** -3, n=3)
    assert str(fe12["ion"].values[0]) == "Fe XII"
    # a line's luminosity is the same line sum synthesize puts in its bin: compare one isolated narrow bin
    spec = sc.synthesize(sc.IsothermalDEM(10 ** 5.9 * u.K, 1e50 * u.cm ** -3), wavelength=[171.0, 171.2] * u.AA,
                         table=table, density=1e9 * u.cm ** -3, edges=True)
    in_bin = fe9["luminosity"].values[(fe9["wavelength"].values > 171.0) & (fe9["wavelength"].values < 171.2)].sum()
    assert float(spec.values[0]) * 0.2 >= in_bin * (1 - 1e-9)        # bin total >= its lines (continuum adds)
    # Roman numerals of the spectroscopic stage
    assert [ion_label(26, s) for s in (1, 4, 9, 14, 17, 24, 26)] == ["Fe I", "Fe IV", "Fe IX", "Fe XIV", "Fe XVII",
                                                                     "Fe XXIV", "Fe XXVI"]
