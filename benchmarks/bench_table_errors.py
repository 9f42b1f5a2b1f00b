"""What the storage choices of the emissivity table cost in accuracy (the rows' unit is per cent).

* Temperature grid: an isothermal plasma between two grid nodes (log-T linear weights) against the band kernel at
  the exact temperature. A finer table is not at hand, so the curvature of log K(log T) between nodes bounds it:
  |d2 log K / d logT^2| dlogT^2 / 8. The int16 log10 packing error recorded in the table goes into the note.
* Continuum energy grid: linear interpolation between the table's energy nodes against a direct fiasco
  calculation at the geometric midpoints of the nodes (free-free + free-bound of a few ions) at several
  temperatures. Cells holding a recombination edge are reported separately: no finite grid represents an edge
  inside a cell.
"""
import json
import time

import numpy as np
from common import chianti

BANDS_KEV = np.array([[0.1, 2.4], [0.2, 1.0], [1.0, 10.0], [0.0689, 0.0752], [0.0620, 0.0670]])


def run_tgrid(quick):
    import astropy.units as u

    import synthcorona as sc
    from synthcorona.synthesis import band_kernel, prepare

    table = sc.load_emissivity()
    t0, c0 = time.perf_counter(), time.process_time()
    k = band_kernel(BANDS_KEV, prepare(table, "coronal", 1e10 * u.cm**-3))
    lk = np.log10(np.maximum(k, 1e-300))
    curv = np.abs(lk[:, 2:] - 2 * lk[:, 1:-1] + lk[:, :-2]) / 8  # |f''| dx^2 / 8 in dex
    sig = k[:, 1:-1] > 1e-3 * k.max(axis=1, keepdims=True)
    worst = (10 ** np.max(np.where(sig, curv, 0)) - 1) * 100
    packing = ", ".join(f"{k} {v.split()[-1]}" for k, v in json.loads(table.provenance.get("storage_error", "{}"))
                        .items() if k != "floor")  # values like 'max relative decode error 4.80e-04'
    return {"seconds": time.perf_counter() - t0, "cpu": time.process_time() - c0, "value": worst,
            "note": f"step {table.logT[1] - table.logT[0]:.3f} dex, significant T only; int16 log10 packing, max relative "
                    f"decode error: {packing}; lines kept {table.provenance.get('lines_kept')}"}


def _continuum(ion, energies):
    """ff + fb continuum of one ion [erg cm3 s-1 keV-1] at ``energies`` keV, for every temperature of ``ion``."""
    import astropy.units as u

    wl = (energies * u.keV).to(u.AA, equivalencies=u.spectral())
    unit = "erg cm3 s-1 Angstrom-1"
    out = ion.free_free(wl).to_value(unit) * 4 * np.pi * ion.ionization_fraction.value[:, None]
    try:
        out = out + ion.free_bound(wl).to_value(unit) * ion.next_ion().ionization_fraction.value[:, None]
    except Exception:  # no free-bound data for this ion: free-free only
        pass
    return out * wl.to_value(u.AA) / energies


def run_continuum(quick):
    _, h5 = chianti()
    import astropy.units as u
    import fiasco

    from synthcorona.atomic.builder import default_energy_grid

    fiasco.log.setLevel("ERROR")
    t0, c0 = time.perf_counter(), time.process_time()
    e = default_energy_grid()
    mid = np.sqrt(e[1:] * e[:-1])
    ions = ("o_7", "fe_17") if quick else ("o_7", "o_8", "fe_17", "fe_24", "fe_25", "fe_26")
    T = 10 ** np.array([6.0, 6.5, 7.0, 7.5]) * u.K
    worst, worst_edge, per_ion = 0.0, 0.0, []
    for name in ions:
        ion = fiasco.Ion(name, T, hdf5_dbase_root=h5)
        at_nodes, at_mid = _continuum(ion, e), _continuum(ion, mid)
        interp = at_nodes[:, :-1] + (at_nodes[:, 1:] - at_nodes[:, :-1]) * (mid - e[:-1]) / (e[1:] - e[:-1])
        sig = at_mid > 1e-3 * at_mid.max(axis=1, keepdims=True)
        rel = np.abs(interp - at_mid) / np.where(at_mid > 0, at_mid, 1)
        # a cell holds a recombination edge if its log step departs by > 1 % from the mean of its neighbours'
        # (a smooth continuum changes its log slope slowly from cell to cell)
        step = np.diff(np.log(np.maximum(at_nodes, 1e-300)), axis=1)
        edge = np.abs(step - 0.5 * (np.roll(step, 1, axis=1) + np.roll(step, -1, axis=1))) > 0.01
        edge_near = edge | np.roll(edge, 1, axis=1) | np.roll(edge, -1, axis=1)
        w, we = float(np.max(np.where(sig & ~edge_near, rel, 0))), float(np.max(np.where(sig & edge_near, rel, 0)))
        per_ion.append(f"{name} {w * 100:.3f}%")
        worst, worst_edge = max(worst, w), max(worst_edge, we)
    return {"seconds": time.perf_counter() - t0, "cpu": time.process_time() - c0, "value": worst * 100,
            "note": f"away from recombination edges ({', '.join(per_ion)}); {worst_edge * 100:.1f}% in cells "
                    f"holding an edge; {e.size} log-uniform energies"}


BENCHMARKS = [
    dict(name="table_tgrid_error", unit="%", target=None, run=run_tgrid,
         about="worst error of an isothermal band kernel between two log-T nodes (curvature bound) for the bands "
               "0.1-2.4, 0.2-1, 1-10 keV, 165-180 A, 185-200 A at 1e10 cm-3; int16 packing error in the note",
         source="no target: the accuracy cost of the table's temperature grid"),
    dict(name="table_continuum_error", unit="%", target=None, run=run_continuum,
         about="worst linear-interpolation error of the continuum (ff + fb of O VII, O VIII, Fe XVII, Fe XXIV-XXVI "
               "at 10^6-10^7.5 K) between the table's energy nodes, against fiasco at the midpoints; needs CHIANTI",
         source="no target: the accuracy cost of the table's energy grid"),
]
