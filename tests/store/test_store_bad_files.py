"""Files that are missing, not HDF5, HDF5 but not a store, or of a newer schema."""

from __future__ import annotations

import h5py
import numpy as np
import pytest

from maasscomp.errors import InputError, StoreError
from maasscomp.report.export import export_csv
from maasscomp.store import SCHEMA_VERSION, Store, export_json
from tests.store.store_form_factory import indexed_form


def test_missing_file_names_the_file(tmp_path):
    p = tmp_path / "absent.h5"
    with pytest.raises(StoreError, match=rf"store file {p} does not exist"):
        Store.open(p, "r")
    with pytest.raises(StoreError, match="does not exist"):
        export_json(p, tmp_path / "out.json")
    assert not (tmp_path / "out.json").exists()


def test_missing_directory_in_write_mode(tmp_path):
    p = tmp_path / "no" / "such" / "dir.h5"
    with pytest.raises(StoreError, match=rf"directory {p.parent} does not exist"):
        Store.open(p, "a", create=True)


def test_text_file_is_not_hdf5(tmp_path):
    p = tmp_path / "notes.h5"
    p.write_text("level,R\n1,9.53\n")
    for mode in ("r", "a"):
        with pytest.raises(StoreError, match=rf"{p} is not an HDF5 file; expected a maasscomp store"):
            Store.open(p, mode)
    assert p.read_text() == "level,R\n1,9.53\n"


def test_truncated_store(tmp_path):
    """Cut inside the last commit record: that commit is gone (as after a killed writer),
    the earlier ones stay.  Cut inside the HDF5 part: the store still opens for reading,
    reports the damage, and refuses writers."""
    p = tmp_path / "cut.h5"
    with Store.open(p, "a", create=True) as st:
        st.add_forms([indexed_form(0)])
        st.add_forms([indexed_form(1)])
    data = p.read_bytes()
    p.write_bytes(data[:-100])
    with Store.open(p, "r") as st:
        assert len(st) == 1 and st.damaged() == {}
        assert st.info()["unfinished_bytes"] > 0
    with Store.open(p, "a") as st:  # the next writer cuts the unfinished commit off
        assert len(st) == 1
    assert len(p.read_bytes()) < len(data) - 100
    p.write_bytes(data[:2000])  # inside the HDF5 part
    with Store.open(p, "r") as st:
        assert len(st) == 0
        assert any("HDF5 part" in why for why in st.damaged().values())
    with pytest.raises(StoreError, match="damaged.*salvage"):
        Store.open(p, "a")


def test_foreign_hdf5_is_refused(tmp_path):
    p = tmp_path / "other.h5"
    with h5py.File(p, "w") as h:
        h["x"] = np.arange(4)
    with pytest.raises(StoreError, match=r"is an HDF5 file but not a maasscomp store: root attribute "
                                         r"'format' is missing, expected 'maasscomp-store'"):
        Store.open(p, "r")
    with h5py.File(p, "a") as h:
        h.attrs["format"] = "something-else"
    with pytest.raises(StoreError, match=r"'format' is 'something-else'"):
        Store.open(p, "r")


def test_newer_schema_is_refused(tmp_path):
    p = tmp_path / "future.h5"
    with Store.open(p, "a", create=True) as st:
        st.add_forms([indexed_form(0)])
    with h5py.File(p, "a") as h:
        h.attrs["schema_version"] = np.int64(SCHEMA_VERSION + 1)
    for mode in ("r", "a"):
        with pytest.raises(StoreError, match=rf"{p} has store schema version {SCHEMA_VERSION + 1}, "
                                             rf"newer than version {SCHEMA_VERSION}.*upgrade"):
            Store.open(p, mode)
    with h5py.File(p, "a") as h:
        h.attrs["schema_version"] = "one"
    with pytest.raises(StoreError, match="expected an integer"):
        Store.open(p, "r")


def test_damaged_store_missing_group(tmp_path):
    p = tmp_path / "damaged.h5"
    Store.open(p, "a", create=True).close()
    with h5py.File(p, "a") as h:
        del h["runs"]
    with pytest.raises(StoreError, match=r"damaged: group /runs"):
        Store.open(p, "r")


def test_export_to_missing_directory(tmp_path):
    p = tmp_path / "s.h5"
    Store.open(p, "a", create=True).close()
    with pytest.raises(InputError, match="cannot write .*nodir/o.csv: directory .*nodir does not exist"):
        export_csv(p, tmp_path / "nodir" / "o.csv")
