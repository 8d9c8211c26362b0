"""Exports of the README's demo store (tests/conftest.py ``readme_session``: three scanned
level-1 forms with their runs, norms and checks): the JSON document against
docs/export-schema.json, a round trip of every field found by walking the HDF5 file, the CSV
tables, the plain-text coefficient tables and the LaTeX tables.

What these tests can detect: a field the store writes that the JSON export leaves out or
changes (the walk lists every dataset, attribute, row column and metadata key of the file and
fails on one it does not know); an export that breaks its schema; precision lost in any table.
They cannot detect a wrong value that is stored wrong (that is the search's tests' job).
"""

from __future__ import annotations

import csv
import json
import math
import shutil
from pathlib import Path

import h5py
import numpy as np
import pytest

from maasscomp.cli import main
from maasscomp.store import Store
from maasscomp.store import _layout as L
from maasscomp.store import schema as S
from maasscomp.store._codec import decode_mapping, decode_tree, to_plain_json

REPO = Path(__file__).resolve().parents[2]
SCHEMA = REPO / "docs" / "export-schema.json"


@pytest.fixture(scope="module")
def demo(readme_session, tmp_path_factory):
    """A compacted copy of the demo store (so that every form sits in the HDF5 base) and its
    export folder written by ``maasscomp export --out``."""
    folder, _ = readme_session
    d = tmp_path_factory.mktemp("export")
    store = d / "demo.h5"
    shutil.copyfile(folder / "demo-forms.h5", store)
    with Store.open(store, "a") as st:
        st.compact()
    assert main(["export", str(store), "--out", str(d / "out")]) == 0
    return store, d / "out"


