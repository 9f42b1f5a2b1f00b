"""Decoding the embedded table on demand gives the numbers of the full decode, bit for bit.

The reference is the evaluation as synthcorona did it before decoding on demand (commit eae582f,
``EmissivityTable.line_emissivity`` and ``_interp_density``): each density plane the request needs
decoded to float32 values, ``eps0**(1-w) * eps1**w`` evaluated on every pair of positive values,
and the continua decoded whole. It is reproduced here from the table's stored codes with the public
decode functions of :mod:`synthcorona.io.table_file`, and every comparison is exact equality.
"""
import functools

import astropy.units as u
import numpy as np
import pytest

import synthcorona as sc
from synthcorona.emissivity import EmissivityTable
from synthcorona.io.table_file import PACKED_VARS, decode_full, decode_plane, plane_codes, read_table

#: Densities and pressures of the comparison: table nodes (w = 0; w = 1 at the top node), between nodes,
#: and constant pressure (a different density interval and weight at every temperature; at 1e15 K cm-3
#: the hottest temperatures fall below the table and are NaN).
CASES = {
    "n=1e8 (bottom node)": dict(density=1e8 * u.cm**-3),
    "n=1e10 (node)": dict(density=1e10 * u.cm**-3),
    "n=3e9 (between)": dict(density=3e9 * u.cm**-3),
    "n=2.5e11 (between)": dict(density=2.5e11 * u.cm**-3),
    "n=1e12 (top node)": dict(density=1e12 * u.cm**-3),
    "p=10**16.5": dict(pressure=10**16.5 * u.K * u.cm**-3),
    "p=1e15 (NaN above the table)": dict(pressure=1e15 * u.K * u.cm**-3),
}
BANDS = {"a": (0.1, 2.4) * u.keV, "b": (0.2, 1.0) * u.keV, "c": (6, 10) * u.keV, "d": (171, 175) * u.AA,
         "e": (10, 100) * u.AA}


@functools.cache
def _raw():
    """The embedded table's stored codes (no decoding) and attributes."""
    return read_table(sc.load_emissivity().path, verify=False, lazy=PACKED_VARS)


def _weights(log_density, log_n):
    finite = np.isfinite(log_n)
    x = np.clip(np.where(finite, log_n, log_density[0]), log_density[0], log_density[-1])
    i = np.clip(np.searchsorted(log_density, x, side="right") - 1, 0, log_density.size - 2)
    return finite, i, (x - log_density[i]) / (log_density[i + 1] - log_density[i])


@functools.cache
def _reference_plane(k):
    le = _raw()["line_emissivity"]
    return decode_plane(le.values, le.attrs, k)


def reference_lines(log_density, log_n):
    finite, i, w = _weights(log_density, log_n)
    planes = {k: _reference_plane(int(k)) for k in np.unique(np.concatenate([i, i + 1]))}
    t = np.arange(log_n.size)
    a0 = np.empty((_raw().sizes["line"], t.size))
    a1 = np.empty_like(a0)
    for k, plane in planes.items():
        for a, m in ((a0, i == k), (a1, i + 1 == k)):
            if m.all():
                a[...] = plane
            elif m.any():
                a[:, m] = plane[:, t[m]]
    out = np.where(w == 0, a0, np.where(w == 1, a1, 0.0))
    r, c = np.nonzero((a0 > 0) & (a1 > 0))
    wc = w[c]
    out[r, c] = a0[r, c] ** (1 - wc) * a1[r, c] ** wc
    if not finite.all():
        out[:, ~finite] = np.nan
    return out


@functools.cache
def _reference_continua():
    return {v: decode_full(_raw()[v].values, _raw()[v].attrs) for v in ("cont_ff", "cont_fb", "cont_2p")}


def reference_continuum(log_density, log_n):
    c = _reference_continua()
    finite, i, w = _weights(log_density, log_n)
    arr_m = np.moveaxis(np.moveaxis(c["cont_2p"], 3, 1), (2, 3), (-2, -1))  # (el, E, n, T)
    t_idx = np.arange(log_n.size)
    a0, a1 = arr_m[..., i, t_idx], arr_m[..., i + 1, t_idx]
    with np.errstate(divide="ignore", invalid="ignore"):
        tp = np.where((a0 > 0) & (a1 > 0), a0 ** (1 - w) * a1 ** w, np.where(w == 0, a0, np.where(w == 1, a1, 0.0)))
    tp = np.where(finite, tp, np.nan)
    return c["cont_ff"] + c["cont_fb"] + np.moveaxis(tp, 1, 2)


