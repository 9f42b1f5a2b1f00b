r"""Count-rate conversion between instruments: what a rate in one instrument band implies in another.

With :math:`C_X = F_{band}/R_X` the counts-to-flux factor of instrument band X for a DEM
(:func:`synthcorona.instruments.observables.counts_to_flux`; the DEM's shape matters, its EM and the
distance cancel), a source rate :math:`R_s` gives the flux :math:`F = R_s C_s` and the target rate
:math:`R_t = R_s C_s / C_t` (:func:`convert_count_rate`). :class:`CountConversion` describes one such
conversion for :func:`synthcorona.products.cycle.compare_cycle`, which reports it phase by phase.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, NamedTuple

import astropy.units as u
import numpy as np

from ..errors import InputError
from ..spectral import Band
from ..validation import as_quantity, as_scalar
from .channels import resolve_channels

__all__ = ["CountConversion", "ConversionResult", "convert_count_rate", "one_channel", "default_flux_band",
           "counts_to_flux_factor", "FLUX_UNIT", "FACTOR_UNIT"]

#: Unit of every energy flux (erg s-1 cm-2).
FLUX_UNIT = u.erg / (u.s * u.cm ** 2)
#: Unit of the counts-to-flux factors (erg cm-2 per count).
FACTOR_UNIT = u.erg / (u.cm ** 2 * u.ct)


def one_channel(name: str, spec) -> tuple[str, Any, str]:
    """The single instrument band ``(label, Instrument, band name)`` named by ``spec``
    (:func:`~synthcorona.instruments.channels.resolve_channels`); an error names ``name`` if it names several."""
    ch = resolve_channels(spec)
    if len(ch) != 1:
        raise InputError(f"{name}={spec!r} names {len(ch)} instrument bands ({', '.join(c[0] for c in ch)}); "
                         "name exactly one, e.g. 'sc-softx:broad'", argument=name)
    return ch[0]


@dataclass(frozen=True)
class CountConversion:
    """Convert a count rate in one instrument band into flux in another instrument's band.

    ``source`` and ``target``: one instrument band each (``"sc-softx:broad"``, ``"sc-fe9"``,
    ``(Instrument, "band")``). ``rate``: optional measured count rate in ``source`` (ct/s).
    ``flux_band``: energy band of the flux (default: the limits of the target band; for a band
    "total", the target instrument's response range). ``absorbed``: flux arriving at the telescope
    (True) or unabsorbed source flux (False, default).
    """

    source: Any
    target: Any
    rate: u.Quantity | None = None
    flux_band: Any = None
    absorbed: bool = False

    def __post_init__(self):
        if self.rate is not None:
            as_scalar("rate", self.rate, u.ct / u.s, lo=0.0, unit_label="ct s-1")
        if self.flux_band is not None:
            Band.coerce(self.flux_band, "flux_band")


class ConversionResult(NamedTuple):
    """Result of :func:`convert_count_rate` (all Quantities)."""

    flux: u.Quantity            #: flux in the flux band implied by the source rate [erg s-1 cm-2]
    rate: u.Quantity            #: expected count rate in the target band [ct s-1]
    source_factor: u.Quantity   #: flux per count s-1 in the source band [erg cm-2 ct-1]
    target_factor: u.Quantity   #: flux per count s-1 in the target band [erg cm-2 ct-1]


def counts_to_flux_factor(channel, dem, flux_band: Band, nh, absorbed, abundances, density, table) -> float:
    """Flux in ``flux_band`` per count s-1 in ``channel`` (a ``(label, Instrument, band)``) for ``dem``
    [erg cm-2 ct-1], from :func:`synthcorona.instruments.observables.counts_to_flux`."""
    from .observables import counts_to_flux

    _, ins, band = channel
    c = counts_to_flux(ins, band=band, flux_band=flux_band.quantity, nh=nh, absorbed=absorbed, dem=dem, table=table,
                       abundances=abundances, density=density)
    return float(c.values)


def default_flux_band(channel) -> Band:
    """The flux band of a conversion into ``channel``: its band limits, or for the band "total" the
    instrument's response range."""
    _, ins, band = channel
    limits = ins.energy_range if band == "total" else ins.bands[band]
    return Band.coerce(limits, "flux_band")


def convert_count_rate(rate, dem, source, target, *, nh=None, flux_band=None, absorbed=False, abundances="coronal",
                       density=None, table=None) -> ConversionResult:
    """Flux and target-band count rate implied by a count rate in a source instrument band, for a DEM.

    With :math:`C_X = F_{band}/R_X` the counts-to-flux factor of instrument band X for the DEM
    (:func:`synthcorona.instruments.observables.counts_to_flux`; the DEM's shape matters, its EM
    and the distance cancel), a source rate :math:`R_s` gives the flux :math:`F = R_s C_s` and the
    target rate :math:`R_t = R_s C_s / C_t`. Converting back (swap ``source`` and ``target``)
    returns the input.

    Parameters
    ----------
    rate : Quantity [ct s-1]
        Count rate measured in ``source`` (>= 0; any shape).
    dem : DEM
        The corona (one volume DEM).
    source, target : str or (Instrument, band)
        One instrument band each (e.g. ``"sc-softx:broad"``, ``"sc-fe9"``).
    nh : Quantity [cm-2], optional
        Interstellar column (included in both count rates).
    flux_band : Band, text or Quantity pair, optional
        Band of the flux; default the target band's limits.
    absorbed : bool
        Flux at the telescope (True) or unabsorbed (False).
    abundances, density, table
        As for :meth:`Instrument.count_rate`.
    """
    r = as_quantity("rate", rate, u.ct / u.s)
    if np.any(~np.isfinite(r.value)) or np.any(r.value < 0):
        raise InputError(f"rate={rate} must be finite and >= 0 ct s-1", argument="rate")
    src = one_channel("source", source)
    tgt = one_channel("target", target)
    fb = default_flux_band(tgt) if flux_band is None else Band.coerce(flux_band, "flux_band")
    cs = counts_to_flux_factor(src, dem, fb, nh, absorbed, abundances, density, table)
    ct = counts_to_flux_factor(tgt, dem, fb, nh, absorbed, abundances, density, table)
    if not (np.isfinite(cs) and np.isfinite(ct)) or ct == 0:
        raise InputError(f"source={src[0]} or target={tgt[0]} records no counts from this DEM: no conversion")
    return ConversionResult(flux=(r.value * cs) * FLUX_UNIT, rate=(r.value * cs / ct) * u.ct / u.s,
                            source_factor=cs * FACTOR_UNIT, target_factor=ct * FACTOR_UNIT)
