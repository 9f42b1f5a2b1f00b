"""synthcorona: synthetic X-ray/EUV emission of stellar coronae from CHIANTI atomic data.

The main path (tables, DEMs, synthesis, instruments) never imports fiasco; only
:mod:`synthcorona.atomic.builder` does, lazily, when a table is built.
"""
from .abundances import AbundanceSet, available_sets, fip_bias, resolve_abundances, scale_metallicity
from .dem import DEM, GaussianDEM, IsothermalDEM, MultiComponentDEM, PowerLawDEM, TabulatedDEM
from .emissivity import EmissivityTable, load_emissivity
from .errors import InputError, TableFileError
from .instruments import Instrument, build_instrument, list_generic, load_generic, load_instrument
from .synthesis import band_flux, luminosity, radiative_loss, synthesize

__version__ = "0.1.0"

__all__ = [
    "AbundanceSet", "available_sets", "fip_bias", "resolve_abundances", "scale_metallicity",
    "DEM", "GaussianDEM", "IsothermalDEM", "MultiComponentDEM", "PowerLawDEM", "TabulatedDEM",
    "EmissivityTable", "load_emissivity", "band_flux", "luminosity", "radiative_loss", "synthesize",
    "TableFileError", "InputError",
    "Instrument", "build_instrument", "list_generic", "load_generic", "load_instrument",
]
