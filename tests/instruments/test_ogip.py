"""Tests of synthcorona.instruments.ogip (OGIP ARF/RMF read and write) and of OGIP files through
synthcorona.instruments.readers.load_instrument.

File-format references: OGIP Calibration Memo CAL/GEN/92-002 (George et al. 1992) and
its addendum CAL/GEN/92-002a.  Expected numbers are analytic integrals computed here with
numpy, or values copied from the files written in the test.
"""
import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits

from synthcorona.constants import HC_KEV_ANGSTROM
from synthcorona.errors import InputError, InstrumentFileError, InstrumentFileWarning
from synthcorona.instruments.ogip import read_arf, read_rmf, write_arf, write_rmf
from synthcorona.instruments.readers import load_instrument

PH = u.ph / (u.s * u.cm**2)


def _f32(x):
    """Values exactly representable in the 4-byte reals of an OGIP file."""
    return np.asarray(x, dtype=np.float32).astype(float)


# 300 energy bins 0.2-10 keV; area a smooth bump (cm^2), all float32-exact
EDGES = _f32(np.geomspace(0.2, 10.0, 301))
ELO, EHI = EDGES[:-1], EDGES[1:]
AREA = _f32(400.0 * np.exp(-0.5 * (np.log(np.sqrt(ELO * EHI) / 1.5) / 0.6) ** 2) + 5.0)


def _gaussian_rmf(n_ch=200, sigma_rel=0.05):
    """Gaussian redistribution (float32), truncated at +-4 sigma, plus a weak 'escape peak' 1.7 keV lower
    (which gives two channel groups per row where it lies in range); each energy column sums to 1."""
    ch_edges = _f32(np.linspace(0.1, 11.0, n_ch + 1))
    cc = 0.5 * (ch_edges[:-1] + ch_edges[1:])
    ec = np.sqrt(ELO * EHI)
    sig = sigma_rel * ec + 0.02
    d = (cc[:, None] - ec[None, :]) / sig[None, :]
    G = np.where(np.abs(d) < 4, np.exp(-0.5 * d**2), 0.0)
    d2 = (cc[:, None] - (ec[None, :] - 1.7)) / 0.05
    G += np.where(np.abs(d2) < 3, 0.05 * np.exp(-0.5 * d2**2), 0.0)
    G /= G.sum(axis=0, keepdims=True)
    G = G.astype(np.float32).astype(float)
    return G, ch_edges[:-1], ch_edges[1:]


def _powerlaw_per_bin(lo, hi, K=2.0, gamma=1.7):
    """Analytic integral of K E^-gamma (photons s^-1 cm^-2 keV^-1) over each bin: photons s^-1 cm^-2."""
    return K / (1 - gamma) * (hi ** (1 - gamma) - lo ** (1 - gamma))


