"""The example responses shipped in examples/responses/ (docs/own_response.md) load and hold what they say.

Expected values are computed here independently of synthcorona's readers: the FITS columns are read
with astropy.io.fits, the text table with numpy.loadtxt, and the count rate of a flat photon spectrum
(1 photon s-1 cm-2 keV-1) is integrated by hand: for binned areas the sum of area x bin width, for an
area table linear in wavelength the closed-form integral of A(lambda) hc / lambda^2 d lambda. The
generator script examples/responses/make_example_responses.py is rerun to check that the shipped
files are current.
"""
import importlib.util
import pathlib

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table
from scipy.integrate import quad

import synthcorona as sc
from synthcorona.io.forecast_file import read_forecast_file

HERE = pathlib.Path(__file__).resolve().parents[2] / "examples" / "responses"
ARF, RMF = HERE / "example_softx.arf", HERE / "example_softx.rmf"
TXT, ECSV = HERE / "example_euv_area.txt", HERE / "example_euv_area.ecsv"
FLAT = u.ph / (u.s * u.cm**2 * u.keV)   # unit of the flat photon spectrum used below
HC_KEV_A = float((const.h * const.c).to_value(u.keV * u.AA))


def _flat_spectrum(lo_kev, hi_kev, n):
    """Edges (keV) and photon flux per bin (ph s-1 cm-2) of 1 ph s-1 cm-2 keV-1 on a log grid."""
    edges = np.geomspace(lo_kev, hi_kev, n + 1)
    return edges * u.keV, (1.0 * FLAT * np.diff(edges) * u.keV).to(u.ph / (u.s * u.cm**2))


def _file_columns():
    """ENERG_LO, ENERG_HI, SPECRESP of the ARF and the dense RMF matrix (channels x energies), read here."""
    with fits.open(ARF) as h:
        d = h["SPECRESP"].data
        lo, hi, area = (np.asarray(d[c], dtype=float) for c in ("ENERG_LO", "ENERG_HI", "SPECRESP"))
    with fits.open(RMF) as h:
        m, eb = h["MATRIX"], h["EBOUNDS"].data
        first = int(m.header["TLMIN4"])
        dense = np.zeros((len(eb), len(m.data)))
        for i, row in enumerate(m.data):
            k = 0
            for f, n in zip(np.atleast_1d(row["F_CHAN"])[:row["N_GRP"]], np.atleast_1d(row["N_CHAN"])[:row["N_GRP"]]):
                dense[f - first:f - first + n, i] = row["MATRIX"][k:k + n]
                k += n
        ch_lo, ch_hi = np.asarray(eb["E_MIN"], float), np.asarray(eb["E_MAX"], float)
    return lo, hi, area, dense, ch_lo, ch_hi


def test_arf_integrated_area_equals_the_sum_in_the_file():
    lo, hi, area, *_ = _file_columns()
    expected = np.sum(area * (hi - lo))                                   # cm2 keV, from the FITS columns
    inst = sc.load_instrument(ARF)
    assert inst.name == "EXAMPLE_SOFTX"
    got = np.sum(inst.area.to_value(u.cm**2) * (inst.energy_hi - inst.energy_lo).to_value(u.keV))
    assert got == pytest.approx(expected, rel=1e-12)
    # a flat spectrum of 1 ph s-1 cm-2 keV-1 on a finer grid than the ARF's gives the same number in ct/s
    edges, flux = _flat_spectrum(0.05, 20.0, 3000)
    rate = inst.count_rate_from_spectrum(flux, edges)
    assert rate.to_value(u.ct / u.s) == pytest.approx(expected, rel=1e-9)
    # and the integral of the formula in the file's header, 0.1-10 keV (float32 storage: ~1e-7)
    header_formula = quad(lambda e: 120.0 * np.exp(-(0.25 / e) ** 2) / (1.0 + (e / 2.5) ** 4), 0.1, 10.0, limit=200)[0]
    assert expected == pytest.approx(header_formula, rel=1e-6)


def test_arf_with_rmf_flat_spectrum_count_rates_equal_the_hand_sums():
    lo, hi, area, dense, ch_lo, ch_hi = _file_columns()
    inst = sc.load_instrument(ARF, rmf=RMF, bands={"soft": "0.2-1 keV"})
    assert inst.band_axis == "channel energy" and inst.n_channels == 512
    edges, flux = _flat_spectrum(0.05, 20.0, 3000)
    # every channel: sum over energy bins of area x width x the probability of landing in any channel
    total = np.sum(area * (hi - lo) * dense.sum(axis=0))
    assert inst.count_rate_from_spectrum(flux, edges).to_value(u.ct / u.s) == pytest.approx(total, rel=1e-6)
    # the 0.2-1 keV channels (EBOUNDS) are exactly channels 11-50: no partial channels
    sel = (ch_lo >= 0.2 - 1e-6) & (ch_hi <= 1.0 + 1e-6)
    assert sel.sum() == 40
    soft = np.sum(area * (hi - lo) * dense[sel].sum(axis=0))
    got = inst.count_rate_from_spectrum(flux, edges, band="soft").to_value(u.ct / u.s)
    assert got == pytest.approx(soft, rel=1e-6)


