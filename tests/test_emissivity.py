"""Density handling of the emissivity table: exact at nodes, log-log between, constant pressure."""
import astropy.units as u
import numpy as np
import pytest

import synthcorona as sc


def test_density_interpolation_exact_at_nodes_and_loglog_between(table):
    raw = table.line_emissivity_grid().astype(np.float64)  # (line, n, T); decoded as float32
    i = int(np.argmax(raw[:, 2, 30]))
    for k, logn in enumerate(table.log_density):
        got = table.line_emissivity(np.full(table.logT.size, logn))
        np.testing.assert_allclose(got[i], raw[i, k], rtol=1e-12)
    # half-way in log n: geometric mean of the neighbours (log-log linear interpolation, our documented rule)
    mid = 0.5 * (table.log_density[1] + table.log_density[2])
    got = table.line_emissivity(np.full(table.logT.size, mid))[i]
    np.testing.assert_allclose(got, np.sqrt(raw[i, 1] * raw[i, 2]), rtol=1e-12)


def test_constant_pressure_uses_density_p_over_t(table):
    # n_e = p / T (common practice: an isobaric corona, e.g. p = n_e T = 1e16 K cm-3)
    p = 1e16 * u.K * u.cm ** -3
    log_n, label = table.density_profile(pressure=p)
    ok = np.isfinite(log_n)
    np.testing.assert_allclose(log_n[ok], 16 - table.logT[ok])
    assert "pressure" in label
    # outside the table's density range the profile is marked invalid, and a DEM there is refused
    dem_cool = sc.IsothermalDEM(temperature=10 ** 4.6 * u.K, total_em=1e50 * u.cm ** -3)  # n_e = 2.5e11: inside
    sc.luminosity(dem_cool, band=(1, 400) * u.AA, table=table, pressure=p)
    dem_hot = sc.IsothermalDEM(temperature=10 ** 8.3 * u.K, total_em=1e50 * u.cm ** -3)  # n_e = 5e7: outside
    with pytest.raises(sc.InputError, match="pressure"):
        sc.luminosity(dem_hot, band=(1, 400) * u.AA, table=table, pressure=p)


def test_provenance_of_embedded_table(table):
    prov = table.provenance
    assert prov["chianti_version"] == "10.1"
    assert "fiasco_version" in prov and "ioneq" in prov and len(prov["content_hash"]) == 64
    assert table.provenance_attrs()["table_content_hash"] == prov["content_hash"]


def test_density_errors_name_the_argument(table):
    dem = sc.GaussianDEM(peak_logT=6.3, width_logT=0.15, total_em=1e51 * u.cm ** -3)
    for bad in (1e7 * u.cm ** -3, 1e13 * u.cm ** -3, -1 * u.cm ** -3):
        with pytest.raises(sc.InputError, match="density"):
            sc.luminosity(dem, band=(0.1, 2.4) * u.keV, table=table, density=bad)
    with pytest.raises(u.UnitsError, match="density"):
        sc.luminosity(dem, band=(0.1, 2.4) * u.keV, table=table, density=1e10 * u.K)
    with pytest.raises(sc.InputError, match="density or pressure"):
        sc.luminosity(dem, band=(0.1, 2.4) * u.keV, table=table, density=1e10 * u.cm ** -3,
                      pressure=1e15 * u.K * u.cm ** -3)
