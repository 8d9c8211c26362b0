"""JSON and CSV exports parse back and agree with the store bit for bit."""

from __future__ import annotations

import csv
import json
import math

import numpy as np
import pytest

from maasscomp.errors import InputError, StoreError
from maasscomp.groups import gamma0, unit_generators
from maasscomp.spectrum.form import Form
from maasscomp.report.export import SUMMARY_COLUMNS, export_csv
from maasscomp.store import Store, export_json
from tests.store.store_form_factory import random_form


def _from_json_float(x):
    return float(x) if isinstance(x, str) else x  # "nan"/"inf" strings (strict JSON)


@pytest.fixture
def store(tmp_path):
    rng = np.random.default_rng(99)
    forms = [random_form(rng, M=int(rng.integers(3, 15))) for _ in range(8)]
    f = forms[0]
    forms[1] = Form(level=f.level, R=f.R + 1.0, symmetry=f.symmetry, coeffs=f.coeffs.copy(),
                    coeff_errors=np.full_like(f.coeff_errors, np.inf), R_error=f.R_error,
                    hecke_residual=math.inf, params=f.params, is_new=True, extra={})
    forms.append(random_form(rng, level=6, M=5, complex_coeffs=True))
    p = tmp_path / "s.h5"
    with Store.open(p, "a", create=True) as st:
        rid = st.begin_run("demo-run", config_text="level = 6\n")
        keys = st.add_forms(forms, config_text="level = 6\n", run_id=rid)
        st.mark_task_done("t0", keys[:3], run_id=rid)
        st.put_attachment(keys[2], "scan", {"peak": np.array([0.5, 1.25]), "sup": 2.0})
    return p, keys, forms


def _sorted(keys, forms):
    """Exports list the forms sorted by (level, R, basis index)."""
    order = sorted(range(len(keys)), key=lambda i: (forms[i].level, forms[i].R, forms[i].basis_index, i))
    return [keys[i] for i in order], [forms[i] for i in order]


def test_json_export_parses_back_identical(store, tmp_path):
    p, keys, forms = store
    out = tmp_path / "o.json"
    assert export_json(p, out, attachments=True) == len(forms)
    doc = json.loads(out.read_text())  # strict JSON: no NaN tokens
    assert doc["format"] == "maasscomp-export" and doc["store"]["schema_version"] == 2
    assert doc["damaged"] == []
    assert doc["runs"]["demo-run"]["done_tasks"] == {"t0": keys[:3]}
    inf_key, scan_key = keys[1], keys[2]
    keys, forms = _sorted(keys, forms)
    assert [r["key"] for r in doc["forms"]] == keys
    for rec, f in zip(doc["forms"], forms):
        assert rec["level"] == f.level and rec["R"] == f.R
        assert rec["symmetry"]["label"] == f.symmetry.label
        assert [tuple(x) for x in rec["symmetry"]["al_signs"]] == list(f.symmetry.al_signs)
        assert _from_json_float(rec["hecke_residual"]) == f.hecke_residual
        assert rec["solver"] == f.params.as_dict() and rec["is_new"] is f.is_new
        assert doc["configs"][rec["provenance"]["config_id"]]["text"] == "level = 6\n"
        if np.iscomplexobj(f.coeffs):  # complex numbers are {"re", "im"} objects
            c = np.array([[complex(z["re"], z["im"]) for z in row] for row in rec["coeffs"]])
        else:
            c = np.array(rec["coeffs"], dtype=float)
        assert c.tobytes() == f.coeffs.tobytes()
        e = np.array([[_from_json_float(x) for x in row] for row in rec["coeff_errors"]])
        np.testing.assert_array_equal(e, f.coeff_errors)
        # the cusp rows and the character come with every form (trivial character mod N)
        g = gamma0(f.level)
        assert [c["name"] for c in rec["cusps"]] == [c.name for c in g.cusps[:f.coeffs.shape[0]]]
        for c, cusp in zip(rec["cusps"], g.cusps):
            assert [c["a"], c["c"]] == list(cusp.representative)
            assert c["width"] == cusp.width and c["scaling"] == [list(r) for r in cusp.scaling]
        assert rec["character"]["modulus"] == f.level and rec["character"]["conductor"] == 1
        assert set(rec["character"]["exponents"]) <= {0}
        assert rec["character"]["label"] in rec["key"] and rec["character"]["label"] in rec["label"]
    by_key = {r["key"]: r for r in doc["forms"]}
    assert by_key[inf_key]["coeff_errors"][0][0] == "inf"
    assert by_key[scan_key]["attachments"]["scan"] == {"peak": [0.5, 1.25], "sup": 2.0}
    plain = [k for k in keys if k != scan_key][:1]
    assert json.loads(_export(p, tmp_path, plain))["forms"][0]["attachments"] == {}


