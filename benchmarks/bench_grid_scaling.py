"""Cost of a detection grid per point: 8 masses against 2."""
import numpy as np
from common import best_of, dimming_scenario


def _grid(quick, k):
    import astropy.units as u

    from synthcorona.dimming import detection_grid

    scenario = dimming_scenario()
    masses = np.geomspace(1e16, 1e18, k) * u.g
    t, c, _ = best_of(lambda: detection_grid(scenario, mass=masses, n_realisations=1000, band="sc-fe12"), n=1)
    return {"seconds": t, "cpu": c, "note": f"{k} grid points, {t / k:.2f} s per point"}


BENCHMARKS = [dict(
    name="grid_scaling", unit="s", target=None, run=lambda quick: _grid(quick, 8), baseline=lambda quick: _grid(quick, 2),
    about="detection_grid over 8 masses vs over 2 masses (1000 realisations each, sc-fe12); ratio = time(2)/time(8): "
          "0.25 would be linear in the grid size, 1 = no cost per point (the event-free calibration is shared "
          "along a mass axis)",
    source="no target: a figure to watch")]
