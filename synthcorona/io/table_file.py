"""The emissivity-table file: packing, content hash, writing and verified reading.

Layout in ``docs/table_format.md``. Large arrays are stored as 16-bit integers of
log10(value) (linear packing of the log between the variable's smallest kept and
largest value), delta-encoded along every axis but the first (exactly
reversible), zlib-compressed; zero (and values below ``RELATIVE_FLOOR`` times
the variable's maximum) is stored as the fill value -32768. The decode error is at
most half a packing step, recorded per variable in ``attrs["storage_error"]``.

The content hash is the SHA-256 of the raw stored integers, the packing constants
and the coordinate/float variables, so a file whose numbers were altered, or that
was truncated, fails verification on load. The attributes that decode the packed
arrays (:data:`DECODING_ATTRS`: packing constants and delta-encoding axes) are
recorded separately, one SHA-256 per variable and attribute, in the global
attribute ``decoding_hash`` (:func:`decoding_hash`); an edited, added or deleted
decoding attribute fails verification with an error naming it. Tables written
before ``decoding_hash`` existed are checked against the layout this format always
writes (:func:`check_decoding_attrs`) and can be given the record in place with
:func:`record_decoding_hash`.
"""
from __future__ import annotations

import hashlib
import json
import pathlib

import numpy as np
import xarray as xr

from ..errors import TableFileError

__all__ = ["PACKED_VARS", "DECODING_ATTRS", "write_table", "read_table", "content_hash", "decoding_hash",
           "check_decoding_attrs", "record_decoding_hash", "verify_table"]

#: Variables stored as packed log10 integers.
PACKED_VARS = ("line_emissivity", "cont_ff", "cont_fb", "cont_2p")
FILL = np.int16(-32768)
QMAX = 32767
#: Values below this fraction of a variable's maximum are stored as zero.
RELATIVE_FLOOR = 1e-40
FORMAT_VERSION = "synthcorona-emissivity-1"
#: Attributes of the packed variables that change how their stored integers decode.
DECODING_ATTRS = ("pack_scale", "pack_offset", "delta_axes")
#: Marks an absent decoding attribute in :func:`decoding_hash`.
_ABSENT = "<absent>"


def _pack(values: np.ndarray) -> tuple[np.ndarray, float, float, float]:
    """Pack positive values as int16 of log10; returns (ints, scale, offset, max relative error)."""
    v = np.asarray(values, dtype=float)
    vmax = float(v.max()) if v.size else 0.0
    out = np.full(v.shape, FILL, dtype=np.int16)
    if vmax <= 0:
        return out, 1.0, 0.0, 0.0
    good = v > vmax * RELATIVE_FLOOR
    lg = np.log10(v[good])
    lo, hi = float(lg.min()), float(lg.max())
    if hi == lo:
        hi = lo + 1e-6
    scale = (hi - lo) / (2 * QMAX)
    offset = 0.5 * (hi + lo)
    out[good] = np.round((lg - offset) / scale).astype(np.int16)
    rel_err = float(10 ** (0.5 * scale) - 1.0)
    return out, scale, offset, rel_err


def _delta_encode(ints: np.ndarray, axes: tuple[int, ...]) -> np.ndarray:
    """Successive first differences along ``axes`` in 16-bit wrap-around arithmetic (exactly reversible).

    Emissivities vary smoothly along temperature, density and energy, so the differences are
    small integers that zlib compresses far better than the values themselves.
    """
    d = np.array(ints, dtype=np.int16, copy=True)
    for ax in axes:
        sl = [slice(None)] * d.ndim
        sl[ax] = slice(1, None)
        d[tuple(sl)] = np.diff(d, axis=ax)
    return d


def _delta_decode(d: np.ndarray, axes: tuple[int, ...]) -> np.ndarray:
    """Inverse of :func:`_delta_encode` (cumulative sums in reverse order, 16-bit wrap-around)."""
    q = np.asarray(d, dtype=np.int16)
    for ax in reversed(axes):
        q = np.cumsum(q, axis=ax, dtype=np.int16)
    return q


def _value_table(scale: float, offset: float, dtype=np.float64) -> np.ndarray:
    """The 65 536 values of the int16 codes, indexed by :func:`code_index` (the fill code -> 0)."""
    lut = 10.0 ** (np.arange(-32768, 32768, dtype=np.float64) * scale + offset)
    lut[0] = 0.0  # FILL = -32768 maps to index 0
    return lut.astype(dtype)


