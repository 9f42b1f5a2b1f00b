"""synthcorona.catalog: the light copies equal what the numerical modules hold, the embedded table's
manifest equals the table, and `synthcorona list` / `table-info` answer without numerical libraries."""
import argparse
import json
import os
import shutil
import subprocess
import sys

import numpy as np
import pytest

import synthcorona as sc
from synthcorona import catalog
from synthcorona.cli import list_items, table_info
from synthcorona.io.table_file import table_manifest, write_manifest

HEAVY = ("numpy", "astropy", "scipy", "xarray", "matplotlib", "h5py")


def test_generic_instruments_equal_the_designs():
    from synthcorona.instruments.designs import list_generic, load_generic

    assert {k: v["description"] for k, v in catalog.GENERIC_INSTRUMENTS.items()} == list_generic()
    for name, entry in catalog.GENERIC_INSTRUMENTS.items():
        ins = load_generic(name)
        assert entry["band_axis"] == ins.band_axis, name
        assert entry["bands_kev"] == {b: tuple(q.to_value("keV").tolist()) for b, q in ins.bands.items()}, name
        # the energy range is kept to the 6 significant digits 'synthcorona list' prints
        lo, hi = ins.energy_range.to_value("keV")
        assert [f"{x:g}" for x in entry["energy_range_kev"]] == [f"{lo:g}", f"{hi:g}"], name


def test_dem_models_and_abundance_sets_equal_their_modules():
    from synthcorona.io.toml import DEM_MODELS

    assert catalog.DEM_MODELS == DEM_MODELS
    assert catalog.abundance_sets() == sc.available_sets()
    assert sc.emissivity.DEFAULT_TABLE_NAME == catalog.DEFAULT_TABLE_NAME


def test_embedded_manifest_equals_the_table():
    # recomputed from the table (content hash verified); a changed table needs write_manifest again
    path = catalog.embedded_table_path()
    want = json.loads(json.dumps(table_manifest(path)))
    assert catalog.read_manifest(path) == want
    assert want["lines"] == 113452 and want["provenance"]["chianti_version"] == "10.1"  # the embedded table
    assert catalog.table_repr(want) == repr(sc.load_emissivity(path))


def _copy_with_manifest(tmp_path, name="emissivity_default.nc"):
    dest = tmp_path / name
    shutil.copyfile(catalog.embedded_table_path(), dest)
    shutil.copyfile(catalog.manifest_path(catalog.embedded_table_path()), catalog.manifest_path(dest))
    return dest


def test_manifest_is_used_only_for_the_very_file(tmp_path):
    dest = _copy_with_manifest(tmp_path)
    assert catalog.read_manifest(dest)["file_sha256"] == catalog.file_sha256(dest)
    data = bytearray(dest.read_bytes())
    data[len(data) // 2] ^= 0xFF  # one byte changed, size the same
    dest.write_bytes(bytes(data))
    assert catalog.read_manifest(dest) is None
    catalog.manifest_path(dest).write_text("{not json")
    assert catalog.read_manifest(dest) is None
    assert catalog.read_manifest(tmp_path / "absent.nc") is None


def test_altered_table_beside_a_manifest_still_fails_the_content_hash(tmp_path):
    import xarray as xr

    (tmp_path / "src").mkdir()
    src = _copy_with_manifest(tmp_path / "src")
    ds = xr.open_dataset(src, engine="h5netcdf", mask_and_scale=False, decode_cf=False).load()
    v = ds["line_emissivity"].values.copy()
    v.flat[np.flatnonzero(v != -32768)[0]] += 1
    ds["line_emissivity"].values = v
    out = tmp_path / "emissivity_default.nc"
    ds.to_netcdf(out, engine="h5netcdf")
    shutil.copyfile(catalog.manifest_path(src), catalog.manifest_path(out))  # the manifest of the unaltered file
    with pytest.raises(sc.TableFileError, match="content-hash"):
        sc.load_emissivity(out)


def test_write_manifest_writes_beside_the_table(tmp_path):
    dest = tmp_path / "copy.nc"
    shutil.copyfile(catalog.embedded_table_path(), dest)
    assert catalog.read_manifest(dest) is None
    assert write_manifest(dest) == tmp_path / "copy.json"
    m = catalog.read_manifest(dest)
    assert m["table_file"] == "copy.nc" and m["content_hash"] == sc.load_emissivity().provenance["content_hash"]


def _run(module, argv, capsys):
    p = argparse.ArgumentParser()
    module.add_arguments(p)
    assert module.run(p.parse_args(argv)) == 0
    return capsys.readouterr().out


def test_table_info_and_list_from_the_manifest_equal_those_from_the_table(tmp_path, monkeypatch, capsys):
    monkeypatch.delenv("SYNTHCORONA_TABLE", raising=False)
    assert catalog.read_manifest(catalog.embedded_table_path()) is not None
    light = {w: _run(list_items, [w], capsys) for w in ("table", "all")}
    light["info"] = _run(table_info, [], capsys)
    # the same file without a manifest beside it, under the same name: read and verified by load_emissivity
    (tmp_path / "t").mkdir()
    bare = tmp_path / "t" / catalog.DEFAULT_TABLE_NAME
    shutil.copyfile(catalog.embedded_table_path(), bare)
    monkeypatch.setenv("SYNTHCORONA_TABLE", str(bare))
    assert catalog.read_manifest(bare) is None
    assert _run(list_items, ["table"], capsys) == light["table"]
    assert _run(list_items, ["all"], capsys) == light["all"]
    assert _run(table_info, [], capsys) == light["info"]
    assert _run(table_info, [str(catalog.embedded_table_path())], capsys) == light["info"]
    assert "content_hash: 65d6a1895a757f2dd13ebf4045ad10348955d6d371fceead0ebd39c4bf856bd5" in light["info"]


def test_list_and_table_info_import_no_numerical_library():
    code = (
        "import argparse, contextlib, io, sys\n"
        "from synthcorona.cli import list_items, table_info\n"
        "with contextlib.redirect_stdout(io.StringIO()) as out:\n"
        "    for w in list_items.WHAT:\n"
        "        list_items.run(argparse.Namespace(what=w))\n"
        "    table_info.run(argparse.Namespace(table=None))\n"
        f"heavy = sorted(m for m in {HEAVY!r} if m in sys.modules)\n"
        "print(heavy, len(out.getvalue()))\n"
    )
    env = {k: v for k, v in os.environ.items() if k != "SYNTHCORONA_TABLE"}
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, env=env)
    assert run.returncode == 0, run.stderr[-2000:]
    heavy, size = run.stdout.rsplit("]", 1)
    assert heavy + "]" == "[]", run.stdout
    assert int(size) > 2000
