"""Writing results (synthcorona.io.writers): units kept, files replaced whole, nothing half-written left behind."""
import os

import astropy.units as u
import numpy as np
import pytest
import xarray as xr
from astropy.table import QTable

from synthcorona.io.writers import (
    csv_table,
    figure_png,
    make_folder,
    netcdf_attrs,
    replace_atomically,
    write_figures,
    write_netcdf,
    write_table,
    write_text,
)


def _table():
    t = QTable()
    t["band"] = ["soft", "hard"]
    t["flux"] = [1.5e-12, 2.5e-13] * u.erg / u.s / u.cm ** 2
    t["depth"] = [0.01, 0.02]
    t.meta.update({"seed": 3, "bands": [1, 2], "note": "n"})
    return t


def test_table_as_ecsv_with_units_and_csv_with_units_in_names(tmp_path):
    paths = write_table(_table(), tmp_path / "t.ecsv", csv=True)
    assert [p.name for p in paths] == ["t.ecsv", "t.csv"]
    back = QTable.read(tmp_path / "t.ecsv")
    assert back["flux"].unit == u.erg / u.s / u.cm ** 2
    np.testing.assert_array_equal(back["flux"].value, [1.5e-12, 2.5e-13])
    assert back.meta["seed"] == 3 and back.meta["bands"] == "[1, 2]"        # a list is kept as text
    lines = (tmp_path / "t.csv").read_text().splitlines()
    assert lines == ["band,flux [erg / (s cm2)],depth", "soft,1.5e-12,0.01", "hard,2.5e-13,0.02"]
    assert csv_table(_table()).colnames == ["band", "flux [erg / (s cm2)]", "depth"]


def test_netcdf_keeps_units_and_stores_other_attrs_as_json(tmp_path):
    ds = xr.Dataset({"flux": ("band", [1.0, 2.0], {"units": "erg / (s cm2)"}),
                     "note": ("band", np.array(["", "x"], dtype=object))},
                    coords={"band": ["a", "b"]}, attrs={"seed": 3, "bracket": [1.0, 2.0], "none": None})
    write_netcdf(ds, tmp_path / "d.nc")
    back = xr.load_dataset(tmp_path / "d.nc", engine="h5netcdf")
    assert back["flux"].attrs["units"] == "erg / (s cm2)"
    assert back.attrs == {"seed": 3, "bracket": "[1.0, 2.0]", "none": "null"}
    assert list(back["note"].values) == ["", "x"]
    assert ds.attrs["bracket"] == [1.0, 2.0]          # the caller's Dataset is not changed
    assert netcdf_attrs({"a": {"b": 1}}) == {"a": '{"b": 1}'}


def test_a_failed_write_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "report.md"
    write_text("old", target)
    with pytest.raises(RuntimeError):
        with replace_atomically(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("interrupted")
    assert target.read_text() == "old"
    assert os.listdir(tmp_path) == ["report.md"]
    write_text("new", target)
    assert target.read_text() == "new" and os.listdir(tmp_path) == ["report.md"]


def test_files_get_the_usual_permissions(tmp_path):
    umask = os.umask(0)
    os.umask(umask)
    path = write_text("x", tmp_path / "a.txt")
    assert path.stat().st_mode & 0o777 == 0o666 & ~umask


def test_figures_as_png(tmp_path):
    from matplotlib.figure import Figure

    fig = Figure()
    fig.add_subplot().plot([0, 1], [0, 1])
    assert figure_png(fig)[:8] == b"\x89PNG\r\n\x1a\n"
    paths = write_figures({"a.png": fig, "b.png": fig}, tmp_path / "figs")
    assert sorted(p.name for p in paths) == ["a.png", "b.png"]
    assert sorted(os.listdir(tmp_path / "figs")) == ["a.png", "b.png"]


def test_make_folder_creates_parents(tmp_path):
    assert make_folder(tmp_path / "a" / "b").is_dir()
    (tmp_path / "file").write_text("")
    with pytest.raises(OSError):
        make_folder(tmp_path / "file" / "sub")