def code_index(codes: np.ndarray) -> np.ndarray:
    """Index of int16 codes into :func:`code_values`: code + 32768 as uint16.

    Computed as the uint16 view with the sign bit flipped (no temporaries).
    """
    return np.ascontiguousarray(codes, dtype=np.int16).view(np.uint16) ^ np.uint16(0x8000)


def code_values(attrs: dict, dtype=np.float64) -> np.ndarray:
    """The value every int16 code of a packed variable stands for: a 65 536-entry table indexed by
    :func:`code_index`, ``10**(code * pack_scale + pack_offset)`` (the fill code -> 0) cast to ``dtype``.

    ``code_values(attrs, dtype)[code_index(codes)]`` equals what :func:`decode_full` and
    :func:`decode_plane` return for those codes, bit for bit.
    """
    return _value_table(float(attrs["pack_scale"]), float(attrs["pack_offset"]), dtype=dtype)


def _unpack(ints: np.ndarray, scale: float, offset: float, dtype=np.float64) -> np.ndarray:
    """Inverse of :func:`_pack` (fill value → 0), through a 65 536-entry look-up table."""
    return np.take(_value_table(scale, offset, dtype), code_index(ints))


def decode_full(stored: np.ndarray, attrs: dict, dtype=np.float64) -> np.ndarray:
    """Values of a lazily read packed array (``read_table(..., lazy=...)``), all at once."""
    axes = tuple(int(x) for x in str(attrs.get("delta_axes", "")).split())
    codes = _delta_decode(stored, axes) if axes else stored
    return _unpack(codes, float(attrs["pack_scale"]), float(attrs["pack_offset"]), dtype=dtype)


def plane_codes(stored: np.ndarray, attrs: dict, k: int) -> np.ndarray:
    """The int16 codes (delta decoding undone) of plane ``k`` along axis 1 of a lazily read packed array.

    For the layouts written here (differences along every axis but the first, e.g. delta axes
    "2 1"), plane k of the codes is the wrap-around sum of the first k+1 stored planes, cumulated
    along the other delta axes (16-bit wrap-around sums are exact in any order); other layouts
    are decoded whole.
    """
    axes = tuple(int(x) for x in str(attrs.get("delta_axes", "")).split())
    if 1 in axes:
        codes = np.sum(stored[:, : k + 1], axis=1, dtype=np.int16)
        for ax in sorted(a - 1 for a in axes if a > 1):  # axis a of the array is axis a - 1 of a plane
            codes = np.cumsum(codes, axis=ax, dtype=np.int16)
        return codes
    if not axes:
        return np.ascontiguousarray(stored[:, k])
    return np.ascontiguousarray(_delta_decode(stored, axes)[:, k])


def decode_plane(stored: np.ndarray, attrs: dict, k: int, dtype=np.float32) -> np.ndarray:
    """Values of plane ``k`` along axis 1 of a lazily read packed array (``read_table(..., lazy=...)``):
    the codes of :func:`plane_codes` through :func:`code_values`; equal, bit for bit, to that plane of
    :func:`decode_full` with the same ``dtype``."""
    return _unpack(plane_codes(stored, attrs, k), float(attrs["pack_scale"]), float(attrs["pack_offset"]),
                   dtype=dtype)


def content_hash(ds: xr.Dataset) -> str:
    """SHA-256 over every data variable and coordinate as stored (raw ints for packed arrays)."""
    h = hashlib.sha256()
    for name in sorted(list(ds.data_vars) + list(ds.coords)):
        arr = ds[name].values
        h.update(name.encode())
        if arr.dtype.kind in "US O".replace(" ", ""):
            h.update("\x1f".join(map(str, arr.ravel())).encode())
        else:
            h.update(np.ascontiguousarray(arr).tobytes())
        for key in ("pack_scale", "pack_offset"):
            if key in ds[name].attrs:
                h.update(f"{key}={float(ds[name].attrs[key])!r}".encode())
    return h.hexdigest()


def _attr_text(value) -> str:
    """A decoding attribute's value as text: floats by ``repr`` (every bit), anything else by ``str``."""
    if value is None:
        return _ABSENT
    if isinstance(value, (float, np.floating)):
        return repr(float(value))
    if isinstance(value, np.ndarray) and value.size == 1 and value.dtype.kind == "f":
        return repr(float(value.reshape(-1)[0]))
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    return str(value)