# ---------------------------------------------------------------- round trip
def test_arf_rmf_round_trip_powerlaw(tmp_path):
    G, clo, chi = _gaussian_rmf()
    arf = write_arf(tmp_path / "g.arf", ELO * u.keV, EHI * u.keV, AREA * u.cm**2, telescope="GENERIC",
                    instrument="CCD")
    rmf = write_rmf(tmp_path / "g.rmf", ELO * u.keV, EHI * u.keV, G, clo * u.keV, chi * u.keV, telescope="GENERIC",
                    instrument="CCD")
    # the file really uses variable-length groups, some rows with two groups
    with fits.open(rmf) as h:
        assert h["MATRIX"].columns["MATRIX"].format.startswith("P")
        assert h["MATRIX"].data["N_GRP"].max() == 2
        assert h["MATRIX"].header["HDUCLAS3"] == "REDIST"
        assert "CHECKSUM" in h["MATRIX"].header
    r = read_rmf(rmf)
    np.testing.assert_array_equal(r.matrix.toarray(), G)          # float32-exact values
    assert r.first_channel == 1 and r.channel[0] == 1

    inst = load_instrument(arf, rmf=rmf, bands={"soft": [0.5, 2.0] * u.keV})
    assert inst.name == "GENERIC_CCD"
    assert len(inst.provenance["files"]) == 2 and len(inst.provenance["files"][1]["sha256"]) == 64
    # input grid: each instrument bin split in 4 (aligned), photons per bin = analytic power-law integral
    fine = np.concatenate([np.linspace(a, b, 5)[:-1] for a, b in zip(ELO, EHI)] + [[EHI[-1]]])
    flux = _powerlaw_per_bin(fine[:-1], fine[1:])
    counts = inst.fold(flux * PH, fine * u.keV).value
    # independent numpy reference: counts_c = sum_j G_cj A_j * integral_j K E^-gamma dE
    expected = G @ (AREA * _powerlaw_per_bin(ELO, EHI))
    np.testing.assert_allclose(counts, expected, rtol=1e-9, atol=1e-12 * expected.max())
    # total: columns of G sum to 1 (float32 round-off ~1e-7), so the total is the analytic
    # integral of the piecewise-constant area times the power law
    total_expected = np.sum(AREA * _powerlaw_per_bin(ELO, EHI))
    np.testing.assert_allclose(inst.count_rate_from_spectrum(flux * PH, fine * u.keV).value, total_expected,
                               rtol=1e-6)
    # channel band 0.5-2 keV: channel fractions of the channels cut by the band edges (hand rule in band_matrix)
    frac = np.clip(np.minimum(chi, 2.0) - np.maximum(clo, 0.5), 0, None) / (chi - clo)
    np.testing.assert_allclose(inst.count_rate_from_spectrum(flux * PH, fine * u.keV, band="soft").value,
                               frac @ expected, rtol=1e-9)


def test_arf_round_trip_values_and_keywords(tmp_path):
    p = write_arf(tmp_path / "a.arf", ELO * u.keV, EHI * u.keV, AREA * u.cm**2)
    a = read_arf(p)
    np.testing.assert_array_equal(a.energy_lo.value, ELO)
    np.testing.assert_array_equal(a.area.to_value(u.cm**2), AREA)
    for k, v in (("HDUCLASS", "OGIP"), ("HDUCLAS1", "RESPONSE"), ("HDUCLAS2", "SPECRESP")):   # CAL/GEN/92-002 s.4
        assert a.meta[k] == v
    inst = load_instrument(p)
    # flat 1 ph/s/cm2/keV: count rate = sum A_i dE_i (analytic integral of the piecewise-constant area)
    rate = inst.count_rate_from_spectrum(np.diff(EDGES) * PH, EDGES * u.keV)
    np.testing.assert_allclose(rate.value, np.sum(AREA * (EHI - ELO)), rtol=1e-12)
    assert inst.band_axis == "photon energy"


def test_arf_written_from_wavelength_bins(tmp_path):
    lam = np.array([10.0, 20.0, 40.0])
    p = write_arf(tmp_path / "w.arf", lam[:-1] * u.AA, lam[1:] * u.AA, [3.0, 7.0] * u.cm**2, double=True)
    a = read_arf(p)
    # 20-40 A is 0.30996-0.61992 keV and comes first in energy order, with its area 7 cm^2
    np.testing.assert_allclose(a.energy_lo.value, [HC_KEV_ANGSTROM / 40, HC_KEV_ANGSTROM / 20], rtol=1e-14)
    np.testing.assert_allclose(a.area.value, [7.0, 3.0])


