"""What synthcorona offers by name, readable without numpy, astropy or xarray.

``synthcorona list`` and ``synthcorona table-info`` answer from this module in a fraction of a
second, without importing the numerical libraries:

* :data:`GENERIC_INSTRUMENTS` -- the ready-made generic instruments with their one-line
  descriptions, band axis, energy range and named bands (a copy of what
  :mod:`synthcorona.instruments.designs` builds);
* :data:`DEM_MODELS` -- the DEM models a ``[...dem]`` table of an input file may use, with the keys
  each reads (the one definition; :mod:`synthcorona.io.toml` uses it);
* :func:`abundance_sets` -- the named abundance sets and their sources, read from the JSON file that
  :mod:`synthcorona.abundances` reads;
* :func:`read_manifest` -- the summary of an emissivity table written beside it by
  :func:`synthcorona.io.table_file.write_manifest` (the embedded table has one), used only while
  the table file's bytes are those the summary was made from (same size and SHA-256).

The copies are checked against the modules that compute them by ``tests/test_catalog.py``, and the
embedded table's manifest against the table, so none of them can go stale unnoticed.
"""
from __future__ import annotations

import hashlib
import json
import pathlib

__all__ = ["GENERIC_NOTE", "GENERIC_INSTRUMENTS", "DEM_MODELS", "DEFAULT_TABLE_NAME", "MANIFEST_FORMAT",
           "abundance_sets", "embedded_table_path", "manifest_path", "file_sha256", "read_manifest",
           "table_summary", "table_repr"]

DATA = pathlib.Path(__file__).parent / "data"

#: The note every generic instrument's description ends with.
GENERIC_NOTE = "generic design of synthcorona, not any real mission's or instrument's calibration"


def _generic(description: str, band_axis: str, energy_range_kev: tuple, bands_kev: dict) -> dict:
    return {"description": f"{description} ({GENERIC_NOTE})", "band_axis": band_axis,
            "energy_range_kev": energy_range_kev, "bands_kev": bands_kev}


#: Generic instruments: name -> description (as :func:`synthcorona.instruments.list_generic` gives it),
#: the axis the band limits refer to, the energy range of the response [keV] (6 significant digits) and
#: the named bands [keV].
GENERIC_INSTRUMENTS = {
    "sc-softx": _generic(
        "grazing-incidence soft-X-ray telescope with a silicon CCD, 0.1-10 keV, bands soft/hard/broad/full",
        "channel energy", (0.1, 10.0),
        {"soft": (0.2, 1.0), "hard": (1.0, 2.4), "broad": (0.2, 2.4), "full": (0.2, 10.0)}),
    "sc-fe9": _generic("narrow-band Mo/Si multilayer EUV design tuned to Fe IX, peak 171 Angstrom",
                       "photon energy", (0.02, 3.74762), {}),
    "sc-fe12": _generic("narrow-band Mo/Si multilayer EUV design tuned to Fe XII, peak 193 Angstrom",
                        "photon energy", (0.02, 3.70664), {}),
    "sc-fe14": _generic("narrow-band Mo/Si multilayer EUV design tuned to Fe XIV, peak 211 Angstrom",
                        "photon energy", (0.02, 3.72149), {}),
    "sc-euvphot": _generic("broadband EUV photometer, Zr/C-filtered silicon photodiode, mainly 60-300 Angstrom",
                           "photon energy", (0.01, 10.0), {}),
}

#: DEM models of a ``[...dem]`` table (``model = "..."``) and the keys each reads.
DEM_MODELS = {
    "isothermal": "temperature, total_em",
    "gaussian": "peak_logT, width_logT, total_em",
    "power_law": "slope, peak_temperature, total_em, min_temperature (default 0.1 MK)",
    "tabulated": "temperature (list), dem (list, per kelvin) or file (ECSV/CSV with columns temperature, dem)",
    "components": "[[...component]] tables, each an isothermal or gaussian model",
}

#: File name of the emissivity table embedded in the package (in ``synthcorona/data``).
DEFAULT_TABLE_NAME = "emissivity_default.nc"
#: ``format`` entry of a table manifest.
MANIFEST_FORMAT = "synthcorona-table-manifest-1"


def abundance_sets() -> dict[str, str]:
    """Named abundance sets as ``{name: source}``, from ``synthcorona/data/abundance_sets.json``."""
    with open(DATA / "abundance_sets.json", encoding="utf-8") as fh:
        return {name: entry["source"] for name, entry in json.load(fh)["sets"].items()}


def embedded_table_path() -> pathlib.Path:
    """The emissivity table embedded in the package."""
    return DATA / DEFAULT_TABLE_NAME


def manifest_path(table_path) -> pathlib.Path:
    """Where the manifest of a table file lives: beside it, same name with ``.json``."""
    return pathlib.Path(table_path).with_suffix(".json")


def file_sha256(path) -> str:
    """SHA-256 of a file's bytes (hex)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 22), b""):
            h.update(block)
    return h.hexdigest()


def read_manifest(table_path) -> dict | None:
    """The manifest beside the table file ``table_path``, if there is one and it describes this very file.

    Returns None when the manifest is missing, unreadable or of another format, or when the table
    file's size or SHA-256 differ from those it records (a replaced or altered table): callers then
    read the table itself. Hashing the file costs about 15 ms for the embedded table (13 MB).
    """
    table_path = pathlib.Path(table_path)
    try:
        manifest = json.loads(manifest_path(table_path).read_text(encoding="utf-8"))
        size = table_path.stat().st_size
    except (OSError, ValueError):
        return None
    if not isinstance(manifest, dict) or manifest.get("format") != MANIFEST_FORMAT:
        return None
    if manifest.get("file_size") != size or manifest.get("file_sha256") != file_sha256(table_path):
        return None
    return manifest


def table_summary(path=None) -> dict:
    """What ``synthcorona table-info`` shows about a table (:meth:`synthcorona.emissivity.EmissivityTable.summary`).

    ``path`` None means the table :func:`synthcorona.load_emissivity` would read (``$SYNTHCORONA_TABLE``,
    else the embedded table). Taken from the table's manifest when it has one that matches the file
    (:func:`read_manifest`: no numerical library imported), else from the table itself, loaded and
    verified by :func:`synthcorona.load_emissivity` (whose errors it raises).
    """
    from . import settings

    target = path if path is not None else (settings.table_path() or embedded_table_path())
    manifest = read_manifest(target) if pathlib.Path(target).is_file() else None
    if manifest is not None:
        return manifest
    from .emissivity import load_emissivity

    return load_emissivity(path).summary()


def table_repr(summary: dict) -> str:
    """One line describing an emissivity table from its summary (:func:`table_summary`); the ``repr`` of
    :class:`synthcorona.emissivity.EmissivityTable`."""
    s = summary
    return (f"<EmissivityTable {s['table_file'] or '(in memory)'}: {s['lines']} lines, {len(s['elements'])} elements, "
            f"logT {s['logT'][0]:.2f}-{s['logT'][-1]:.2f}, log n_e {s['log_density'][0]:g}-{s['log_density'][-1]:g}, "
            f"CHIANTI {s['provenance'].get('chianti_version')}>")
