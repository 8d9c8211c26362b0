"""The scan and figures commands, store attachments, peak tables and shares (project-internal checks)."""

from __future__ import annotations

import csv
import math

import pytest

from maasscomp.cli import main
from maasscomp.store import Store
from maasscomp.supnorm import load_norm, load_scans
from maasscomp.supnorm.scan import NORM_ATTACHMENT, SCAN_ATTACHMENT
from maasscomp.report.folder import PEAK_FIGURES
from maasscomp.report.peaks import FORM_COLUMNS, region_share


@pytest.fixture()
def small_store(tmp_path, forms_by_level):
    """A store with the first three level-1 forms and the first level-2 form."""
    path = tmp_path / "forms.h5"
    with Store.open(path, "w") as st:
        st.add_forms(forms_by_level[1][:3] + forms_by_level[2][:1])
    return path


def test_scan_command_writes_attachments(small_store, capsys):
    assert main(["scan", str(small_store), "--level", "1", "--R-max", "13"]) == 0
    out = capsys.readouterr().out
    assert "2 forms scanned" in out
    with Store.open(small_store, "r") as st:
        done = [k for k in st.keys() if SCAN_ATTACHMENT in st.attachments(k)]
        assert len(done) == 2 and all(st.get(k).level == 1 for k in done)
        assert all(NORM_ATTACHMENT in st.attachments(k) for k in done)
    scans = load_scans(small_store)
    assert [s.form_key for s in scans] == done
    norm = load_norm(small_store, done[0])
    assert math.isclose(norm.scale, scans[0].scale) and abs(norm.rs_rel_diff) < 1e-6
    # a second run reuses the stored results
    assert main(["scan", str(small_store), "--level", "1", "--R-max", "13", "-q"]) == 0
    assert repr(load_scans(small_store)) == repr(scans)  # repr: empty regions carry NaN


def test_figures_command(small_store, tmp_path):
    assert main(["scan", str(small_store), "-q", "--table", str(tmp_path / "t.csv")]) == 0
    with open(tmp_path / "t.csv", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 4 and list(rows[0]) == [c.name for c in FORM_COLUMNS]
    # every number reads back as a float (no numpy reprs such as np.float64(...))
    for r in rows:
        for c in ("R", "global_peak", "transition_peak", "transition_rest", "omega_peak", "bulk_peak"):
            float(r[c])
    out = tmp_path / "figs"
    assert main(["figures", str(small_store), "--out", str(out)]) == 0
    names = {p.name for p in out.iterdir()}
    assert set(PEAK_FIGURES) | {"peaks.csv", "regions.csv", "shares.csv", "fits.csv", "beats.csv", "peaks.md"} <= names
    assert sum(n.startswith("form_") for n in names) == 3  # maps of the three largest peaks
    for p in out.iterdir():
        assert p.stat().st_size > 0
    md = (out / "peaks.md").read_text()
    assert "Share of global maxima by region" in md and "random-wave" in md.lower()
    # the mass of Omega per unit area is reported beside 1/vol, with its spread over the forms
    assert "Mass of Ω" in md and "| band | forms | mean | sd |" in md
    for name in PEAK_FIGURES:
        assert f"]({name})" in md
    with open(out / "regions.csv", encoding="utf-8") as fh:
        regs = list(csv.DictReader(fh))
    # level 1: Omega, intermediate, transition; level 2: Omega and two cusps
    assert len(regs) == 3 * 3 + 5
    key = rows[0]["key"]
    one = tmp_path / "one"
    assert main(["figures", str(small_store), "--out", str(one), "--key", key]) == 0
    assert [p.name for p in one.iterdir() if p.name.startswith("form_")] == [f"form_{key}.png"]


@pytest.mark.parametrize("argv_tail, needle", [
    (["--key", "no-such-form"], "no-such-form"),
    (["--Y-omega", "0.5"], "Y_omega"),
    (["--R-min", "5", "--R-max", "4"], "R_min"),
])
def test_scan_user_errors(small_store, capsys, argv_tail, needle):
    assert main(["scan", str(small_store)] + argv_tail) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and needle in err[0]


def test_scan_skips_forms_with_too_few_coefficients(tmp_path, forms_by_level, capsys):
    """A form that cannot be scanned is reported and skipped; the exit code is 1."""
    from dataclasses import replace

    good = forms_by_level[1][0]
    bad = replace(forms_by_level[1][1], coeffs=forms_by_level[1][1].coeffs[:, :3].copy(),
                  coeff_errors=forms_by_level[1][1].coeff_errors[:, :3].copy())
    path = tmp_path / "mixed.h5"
    with Store.open(path, "w") as st:
        st.add_forms([good, bad])
    assert main(["scan", str(path)]) == 1
    cap = capsys.readouterr()
    assert "1 forms scanned" in cap.out and "store at least" in cap.err
    assert len(load_scans(path)) == 1


def test_figures_need_a_scan(small_store, tmp_path, capsys):
    assert main(["figures", str(small_store), "--out", str(tmp_path / "f")]) == 2
    assert "scan" in capsys.readouterr().err


def test_scan_missing_store(tmp_path, capsys):
    assert main(["figures", str(tmp_path / "none.h5"), "--out", str(tmp_path / "f")]) == 2


def test_region_share_counts(small_store):
    main(["scan", str(small_store), "-q"])
    scans = load_scans(small_store)
    for by in ("band", "level"):
        rows = region_share(scans, by=by)
        assert sum(d["forms"] for d in rows) == len(scans)
        for kind in ("transition", "omega", "intermediate"):
            assert sum(d[kind] for d in rows) == sum(s.global_kind == kind for s in scans)
        for d in rows:
            assert math.isclose(d["transition_share"] + d["omega_share"] + d["intermediate_share"], 1.0)


def test_scans_of_an_older_format_are_named_not_misread(tmp_path, forms_by_level, capsys):
    """A store scanned by an older scanner (no regions): the report says so, figures refuses with
    the rescan command, and scan --overwrite replaces the old result."""
    from maasscomp.report import make_report

    path = tmp_path / "old.h5"
    with Store.open(path, "w") as st:
        (key,) = st.add_forms(forms_by_level[1][:1])
        st.put_attachment(key, SCAN_ATTACHMENT, {"global_region": "cusp 0", "global_value": 2.8, "Y_c": 1.0})
    make_report(path, tmp_path / "rep")
    assert "older scanner" in (tmp_path / "rep" / "README.md").read_text()
    assert main(["figures", str(path), "--out", str(tmp_path / "f")]) == 2
    assert "rescan" in capsys.readouterr().err
    assert main(["scan", str(path), "-q"]) == 0
    assert len(load_scans(path)) == 1
