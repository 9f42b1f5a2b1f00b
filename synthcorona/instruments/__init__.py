"""Instrument models: optics, filters, detectors, telescope responses and what they record.

* :class:`Instrument` (:mod:`.instrument`) -- effective area, redistribution, bands; folding of spectra.
* :mod:`.dem_response` -- temperature responses and count rates of DEMs
  (:meth:`Instrument.temperature_response`, :meth:`Instrument.count_rate`).
* :func:`load_instrument` (:mod:`.readers`) -- OGIP ARF/RMF (:mod:`.ogip`), area tables and
  CHIANTI ``.area`` files (:mod:`.area_files`), or a ready-made generic instrument by name
  (:func:`list_generic`).
* :func:`build_instrument` (:mod:`.designs`) -- a physics-built design (mirror, filters, silicon
  detector) from :mod:`.optics` and :mod:`.multilayer`.
* observables (:mod:`.observables`) -- :func:`observed_flux`, :func:`band_luminosity`,
  :func:`hardness_ratio`, :func:`hardness_ratio_curve`, :func:`counts_to_flux`.
* :mod:`.soft_xray_monitor` -- the long (1-8 Angstrom) channel of the standard solar soft-X-ray flux
  monitor, built from its physics, and the flare-class flux scale.
* plotting -- :mod:`synthcorona.plotting.instruments` (imported on use: needs matplotlib).
"""
from ..errors import InstrumentFileError, InstrumentFileWarning
from .area_files import chianti_area_names, read_area_table, read_chianti_area
from .dem_response import TEMPERATURE_RESPONSE_UNIT, TOTAL_BAND
from .designs import (
                      GENERIC_EUV_CHANNELS,
                      GrazingMirror,
                      MultilayerMirror,
                      SiliconDetector,
                      build_instrument,
                      list_generic,
                      load_generic,
)
from .instrument import COUNT_RATE_UNIT, PHOTON_FLUX_UNIT, Instrument
from .observables import (
                      REFERENCE_DISTANCE,
                      band_luminosity,
                      counts_to_flux,
                      hardness_ratio,
                      hardness_ratio_curve,
                      observed_flux,
)
from .ogip import read_arf, read_rmf, write_arf, write_rmf
from .readers import load_instrument

__all__ = [
    "Instrument", "COUNT_RATE_UNIT", "PHOTON_FLUX_UNIT", "TEMPERATURE_RESPONSE_UNIT", "TOTAL_BAND",
    "InstrumentFileError", "InstrumentFileWarning", "chianti_area_names", "read_area_table", "read_arf",
    "read_chianti_area", "read_rmf", "write_arf", "write_rmf",
    "GENERIC_EUV_CHANNELS", "GrazingMirror", "MultilayerMirror", "SiliconDetector", "build_instrument",
    "list_generic", "load_generic", "load_instrument",
    "REFERENCE_DISTANCE", "band_luminosity", "counts_to_flux", "hardness_ratio", "hardness_ratio_curve",
    "observed_flux",
]
