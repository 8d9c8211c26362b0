"""Damaged stores are read form by form: a damaged form is found, named and skipped.

Each test damages a store the way a disk, a careless tool or a hand edit would, and checks
that (a) the damage is detected (checksums of version-2 stores; read errors of version-1
stores), (b) every other form still reads, lists and exports, and (c) `salvage` copies
exactly the intact forms.  Byte offsets come from the store's own index.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import h5py
import numpy as np
import pytest

from maasscomp.cli import main
from maasscomp.errors import DamagedFormError, StoreError
from maasscomp.report.export import export_csv
from maasscomp.store import Store, export_json, salvage
from tests.store.store_form_factory import assert_forms_equal, indexed_form

V1 = Path(__file__).resolve().parent / "data" / "v1-small.h5"


def _flip(path: Path, offset: int, n: int = 8) -> None:
    """Overwrite n bytes at ``offset`` with their complement (always a change)."""
    with open(path, "r+b") as fh:
        fh.seek(offset)
        old = fh.read(n)
        fh.seek(offset)
        fh.write(bytes(255 - b for b in old))


def _row(st: Store, key: str):
    return st._idx.buf[st._idx.pos[key]]


def _make(path: Path, n: int = 5, compact: bool = False) -> tuple[list[str], list]:
    forms = [indexed_form(i) for i in range(n)]
    with Store.open(path, "a", create=True) as st:
        keys = []
        for f in forms:  # one commit each
            keys += st.add_forms([f], config_text="cfg", run_id="r")
            st.mark_task_done(f"t{len(keys)}", keys[-1:], run_id="r")
        st.put_attachment(keys[1], "scan", {"sup": 2.0, "v": np.arange(100.0)})
        if compact:
            assert st.compact()
    return keys, forms


@pytest.mark.parametrize("compact", [False, True], ids=["in-records", "in-base"])
def test_overwritten_coefficient_bytes_are_detected(tmp_path, compact, capsys):
    """Bytes inside a coefficient array (past the listed c(1..8)) change: the form fails its
    checksum on every full read; `list` still prints the right values of every form (they
    come from the checksummed index), `list --verify` and `export` skip and name the form."""
    p = tmp_path / "s.h5"
    keys, forms = _make(p, compact=compact)
    with Store.open(p) as st:
        r = _row(st, keys[2])
        _flip(p, int(r["coeffs_at"]) + 8 * 20)  # c_inf(21)
    with Store.open(p) as st:
        with pytest.raises(DamagedFormError, match=keys[2]):
            st.get(keys[2])
        assert keys[2] in st.damaged()
        for k, f in zip(keys, forms):
            if k != keys[2]:
                assert_forms_equal(st.get(k), f)
        assert [sf.key for sf in st.iter_forms()] == [k for k in keys if k != keys[2]]
    assert main(["list", str(p)]) == 0  # the index is intact
    out = capsys.readouterr().out
    assert f"{forms[2].coeffs[0, 1]:.10f}" in out and "5 forms" in out
    assert main(["list", str(p), "--verify"]) == 1
    cap = capsys.readouterr()
    assert "4 forms" in cap.out and keys[2] in cap.err and "checksum" in cap.err
    assert main(["export", str(p), "--json", str(tmp_path / "o.json")]) == 1
    doc = json.loads((tmp_path / "o.json").read_text())
    assert [r["key"] for r in doc["forms"]] == [k for k in keys if k != keys[2]]
    assert [d["key"] for d in doc["damaged"]] == [keys[2]]


def test_damaged_index_row_in_the_base(tmp_path, capsys):
    """A byte of one row of the base's form table changes: that form is listed as damaged
    (its row fails its checksum), the others list and export."""
    p = tmp_path / "s.h5"
    keys, forms = _make(p, compact=True)
    with h5py.File(p, "r") as h:
        off = h["forms/rows"].id.get_offset()
        itemsize = h["forms/rows"].dtype.itemsize
    _flip(p, off + 3 * itemsize + 16, 1)  # R of row 3
    with Store.open(p) as st:
        assert list(st.damaged()) == [keys[3]]
        assert [r["key"] for r in st.summary_rows()] == [k for k in keys if k != keys[3]]
    assert main(["list", str(p)]) == 1
    cap = capsys.readouterr()
    assert "4 forms" in cap.out and keys[3] in cap.err and "index row" in cap.err
    damaged: list = []
    assert export_csv(p, tmp_path / "o.csv", damaged=damaged) == 4
    assert [k for k, _ in damaged] == [keys[3]]


def test_damaged_commit_record_loses_only_its_own_forms(tmp_path):
    """The index part of one commit record in the middle of the log changes: the forms of
    that commit are lost (reported), every later commit still reads; writers are refused."""
    p = tmp_path / "s.h5"
    keys, forms = _make(p)
    with Store.open(p) as st:
        r = _row(st, keys[2])
        # the record's index part ends where its data part (holding coeffs first) begins
        _flip(p, int(r["coeffs_at"]) - 40, 4)
    with Store.open(p) as st:
        notes = [k for k in st.damaged() if k.startswith("(record")]
        assert len(notes) == 1
        assert keys[2] not in st and st.keys(order="written") == [k for k in keys if k != keys[2]]
        for k, f in zip(keys, forms):
            if k != keys[2]:
                assert_forms_equal(st.get(k), f)
    with pytest.raises(StoreError, match="salvage"):
        Store.open(p, "a")


def test_damaged_attachment(tmp_path):
    p = tmp_path / "s.h5"
    keys, _ = _make(p)
    with Store.open(p) as st:
        a = st._idx.atts[st._idx.pos[keys[1]]]["scan"]
        _flip(p, a.at + a.length - 16)
    with Store.open(p) as st:
        with pytest.raises(DamagedFormError, match="attachment 'scan'"):
            st.get_attachment(keys[1], "scan")
        assert st.get(keys[1]).level == indexed_form(1).level  # the form itself is intact
        bad: list = []
        assert list(st.iter_attachments("scan", damaged=bad)) == [] and len(bad) == 1
    damaged: list = []
    export_json(p, tmp_path / "o.json", attachments=True, damaged=damaged)
    assert [k for k, _ in damaged] == [f"{keys[1]} [attachment scan]"]


def test_salvage_copies_exactly_the_intact_forms(tmp_path, capsys):
    p = tmp_path / "s.h5"
    keys, forms = _make(p)
    with Store.open(p) as st:
        _flip(p, int(_row(st, keys[0])["errors_at"]) + 8)
    p.chmod(0o444)  # salvage only reads
    new = tmp_path / "new.h5"
    assert main(["salvage", str(p), str(new)]) == 0
    out = capsys.readouterr().out
    assert "4 intact forms and 1 attachments copied" in out and keys[0] in out
    assert "task t1 of run r is no longer marked done" in out
    with Store.open(new) as st:
        assert st.keys(order="written") == keys[1:] and st.verify() == {}
        for k, f in zip(keys[1:], forms[1:]):
            assert_forms_equal(st.get(k), f)
        assert st.get_attachment(keys[1], "scan")["sup"] == 2.0
        assert set(st.done_tasks("r")) == {"t2", "t3", "t4", "t5"}
        assert st.provenance(keys[1])["config"] == "cfg"
    with pytest.raises(StoreError, match="exists"):
        salvage(p, new)


def test_version1_store_with_damaged_forms(tmp_path, capsys):
    """A version-1 store with a missing dataset, a deleted attribute and bad JSON in three
    forms: those three are skipped and named; the others list, export and salvage."""
    p = tmp_path / "old.h5"
    shutil.copyfile(V1, p)
    with Store.open(p) as st:
        keys = st.keys(order="written")
    with h5py.File(p, "a") as h:
        del h["forms"][keys[0]]["coeffs"]
        del h["forms"][keys[1]].attrs["R"]
        del h["forms"][keys[2]]["extra"]
        h["forms"][keys[2]]["extra"] = "{not json"
    assert main(["list", str(p)]) == 1  # the index holds no JSON: two forms are seen damaged
    cap = capsys.readouterr()
    assert "4 forms" in cap.out and keys[0] in cap.err and keys[1] in cap.err
    assert main(["list", str(p), "--verify"]) == 1
    cap = capsys.readouterr()
    assert "3 forms" in cap.out and keys[2] in cap.err
    assert main(["export", str(p), "--json", str(tmp_path / "o.json"),
                 "--csv", str(tmp_path / "o.csv")]) == 1
    doc = json.loads((tmp_path / "o.json").read_text())
    assert [r["key"] for r in doc["forms"]] == keys[3:]
    assert {d["key"] for d in doc["damaged"]} == set(keys[:3])
    with pytest.raises(StoreError, match="salvage"):
        Store.open(p, "a")  # no migration of a damaged version-1 store
    new = tmp_path / "new.h5"
    rep = salvage(p, new)
    assert rep.forms_copied == 3 and {k for k, _ in rep.damaged} == set(keys[:3])
    with Store.open(new) as st:
        assert st.schema_version == 2 and st.keys(order="written") == keys[3:] and st.verify() == {}