def _rmf_by_hand(path, rows, ebounds_channels, tlmin=None, matrix_format=None, fchan_format=None, ebounds=True):
    """Write an RMF with astropy directly (not with write_rmf): rows = list of (N_GRP, F_CHAN, N_CHAN, MATRIX)."""
    n = len(rows)
    e = np.arange(1.0, n + 2.0)
    ngrp = np.array([r[0] for r in rows], dtype=np.int16)
    fch = np.array([r[1] for r in rows])
    nch = np.array([r[2] for r in rows])
    mat = np.array([r[3] for r in rows], dtype=np.float32)
    cols = [fits.Column("ENERG_LO", "E", unit="keV", array=e[:-1]),
            fits.Column("ENERG_HI", "E", unit="keV", array=e[1:]),
            fits.Column("N_GRP", "I", array=ngrp),
            fits.Column("F_CHAN", fchan_format or ("I" if fch.ndim == 1 else f"{fch.shape[1]}I"), array=fch),
            fits.Column("N_CHAN", fchan_format or ("I" if nch.ndim == 1 else f"{nch.shape[1]}I"), array=nch),
            fits.Column("MATRIX", matrix_format or f"{mat.shape[1]}E", array=mat)]
    h = fits.BinTableHDU.from_columns(cols, name="MATRIX")
    h.header["HDUCLASS"], h.header["HDUCLAS1"], h.header["HDUCLAS2"] = "OGIP", "RESPONSE", "RSP_MATRIX"
    h.header["HDUCLAS3"] = "REDIST"
    if tlmin is not None:
        h.header["TLMIN4"] = tlmin
    nc = len(ebounds_channels)
    eb = fits.BinTableHDU.from_columns([
        fits.Column("CHANNEL", "I", array=np.asarray(ebounds_channels)),
        fits.Column("E_MIN", "E", unit="keV", array=np.arange(nc) + 1.0),
        fits.Column("E_MAX", "E", unit="keV", array=np.arange(nc) + 2.0)], name="EBOUNDS")
    fits.HDUList([fits.PrimaryHDU(), h] + ([eb] if ebounds else [])).writeto(path)
    return path


def test_rmf_scalar_groups_first_channel_0(tmp_path):
    # one group per row, scalar F_CHAN/N_CHAN, fixed-length MATRIX of 3 (padded); channels 0..3 (TLMIN=0)
    rows = [(1, 0, 2, [0.7, 0.3, 0.0]), (1, 1, 3, [0.2, 0.5, 0.3]), (0, 0, 0, [0.0, 0.0, 0.0])]
    p = _rmf_by_hand(tmp_path / "s.rmf", rows, [0, 1, 2, 3], tlmin=0)
    r = read_rmf(p)
    expected = np.array([[0.7, 0, 0], [0.3, 0.2, 0], [0, 0.5, 0], [0, 0.3, 0]])   # written above, by hand
    np.testing.assert_allclose(r.matrix.toarray(), expected, rtol=1e-7)
    assert r.first_channel == 0


def test_rmf_vector_groups_first_channel_1(tmp_path):
    # two groups per row in fixed-length vector columns; channels 1..5 (TLMIN=1); unused group slots padded
    rows = [(2, [1, 4], [1, 2], [0.5, 0.25, 0.25]), (1, [2, 0], [2, 0], [0.6, 0.4, 0.0])]
    p = _rmf_by_hand(tmp_path / "v.rmf", rows, [1, 2, 3, 4, 5], tlmin=1)
    r = read_rmf(p)
    expected = np.array([[0.5, 0], [0, 0.6], [0, 0.4], [0.25, 0], [0.25, 0]])
    np.testing.assert_allclose(r.matrix.toarray(), expected, rtol=1e-7)


def test_rmf_without_tlmin_uses_ebounds_first_channel(tmp_path):
    rows = [(1, 0, 1, [1.0]), (1, 1, 1, [1.0])]
    p = _rmf_by_hand(tmp_path / "n.rmf", rows, [0, 1])
    r = read_rmf(p)
    np.testing.assert_allclose(r.matrix.toarray(), np.eye(2))
    assert r.first_channel == 0
    assert any("TLMIN" in n for n in r.meta["notes"])