def test_json_export_validates_against_the_schema(demo):
    """docs/export-schema.json (draft 2020-12, additionalProperties false at every fixed level)
    accepts the export; a record with an unknown field or a string R is refused."""
    import jsonschema

    schema = json.loads(SCHEMA.read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    doc = json.loads((demo[1] / "forms.json").read_text())
    v = jsonschema.Draft202012Validator(schema)
    v.validate(doc)
    assert len(doc["forms"]) == 3 and all(r["attachments"] for r in doc["forms"])
    bad = json.loads(json.dumps(doc))
    bad["forms"][0]["surprise"] = 1
    assert not v.is_valid(bad)
    bad = json.loads(json.dumps(doc))
    bad["forms"][0]["R"] = "9.53"
    assert not v.is_valid(bad)


# Columns of /forms/rows that describe storage, not the form (offsets into the pools,
# checksums, padding, the preview copy of the first coefficients), and how every other column
# appears in an exported record. A column added to the row layout and not listed here fails.
STORAGE_COLUMNS = {"pad", "coeffs_at", "errors_at", "meta_at", "meta_len", "labels_at", "labels_len",
                   "data_sum", "row_sum"}
ROW_TO_RECORD = {
    "seq": lambda r: r["provenance"]["seq"],
    "level": lambda r: r["level"], "R": lambda r: r["R"], "R_error": lambda r: r["R_error"],
    "hecke_residual": lambda r: r["hecke_residual"],
    "solver_Y": lambda r: r["solver"]["Y"], "solver_eps": lambda r: r["solver"]["eps"],
    "solver_M0": lambda r: r["solver"]["M0"], "solver_Q": lambda r: r["solver"]["Q"],
    "multiplicity": lambda r: r["multiplicity"], "basis_index": lambda r: r["basis_index"],
    "n_cusps": lambda r: r["n_cusps"], "M": lambda r: r["M"],
    "parity": lambda r: L.PARITY_CODES[r["symmetry"]["parity"]],
    "is_new": lambda r: {v: k for k, v in S.IS_NEW_FROM_CODE.items()}[r["is_new"]],
    "coeffs_kind": lambda r: L.KIND_COMPLEX if isinstance(r["coeffs"][0][0], dict) else L.KIND_REAL,
    "errors_kind": lambda r: L.KIND_COMPLEX if isinstance(r["coeff_errors"][0][0], dict) else L.KIND_REAL,
    "char_modulus": lambda r: r["character"]["modulus"], "char_conductor": lambda r: r["character"]["conductor"],
    "preview": None,  # checked against the coefficients below
}


def _plain(v):
    v = to_plain_json(v)
    return json.loads(json.dumps(v))


def test_every_stored_field_round_trips_through_the_json_export(demo):
    """Walk the HDF5 file (root attributes, every group and dataset, every column of the form
    rows, every key of each form's metadata, every attachment, run and config text) and find
    each value in the export."""
    store, out = demo
    doc = json.loads((out / "forms.json").read_text())
    recs = {r["key"]: r for r in doc["forms"]}
    seen_paths = set()
    with h5py.File(store, "r", locking=False) as h:
        h.visit(seen_paths.add)
        # root attributes
        for name, value in h.attrs.items():
            assert _plain(value.item() if hasattr(value, "item") else value) == doc["store"][name], name
        rows = h[S.D_ROWS][...]
        values = h[S.D_VALUES][...]
        meta = h[S.D_META][...].tobytes()
        labels = h[S.D_LABELS][...].tobytes()
        unknown = set(rows.dtype.names) - STORAGE_COLUMNS - set(ROW_TO_RECORD)
        assert not unknown, f"row columns the export test does not know: {unknown}"
        by_seq = {}
        for row in rows:
            key, sym, char = L.split_labels(labels[row["labels_at"]:row["labels_at"] + row["labels_len"]])
            rec = recs[key]
            by_seq[int(row["seq"])] = key
            assert rec["symmetry"]["label"] == sym and rec["character"]["label"] == char
            for col, get in ROW_TO_RECORD.items():
                if get is not None:
                    assert get(rec) == row[col].item(), (key, col)
            nc, M = int(row["n_cusps"]), int(row["M"])
            for at, kind, name in ((row["coeffs_at"], row["coeffs_kind"], "coeffs"),
                                   (row["errors_at"], row["errors_kind"], "coeff_errors")):
                n = nc * M * (2 if kind == L.KIND_COMPLEX else 1)
                a = values[int(at):int(at) + n]
                a = a.view(np.complex128) if kind == L.KIND_COMPLEX else a
                assert _plain(a.reshape(nc, M)) == rec[name], (key, name)
            pv = row["preview"][: 2 * min(M, L.PREVIEW)]
            assert pv[0::2].tolist() == [float(np.real(complex(x["re"], x["im"])) if isinstance(x, dict) else x)
                                         for x in rec["coeffs"][0][: len(pv) // 2]]
            blob, arrays = L.unpack_blob(meta[row["meta_at"]:row["meta_at"] + row["meta_len"]])
            for k in blob:  # every metadata key of the form
                if k == S.M_SYMMETRY:
                    assert blob[k]["parity"] == rec["symmetry"]["parity"]
                    assert blob[k]["al_signs"] == rec["symmetry"]["al_signs"]
                elif k == S.M_CHARACTER:
                    assert blob[k]["modulus"] == rec["character"]["modulus"]
                    assert blob[k]["exponents"] == rec["character"]["exponents"]
                elif k == S.M_CUSPS:
                    assert [list(c[:4]) for c in blob[k]] == [[c["name"], c["a"], c["c"], c["width"]]
                                                              for c in rec["cusps"]]
                    assert [[[c[4], c[5]], [c[6], c[7]]] for c in blob[k]] == [c["scaling"] for c in rec["cusps"]]
                elif k == S.M_EXTRA:
                    assert _plain(decode_tree(blob[k], arrays)) == rec["extra"]
                elif k == S.M_FIELDS:
                    assert _plain({n: decode_tree(v, arrays) for n, v in blob[k].items()}) == rec.get("fields", {})
                elif k == S.M_PROVENANCE:
                    p = blob[k]
                    assert {x: p[x] for x in ("package_version", "created_utc", "run_id")} == {
                        x: rec["provenance"][x] for x in ("package_version", "created_utc", "run_id")}
                    assert p["config_id"] == (rec["provenance"]["config_id"] or "")
                    text = h[S.TEXTS_GROUP][p["config_id"]].asstr()[()]
                    assert doc["configs"][p["config_id"]]["text"] == text
                    parsed = doc["configs"][p["config_id"]]["parsed"]
                    assert isinstance(parsed, dict) and parsed["job"]["name"] == "demo-level-1"
                else:
                    raise AssertionError(f"metadata key {k!r} of the form is not checked by this test")
        # attachments: every row, by form and name
        arows = h[S.D_ATT_ROWS][...]
        names = h[S.D_ATT_NAMES][...].tobytes()
        blobs = h[S.D_ATT_BLOBS][...].tobytes()
        assert len(arows) == 6  # an L2 norm and a scan per form
        for a in arows:
            key = by_seq[int(a["form_seq"])]
            name = names[a["name_at"]:a["name_at"] + a["name_len"]].decode()
            data = decode_mapping(*L.unpack_blob(blobs[a["blob_at"]:a["blob_at"] + a["blob_len"]]))
            assert _plain(data) == recs[key]["attachments"][name], (key, name)
        # runs: attributes, the job record, the finished tasks
        for rid, g in h[S.RUNS_GROUP].items():
            run = doc["runs"][rid]
            for name, value in g.attrs.items():
                assert run[name] == _plain(value), (rid, name)
            text = g[S.RUN_D_CONFIG].asstr()[()]
            assert run["config_text"] == text and run["config"] == json.loads(text)
            tasks = json.loads(g[S.RUN_D_TASKS].asstr()[()])
            assert run["done_tasks"] == {t: v[1] for t, v in tasks.items()}
            assert set(g) == {S.RUN_D_CONFIG, S.RUN_D_TASKS}, set(g)
    # nothing in the file that the walk above did not visit
    known = {S.FORMS_GROUP, S.D_ROWS, S.D_VALUES, S.D_META, S.D_LABELS, S.D_BLOCK_SUMS, S.ATT_GROUP,
             S.D_ATT_ROWS, S.D_ATT_NAMES, S.D_ATT_BLOBS, S.RUNS_GROUP, S.TEXTS_GROUP}
    extra = {p for p in seen_paths if p not in known and not p.startswith((S.RUNS_GROUP + "/", S.TEXTS_GROUP + "/"))}
    assert not extra, f"HDF5 objects the export test does not know: {extra}"
    assert set(doc["configs"]) == set(h5py.File(store, "r", locking=False)[S.TEXTS_GROUP])


def test_text_coefficient_table_reads_back_to_full_precision(demo):
    """The first level-1 form's table: '#' header lines, then n re im err with 17 significant
    digits, read back bit for bit with one line."""
    store, out = demo
    with Store.open(store) as st:
        key = st.select(level=1)[0]
        f = st[key]
    path = out / "coefficients" / f"{key}.txt"
    text = path.read_text()
    head = [ln for ln in text.splitlines() if ln.startswith("#")]
    for field in ("# level: 1", f"# R: {f.R!r}", "# symmetry: odd", "# character: X1", "# cusp: inf"):
        assert any(ln.startswith(field) for ln in head), field
    rows = [tuple(map(float, ln.split())) for ln in open(path) if not ln.startswith("#")]
    assert [int(r[0]) for r in rows] == list(range(1, f.coeffs.shape[1] + 1))
    assert np.array_equal([r[1] for r in rows], f.coeffs[0].real)
    assert np.array_equal([r[2] for r in rows], np.zeros(f.coeffs.shape[1]))
    assert np.array_equal([r[3] for r in rows], f.coeff_errors[0])
    assert all(len(t.split("e")[0].replace("-", "").replace(".", "")) == 17
               for ln in text.splitlines() if not ln.startswith("#") for t in ln.split()[1:])


def test_csv_tables_hold_every_coefficient_and_honest_checks(demo):
    store, out = demo
    with Store.open(store) as st:
        forms = {k: st[k] for k in st}
    with open(out / "coefficients.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == sum(f.coeffs.size for f in forms.values())
    for r in rows:
        assert float(r["c"]) == forms[r["key"]].coeffs[int(r["cusp"]), int(r["n"]) - 1]
    with open(out / "checks.csv", newline="") as fh:
        checks = list(csv.DictReader(fh))
    assert [c["key"] for c in checks] == list(forms)
    u = 2.0**-53
    for c in checks:
        # R_error is the largest of its parts (docs: DEVELOPERS.md, the search): never below
        # the spread of the two heights' roots nor the rounding bound
        parts = (float(c["two_height_spread"]), float(c["rounding_bound"]), 4 * u * float(c["R"]))
        assert float(c["R_error"]) == max(parts)
        assert c["atkin_lehner_residual"] == ""  # no Atkin-Lehner relation at level 1
        assert c["lfunction_passed"] == "true" and c["lfunction_sign"] == c["lfunction_predicted_sign"]
    with open(out / "scans.csv", newline="") as fh:
        scans = list(csv.DictReader(fh))
    assert sorted(s["key"] for s in scans) == sorted(forms)
    assert all(float(s["global_peak"]) > 0 for s in scans)


def test_latex_tables_use_booktabs_and_the_digits_R_error_supports(demo):
    store, out = demo
    eig = (out / "latex" / "eigenvalues.tex").read_text()
    co = (out / "latex" / "coefficients.tex").read_text()
    for t in (eig, co):
        assert t.index("\\toprule") < t.index("\\midrule") < t.index("\\bottomrule")
        assert "\\hline" not in t
    with Store.open(store) as st:
        for k in st:
            f = st[k]
            d = int(min(14, max(3, math.floor(-math.log10(f.R_error)))))
            assert f"{f.R:.{d}f}" in eig
            assert f"{f.coeffs[0, 1]:.10f}".replace("-", "$-$") in co


def test_export_options_name_what_they_wrote(demo, tmp_path, capsys):
    store, _ = demo
    assert main(["export", str(store), "--coeffs-csv", str(tmp_path / "c.csv")]) == 0
    assert capsys.readouterr().out.strip() == f"wrote 3 forms (180 coefficients) to {tmp_path / 'c.csv'}"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.csv"]
    assert main(["export", str(store)]) == 2
    assert "export needs --out DIR" in capsys.readouterr().err
