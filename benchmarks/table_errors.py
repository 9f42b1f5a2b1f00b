"""Measure the error each storage choice of an emissivity table costs. Prints figures.

    python benchmarks/table_errors.py [--chianti PATH] [--table PATH]

1. Continuum energy grid: linear interpolation between the table's energy nodes versus a direct
   fiasco calculation at the geometric midpoints of the nodes (free-free + free-bound + two-photon
   of a few ions), at several temperatures; points within one grid cell of a recombination edge are
   reported separately (an edge inside a cell cannot be represented by any finite grid).
2. int16 log10 packing: the decode error recorded in the table attributes.
3. Temperature grid: an isothermal plasma between two grid nodes (log-T linear weights) versus the
   band kernel at the exact temperature, from a 2x finer table grid is not available here, so the
   curvature of log K(log T) between nodes bounds it: |d2 log K / d logT^2| dlogT^2 / 8.
"""
import argparse
import json
import os
import warnings

import astropy.units as u
import numpy as np


def continuum_interp_error(chianti, ions=("o_7", "o_8", "fe_17", "fe_24", "fe_25", "fe_26"), logTs=(6.0, 6.5, 7.0, 7.5)):
    import fiasco

    from synthcorona.atomic import locate
    from synthcorona.atomic.builder import default_elements, default_energy_grid

    fiasco.log.setLevel("ERROR")
    warnings.filterwarnings("ignore")
    src = locate.find_chianti(chianti)
    h5 = locate.ensure_hdf5(src, default_elements(src.root))
    e = default_energy_grid()
    mid = np.sqrt(e[1:] * e[:-1])
    T = 10 ** np.array(logTs) * u.K
    def cont(ion, energies):
        wl = (energies * u.keV).to(u.AA, equivalencies=u.spectral())
        jac = wl.to_value(u.AA) / energies
        unit = "erg cm3 s-1 Angstrom-1"
        out = ion.free_free(wl).to_value(unit) * 4 * np.pi * ion.ionization_fraction.value[:, None]
        try:
            out = out + ion.free_bound(wl).to_value(unit) * ion.next_ion().ionization_fraction.value[:, None]
        except Exception:
            pass
        return out * jac
    worst, worst_edge = 0.0, 0.0
    for name in ions:
        ion = fiasco.Ion(name, T, hdf5_dbase_root=h5)
        at_nodes = cont(ion, e)
        at_mid = cont(ion, mid)
        interp = 0.5 * (at_nodes[:, 1:] + at_nodes[:, :-1])  # linear in E at the (near-)midpoint
        interp = at_nodes[:, :-1] + (at_nodes[:, 1:] - at_nodes[:, :-1]) * (mid - e[:-1]) / (e[1:] - e[:-1])
        sig = at_mid > 1e-3 * at_mid.max(axis=1, keepdims=True)
        rel = np.abs(interp - at_mid) / np.where(at_mid > 0, at_mid, 1)
        # a cell holds a recombination edge if its log step departs by > 1 % from the mean of its neighbours'
        # (a smooth continuum changes its log slope slowly from cell to cell)
        step = np.diff(np.log(np.maximum(at_nodes, 1e-300)), axis=1)
        trend = 0.5 * (np.roll(step, 1, axis=1) + np.roll(step, -1, axis=1))
        edge = np.abs(step - trend) > 0.01
        edge_near = edge | np.roll(edge, 1, axis=1) | np.roll(edge, -1, axis=1)
        smooth = sig & ~edge_near
        w = float(np.max(np.where(smooth, rel, 0)))
        we = float(np.max(np.where(sig & edge_near, rel, 0)))
        print(f"  {name}: max linear-interpolation error {w*100:.3f} % away from edges, {we*100:.1f} % in edge cells")
        worst, worst_edge = max(worst, w), max(worst_edge, we)
    return worst, worst_edge


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--chianti", default=os.environ.get("SYNTHCORONA_CHIANTI"))
    ap.add_argument("--table")
    args = ap.parse_args()
    import synthcorona as sc
    from synthcorona.synthesis import band_kernel, prepare

    table = sc.load_emissivity(args.table)
    print(f"table: {table!r}")
    print("int16 log10 packing:", json.loads(table.provenance["storage_error"]))
    print("lines kept:", table.provenance.get("lines_kept"), "threshold", table.provenance.get("line_threshold"))
    prep = prepare(table, "coronal", 1e10 * u.cm ** -3)
    bands = np.array([[0.1, 2.4], [0.2, 1.0], [1.0, 10.0], [0.0689, 0.0752], [0.0620, 0.0670]])
    k = band_kernel(bands, prep)
    lk = np.log10(np.maximum(k, 1e-300))
    dx = table.logT[1] - table.logT[0]
    curv = np.abs(lk[:, 2:] - 2 * lk[:, 1:-1] + lk[:, :-2]) / 8  # |f''| dx^2 / 8 in dex
    sig = k[:, 1:-1] > 1e-3 * k.max(axis=1, keepdims=True)
    print(f"temperature grid (step {dx:.3f} dex): isothermal between nodes, worst interpolation error "
          f"{(10**np.max(np.where(sig, curv, 0)) - 1)*100:.1f} % (band kernels 0.1-2.4, 0.2-1, 1-10 keV, 165-180 A, "
          f"185-200 A; significant T only)")
    if args.chianti:
        print("continuum energy grid (1000 log-uniform points, 1 eV - 50 keV):")
        w, we = continuum_interp_error(args.chianti)
        print(f"  worst: {w*100:.3f} % away from recombination edges; {we*100:.1f} % in cells holding an edge")
    else:
        print("continuum energy-grid error: skipped (needs CHIANTI: --chianti or SYNTHCORONA_CHIANTI)")


if __name__ == "__main__":
    main()
