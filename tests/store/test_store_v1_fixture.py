"""A store written by the schema-version-1 writer still opens, lists and exports.

``tests/store/data/v1-small.h5`` was made by ``make_v1_fixture.py`` with the version-1
writer, and ``v1-small.export.json`` is the JSON export the same old code made of it.  The
current reader must give back every field of that export unchanged (the new export may add
fields; none may change or disappear).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from maasscomp.cli import main
from maasscomp.store import Store, export_json

DATA = Path(__file__).resolve().parent / "data"
V1 = DATA / "v1-small.h5"
V1_EXPORT = DATA / "v1-small.export.json"

#: fields of the old export that describe the export run, not the store
_VOLATILE = {"source", "exported_utc", "package_version"}


def _contains(new, old, where="") -> None:
    """Every value of ``old`` is present and equal in ``new`` (dicts may gain keys)."""
    if isinstance(old, dict):
        assert isinstance(new, dict), where
        for k, v in old.items():
            assert k in new, f"{where}.{k} missing"
            _contains(new[k], v, f"{where}.{k}")
    elif isinstance(old, list):
        assert isinstance(new, list) and len(new) == len(old), where
        for i, (a, b) in enumerate(zip(new, old)):
            _contains(a, b, f"{where}[{i}]")
    else:
        assert new == old, f"{where}: {new!r} != {old!r}"


def _as_format_2(old: dict, new: dict) -> dict:
    """The old export (format 1) in the terms of format 2: config texts of runs are
    ``config_text`` (``config`` is the parsed object), a form's config is referenced by
    ``config_id`` into ``configs``. Checks the moved texts and returns the rest to compare."""
    old = json.loads(json.dumps(old))
    assert old.pop("format_version") == 1 and new["format_version"] == 2
    order = [r["key"] for r in new["forms"]]  # format 2 lists the forms sorted by (level, R)
    old["forms"].sort(key=lambda r: order.index(r["key"]))
    for rid, run in old["runs"].items():
        run["config_text"] = run.pop("config")
    for rec, got in zip(old["forms"], new["forms"]):
        text = rec["provenance"].pop("config")
        cid = got["provenance"]["config_id"]
        assert (new["configs"][cid]["text"] if cid else "") == text
    return old


@pytest.fixture
def v1_copy(tmp_path):
    """A read-only copy: reading, listing and exporting must not need write permission."""
    import os

    p = tmp_path / "old.h5"
    shutil.copyfile(V1, p)
    os.chmod(p, 0o444)
    return p


def test_v1_store_opens_and_reads_every_form(v1_copy):
    old = json.loads(V1_EXPORT.read_text())
    with Store.open(v1_copy, "r") as st:
        assert st.schema_version == 1
        assert st.keys(order="written") == [r["key"] for r in old["forms"]]
        for rec in old["forms"]:
            f = st.get(rec["key"])
            assert f.level == rec["level"] and f.R == rec["R"]
            assert f.symmetry.label == rec["symmetry"]["label"]
            assert f.coeffs.shape == (rec["n_cusps"], rec["M"])


def test_v1_store_exports_what_the_old_code_exported(v1_copy, tmp_path):
    old = json.loads(V1_EXPORT.read_text())
    out = tmp_path / "new.json"
    assert export_json(v1_copy, out, attachments=True) == len(old["forms"])
    new = json.loads(out.read_text())
    for k in _VOLATILE:
        old.pop(k, None)
    _contains(new, _as_format_2(old, new))


def test_v1_store_lists(v1_copy, capsys):
    assert main(["list", str(v1_copy), "--coeffs", "2"]) == 0
    out = capsys.readouterr().out
    old = json.loads(V1_EXPORT.read_text())
    for rec in old["forms"]:
        assert rec["key"] in out
    assert f"{len(old['forms'])} forms" in out


def test_first_write_migrates_to_version_2_keeping_everything(v1_copy, tmp_path):
    """Opening a version-1 store for writing rewrites it as version 2 (same keys, forms,
    attachments, runs, provenance and file mode); the next export equals the old one."""
    import os

    os.chmod(v1_copy, 0o640)
    old = json.loads(V1_EXPORT.read_text())
    with Store.open(v1_copy, "a") as st:
        assert st.schema_version == 2
        assert st.keys(order="written") == [r["key"] for r in old["forms"]]
    assert os.stat(v1_copy).st_mode & 0o777 == 0o640
    out = tmp_path / "migrated.json"
    export_json(v1_copy, out, attachments=True)
    new = json.loads(out.read_text())
    for k in _VOLATILE:
        old.pop(k, None)
    old["store"].pop("schema_version")
    _contains(new, _as_format_2(old, new))
    assert new["store"]["schema_version"] == 2
    with Store.open(v1_copy) as st:
        assert st.verify() == {}