def decoding_hash(ds: xr.Dataset) -> str:
    """JSON of ``{"variable/attribute": SHA-256}`` over every decoding attribute (:data:`DECODING_ATTRS`)
    of every packed variable (:data:`PACKED_VARS`); an absent attribute is hashed as absent."""
    out = {}
    for name in PACKED_VARS:
        if name not in ds:
            continue
        for key in DECODING_ATTRS:
            text = f"{name}/{key}={_attr_text(ds[name].attrs.get(key))}"
            out[f"{name}/{key}"] = hashlib.sha256(text.encode()).hexdigest()
    return json.dumps(out, sort_keys=True)


def _layout_axes(ndim: int) -> str:
    """The ``delta_axes`` this format writes for an ``ndim``-dimensional packed variable."""
    return " ".join(str(a) for a in range(ndim - 1, 0, -1))


def check_decoding_attrs(ds: xr.Dataset, path) -> None:
    """Verify the decoding attributes of the packed variables of a table read from ``path``.

    With a recorded ``decoding_hash`` every attribute of :data:`DECODING_ATTRS` must match its
    record; without one (tables written before it existed) ``delta_axes`` must be the layout this
    format writes and the packing constants must be present (their values are in the content hash).
    Raises :class:`TableFileError` naming the variable and the attribute.
    """
    recorded = ds.attrs.get("decoding_hash")
    if recorded is None:
        for name in PACKED_VARS:
            attrs = ds[name].attrs
            for key in DECODING_ATTRS:
                if key not in attrs:
                    raise TableFileError(f"emissivity table {path}: variable {name!r} lacks its decoding attribute "
                                         f"{key!r}; the file was altered or damaged",
                                         path=path, variable=name, attribute=key)
            want = _layout_axes(ds[name].ndim)
            if _attr_text(attrs["delta_axes"]).split() != want.split():
                raise TableFileError(f"emissivity table {path}: attribute 'delta_axes' of {name!r} is "
                                     f"{_attr_text(attrs['delta_axes'])!r}, but this format writes {want!r}; the "
                                     "file was altered and its numbers would decode wrongly",
                                     path=path, variable=name, attribute="delta_axes")
        return
    try:
        want = json.loads(_attr_text(recorded))
        if not isinstance(want, dict):
            raise ValueError("not a JSON object")
    except ValueError as exc:
        raise TableFileError(f"emissivity table {path}: its decoding_hash attribute is not readable ({exc}); the file "
                             "was altered or damaged", path=path, attribute="decoding_hash") from None
    got = json.loads(decoding_hash(ds))
    for key in sorted(set(want) | set(got)):
        if want.get(key) != got.get(key):
            name, _, attr = key.partition("/")
            value = _attr_text(ds[name].attrs.get(attr)) if name in ds else _ABSENT
            raise TableFileError(f"emissivity table {path}: attribute {attr!r} of variable {name!r} (now {value!r}) "
                                 "differs from the value recorded when the table was written (decoding_hash); the "
                                 "file was altered and its numbers would decode wrongly",
                                 path=path, variable=name, attribute=attr)


def verify_table(ds: xr.Dataset, path) -> None:
    """The checks of :func:`read_table` on a dataset read raw from ``path``: the decoding attributes
    (:func:`check_decoding_attrs`), then the content hash. Raises :class:`TableFileError`."""
    check_decoding_attrs(ds, path)
    got = content_hash(ds)
    if got != ds.attrs.get("content_hash"):
        raise TableFileError(f"emissivity table {path} fails its content-hash check (stored "
                             f"{ds.attrs.get('content_hash')}, computed {got}): the file was altered or damaged",
                             path=path, attribute="content_hash")


def record_decoding_hash(path) -> pathlib.Path:
    """Add the ``decoding_hash`` attribute to a table file written before it existed, in place.

    The file is verified first (:func:`read_table`: content hash, and the layout of the decoding
    attributes), so an altered table is refused rather than recorded; only the one global attribute
    is written (with h5py), the stored arrays are untouched. A file that already has the record
    is left as it is. Returns the path.
    """
    import h5py

    path = pathlib.Path(path)
    ds = read_table(path, verify=True, lazy=PACKED_VARS)
    if "decoding_hash" not in ds.attrs:
        record = decoding_hash(_open_raw(path))
        with h5py.File(path, "r+") as f:
            f.attrs["decoding_hash"] = record
    return path