class _Table(EmissivityTable):
    """The embedded table under its own cache identity (kernels are cached per content hash)."""

    def __init__(self, label, lazy=PACKED_VARS):
        path = sc.load_emissivity().path
        super().__init__(read_table(path, verify=False, lazy=lazy), path)
        self.label = label

    @property
    def content_hash(self):
        return f"{self.label}-{super().content_hash}"


class ReferenceTable(_Table):
    """Lines and continuum evaluated the reference way."""

    def line_emissivity(self, log_n):
        return reference_lines(self.log_density, log_n)

    def continuum(self, log_n):
        return reference_continuum(self.log_density, log_n)


@pytest.fixture(scope="module")
def tables():
    return _Table("on-demand"), ReferenceTable("reference")


def _same(a, b):
    a, b = np.asarray(a), np.asarray(b)
    return a.shape == b.shape and a.dtype == b.dtype and a.tobytes() == b.tobytes()


def test_planes_decoded_one_at_a_time_equal_the_full_decode():
    for name in ("line_emissivity", "cont_2p"):
        v = _raw()[name]
        full = decode_full(v.values, v.attrs, dtype=np.float32)
        for k in range(v.shape[1]):
            assert plane_codes(v.values, v.attrs, k).dtype == np.int16
            assert _same(decode_plane(v.values, v.attrs, k), full[:, k]), (name, k)


@pytest.mark.parametrize("case", list(CASES))
def test_lines_and_continuum_equal_the_reference(tables, case):
    new, _ = tables
    log_n, _ = new.density_profile(**CASES[case])
    assert _same(new.line_emissivity(log_n), reference_lines(new.log_density, log_n))
    assert _same(new.continuum(log_n), reference_continuum(new.log_density, log_n))


def test_table_decoded_in_memory_gives_the_same_lines(tables):
    new, _ = tables
    eager = _Table("eager", lazy=())
    for case in ("n=3e9 (between)", "p=10**16.5"):
        log_n, _ = new.density_profile(**CASES[case])
        assert _same(eager.line_emissivity(log_n), new.line_emissivity(log_n)), case


@pytest.mark.parametrize("case", list(CASES))
def test_band_flux_spectra_and_responses_equal_the_reference(tables, case):
    new, ref = tables
    kw = CASES[case]
    if case.startswith("p=1e15"):  # the DEM must stay where p/T lies inside the table
        dems = sc.IsothermalDEM(temperature=10 ** np.array([6.0, 6.43, 6.8]) * u.K,
                                total_em=np.array([1e50, 3e51, 1e52]) * u.cm**-3)
        one = sc.IsothermalDEM(temperature=10**6.37 * u.K, total_em=1e51 * u.cm**-3)
    else:
        dems = sc.GaussianDEM(peak_logT=np.array([6.0, 6.4, 6.9, 7.3]), width_logT=np.array([0.2, 0.1, 0.25, 0.15]),
                              total_em=np.array([1e50, 3e51, 1e52, 2e50]) * u.cm**-3)
        one = sc.GaussianDEM(peak_logT=6.3, width_logT=0.2, total_em=1e51 * u.cm**-3)
    for photons in (False, True):
        got = sc.band_flux(dems, BANDS, 10 * u.pc, table=new, photons=photons, **kw)
        want = sc.band_flux(dems, BANDS, 10 * u.pc, table=ref, photons=photons, **kw)
        assert got.unit == want.unit and _same(got.value, want.value), photons
    for grid in (dict(wavelength=np.arange(5, 250, 0.05) * u.AA), dict(energy=np.linspace(0.2, 8, 3000) * u.keV)):
        assert _same(sc.synthesize(one, table=new, **grid, **kw).values,
                     sc.synthesize(one, table=ref, **grid, **kw).values), list(grid)
    if case in ("n=1e10 (node)", "n=3e9 (between)", "p=10**16.5"):
        for name in ("sc-softx", "sc-fe9"):
            ins = sc.load_generic(name)
            assert _same(ins.temperature_response(table=new, **kw).values,
                         ins.temperature_response(table=ref, **kw).values), name
