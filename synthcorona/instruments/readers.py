"""One entry point for every instrument response: :func:`load_instrument`.

A ready-made generic instrument by name (:func:`synthcorona.instruments.designs.list_generic`), or a
response file, recognised by its content:

* FITS files: OGIP ARF (with an optional RMF) or a full response matrix
  (:mod:`synthcorona.instruments.ogip`);
* ``.area`` files: CHIANTI-format effective areas (:func:`~synthcorona.instruments.area_files.read_dot_area`);
* any other file: an area table in ECSV or text (:func:`~synthcorona.instruments.area_files.read_area_table`).
"""
from __future__ import annotations

import os
from pathlib import Path

import astropy.units as u
import numpy as np
import scipy.sparse as sp

from ..errors import InputError, InstrumentFileError
from .area_files import read_area_table, read_dot_area
from .designs import list_generic, load_generic
from .files import existing_file
from .instrument import Instrument
from .ogip import OGIP_REFERENCE, extension_kinds, is_fits, read_arf, read_rmf

__all__ = ["load_instrument"]


def load_instrument(path, rmf=None, name: str | None = None, bands=None) -> Instrument:
    """Load an instrument from a response file, or a ready-made generic instrument by name.

    * A string that is not an existing file but the name of a generic instrument
      (:func:`~synthcorona.instruments.designs.list_generic`): :func:`~synthcorona.instruments.designs.load_generic`,
      with ``bands`` added if given.
    * FITS with a SPECRESP extension: an OGIP ARF; ``rmf`` optionally names the matching
      OGIP RMF (same energy grid, checked).  An RMF whose matrix already includes the
      area (HDUCLAS3 'FULL') cannot be combined with an ARF.
    * FITS with a MATRIX/SPECRESP MATRIX extension: an RMF alone; allowed only if it
      includes the effective area, which is then split as ``A_i = sum_c M[c, i]`` (the
      area for events in any channel) and ``R = M / A`` (columns summing to 1; zero
      columns stay zero), so that ``R @ diag(A) = M`` exactly.
    * ``.ecsv``, ``.txt``, ``.dat`` (or other text): :func:`~synthcorona.instruments.area_files.read_area_table`.
    * ``.area``: a CHIANTI-format effective-area file (Angstrom, cm^2).

    ``bands`` are channel-energy bands when an RMF is used, photon-energy bands otherwise.
    ``provenance`` lists every file read with its SHA-256.
    """
    generic = list_generic()
    if isinstance(path, str) and path in generic and not Path(path).exists():
        if rmf is not None:
            raise InputError(f"rmf= cannot be combined with the generic instrument '{path}'")
        inst = load_generic(path)
        if bands:
            inst = inst.with_bands(**bands)
        return inst
    if isinstance(path, (str, os.PathLike)) and not Path(os.fspath(path)).expanduser().exists():
        raise InstrumentFileError(
            f"path={os.fspath(path)!r} is neither an existing response file nor a generic instrument name; generic "
            f"instruments: {', '.join(generic)} (the file '{Path(os.fspath(path)).expanduser()}' does not exist)")
    p = existing_file(path, "instrument response")
    if is_fits(p):
        return _from_ogip(p, rmf, name, bands)
    if rmf is not None:
        raise InstrumentFileError(f"rmf= can only be combined with an OGIP ARF; '{p}' is not a FITS file")
    if p.suffix.lower() == ".area":
        return read_dot_area(p, name=name, bands=bands)
    return read_area_table(p, name=name, bands=bands)


# ----------------------------------------------------------------------------- OGIP files
def _ogip_name(meta: dict, p: Path) -> str:
    """Instrument name from TELESCOP/INSTRUME/FILTER keywords, else the file stem."""
    parts = [str(meta.get(k, "")).strip() for k in ("TELESCOP", "INSTRUME", "FILTER")]
    parts = [s for s in parts if s and s.upper() != "NONE"]
    return "_".join(parts) if parts else p.stem


