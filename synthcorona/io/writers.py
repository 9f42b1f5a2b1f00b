"""Writing results to disk: netCDF, ECSV and CSV tables with units, PNG figures and text, one set for every
subcommand.

Every file is first written under a temporary name in its own folder and then moved into place with
:func:`os.replace`, so a file is either the previous complete version or the new complete version,
never a half-written one. The command line writes through these into the staging folder of
:class:`synthcorona.io.output_folder.OutputRun`, which moves a run's files into the output folder
only when all of them are complete (a failed or interrupted run leaves the previous set intact).

* :func:`write_netcdf` -- a Dataset or DataArray; attrs that netCDF cannot hold (lists, dicts, None)
  are stored as JSON text, text variables as fixed-width strings.
* :func:`write_table` -- an astropy table as ECSV (units and metadata kept) and, optionally, as
  plain CSV with the units in the column names (``flux [erg / (cm2 s)]``).
* :func:`write_figure` / :func:`write_figures` / :func:`figure_png` -- matplotlib figures as PNG.
* :func:`write_text` -- a report or any other text (UTF-8).
"""
from __future__ import annotations

import contextlib
import io
import json
import os
import pathlib
import uuid

__all__ = ["make_folder", "write_netcdf", "write_table", "csv_table", "write_figure", "write_figures",
           "figure_png", "write_text", "write_bytes", "replace_atomically", "netcdf_attrs"]


def make_folder(path) -> pathlib.Path:
    """The output folder ``path``, created with its parents if needed (an ``OSError`` if impossible)."""
    p = pathlib.Path(path)
    p.mkdir(parents=True, exist_ok=True)
    return p


@contextlib.contextmanager
def replace_atomically(path):
    """Context manager yielding a temporary path in ``path``'s folder; on success the temporary file
    replaces ``path`` (:func:`os.replace`), on an error it is removed and ``path`` is left untouched."""
    target = pathlib.Path(path)
    tmp = target.with_name(f".{target.name}.{uuid.uuid4().hex[:12]}.part")   # created by the writer (umask applies)
    try:
        yield pathlib.Path(tmp)
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def netcdf_attrs(attrs: dict) -> dict:
    """``attrs`` with every value netCDF cannot store (anything but str, int, float) as JSON text."""
    return {k: (v if isinstance(v, (str, int, float)) else json.dumps(v, default=str)) for k, v in attrs.items()}


def write_netcdf(obj, path) -> pathlib.Path:
    """Write a Dataset or DataArray to ``path`` (netCDF-4 through h5netcdf) with :func:`netcdf_attrs` and
    text (object) variables as fixed-width strings; returns the path."""
    import xarray as xr

    out = obj.copy()
    out.attrs = netcdf_attrs(obj.attrs)
    if isinstance(out, xr.Dataset):
        for name, var in obj.data_vars.items():
            if var.dtype == object:
                out[name] = var.astype(str)
    with replace_atomically(path) as tmp:
        out.to_netcdf(tmp, engine="h5netcdf")
    return pathlib.Path(path)


def csv_table(table):
    """A plain copy of ``table`` for CSV, which keeps no units: each column with a unit gets it in its
    name (``flux [erg / (cm2 s)]``); no metadata."""
    from astropy.table import Table

    plain = Table()
    for name in table.colnames:
        col = table[name]
        unit = getattr(col, "unit", None)
        label = f"{name} [{unit.to_string()}]" if unit is not None and str(unit) else name
        plain[label] = getattr(col, "value", col)
    return plain


def write_table(table, path, csv: bool = False) -> list[pathlib.Path]:
    """Write an astropy table as ECSV to ``path`` (units and metadata kept; metadata values that ECSV
    cannot hold are stored as text) and, with ``csv=True``, as CSV next to it (same name, ``.csv``;
    :func:`csv_table`). Returns the paths written."""
    path = pathlib.Path(path)
    t = table.copy()
    t.meta = {k: (v if isinstance(v, (str, int, float)) else str(v)) for k, v in table.meta.items()}
    with replace_atomically(path) as tmp:
        t.write(tmp, format="ascii.ecsv", overwrite=True)
    written = [path]
    if csv:
        c = path.with_suffix(".csv")
        with replace_atomically(c) as tmp:
            csv_table(table).write(tmp, format="ascii.csv", overwrite=True)
        written.append(c)
    return written


def figure_png(fig, dpi: int = 110) -> bytes:
    """A matplotlib figure as PNG bytes."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


def write_figure(fig, path, dpi: int = 110) -> pathlib.Path:
    """Save a matplotlib figure as PNG to ``path``; returns the path."""
    return write_bytes(figure_png(fig, dpi), path)


def write_figures(figures: dict, folder, dpi: int = 110) -> list[pathlib.Path]:
    """Save ``{file name: Figure}`` as PNG files into ``folder`` (created if needed); returns the paths."""
    out = make_folder(folder)
    return [write_figure(fig, out / name, dpi) for name, fig in figures.items()]


def write_bytes(data: bytes, path) -> pathlib.Path:
    """Write ``data`` to ``path``; returns the path."""
    with replace_atomically(path) as tmp:
        tmp.write_bytes(data)
    return pathlib.Path(path)


def write_text(text: str, path) -> pathlib.Path:
    """Write ``text`` to ``path`` as UTF-8; returns the path."""
    return write_bytes(text.encode("utf-8"), path)
