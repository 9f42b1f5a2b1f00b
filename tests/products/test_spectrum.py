"""Spectra, band fluxes and count rates of a corona (synthcorona.products.spectrum), computed directly.

Expected values: the already-tested synthesis API (band_flux, luminosity, synthesize, count_rate) for
the same DEM, and the Rosner, Tucker & Vaiana (1978) density of synthcorona.dimming.mass_removal.
"""
import pathlib

import astropy.units as u
import numpy as np
import pytest

from synthcorona.dem import GaussianDEM, IsothermalDEM
from synthcorona.dimming.mass_removal import rtv_density
from synthcorona.errors import InputError
from synthcorona.io.forecast_file import read_forecast_file
from synthcorona.products.spectrum import (
    DEFAULT_FLUX_BANDS,
    dem_spectrum,
    emission_density,
    scenario_spectrum,
    table_density,
    wavelength_grid,
)
from synthcorona.synthesis import band_flux, luminosity, synthesize

DATA = pathlib.Path(__file__).parent.parent / "data"
FLUX = u.erg / u.s / u.cm ** 2


@pytest.fixture(scope="module")
def inputs():
    return read_forecast_file(DATA / "small_forecast.toml", build=False)


def test_scenario_spectrum_equals_the_api(inputs, table):
    res = scenario_spectrum(inputs, table=table)
    dem, dist, dens = inputs.corona.dem, inputs.star.distance, 2e9 * u.cm ** -3
    assert list(res.fluxes["band"]) == [b.range_text for b in DEFAULT_FLUX_BANDS]
    for row, band in zip(res.fluxes, DEFAULT_FLUX_BANDS):
        assert row["flux"].to_value(FLUX) == pytest.approx(band_flux(dem, band, dist, density=dens).to_value(FLUX),
                                                           rel=1e-12)
        assert row["luminosity"].to_value(u.erg / u.s) == pytest.approx(
            luminosity(dem, band, density=dens).to_value(u.erg / u.s), rel=1e-12)
    ins = inputs.instruments[0].instrument
    rate = ins.count_rate(dem, distance=dist, nh=inputs.star.nh, band="total", density=dens)
    assert list(res.rates["label"]) == ["sc-fe9"]
    assert res.rates["count_rate"][0].to_value(u.ct / u.s) == pytest.approx(float(np.squeeze(rate.to_value(u.ct / u.s))), rel=1e-12)
    # default [output] spectrum_range 1-400 Angstrom in 0.05 Angstrom bins
    assert res.spectrum.sizes["wavelength"] == np.arange(1.0, 400.0, 0.05).size
    for meta in (res.fluxes.meta, res.rates.meta, res.spectrum.attrs):
        assert meta["table_content_hash"] == table.provenance["content_hash"]
        assert meta["density_from"] == "[corona] density" and meta["scenario_file"].endswith("small_forecast.toml")


def test_dem_spectrum_equals_the_api(table):
    dem = IsothermalDEM(4 * u.MK, 1e51 * u.cm ** -3)
    res = dem_spectrum(dem, 10 * u.pc, bands=["0.1-2.4 keV", [171, 175] * u.AA], density=1e9 * u.cm ** -3,
                       wavelength_range=[150, 200] * u.AA, wavelength_bin=0.1 * u.AA, table=table)
    assert res.rates is None and list(res.fluxes["band"]) == ["0.1-2.4 keV", "171-175 Angstrom"]
    f = band_flux(dem, [171, 175] * u.AA, 10 * u.pc, density=1e9 * u.cm ** -3).to_value(FLUX)
    assert res.fluxes["flux"][1].to_value(FLUX) == pytest.approx(f, rel=1e-12)
    ref = synthesize(dem, wavelength=np.arange(150.0, 200.0, 0.1) * u.AA, density=1e9 * u.cm ** -3,
                     distance=10 * u.pc)
    np.testing.assert_allclose(res.spectrum.values, ref.values, rtol=1e-12)
    assert res.spectrum.attrs["dem"] == repr(dem) and res.meta["density"] == str(1e9 * u.cm ** -3)