def _check_same_grid(a_lo, a_hi, r_lo, r_hi, arf_p, rmf_p):
    """The ARF and RMF energy grids must coincide (section 2.3 of CAL/GEN/92-002)."""
    if a_lo.size != r_lo.size:
        raise InstrumentFileError(f"ARF '{arf_p}' has {a_lo.size} energy bins but RMF '{rmf_p}' has {r_lo.size}; "
                                  "an ARF and an RMF must share one energy grid")
    tol = 1e-5 * np.maximum(np.abs(r_hi), 1e-30)
    bad = (np.abs(a_lo - r_lo) > tol) | (np.abs(a_hi - r_hi) > tol)
    if np.any(bad):
        k = int(np.argmax(bad))
        raise InstrumentFileError(
            f"ARF '{arf_p}' and RMF '{rmf_p}' energy grids differ at bin {k}: {a_lo[k]:g}-{a_hi[k]:g} keV vs "
            f"{r_lo[k]:g}-{r_hi[k]:g} keV")


def _from_ogip(p: Path, rmf, name, bands) -> Instrument:
    """An Instrument from an OGIP FITS file: an ARF (with an optional RMF) or a full response matrix."""
    is_arf, is_rmf, extnames = extension_kinds(p)
    if is_arf:
        return _from_arf(p, rmf, name, bands)
    if is_rmf:
        if rmf is not None:
            raise InstrumentFileError(f"'{p}' is an RMF; pass the ARF as path and the RMF as rmf=")
        return _from_full_rmf(p, name, bands)
    raise InstrumentFileError(f"FITS file '{p}' has neither a SPECRESP (ARF) nor a MATRIX (RMF) extension "
                              f"(extensions: {extnames}; see {OGIP_REFERENCE})")


def _from_arf(p: Path, rmf, name, bands) -> Instrument:
    """ARF (and optional RMF of the same energy grid) -> Instrument."""
    arf = read_arf(p)
    prov = {"files": list(arf.provenance["files"]), "notes": list(arf.meta["notes"])}
    desc = f"OGIP ARF {p.name} ({', '.join(f'{k}={arf.meta[k]}' for k in ('TELESCOP', 'INSTRUME', 'FILTER') if k in arf.meta)})"
    kw = {}
    if rmf is not None:
        r = read_rmf(rmf)
        if r.includes_area:
            raise InstrumentFileError(
                f"RMF '{r.provenance['files'][0]['path']}' already includes the effective area "
                f"(HDUCLAS3='FULL'/SPECRESP MATRIX); combining it with ARF '{p}' would count the area twice")
        _check_same_grid(arf.energy_lo.value, arf.energy_hi.value, r.energy_lo.value, r.energy_hi.value,
                         p, r.provenance["files"][0]["path"])
        kw = dict(redistribution=r.matrix, channel_lo=r.channel_lo, channel_hi=r.channel_hi)
        prov["files"] += r.provenance["files"]
        prov["notes"] += r.meta["notes"]
        prov["first_channel"] = r.first_channel
        desc += f" with OGIP RMF {Path(os.fspath(rmf)).name}"
    try:
        return Instrument(name or _ogip_name(arf.meta, p), arf.energy_lo, arf.energy_hi, arf.area,
                          bands=bands, description=desc, provenance=prov, **kw)
    except InstrumentFileError:
        raise
    except InputError as exc:
        raise InstrumentFileError(f"instrument from '{p}'{' and ' + str(rmf) if rmf else ''}: {exc}") from None


def _from_full_rmf(p: Path, name, bands) -> Instrument:
    """A response matrix that includes the area -> Instrument (area = column sums, R = M / A)."""
    r = read_rmf(p)
    if not r.includes_area:
        raise InstrumentFileError(
            f"RMF '{p}' holds only the redistribution (HDUCLAS3='{r.meta.get('HDUCLAS3', '')}'); an effective "
            "area is also needed: pass the ARF as path and this file as rmf=")
    M = r.matrix.tocsc()
    area = np.asarray(M.sum(axis=0)).ravel()
    inv = np.divide(1.0, area, out=np.zeros_like(area), where=area > 0)
    R = (M @ sp.diags(inv)).tocsr()
    prov = {"files": list(r.provenance["files"]), "first_channel": r.first_channel,
            "notes": list(r.meta["notes"]) + ["effective area = column sums of the full response matrix"]}
    try:
        return Instrument(name or _ogip_name(r.meta, p), r.energy_lo, r.energy_hi, area * u.cm**2,
                          redistribution=R, channel_lo=r.channel_lo, channel_hi=r.channel_hi, bands=bands,
                          description=f"OGIP full response matrix {p.name}", provenance=prov)
    except InstrumentFileError:
        raise
    except InputError as exc:
        raise InstrumentFileError(f"instrument from '{p}': {exc}") from None