def write_table(output, results: dict, settings, elements: list[str], attrs: dict) -> pathlib.Path:
    """Assemble per-ion results into the table file (see module doc). Returns the path written."""
    output = pathlib.Path(output)
    names = list(results)
    # lines
    wl = np.concatenate([results[n]["wavelength"] for n in names]) if names else np.zeros(0)
    order = np.argsort(wl, kind="stable")
    def cat(key, dtype):
        return np.concatenate([np.asarray(results[n][key]).astype(dtype) for n in names])[order]
    nn, nT, nE = settings.log_density.size, settings.logT.size, settings.energy.size
    eps = np.concatenate([results[n]["emissivity"].reshape(-1, nn, nT) for n in names])[order]
    zline = np.concatenate([np.full(results[n]["wavelength"].size, int(results[n]["Z"])) for n in names])[order]
    sline = np.concatenate([np.full(results[n]["wavelength"].size, int(results[n]["stage"])) for n in names])[order]
    # continua per element
    el_index = {e: i for i, e in enumerate(elements)}
    ff = np.zeros((len(elements), nT, nE))
    fb = np.zeros_like(ff)
    tp = np.zeros((len(elements), nn, nT, nE))
    mass = np.full(len(elements), np.nan)
    fip = np.full(len(elements), np.nan)
    for n in names:
        sym = n.split("_")[0].capitalize()
        i = el_index[sym]
        r = results[n]
        ff[i] += r["ff"]
        fb[i] += r["fb"]
        tp[i] += r["tp"]
        mass[i] = float(r["mass_amu"])
        if int(r["stage"]) == 1:
            fip[i] = float(r["ip_ev"])
    ds = xr.Dataset(
        coords={
            "logT": ("logT", settings.logT, {"units": "log10(K)"}),
            "log_density": ("log_density", settings.log_density, {"units": "log10(cm-3)"}),
            "element": ("element", np.array(elements, dtype="U2")),
            "energy": ("energy", settings.energy, {"units": "keV"}),
        }
    )
    ds["line_wavelength"] = ("line", wl[order], {"units": "Angstrom"})
    ds["line_Z"] = ("line", zline.astype(np.int16))
    ds["line_ion"] = ("line", sline.astype(np.int16), {"meaning": "spectroscopic number (12 = XII)"})
    ds["line_upper"] = ("line", cat("upper", np.int32))
    ds["line_lower"] = ("line", cat("lower", np.int32))
    ds["line_observed"] = ("line", cat("observed", np.int8))
    ds["mass_amu"] = ("element", mass, {"units": "u"})
    ds["fip_ev"] = ("element", fip, {"units": "eV"})
    errors = {}
    chunks = {}
    for name, dims, arr, unit in (
        ("line_emissivity", ("line", "log_density", "logT"), eps, "erg cm3 s-1"),
        ("cont_ff", ("element", "logT", "energy"), ff, "erg cm3 s-1 keV-1"),
        ("cont_fb", ("element", "logT", "energy"), fb, "erg cm3 s-1 keV-1"),
        ("cont_2p", ("element", "log_density", "logT", "energy"), tp, "erg cm3 s-1 keV-1"),
    ):
        ints, scale, offset, err = _pack(arr)
        axes = tuple(range(ints.ndim - 1, 0, -1))  # every axis but the first, innermost first
        ds[name] = (dims, _delta_encode(ints, axes),
                    {"units": unit, "stored_as": "int16 log10 packing, delta-encoded", "pack_scale": scale,
                     "pack_offset": offset, "fill": int(FILL), "delta_axes": " ".join(str(a) for a in axes)})
        errors[name] = err
        chunks[name] = (min(4096, max(1, ints.shape[0])),) + ints.shape[1:] if name == "line_emissivity" \
            else (1,) + ints.shape[1:]
    ds.attrs.update(attrs)
    ds.attrs["format"] = FORMAT_VERSION
    ds.attrs["storage_error"] = json.dumps({k: f"max relative decode error {v:.2e}" for k, v in errors.items()}
                                           | {"floor": f"values below {RELATIVE_FLOOR:g} x variable maximum stored as 0"})
    ds.attrs["content_hash"] = content_hash(ds)
    ds.attrs["decoding_hash"] = decoding_hash(ds)
    enc = {v: {"zlib": True, "complevel": 6, "shuffle": True} for v in ds.data_vars}
    for v in PACKED_VARS:
        enc[v]["chunksizes"] = chunks[v]
    output.parent.mkdir(parents=True, exist_ok=True)
    tmp = output.with_name(output.name + ".partial")
    ds.to_netcdf(tmp, engine="h5netcdf", encoding=enc)
    tmp.replace(output)
    return output


