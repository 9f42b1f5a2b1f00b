"""Instrument models: optics, filters, detectors, telescope responses and what they record.

* :class:`Instrument` -- effective area, redistribution, bands; folding of spectra;
  :meth:`Instrument.temperature_response` and :meth:`Instrument.count_rate` of DEMs.
* :func:`load_instrument` -- OGIP ARF/RMF, area tables, CHIANTI ``.area`` files, or a
  ready-made generic instrument by name (:func:`list_generic`).
* :func:`build_instrument` -- a physics-built design (mirror, filters, silicon detector).
* observables -- :func:`observed_flux`, :func:`band_luminosity`, :func:`hardness_ratio`,
  :func:`hardness_ratio_curve`, :func:`counts_to_flux`.
* plotting -- :mod:`synthcorona.plotting.instruments` (imported on use: needs matplotlib).
"""
from .designs import (
                      GENERIC_EUV_CHANNELS,
                      GrazingMirror,
                      MultilayerMirror,
                      SiliconDetector,
                      build_instrument,
                      list_generic,
                      load_generic,
                      load_instrument,
)
from .observables import (
                      REFERENCE_DISTANCE,
                      band_luminosity,
                      counts_to_flux,
                      hardness_ratio,
                      hardness_ratio_curve,
                      observed_flux,
)
from .readers import (
                      InstrumentFileError,
                      InstrumentFileWarning,
                      chianti_area_names,
                      read_area_table,
                      read_arf,
                      read_chianti_area,
                      read_rmf,
                      write_arf,
                      write_rmf,
)
from .response import COUNT_RATE_UNIT, PHOTON_FLUX_UNIT, TEMPERATURE_RESPONSE_UNIT, TOTAL_BAND, Instrument

__all__ = [
    "Instrument", "COUNT_RATE_UNIT", "PHOTON_FLUX_UNIT", "TEMPERATURE_RESPONSE_UNIT", "TOTAL_BAND",
    "InstrumentFileError", "InstrumentFileWarning", "chianti_area_names", "read_area_table", "read_arf",
    "read_chianti_area", "read_rmf", "write_arf", "write_rmf",
    "GENERIC_EUV_CHANNELS", "GrazingMirror", "MultilayerMirror", "SiliconDetector", "build_instrument",
    "list_generic", "load_generic", "load_instrument",
    "REFERENCE_DISTANCE", "band_luminosity", "counts_to_flux", "hardness_ratio", "hardness_ratio_curve",
    "observed_flux",
]
