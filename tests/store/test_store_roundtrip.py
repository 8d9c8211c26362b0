"""Round trip, listing, duplicates, transactions, attachments and runs of the HDF5 store."""

from __future__ import annotations

import os

import h5py
import numpy as np
import pytest

from maasscomp.errors import InputError, StoreError
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum.form import Form
from maasscomp.store import Store, _layout, schema
from tests.store.store_form_factory import assert_forms_equal, indexed_form, random_form


@pytest.fixture
def path(tmp_path):
    return tmp_path / "forms.h5"


def _with(form: Form, **kw) -> Form:
    d = {k: getattr(form, k) for k in ("level", "R", "symmetry", "coeffs", "coeff_errors",
                                       "R_error", "hecke_residual", "params", "is_new",
                                       "multiplicity", "basis_index", "extra")}
    d.update(kw)
    return Form(**d)


def test_random_forms_round_trip_bit_identical(path):
    rng = np.random.default_rng(2024)
    forms = [random_form(rng) for _ in range(25)]
    forms.append(random_form(rng, level=6, M=200, complex_coeffs=True))
    forms.append(random_form(rng, level=1, M=1))
    cfg = '[search]\nlevel = 11\nR = [1.0, 10.0]\n# caf\u00e9\n'
    with Store.open(path, "a", create=True) as st:
        keys = st.add_forms(forms, config_text=cfg, on_duplicate="error")
    assert len(set(keys)) == len(forms)
    with Store.open(path, "r") as st:
        assert st.keys(order="written") == keys
        assert len(st) == len(forms)
        for k, f in zip(keys, forms):
            assert_forms_equal(st.get(k), f)
            prov = st.provenance(k)
            assert prov["config"] == cfg
            assert prov["package_version"] == __import__("maasscomp").__version__
            assert prov["created_utc"].endswith("Z") and "T" in prov["created_utc"]
        by_key = dict(zip(keys, forms))
        # the store reads like a mapping: keys sorted by (level, R), store[key] -> Form
        assert list(st) == sorted(keys, key=lambda k: (by_key[k].level, by_key[k].R, by_key[k].basis_index))
        for (k, got), k2 in zip(st.items(), st):
            assert k == k2 and got.key == k and st[k].key == k
            f = by_key[k]
            assert_forms_equal(got, f)
        meta = st.metadata
        assert meta["format"] == "maasscomp-store" and meta["schema_version"] == 2


def test_layout_matches_schema_module(path):
    """The file is a header, an HDF5 base with the documented datasets, then records; after
    compaction the HDF5 part alone holds every form (readable with h5py)."""
    f = random_form(np.random.default_rng(5), level=6, with_al=True)
    with Store.open(path, "a", create=True) as st:
        (k,) = st.add_forms([f])
        assert st.info()["log_forms"] == 1
        assert st.compact()
        assert st.info()["log_forms"] == 0
    assert path.read_bytes()[:16] == _layout.FILE_MAGIC
    with h5py.File(path, "r") as h:
        assert h.attrs[schema.ROOT_FORMAT] == schema.FORMAT_NAME
        assert int(h.attrs[schema.ROOT_SCHEMA_VERSION]) == schema.SCHEMA_VERSION
        rows = h[schema.D_ROWS][...]
        assert rows.dtype == _layout.ROW_DTYPE and len(rows) == 1
        r = rows[0]
        assert (r["level"], r["R"], r["n_cusps"], r["M"]) == (6, f.R, *f.coeffs.shape)
        # the documented way to read coefficients with plain h5py
        n = f.coeffs.size
        c = h[schema.D_VALUES][r["coeffs_at"]:r["coeffs_at"] + n].reshape(f.coeffs.shape)
        assert c.tobytes() == f.coeffs.tobytes()
        lab = h[schema.D_LABELS][r["labels_at"]:r["labels_at"] + r["labels_len"]].tobytes()
        assert lab.decode() == "\t".join([k, f.symmetry.label, "X6.0"]) + "\n"


