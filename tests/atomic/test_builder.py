"""The table builder against direct fiasco calculations (needs CHIANTI: SYNTHCORONA_CHIANTI)."""
import json
import warnings

import astropy.units as u
import numpy as np
import pytest
from conftest import SMALL_ELEMENTS, SMALL_LOGN, SMALL_LOGT

pytestmark = pytest.mark.chianti


@pytest.fixture(scope="module")
def fiasco_db(small_build):
    from synthcorona.atomic import locate

    src = locate.find_chianti(small_build["chianti"])
    return locate.ensure_hdf5(src, SMALL_ELEMENTS)


@pytest.fixture(scope="module")
def built(small_build):
    from synthcorona.emissivity import load_emissivity

    return load_emissivity(small_build["path"])


def _direct_ion(name, h5):
    """A plain fiasco ion with fiasco's default abundance file (which also sets its proton/electron ratio);
    results are divided by ``ion.abundance`` to get values per unit abundance."""
    import fiasco

    fiasco.log.setLevel("ERROR")
    warnings.filterwarnings("ignore")
    return fiasco.Ion(name, 10 ** SMALL_LOGT * u.K, hdf5_dbase_root=h5)


@pytest.mark.parametrize("ion_name, z, stage", [("fe_12", 26, 12), ("fe_18", 26, 18), ("o_7", 8, 7)])
def test_lines_match_direct_fiasco(built, fiasco_db, ion_name, z, stage):
    # Reference: fiasco.Ion.contribution_function (Young et al. 2016, J. Phys. B 49, 074009, eq. 3) called
    # plainly on the same grid and database, with fiasco's own proton/electron ratio, divided by the abundance.
    ion = _direct_ion(ion_name, fiasco_db)
    g = ion.contribution_function(10 ** SMALL_LOGN * u.cm ** -3).to_value(u.erg * u.cm ** 3 / u.s) / ion.abundance.value
    tr = ion.transitions
    bb = tr.is_bound_bound
    up, lo = tr.upper_level[bb], tr.lower_level[bb]
    ref = np.transpose(g, (2, 1, 0))  # (line, n, T)
    m = (built.line_Z == z) & (built.line_ion == stage)
    eps = built.line_emissivity_grid()[m]
    key = {(a, b): i for i, (a, b) in enumerate(zip(up, lo))}
    idx = np.array([key[(a, b)] for a, b in zip(built.line_upper[m], built.line_lower[m])])
    ref = ref[idx]
    strongest = np.argsort(ref.max(axis=(1, 2)))[::-1][:25]
    for j in strongest:
        sig = ref[j] >= 1e-3 * ref[j].max()
        np.testing.assert_allclose(eps[j][sig], ref[j][sig], rtol=0.01)


def test_continuum_matches_direct_fiasco(built, fiasco_db):
    # Reference: fiasco.IonCollection free-free (x 4 pi: fiasco's free_free is per steradian, Phillips et al.
    # 2008 eq. 4.114), free-bound and two-photon of the oxygen ions in the build, per unit abundance.
    import fiasco

    ions = [_direct_ion(f"o_{k}", fiasco_db) for k in (6, 7, 8, 9)]
    coll = fiasco.IonCollection(*ions)
    e = np.array([0.05, 0.2, 0.5, 0.8, 1.5, 3.0])  # keV, away from edges
    wl = (e * u.keV).to(u.AA, equivalencies=u.spectral())
    jac = wl.to_value(u.AA) / e  # per Angstrom -> per keV
    ab = ions[0].abundance.value
    ff = coll.free_free(wl).to_value("erg cm3 s-1 Angstrom-1") * 4 * np.pi * jac / ab
    fb = coll.free_bound(wl).to_value("erg cm3 s-1 Angstrom-1") * jac / ab
    n = 1e10 * u.cm ** -3
    tp = coll.two_photon(wl, n).to_value("erg cm3 s-1 Angstrom-1")[:, 0, :] * jac / ab
    io = built.elements.index("O")
    comp = built.continuum_components()
    x = np.log(built.energy)
    def at(arr):
        return np.array([np.exp(np.interp(np.log(e), x, np.log(np.maximum(row, 1e-300)))) for row in arr])
    got_ff, got_fb = at(comp["ff"][io]), at(comp["fb"][io])
    got_tp = at(comp["2p"][io][list(SMALL_LOGN).index(10.0)])
    for got, ref in ((got_ff, ff), (got_fb, fb), (got_tp, tp)):
        sig = ref >= 1e-4 * ref.max()
        np.testing.assert_allclose(got[sig], ref[sig], rtol=0.01)