def test_emission_density_from_the_file_or_the_scaling_law(inputs, table):
    import dataclasses

    n, src = emission_density(inputs)
    assert n.to_value(u.cm ** -3) == pytest.approx(2e9, rel=1e-15) and src == "[corona] density"
    no_density = dataclasses.replace(inputs, corona=dataclasses.replace(inputs.corona, density=None))
    n, src = emission_density(no_density)
    expected = rtv_density(2 * u.MK, inputs.corona.loop_half_length).to_value(u.cm ** -3)
    assert n.to_value(u.cm ** -3) == pytest.approx(expected, rel=1e-12) and "Rosner" in src
    # the emissivities are taken at the nearest density the table holds
    top = 10 ** float(table.log_density[-1])
    assert table_density(1e20 * u.cm ** -3, table).to_value(u.cm ** -3) == pytest.approx(top, rel=1e-12)
    assert table_density(2e9 * u.cm ** -3, table).to_value(u.cm ** -3) == pytest.approx(2e9, rel=1e-15)


@pytest.mark.parametrize("limits, step, n", [
    ([10, 40] * u.AA, 0.5 * u.AA, 60),
    ([1, 4] * u.nm, 0.5 * u.AA, 60),
    ("10-40 Angstrom", 1 * u.AA, 30),
])
def test_wavelength_grid(limits, step, n):
    g = wavelength_grid(limits, step)
    assert g.unit == u.AA and g.size == n and g[0].value == pytest.approx(10.0, rel=1e-12)


@pytest.mark.parametrize("limits, step, text", [
    ([40, 10] * u.AA, 1 * u.AA, "not below"),
    ([10, 40] * u.AA, 0 * u.AA, "positive bin width"),
    ([10, 40] * u.AA, -0.5 * u.AA, "positive bin width"),
    ([10, 40] * u.AA, np.nan * u.AA, "positive bin width"),
    ([10, 40] * u.AA, [0.5, 1.0] * u.AA, "one positive bin width"),
])
def test_wavelength_grid_errors(limits, step, text):
    with pytest.raises(InputError, match=text) as err:
        wavelength_grid(limits, step, step_name="wavelength_bin")
    if "bin width" in text:
        assert err.value.argument == "wavelength_bin"


def test_wavelength_grid_beyond_the_memory_budget_is_refused_before_allocating(monkeypatch):
    # Before: a fixed cap of 2,000,000 bins; `synthcorona emission` with tiny bins once grew to 23 GB.
    # Expected estimate: 399,000,000 bins x SPECTRUM_BYTES_PER_BIN (200 bytes) = 79.8 GB.
    import tracemalloc

    from synthcorona.errors import MemoryBudgetError
    from synthcorona.settings import MEMORY_BUDGET_ENV

    monkeypatch.setenv(MEMORY_BUDGET_ENV, "4 GB")
    tracemalloc.start()
    try:
        with pytest.raises(MemoryBudgetError, match=r"399,000,000 bins\) would need about 79.8 GB, more than the "
                                                    r"memory budget of 4 GB .*change wavelength_bin \(wider bins\) or "
                                                    r"wavelength_range") as err:
            wavelength_grid([1, 400] * u.AA, 1e-6 * u.AA, name="wavelength_range", step_name="wavelength_bin")
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 1e6                                     # refused before the grid was allocated
    assert (err.value.estimate, err.value.budget, err.value.argument) == (79_800_000_000, 4 * 10**9, "wavelength_bin")
    assert wavelength_grid([1, 400] * u.AA, 1e-4 * u.AA).size == 3_990_000   # 0.8 GB: within this budget


def test_dem_spectrum_names_its_bin_argument(table, monkeypatch):
    from synthcorona.errors import MemoryBudgetError
    from synthcorona.settings import MEMORY_BUDGET_ENV

    monkeypatch.setenv(MEMORY_BUDGET_ENV, "1 GB")
    with pytest.raises(MemoryBudgetError, match="change wavelength_bin") as err:
        dem_spectrum(GaussianDEM(6.5, 0.2, 1e51 * u.cm ** -3), 5 * u.pc, wavelength_bin=1e-6 * u.AA, table=table)
    assert err.value.argument == "wavelength_bin"