def test_keys_are_readable_and_unique(path):
    f = _with(indexed_form(0), level=6, symmetry=SymmetryClass("even", ((2, 1), (3, -1))),
              R=9.533695261353)
    with Store.open(path, "a", create=True) as st:
        k1 = st.add_form(f)
        # same name but a different basis index is not a duplicate -> suffix _b1
        k2 = st.add_form(_with(f, multiplicity=2, basis_index=1))
        # same key base, R differs below the printed digits but above the tolerance
        k3 = st.add_form(_with(f, R=f.R + 2e-11), tol=1e-12)
    assert k1 == "N6_X6.0_even_2p_3m_R9.5336952614"
    assert k2 == "N6_X6.0_even_2p_3m_R9.5336952614_b1"
    assert k3 == "N6_X6.0_even_2p_3m_R9.5336952614_v2"


def test_filters_and_summary_rows(path):
    rng = np.random.default_rng(7)
    forms = [random_form(rng, M=12) for _ in range(30)]
    with Store.open(path, "a", create=True) as st:
        keys = st.add_forms(forms)
        got = st.forms(level=6, parity="odd", R_min=5.0, R_max=30.0)
        want = sorted((f for f in forms if f.level == 6 and f.parity == "odd" and 5.0 <= f.R <= 30.0),
                      key=lambda f: f.R)
        assert [g.R for g in got] == [f.R for f in want]  # queries are sorted by (level, R)
        assert len(st.forms()) == 30
        sel = st.select(symmetry=forms[0].symmetry.label)
        assert keys[0] in sel and [st[k].R for k in sel] == sorted(st[k].R for k in sel)
        rows = st.summary_rows(n_coeffs=4)
        order = st.keys()  # summaries come sorted by (level, R), like every listing
    by_key = dict(zip(keys, forms))
    assert [r["key"] for r in rows] == order
    for r, f in zip(rows, (by_key[k] for k in order)):
        assert r["level"] == f.level and r["R"] == f.R and r["symmetry"] == f.symmetry.label
        assert r["R_error"] == f.R_error and r["hecke_residual"] == f.hecke_residual
        assert r["is_new"] is f.is_new and r["multiplicity"] == f.multiplicity
        assert [r[f"c{n}"] for n in range(1, 5)] == f.coeffs[0, :4].tolist()
    with Store.open(path) as st, pytest.raises(InputError, match="parity 'up'"):
        st.forms(parity="up")


def test_duplicates_skip_replace_error(path):
    f = indexed_form(3)
    near = _with(f, R=f.R + 1e-9, hecke_residual=1e-3)
    with Store.open(path, "a", create=True) as st:
        (k,) = st.add_forms([f])
        assert st.find_duplicate(near) == k
        assert st.find_duplicate(near, tol=1e-10) is None
        assert st.find_duplicate(_with(f, basis_index=1, multiplicity=2)) is None
        assert st.find_duplicate(_with(f, symmetry=SymmetryClass("odd" if f.parity == "even" else "even", f.symmetry.al_signs))) is None
        with pytest.raises(StoreError, match=f"duplicates stored form '{k}'"):
            st.add_forms([near])
        assert st.add_forms([near], on_duplicate="skip") == [k]
        assert st.get(k).hecke_residual == f.hecke_residual
        st.put_attachment(k, "scan", {"x": np.arange(3)})
        (k2,) = st.add_forms([near], on_duplicate="replace")
        assert len(st) == 1 and st.get(k2).hecke_residual == 1e-3
        assert st.attachments(k2) == []
        # a duplicate inside one batch is seen too
        assert len(st.add_forms([indexed_form(4), indexed_form(4)], on_duplicate="skip")) == 2
        assert len(st) == 2
        with pytest.raises(InputError, match="on_duplicate 'ignore'"):
            st.add_forms([f], on_duplicate="ignore")