def _export(p, tmp_path, keys):
    out = tmp_path / "sub.json"
    export_json(p, out, keys=keys)
    return out.read_text()


def test_json_export_of_selected_keys_and_missing_key(store, tmp_path):
    p, keys, _ = store
    doc = json.loads(_export(p, tmp_path, [keys[3], keys[0]]))
    assert [r["key"] for r in doc["forms"]] == [keys[3], keys[0]]
    out = tmp_path / "keep.json"
    out.write_text("old")
    with pytest.raises(StoreError, match="no form with key 'N0_x'"):
        export_json(p, out, keys=["N0_x"])
    assert out.read_text() == "old"  # a failed export leaves the old file untouched


def test_csv_exports_parse_back(store, tmp_path):
    p, keys, forms = store
    out, long = tmp_path / "o.csv", tmp_path / "c.csv"
    assert export_csv(p, out, n_coeffs=6, coeffs_path=long) == len(forms)
    keys, forms = _sorted(keys, forms)
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0]) == list(SUMMARY_COLUMNS) + [f"c{n}" for n in range(1, 7)]
    for r, k, f in zip(rows, keys, forms):
        assert r["key"] == k and int(r["level"]) == f.level and r["symmetry"] == f.symmetry.label
        assert float(r["R"]) == f.R and float(r["R_error"]) == f.R_error
        assert float(r["hecke_residual"]) == f.hecke_residual
        assert r["is_new"] == {True: "true", False: "false", None: ""}[f.is_new]
        signs = [tuple(int(x) for x in t.split(":")) for t in r["al_signs"].split(";") if t]
        assert signs == list(f.symmetry.al_signs)
        assert int(r["M"]) == f.coeffs.shape[1] and int(r["n_cusps"]) == f.coeffs.shape[0]
        for n in range(1, 7):
            cell = r[f"c{n}"]
            if n <= f.coeffs.shape[1]:
                assert complex(cell) == f.coeffs[0, n - 1]
            else:
                assert cell == ""
        json.loads(r["extra"])
        assert r["character"] == f"X{f.level}" + ".0" * len(unit_generators(f.level))
        assert r["cusps"] == ";".join(c.name for c in gamma0(f.level).cusps[:f.coeffs.shape[0]])
    with open(long, newline="") as fh:
        crow = list(csv.DictReader(fh))
    assert len(crow) == sum(f.coeffs.size for f in forms)
    by_key = dict(zip(keys, forms))
    for r in crow:
        f = by_key[r["key"]]
        j, n = int(r["cusp"]), int(r["n"])
        want = f.coeffs[j, n - 1]
        got = complex(r["c"]) if np.iscomplexobj(f.coeffs) else float(r["c"])
        assert got == want and type(got) is type(want.item())
        assert float(r["error"]) == f.coeff_errors[j, n - 1]
        assert r["cusp_name"] == gamma0(f.level).cusps[j].name


def test_csv_bad_n_coeffs(store, tmp_path):
    p, _, _ = store
    with pytest.raises(InputError, match="n_coeffs -1"):
        export_csv(p, tmp_path / "o.csv", n_coeffs=-1)


def test_exports_leave_no_temporaries(store, tmp_path):
    p, _, _ = store
    export_json(p, tmp_path / "a.json")
    export_csv(p, tmp_path / "a.csv")
    assert not [x for x in tmp_path.iterdir() if ".tmp." in x.name]


def test_fast_records_equal_the_records_of_whole_forms(store):
    """Exports read plain records without building Form objects; they must give exactly
    what the full reader gives."""
    from maasscomp.store.export import record_of
    from maasscomp.store.store import FormRecord

    p, keys, _ = store
    with Store.open(p) as st:
        fast = [record_of(r) for r in st.iter_records()]
        full = [record_of(FormRecord.from_stored(st.read(k))) for k in st.keys()]
    assert json.dumps(fast, sort_keys=True) == json.dumps(full, sort_keys=True)