def _open_raw(path: pathlib.Path) -> xr.Dataset:
    """The file's variables as stored (no CF decoding), loaded; :class:`TableFileError` if it cannot be read."""
    if not path.is_file():
        raise TableFileError(f"emissivity table {path}: no such file", path=path)
    try:
        with xr.open_dataset(path, engine="h5netcdf", mask_and_scale=False, decode_cf=False) as ds:
            return ds.load()
    except Exception as exc:  # h5py/netCDF errors vary: report them all as a bad file
        raise TableFileError(f"emissivity table {path} cannot be read ({type(exc).__name__}: {exc}); "
                             "the file is corrupted or not a netCDF/HDF5 file", path=path) from None


def read_table(path, verify: bool = True, lazy: tuple = ()) -> xr.Dataset:
    """Read a table file, verify its content hash, and decode packed arrays to float.

    Variables named in ``lazy`` are left as int16 log10 codes (delta decoding done) with
    their ``pack_scale``/``pack_offset`` attributes; decode them with :func:`decode`.

    Raises :class:`TableFileError` naming the file if it is missing, unreadable,
    not a synthcorona table, or fails verification (:func:`verify_table`: a decoding
    attribute that differs from its record, named; or the content hash).
    """
    path = pathlib.Path(path)
    ds = _open_raw(path)
    if ds.attrs.get("format") != FORMAT_VERSION:
        raise TableFileError(f"emissivity table {path} is not a synthcorona table "
                             f"(format attribute {ds.attrs.get('format')!r}, expected {FORMAT_VERSION!r})",
                             path=path, attribute="format")
    missing = [v for v in ("line_wavelength", *PACKED_VARS) if v not in ds]
    if missing:
        raise TableFileError(f"emissivity table {path} lacks variables {missing}", path=path, variable=missing[0])
    if verify:
        verify_table(ds, path)
    for name in PACKED_VARS:
        a = ds[name]
        axes = tuple(int(x) for x in str(a.attrs.get("delta_axes", "")).split())
        if name in lazy:  # left delta-encoded: decode_plane() undoes it one density plane at a time
            ds[name] = (a.dims, a.values, dict(a.attrs))
            continue
        ints = _delta_decode(a.values, axes) if axes else a.values
        dec = _unpack(ints, float(a.attrs["pack_scale"]), float(a.attrs["pack_offset"]),
                      dtype=np.float32 if name == "line_emissivity" else np.float64)
        ds[name] = (a.dims, dec, {k: v for k, v in a.attrs.items() if k not in ("stored_as", "fill", "delta_axes")})
    return ds


def table_manifest(path) -> dict:
    """The manifest of a table file: its size and SHA-256, and what ``synthcorona table-info`` and
    ``synthcorona list`` show (:meth:`synthcorona.emissivity.EmissivityTable.summary`).

    The table is read with its content hash verified, so a manifest vouches for a table that passed
    verification; :func:`synthcorona.catalog.read_manifest` uses it only while the file's SHA-256 is
    unchanged.
    """
    from .. import catalog
    from ..emissivity import REQUIRED_PROVENANCE, EmissivityTable

    path = pathlib.Path(path)
    table = EmissivityTable(read_table(path, verify=True, lazy=PACKED_VARS), path)
    missing = [k for k in REQUIRED_PROVENANCE if not table.provenance.get(k)]
    if missing:
        raise TableFileError(f"emissivity table {path} has no {missing} provenance attributes")
    return {"format": catalog.MANIFEST_FORMAT,
            "about": f"Summary of {path.name} for 'synthcorona list' and 'synthcorona table-info' without reading "
                     "the table; written by synthcorona.io.table_file.write_manifest and valid only for the file "
                     "with this size and SHA-256.",
            "file_size": path.stat().st_size, "file_sha256": catalog.file_sha256(path),
            "content_hash": table.provenance["content_hash"], **table.summary()}


def write_manifest(path) -> pathlib.Path:
    """Write :func:`table_manifest` of a table file beside it (same name, ``.json``); returns the path written.

    Run after a table changes (``python -c "from synthcorona.io.table_file import write_manifest;
    write_manifest('synthcorona/data/emissivity_default.nc')"`` for the embedded one).
    """
    from ..catalog import manifest_path

    out = manifest_path(path)
    out.write_text(json.dumps(table_manifest(path), indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
    return out
