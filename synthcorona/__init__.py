"""synthcorona: synthetic X-ray/EUV emission of stellar coronae from CHIANTI atomic data.

The public names below are loaded on first use (module ``__getattr__``, PEP 562), so that
``import synthcorona`` and the command line's ``--help`` stay fast: numpy, astropy, xarray and
scipy are imported only when a name that needs them is used.

The main path (tables, DEMs, synthesis, instruments) never imports fiasco; only
:mod:`synthcorona.atomic.builder` does, lazily, when a table is built.
"""
from __future__ import annotations

import importlib

__version__ = "0.1.0"

#: Public name -> submodule that defines it.
_LAZY = {
    **dict.fromkeys(["AbundanceSet", "available_sets", "fip_bias", "resolve_abundances", "scale_metallicity"],
                    ".abundances"),
    **dict.fromkeys(["DEM", "GaussianDEM", "IsothermalDEM", "MultiComponentDEM", "PowerLawDEM", "TabulatedDEM"],
                    ".dem"),
    **dict.fromkeys(["EmissivityTable", "load_emissivity"], ".emissivity"),
    **dict.fromkeys(["InputError", "TableFileError"], ".errors"),
    **dict.fromkeys(["Instrument", "build_instrument", "list_generic", "load_generic", "load_instrument"],
                    ".instruments"),
    **dict.fromkeys(["band_flux", "luminosity", "radiative_loss", "synthesize"], ".synthesis"),
    "Band": ".spectral",
}
#: Subpackages and modules reachable as attributes (``synthcorona.dimming``) without an explicit import.
_SUBMODULES = frozenset({
    "abundances", "absorption", "atomic", "batch", "catalog", "cli", "cluster", "constants", "dem", "dimming",
    "emissivity", "errors", "instruments", "io", "memory", "plotting", "products", "settings", "spectral",
    "synthesis", "validation",
})

__all__ = [
    "AbundanceSet", "available_sets", "fip_bias", "resolve_abundances", "scale_metallicity",
    "DEM", "GaussianDEM", "IsothermalDEM", "MultiComponentDEM", "PowerLawDEM", "TabulatedDEM",
    "EmissivityTable", "load_emissivity", "band_flux", "luminosity", "radiative_loss", "synthesize",
    "TableFileError", "InputError", "Band",
    "Instrument", "build_instrument", "list_generic", "load_generic", "load_instrument",
]


def __getattr__(name: str):
    """Load a public name (or a subpackage) on first use and keep it in the module namespace."""
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name], __name__), name)
        globals()[name] = value
        return value
    if name in _SUBMODULES:
        return importlib.import_module("." + name, __name__)
    raise AttributeError(f"module 'synthcorona' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