def test_rmf_rows_are_the_gaussian_its_header_states():
    """FWHM(E) = 0.05 keV + 0.05 keV sqrt(E / 1 keV), centred on the bin's geometric-mean energy."""
    lo, hi, _, dense, ch_lo, ch_hi = _file_columns()
    centre_ch = 0.5 * (ch_lo + ch_hi)
    for e_target in (0.5, 1.0, 3.0):
        i = int(np.argmin(np.abs(np.sqrt(lo * hi) - e_target)))
        e = np.sqrt(lo[i] * hi[i])
        p = dense[:, i]
        assert p.sum() == pytest.approx(1.0, abs=1e-4)
        mean = np.sum(p * centre_ch) / p.sum()
        var = np.sum(p * (centre_ch - mean) ** 2) / p.sum() - 0.02**2 / 12   # minus the channel binning
        assert mean == pytest.approx(e, abs=1e-3)
        fwhm = 2 * np.sqrt(2 * np.log(2)) * np.sqrt(var)
        assert fwhm == pytest.approx(0.05 + 0.05 * np.sqrt(e), rel=0.01)


def test_area_table_flat_spectrum_equals_the_closed_form_integral():
    wl, area = np.loadtxt(TXT, unpack=True)                  # Angstrom, cm2 (the '# units:' line)
    a1, a2, l1, l2 = area[:-1], area[1:], wl[:-1], wl[1:]
    slope = (a2 - a1) / (l2 - l1)
    # A linear in lambda on each interval; dE = hc / lambda^2 d lambda
    expected = HC_KEV_A * np.sum((a1 - slope * l1) * (1 / l1 - 1 / l2) + slope * np.log(l2 / l1))
    edges, flux = _flat_spectrum(0.05, 0.1, 4000)
    for path in (TXT, ECSV):
        inst = sc.load_instrument(path)
        assert inst.band_axis == "photon energy"
        got = inst.count_rate_from_spectrum(flux, edges).to_value(u.ct / u.s)
        assert got == pytest.approx(expected, rel=1e-9), path.name
    assert expected == pytest.approx(2.5 * np.sqrt(2 * np.pi) * 5.0 * HC_KEV_A / 180.0**2, rel=0.01)
    assert sc.load_instrument(TXT).effective_area(180 * u.AA).to_value(u.cm**2) == pytest.approx(2.5)


def test_text_and_ecsv_tables_hold_the_same_numbers():
    wl, area = np.loadtxt(TXT, unpack=True)
    t = Table.read(ECSV, format="ascii.ecsv")
    assert t.colnames == ["wavelength", "area"]
    assert t["wavelength"].unit == u.AA and t["area"].unit == u.cm**2
    np.testing.assert_array_equal(np.asarray(t["wavelength"]), wl)
    np.testing.assert_array_equal(np.asarray(t["area"]), area)
    assert TXT.read_text().splitlines()[3] == "# units: Angstrom cm2"


def test_every_file_says_it_is_an_invented_example():
    for path in (ARF, RMF):
        with fits.open(path) as h:
            for hdu in h:
                assert "Invented generic example" in str(hdu.header.get("COMMENT", "")), (path.name, hdu.name)
    assert TXT.read_text().startswith("# Invented generic example")
    assert "Invented generic example" in ECSV.read_text()


def _generator():
    spec = importlib.util.spec_from_file_location("make_example_responses", HERE / "make_example_responses.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_shipped_files_are_what_the_generator_writes(tmp_path):
    written = _generator().write_all(tmp_path)
    assert sorted(p.name for p in written) == sorted(p.name for p in (ARF, RMF, TXT, ECSV))
    for name in ("example_softx.arf", "example_softx.rmf"):
        with fits.open(HERE / name) as shipped, fits.open(tmp_path / name) as fresh:
            assert [h.name for h in shipped] == [h.name for h in fresh]
            for a, b in zip(shipped[1:], fresh[1:]):
                for col in a.columns.names:
                    x, y = a.data[col], b.data[col]
                    if a.columns[col].format.startswith("P"):
                        assert all(np.array_equal(p, q) for p, q in zip(x, y)), (name, col)
                    else:
                        np.testing.assert_array_equal(x, y, err_msg=f"{name} {col}")
    for name in ("example_euv_area.txt", "example_euv_area.ecsv"):
        assert (HERE / name).read_text() == (tmp_path / name).read_text(), name


def test_a_scenario_file_uses_the_files_like_load_instrument(tmp_path):
    """The [[instrument]] keys of docs/own_response.md; paths relative to the scenario file."""
    scenario = tmp_path / "own.toml"
    scenario.write_text(f"""
[star]
distance = "20 pc"
nh = "3e18 cm-2"
[corona]
density = "3e9 cm-3"
[corona.dem]
model = "gaussian"
peak_logT = 6.39794   # 2.5 MK
width_logT = 0.2
total_em = "3e52 cm-3"
[cme]
mass = "1e18 g"
source_temperature = "2.5 MK"
[[instrument]]
name = "my-xray"
arf = "{ARF.as_posix()}"
rmf = "{RMF.as_posix()}"
bands = ["soft"]
[instrument.define_bands]
soft = "0.2-1 keV"
[[instrument]]
name = "my-euv"
table = "{TXT.as_posix()}"
[observation]
exposure = "10 h"
bin_width = "300 s"
pre_event = "3 h"
""")
    inputs = read_forecast_file(scenario)
    rates = inputs.scenario.prepared.rates.quiescent_rate
    assert inputs.scenario.labels == ["my-xray:soft", "my-euv"]
    dem = sc.GaussianDEM(peak_logT=np.log10(2.5e6), width_logT=0.2, total_em=3e52 * u.cm**-3)
    xray = sc.load_instrument(ARF, rmf=RMF, bands={"soft": "0.2-1 keV"})
    euv = sc.load_instrument(TXT)
    kw = dict(distance=20 * u.pc, nh=3e18 * u.cm**-2, density=3e9 * u.cm**-3)   # the [corona] density
    assert rates[0] == pytest.approx(float(xray.count_rate(dem, band="soft", **kw).value), rel=1e-6)
    assert rates[1] == pytest.approx(float(np.squeeze(euv.count_rate(dem, **kw).value)), rel=1e-6)
