"""Count-rate conversion between instruments (synthcorona.instruments.conversion).

References: exact algebraic identities (flux and count rate are linear in EM, so conversions must
invert to rounding) and direct calls of the already-tested band_flux / count_rate API.
"""
import astropy.units as u
import pytest

from synthcorona.dem import GaussianDEM, IsothermalDEM
from synthcorona.errors import InputError
from synthcorona.instruments import load_generic
from synthcorona.instruments.conversion import CountConversion, convert_count_rate, default_flux_band, one_channel
from synthcorona.synthesis import band_flux

FLUX = u.erg / u.s / u.cm ** 2
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


def test_default_flux_band_is_the_target_band_or_the_response_range():
    sxt, fe12 = load_generic("sc-softx"), load_generic("sc-fe12")
    assert default_flux_band(one_channel("target", "sc-softx:broad")).energy_kev == pytest.approx(
        tuple(sxt.bands["broad"].to_value(u.keV)), rel=1e-12)
    assert default_flux_band(one_channel("target", "sc-fe12")).energy_kev == pytest.approx(
        tuple(fe12.energy_range.to_value(u.keV)), rel=1e-12)


@pytest.mark.parametrize("call, argument", [
    (lambda: one_channel("source", "sc-softx"), "source"),              # names every band of sc-softx
    (lambda: convert_count_rate(-1 * u.ct / u.s, IsothermalDEM(2 * u.MK, 1e50 * u.cm ** -3), "sc-softx:broad",
                                "sc-fe12"), "rate"),
])
def test_conversion_errors_name_the_argument(call, argument):
    with pytest.raises(InputError) as exc:
        call()
    assert exc.value.argument == argument


def test_reversed_flux_band_is_refused():
    with pytest.raises(InputError, match="lower limit 2.4 keV is not below the upper limit 0.1 keV"):
        CountConversion("sc-softx:broad", "sc-fe12", flux_band=[2.4, 0.1] * u.keV)
