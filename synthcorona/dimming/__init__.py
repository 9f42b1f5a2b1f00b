"""CME coronal dimming forecasts: flare loop evolution, dimming models and their instrument signatures.

Figures of these results are in :mod:`synthcorona.plotting.dimming`.
"""
from .detection import detection_probability, minimum_detectable
from .grids import detection_grid
from .lightcurve_model import DimmingLightCurveModel
from .mass_removal import (
    expansion_emission_measure_change,
    mass_to_emission_measure,
    max_removable_mass,
    removal_weights,
    removed_emission_measure,
    rtv_density,
)
from .noise import chunk_size_for, iter_realisations, poisson_counts
from .profile import cooling_time, dimming_profile, onset_time, recovery_time, refill_time, sound_speed
from .scenario import CME, Corona, DimmingScenario, Flare, Observation, Star
from .sizes import realisations_for_precision
from .statistics import likelihood_ratio, window_test
from .timeseries import lightcurve_from_em_series

__all__ = [
    "expansion_emission_measure_change", "mass_to_emission_measure", "max_removable_mass", "removal_weights", "removed_emission_measure", "rtv_density",
    "cooling_time", "dimming_profile", "onset_time", "recovery_time", "refill_time", "sound_speed",
    "CME", "Corona", "DimmingScenario", "Flare", "Observation", "Star", "DimmingLightCurveModel",
    "lightcurve_from_em_series", "detection_grid",
    "detection_probability", "minimum_detectable", "likelihood_ratio", "window_test", "chunk_size_for",
    "iter_realisations", "poisson_counts", "realisations_for_precision",
]