def test_dropped_lines_carry_under_one_percent_of_any_window(small_build, built):
    # The criterion: against a no-threshold build of the same ions, the dropped lines carry < 1 % of the
    # emission in any 10 A window, at any grid point where that window is significant (>= 1 % of the line
    # emission of these ions at that point, photospheric abundances).
    from synthcorona.abundances import resolve_abundances
    from synthcorona.atomic.builder import build_table
    from synthcorona.emissivity import load_emissivity

    full_path = build_table(small_build["work"] / "nothreshold.nc", chianti=small_build["chianti"],
                            settings=_settings(small_build, line_threshold=0.0), jobs=1,
                            work_dir=small_build["work"], progress=False)
    full = load_emissivity(full_path)
    assert full.line_wavelength.size > 1.5 * built.line_wavelength.size
    ab = resolve_abundances("photospheric", elements=full.elements)
    a_full = ab.as_array(full.elements)[full.line_element_index]
    a_kept = ab.as_array(built.elements)[built.line_element_index]
    pf = full.line_emissivity_grid() * a_full[:, None, None]
    pk = built.line_emissivity_grid() * a_kept[:, None, None]
    wf, wk = full.line_wavelength, built.line_wavelength
    cf = np.concatenate([np.zeros((1,) + pf.shape[1:]), np.cumsum(pf, axis=0)])
    ck = np.concatenate([np.zeros((1,) + pk.shape[1:]), np.cumsum(pk, axis=0)])
    total = cf[-1]
    starts = np.arange(1.0, 2000.0, 0.5)
    w_full = cf[np.searchsorted(wf, starts + 10.0)] - cf[np.searchsorted(wf, starts)]
    w_kept = ck[np.searchsorted(wk, starts + 10.0)] - ck[np.searchsorted(wk, starts)]
    significant = w_full >= 0.01 * total[None]
    dropped = np.where(significant, (w_full - w_kept) / np.where(w_full > 0, w_full, 1), 0.0)
    assert dropped.max() < 0.01


def _settings(small_build, **kw):
    from synthcorona.atomic.builder import BuildSettings

    s = small_build["settings"]
    return BuildSettings(logT=s.logT, log_density=s.log_density, elements=s.elements, ions=s.ions, **kw)


def test_build_is_resumable_and_records_provenance(small_build, built):
    from synthcorona.atomic.builder import build_table

    again = build_table(small_build["work"] / "again.nc", chianti=small_build["chianti"],
                        settings=_settings(small_build), jobs=1, work_dir=small_build["work"], progress=False)
    import xarray as xr

    ds = xr.open_dataset(again, engine="h5netcdf")
    assert json.loads(ds.attrs["build_seconds_per_ion"]) == {}  # nothing recomputed: all ions from the work dir
    for key in ("chianti_version", "chianti_provenance", "chianti_substituted_ions", "fiasco_version", "ioneq",
                "elements", "line_threshold", "build_date", "content_hash"):
        assert key in built.provenance
    assert built.provenance["chianti_version"] == "10.1"
    # the composite copy's manifest (PROVENANCE.md of ../shared/chianti: Fe XII comes from release 7.0.0)
    from synthcorona.atomic import locate

    src = locate.find_chianti(small_build["chianti"])
    if (src.root / "COMPOSITE_MANIFEST.tsv").is_file():
        assert "fe_12 v7.0.0" in built.provenance["chianti_substituted_ions"]
    else:
        assert built.provenance["chianti_substituted_ions"].startswith("none")


def test_missing_chianti_error_says_where_it_looked(tmp_path, monkeypatch):
    from synthcorona.atomic import locate

    monkeypatch.setenv("SYNTHCORONA_CHIANTI", str(tmp_path / "nowhere"))
    with pytest.raises(locate.ChiantiNotFoundError, match="SYNTHCORONA_CHIANTI.*nowhere"):
        locate.find_chianti()
    (tmp_path / "empty").mkdir()
    with pytest.raises(locate.ChiantiNotFoundError, match="no VERSION file"):
        locate.find_chianti(tmp_path / "empty")
    old = tmp_path / "old"
    old.mkdir()
    (old / "VERSION").write_text("7.1.4\n")
    with pytest.raises(locate.ChiantiNotFoundError, match="version 7.1.4"):
        locate.find_chianti(old)