def test_full_matrix_rmf_alone(tmp_path):
    G, clo, chi = _gaussian_rmf()
    M = G * AREA[None, :]                                   # response including area (cm^2)
    p = write_rmf(tmp_path / "full.rsp", ELO * u.keV, EHI * u.keV, M, clo * u.keV, chi * u.keV, includes_area=True)
    inst = load_instrument(p)
    flux = _powerlaw_per_bin(ELO, EHI)
    counts = inst.fold(flux * PH, EDGES * u.keV).value
    expected = M.astype(np.float32).astype(float) @ flux    # independent: the stored matrix times the photons
    np.testing.assert_allclose(counts, expected, rtol=1e-9, atol=1e-12 * expected.max())
    with pytest.raises(InstrumentFileError, match="count the area twice"):
        load_instrument(write_arf(tmp_path / "x.arf", ELO * u.keV, EHI * u.keV, AREA * u.cm**2), rmf=p)


def test_redistribution_rmf_alone_needs_arf(tmp_path):
    G, clo, chi = _gaussian_rmf()
    p = write_rmf(tmp_path / "r.rmf", ELO * u.keV, EHI * u.keV, G, clo * u.keV, chi * u.keV)
    with pytest.raises(InstrumentFileError, match="effective area is also needed"):
        load_instrument(p)


def test_arf_rmf_grid_mismatch(tmp_path):
    G, clo, chi = _gaussian_rmf()
    rmf = write_rmf(tmp_path / "r.rmf", ELO * u.keV, EHI * u.keV, G, clo * u.keV, chi * u.keV)
    arf = write_arf(tmp_path / "a.arf", ELO * 1.01 * u.keV, EHI * 1.01 * u.keV, AREA * u.cm**2)
    with pytest.raises(InstrumentFileError, match="energy grids differ at bin 0"):
        load_instrument(arf, rmf=rmf)


# ---------------------------------------------------------------- malformed OGIP files
def _arf_by_hand(path, lo, hi, area, units=("keV", "keV", "cm**2"), names=("ENERG_LO", "ENERG_HI", "SPECRESP")):
    cols = [fits.Column(n, "E", unit=un, array=np.asarray(v)) for n, un, v in zip(names, units, (lo, hi, area))]
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols, name="SPECRESP")]).writeto(path)
    return path


@pytest.mark.parametrize("kwargs,match", [
    (dict(names=("ENERG_LO", "ENERG_HI", "AREA")), r"missing column\(s\) \['SPECRESP'\]"),
    (dict(area=[1.0, -2.0, 1.0]), r"negative effective area SPECRESP\[1\] = -2 cm\^2"),
    (dict(lo=[1.0, 3.0, 2.0], hi=[2.0, 4.0, 3.0]), "not sorted in increasing energy"),
    (dict(lo=[1.0, 1.5, 3.0], hi=[2.0, 3.0, 4.0]), "energy bins overlap: bin 0"),
    (dict(units=("keV", "keV", "keV")), "column SPECRESP has units 'keV', which cannot be converted to 'cm2'"),
    (dict(units=("cm", "keV", "cm**2")), "column ENERG_LO has units 'cm'"),
    (dict(hi=[2.0, 1.0, 4.0]), r"ENERG_HI = 1 keV <= ENERG_LO = 2 keV"),
])
def test_malformed_arf(tmp_path, kwargs, match):
    args = dict(lo=[1.0, 2.0, 3.0], hi=[2.0, 3.0, 4.0], area=[1.0, 2.0, 1.0])
    args.update(kwargs)
    p = _arf_by_hand(tmp_path / "bad.arf", **args)
    with pytest.raises(InstrumentFileError, match=match) as exc:
        read_arf(p)
    assert "bad.arf" in str(exc.value)