def test_failed_batch_writes_nothing(path):
    with Store.open(path, "a", create=True) as st:
        st.add_forms([indexed_form(0)])
        with pytest.raises(StoreError):
            st.add_forms([indexed_form(1), indexed_form(2), indexed_form(0)])
        assert len(st) == 1
        with pytest.raises(RuntimeError):
            with st.transaction():
                st.add_forms([indexed_form(5)])
                st.mark_task_done("t5", st.keys(order="written")[-1:], run_id="r")
                raise RuntimeError("boom")
        assert len(st) == 1 and st.done_tasks("r") == {}
        # an error caught inside a transaction block still voids the block
        with pytest.raises(StoreError, match="rolled back"):
            with st.transaction():
                st.add_forms([indexed_form(6)])
                with pytest.raises(StoreError):
                    st.add_forms([indexed_form(0)])
                with pytest.raises(StoreError, match="rolled back"):
                    st.add_forms([indexed_form(7)])
        assert len(st) == 1
    with Store.open(path) as st:
        assert len(st) == 1
    assert not [p for p in path.parent.iterdir() if ".tmp." in p.name]


def test_transaction_commits_once_and_nests(path):
    with Store.open(path, "a", create=True) as st:
        with st.transaction():
            keys = st.add_forms([indexed_form(i) for i in range(3)])
            with st.transaction():
                keys += st.add_forms([indexed_form(3)])
            st.mark_task_done("task-A", keys, run_id="run1")
            # not yet visible to an independent reader
            with Store.open(path) as other:
                assert len(other) == 0
            assert len(st) == 4  # but visible inside the transaction
        with Store.open(path) as other:
            assert len(other) == 4 and other.done_tasks("run1") == {"task-A": keys}


def test_attachments_round_trip(path):
    with Store.open(path, "a", create=True) as st:
        (k,) = st.add_forms([indexed_form(1)])
        data = {"peaks_z": np.array([0.1 + 2j, -0.3 + 0.9j]), "values": np.arange(6.0).reshape(2, 3),
                "sup": 3.25, "n": 17, "ok": True, "where": "cusp 0", "missing": None,
                "grid": {"nx": 64, "x": np.linspace(0, 1, 5).astype(np.float32)}}
        st.put_attachment(k, "scan", data)
        with pytest.raises(StoreError, match="already has attachment 'scan'"):
            st.put_attachment(k, "scan", data, overwrite=False)
        with pytest.raises(InputError, match="attachment name 'a/b'"):
            st.put_attachment(k, "a/b", data)
        with pytest.raises(InputError, match="cannot be stored"):
            st.put_attachment(k, "bad", {"obj": object()})
    with Store.open(path) as st:
        got = st.get_attachment(k, "scan")
        assert st.attachments(k) == ["scan"]
        with pytest.raises(StoreError, match="has no attachment 'norm'; it has scan"):
            st.get_attachment(k, "norm")
    assert got.keys() == data.keys()
    for name in ("peaks_z", "values"):
        assert got[name].dtype == data[name].dtype and got[name].tobytes() == data[name].tobytes()
    assert got["grid"]["x"].dtype == np.float32 and got["grid"]["nx"] == 64
    assert got["sup"] == 3.25 and got["n"] == 17 and got["ok"] is True
    assert got["where"] == "cusp 0" and got["missing"] is None


def test_replacing_attachments_costs_what_is_written_and_compaction_frees_it(path):
    """Replacing an attachment appends the new one (the file grows by about its size, not
    by a copy of the file); compaction drops the replaced ones."""
    with Store.open(path, "a", create=True) as st:
        (k,) = st.add_forms([indexed_form(1)])
        st.put_attachment(k, "scan", {"v": np.zeros(20_000)})
        size1 = os.path.getsize(path)
        for i in range(6):
            st.put_attachment(k, "scan", {"v": np.full(20_000, float(i))})
        grown = os.path.getsize(path) - size1
        assert 6 * 160_000 <= grown <= 6 * 160_000 + 6 * 4096
        assert st.get_attachment(k, "scan")["v"][0] == 5.0
        assert st.compact()
        assert os.path.getsize(path) <= size1 * 1.1
        assert st.get_attachment(k, "scan")["v"][0] == 5.0
    with Store.open(path) as st:
        assert st.get_attachment(k, "scan")["v"][0] == 5.0 and st.attachments(k) == ["scan"]


