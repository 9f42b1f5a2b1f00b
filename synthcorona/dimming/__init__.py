"""CME coronal dimming forecasts: flare loop evolution, dimming models and their instrument signatures."""
from .mass_removal import (
    expansion_emission_measure_change, mass_to_emission_measure, max_removable_mass, removal_weights, removed_emission_measure, rtv_density,
)
from .profile import cooling_time, dimming_profile, onset_time, recovery_time, refill_time, sound_speed
from .scenario import CME, Corona, DimmingScenario, Flare, Observation, Star
from .lightcurve_model import DimmingLightCurveModel

__all__ = [
    "expansion_emission_measure_change", "mass_to_emission_measure", "max_removable_mass", "removal_weights", "removed_emission_measure", "rtv_density",
    "cooling_time", "dimming_profile", "onset_time", "recovery_time", "refill_time", "sound_speed",
    "CME", "Corona", "DimmingScenario", "Flare", "Observation", "Star", "DimmingLightCurveModel",
]