def test_arf_in_other_units_is_converted(tmp_path):
    p = _arf_by_hand(tmp_path / "ev.arf", [1000.0, 2000.0], [2000.0, 3000.0], [0.01, 0.02], units=("eV", "eV", "m**2"))
    a = read_arf(p)
    np.testing.assert_allclose(a.energy_lo.to_value(u.keV), [1.0, 2.0])
    np.testing.assert_allclose(a.area.to_value(u.cm**2), [100.0, 200.0], rtol=1e-6)   # 1 m^2 = 1e4 cm^2


def test_truncated_fits(tmp_path):
    p = write_arf(tmp_path / "t.arf", ELO * u.keV, EHI * u.keV, AREA * u.cm**2)
    raw = p.read_bytes()
    for cut, name in ((len(raw) - 1000, "cut_data.arf"), (2880 + 500, "cut_header.arf"), (100, "cut_primary.arf")):
        q = tmp_path / name
        q.write_bytes(raw[:cut])
        with pytest.raises(InstrumentFileError, match="truncated") as exc:
            read_arf(q)
        assert name in str(exc.value)
        with pytest.raises(InstrumentFileError, match="truncated"):
            load_instrument(q)


def test_checksum_mismatch_warns(tmp_path):
    p = write_arf(tmp_path / "c.arf", ELO * u.keV, EHI * u.keV, AREA * u.cm**2)
    raw = bytearray(p.read_bytes())
    raw[2 * 2880 + 10] ^= 0x01                 # flip one bit in the table data
    p.write_bytes(bytes(raw))
    with pytest.warns(InstrumentFileWarning, match="c.arf"):
        read_arf(p)


def test_missing_file_and_wrong_kind(tmp_path):
    with pytest.raises(InstrumentFileError, match="does not exist") as exc:
        read_arf(tmp_path / "nothing.arf")
    assert "nothing.arf" in str(exc.value)
    with pytest.raises(InstrumentFileError, match="does not exist"):
        load_instrument(tmp_path / "nothing.fits")
    rmf_only = write_rmf(tmp_path / "r.rmf", [1.0] * u.keV, [2.0] * u.keV, np.ones((1, 1)), [1.0] * u.keV,
                         [2.0] * u.keV)
    with pytest.raises(InstrumentFileError, match="no SPECRESP extension"):
        read_arf(rmf_only)
    assert isinstance(InstrumentFileError("x"), InputError)


@pytest.mark.parametrize("fname, rows, channels, ebounds, match", [
    # channel outside EBOUNDS
    ("oob.rmf", [(1, 3, 2, [0.5, 0.5])], [1, 2, 3], True, r"oob.rmf.*addresses channel 3..4, outside the channels 1..3"),
    # MATRIX shorter than the groups
    ("short.rmf", [(1, 1, 3, [0.5, 0.5])], [1, 2, 3], True, r"short.rmf.*MATRIX has 2 elements but its groups"),
    # EBOUNDS missing
    ("noeb.rmf", [(1, 1, 1, [1.0])], [1], False, r"noeb.rmf' has no EBOUNDS extension"),
])
def test_malformed_rmf(tmp_path, fname, rows, channels, ebounds, match):
    p = _rmf_by_hand(tmp_path / fname, rows, channels, tlmin=1, ebounds=ebounds)
    with pytest.raises(InstrumentFileError, match=match):
        read_rmf(p)


def test_rmf_missing_column(tmp_path):
    # a required column missing
    with fits.open(_rmf_by_hand(tmp_path / "ok.rmf", [(1, 1, 1, [1.0])], [1], tlmin=1)) as h:
        cols = [c for c in h["MATRIX"].columns if c.name != "N_GRP"]
        fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols, name="MATRIX"),
                      h["EBOUNDS"].copy()]).writeto(tmp_path / "nogrp.rmf")
    with pytest.raises(InstrumentFileError, match=r"nogrp.rmf', extension MATRIX: missing column\(s\) \['N_GRP'\]"):
        read_rmf(tmp_path / "nogrp.rmf")