def test_runs_and_task_manifest(path):
    with Store.open(path, "a", create=True) as st:
        rid = st.begin_run(config_text="level = 1\n")
        assert st.begin_run(rid, config_text="changed") == rid  # resuming keeps the record
        keys = st.add_forms([indexed_form(i) for i in range(2)], run_id=rid)
        st.mark_task_done("level=1/even/R=[0,5]", keys, run_id=rid)
        st.mark_task_done("level=1/odd/R=[0,5]", [], run_id=rid)
        with pytest.raises(StoreError, match="no form with key 'nope'"):
            st.mark_task_done("t", ["nope"], run_id=rid)
    with Store.open(path) as st:
        assert st.runs() == [rid]
        info = st.run_info(rid)
        assert info["config"] == "level = 1\n" and info["n_tasks_done"] == 2
        assert st.done_tasks(rid) == {"level=1/even/R=[0,5]": keys, "level=1/odd/R=[0,5]": []}
        assert st.done_tasks("other") == {}
        assert st.provenance(keys[0])["run_id"] == rid
        with pytest.raises(StoreError, match="no run 'zz'"):
            st.run_info("zz")


def test_bad_input_is_refused_with_clear_errors(path):
    f = indexed_form(0)
    with Store.open(path, "a", create=True) as st:
        with pytest.raises(InputError, match=r"Form.coeffs .*2-d"):
            st.add_forms([_with(f, coeffs=f.coeffs[0])])
        with pytest.raises(InputError, match="does not match"):
            st.add_forms([_with(f, coeff_errors=f.coeff_errors[:, :3])])
        with pytest.raises(InputError, match=r"extra\['x'\]\[1\]: value of type set"):
            st.add_forms([_with(f, extra={"x": [1, {2}]})])
        with pytest.raises(InputError, match="keys must be str"):
            st.add_forms([_with(f, extra={1: 2})])
        with pytest.raises(InputError, match="dtype <U1"):
            st.add_forms([_with(f, extra={"s": np.array(["a"])})])
        with pytest.raises(InputError, match="Form.level 0"):
            st.add_forms([_with(f, level=0)])
        with pytest.raises(InputError, match="Form.R nan"):
            st.add_forms([_with(f, R=float("nan"))])
        bad = f.coeffs.copy()
        bad[0, 3] = np.nan
        with pytest.raises(InputError, match=r"Form.coeffs\[0, 3\] \(cusp 0, n = 4\) is nan"):
            st.add_forms([_with(f, coeffs=bad)])
        bad = f.coeff_errors.copy()
        bad[-1, -1] = np.nan
        with pytest.raises(InputError, match="Form.coeff_errors.*NaN values cannot be stored"):
            st.add_forms([_with(f, coeff_errors=bad)])
        with pytest.raises(InputError, match="float64 or complex128"):
            st.add_forms([_with(f, coeffs=f.coeffs.astype(np.float32))])
        with pytest.raises(InputError, match="hecke_residual nan"):
            st.add_forms([_with(f, hecke_residual=float("nan"))])
        with pytest.raises(InputError, match="Gamma0\\(1\\) has only 1 cusps"):
            st.add_forms([_with(f, coeffs=np.vstack([f.coeffs, f.coeffs]),
                                coeff_errors=np.vstack([f.coeff_errors, f.coeff_errors]))])
        assert len(st) == 0
    with pytest.raises(InputError, match="store mode 'x'"):
        Store.open(path, "x")
    with Store.open(path, "r") as st, pytest.raises(StoreError, match="read-only"):
        st.add_forms([f])


