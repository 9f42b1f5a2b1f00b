"""Peak memory of the whole emissivity table decoded."""
import time

import numpy as np


def run(quick):
    import synthcorona as sc

    t0, c0 = time.perf_counter(), time.process_time()
    table = sc.load_emissivity()
    lines = table.line_emissivity_grid()
    comp = table.continuum_components()
    for k in range(table.log_density.size):
        table.continuum(np.full(table.logT.size, table.log_density[k]))
    nbytes = lines.nbytes + sum(v.nbytes for v in comp.values())
    f64 = lines.size * 8 + sum(v.size * 8 for v in comp.values())
    return {"seconds": time.perf_counter() - t0, "cpu": time.process_time() - c0,
            "note": f"decoded arrays {nbytes / 2**20:.0f} MiB (lines {lines.dtype}); as float64 {f64 / 2**20:.0f} MiB"}


BENCHMARKS = [dict(
    name="table_memory", unit="MB", target=("max", 1000.0), run=run,
    about="peak RSS after loading the default table and decoding every density plane of the lines and every "
          "continuum; the size of the same arrays as float64 in the note",
    source="project memory target (first stated in the former run_all.py): the full table in memory < 1 GB")]
