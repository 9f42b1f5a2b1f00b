"""The emissivity-table file (synthcorona.io.table_file): written, read back, and refused when altered.

The small table here is synthetic (smooth invented emissivities, no CHIANTI); expected values are
the written numbers themselves, to within the documented packing error.
"""
import json
import shutil
from types import SimpleNamespace

import h5py
import numpy as np
import pytest

import synthcorona as sc
from synthcorona.errors import TableFileError
from synthcorona.io.table_file import (
    DECODING_ATTRS,
    PACKED_VARS,
    decoding_hash,
    read_table,
    record_decoding_hash,
    write_table,
)

#: content_hash of the embedded table before its decoding_hash record was added (attributes only changed).
EMBEDDED_CONTENT_HASH = "65d6a1895a757f2dd13ebf4045ad10348955d6d371fceead0ebd39c4bf856bd5"


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """A two-ion synthetic table: 3 lines, 2 densities, 6 temperatures, 8 energies; and what was written."""
    logT, logn, e = np.linspace(6.0, 7.0, 6), np.array([9.0, 11.0]), np.geomspace(0.1, 10.0, 8)
    t = 10 ** logT[:, None]
    ff = 1e-23 * np.exp(-e[None, :] / (8.617e-8 * t)) / np.sqrt(t)
    results = {
        "h_1": dict(wavelength=np.array([1215.7]), emissivity=np.full((1, 2, 6), 1e-25) * np.arange(1, 7),
                    Z=1, stage=1, upper=[2], lower=[1], observed=[1], ff=ff, fb=0.5 * ff,
                    tp=np.stack([0.1 * ff, 0.2 * ff]), mass_amu=1.008, ip_ev=13.6),
        "fe_12": dict(wavelength=np.array([195.1, 193.5]), emissivity=np.geomspace(1e-27, 1e-24, 24).reshape(2, 2, 6),
                      Z=26, stage=12, upper=[30, 29], lower=[1, 1], observed=[1, 0], ff=2 * ff, fb=ff,
                      tp=np.zeros((2, 6, 8)), mass_amu=55.845, ip_ev=290.0),
    }
    settings = SimpleNamespace(logT=logT, log_density=logn, energy=e)
    path = write_table(tmp_path_factory.mktemp("table") / "small.nc", results, settings, ["H", "Fe"],
                       {"builder_version": "test"})
    return path, results


def _copy(src, tmp_path, name="copy.nc"):
    out = tmp_path / name
    shutil.copy(src, out)
    return out


def test_small_table_round_trip(small):
    path, results = small
    ds = read_table(path)
    assert json.loads(ds.attrs["decoding_hash"]).keys() == {f"{v}/{a}" for v in PACKED_VARS for a in DECODING_ATTRS}
    # lines are sorted by wavelength: 193.5, 195.1, 1215.7; each array within its recorded packing error
    # (attrs["storage_error"]), values below 1e-40 of its maximum stored as 0 (docs/table_format.md)
    err = {k: float(v.split()[-1]) for k, v in json.loads(ds.attrs["storage_error"]).items() if k != "floor"}
    want = np.concatenate([results["fe_12"]["emissivity"][::-1], results["h_1"]["emissivity"]])
    np.testing.assert_allclose(ds["line_emissivity"].values, want, rtol=err["line_emissivity"] * 1.001)
    ff = results["h_1"]["ff"]                          # element H: the h_1 ion only
    kept = ff > 1e-40 * (2 * ff.max())                 # the variable's maximum is Fe's (2 ff)
    np.testing.assert_allclose(ds["cont_ff"].values[0][kept], ff[kept], rtol=err["cont_ff"] * 1.001)
    assert np.all(ds["cont_ff"].values[0][~kept] == 0) and np.any(~kept)


@pytest.mark.parametrize("variable", PACKED_VARS)
@pytest.mark.parametrize("attribute, value", [("pack_scale", 1.0001), ("pack_offset", 0.5), ("delta_axes", None)])
def test_edited_decoding_attribute_is_named(small, tmp_path, variable, attribute, value):
    path = _copy(small[0], tmp_path)
    with h5py.File(path, "r+") as f:
        a = f[variable].attrs
        if attribute == "delta_axes":
            a[attribute] = " ".join(str(a[attribute]).split()[:-1])      # "2 1" -> "2": one axis not decoded
        else:
            a[attribute] = a[attribute] * value if attribute == "pack_scale" else a[attribute] + value
    with pytest.raises(TableFileError, match=rf"attribute '{attribute}' of variable '{variable}'.*decode wrongly") as err:
        read_table(path)
    assert (err.value.variable, err.value.attribute, err.value.path) == (variable, attribute, str(path))


def test_deleted_or_added_decoding_attribute_is_named(small, tmp_path):
    path = _copy(small[0], tmp_path)
    with h5py.File(path, "r+") as f:
        del f["cont_fb"].attrs["delta_axes"]
    with pytest.raises(TableFileError, match=r"attribute 'delta_axes' of variable 'cont_fb' \(now '<absent>'\)"):
        read_table(path)
    path = _copy(small[0], tmp_path, "other.nc")
    with h5py.File(path, "r+") as f:
        f["line_emissivity"].attrs["decoding_hash"] = "{}"
        f.attrs["decoding_hash"] = "not json"
    with pytest.raises(TableFileError, match="decoding_hash attribute is not readable") as err:
        read_table(path)
    assert err.value.attribute == "decoding_hash"


def test_table_without_record_is_checked_against_the_layout_and_can_be_recorded(small, tmp_path):
    path = _copy(small[0], tmp_path)
    with h5py.File(path, "r+") as f:
        del f.attrs["decoding_hash"]                      # as written before the record existed
    read_table(path)                                      # the layout of this format: accepted
    bad = _copy(path, tmp_path, "bad.nc")
    with h5py.File(bad, "r+") as f:
        f["cont_2p"].attrs["delta_axes"] = "1 2 3"
    with pytest.raises(TableFileError, match=r"attribute 'delta_axes' of 'cont_2p' is '1 2 3', but this format "
                                             r"writes '3 2 1'"):
        read_table(bad)
    with pytest.raises(TableFileError, match="delta_axes"):
        record_decoding_hash(bad)                          # an altered file is not recorded
    record_decoding_hash(path)
    ds = read_table(path)
    assert ds.attrs["decoding_hash"] == decoding_hash(read_table(small[0], lazy=PACKED_VARS))
    assert ds.attrs["content_hash"] == read_table(small[0]).attrs["content_hash"]


def test_embedded_table_has_its_record_and_an_unchanged_content_hash(table, tmp_path):
    ds = read_table(table.path, lazy=PACKED_VARS)
    assert ds.attrs["content_hash"] == EMBEDDED_CONTENT_HASH
    assert "decoding_hash" in ds.attrs
    # Before: a copy with delta_axes "2 1" -> "2" loaded without complaint, and its free-free continuum
    # (decoded along one axis only) gave a 2-10 keV flux of a 3 MK Gaussian DEM 20 % low.
    path = _copy(table.path, tmp_path)
    with h5py.File(path, "r+") as f:
        f["cont_ff"].attrs["delta_axes"] = "2"
    with pytest.raises(TableFileError, match=r"attribute 'delta_axes' of variable 'cont_ff'"):
        sc.load_emissivity(path)