def test_second_writer_is_locked_out_and_readers_see_snapshots(path):
    with Store.open(path, "a", create=True) as w:
        w.add_forms([indexed_form(0)])
        with pytest.raises(StoreError, match="open for writing by another process"):
            Store.open(path, "a", create=True)
        r = Store.open(path, "r")
        w.add_forms([indexed_form(1), indexed_form(2)])
        assert len(r) == 1  # the reader's snapshot is unchanged ...
        assert_forms_equal(r.get(r.keys(order="written")[0]), indexed_form(0))
        r.close()
        with Store.open(path, "r") as r2:  # ... a new reader sees the commit
            assert len(r2) == 3
    with Store.open(path, "a", create=True) as w2:  # the lock is released on close
        assert len(w2) == 3


def test_mode_w_starts_empty_but_never_clobbers_foreign_files(path, tmp_path):
    with Store.open(path, "a", create=True) as st:
        st.add_forms([indexed_form(0)])
    with Store.open(path, "w") as st:
        assert len(st) == 0
    foreign = tmp_path / "foreign.h5"
    with h5py.File(foreign, "w") as h:
        h["data"] = np.arange(3)
    before = foreign.read_bytes()
    for mode in ("a", "w"):
        with pytest.raises(StoreError, match="not a maasscomp store"):
            Store.open(foreign, mode)
    assert foreign.read_bytes() == before


def test_stale_temporary_is_cleaned_on_next_write_open(path):
    with Store.open(path, "a", create=True) as st:
        st.add_forms([indexed_form(0)])
    stale = path.with_name(f".{path.name}.tmp.99999.deadbeef")
    stale.write_bytes(b"half-written")
    with Store.open(path, "r") as st:  # readers ignore it
        assert len(st) == 1
    assert stale.exists()
    with Store.open(path, "a", create=True) as st:
        assert len(st) == 1
    assert not stale.exists()


def test_form_fields_unknown_to_the_store_are_kept(path):
    """A field the Form class gains later (here through a subclass) is stored generically,
    like ``extra``, and handed back (as ``unknown_fields`` while this Form lacks it)."""
    import dataclasses

    @dataclasses.dataclass(frozen=True, eq=False)
    class LaterForm(Form):
        spectral_gap: float = 0.0
        neighbours: tuple = ()
        weights: np.ndarray = dataclasses.field(default_factory=lambda: np.zeros(0))

    f = indexed_form(2)
    g = LaterForm(**{k.name: getattr(f, k.name) for k in dataclasses.fields(Form)},
                  spectral_gap=0.125, neighbours=(1.5, "x"), weights=np.arange(3, dtype=np.int16))
    with Store.open(path, "a", create=True) as st:
        (k,) = st.add_forms([g])
    with Store.open(path) as st:
        sf = st.read(k)
        assert_forms_equal(sf.form, f)
        assert sf.unknown_fields["spectral_gap"] == 0.125
        assert sf.unknown_fields["neighbours"] == (1.5, "x")
        w = sf.unknown_fields["weights"]
        assert w.dtype == np.int16 and w.tolist() == [0, 1, 2]
    kw = {k.name: getattr(f, k.name) for k in dataclasses.fields(Form)}
    kw["R"] = f.R + 1
    with Store.open(path, "a") as st, pytest.raises(InputError, match=r"Form.neighbours\[0\]"):
        st.add_forms([LaterForm(**kw, neighbours=({1},))])
    with Store.open(path) as st:
        assert len(st) == 1
    from maasscomp.store import export_json

    export_json(path, path.with_suffix(".json"))
    import json

    rec = json.loads(path.with_suffix(".json").read_text())["forms"][0]
    assert rec["fields"] == {"spectral_gap": 0.125, "neighbours": [1.5, "x"], "weights": [0, 1, 2]}
