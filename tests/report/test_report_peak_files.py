"""The scan and figures commands, store attachments, peak tables and shares (project-internal checks)."""

from __future__ import annotations

import csv
import math

import pytest

from maasscomp.cli import main
from maasscomp.store import Store
from maasscomp.supnorm import load_norm, load_scans
from maasscomp.supnorm.scan import NORM_ATTACHMENT, SCAN_ATTACHMENT
from maasscomp.report.peaks import COLUMNS, cusp_share


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
    assert load_scans(small_store) == scans


def test_figures_command(small_store, tmp_path):
    assert main(["scan", str(small_store), "-q", "--table", str(tmp_path / "t.csv")]) == 0
    with open(tmp_path / "t.csv", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 4 and list(rows[0]) == [c.name for c in COLUMNS]
    # every number reads back as a float (no numpy reprs such as np.float64(...))
    for r in rows:
        for c in ("R", "cusp_peak", "n2_at_peak", "compact_peak", "ratio"):
            float(r[c])
    out = tmp_path / "figs"
    assert main(["figures", str(small_store), "--out", str(out)]) == 0
    names = {p.name for p in out.iterdir()}
    assert {"peaks_vs_lambda.png", "cusp_share.png", "value_distribution.png", "peaks.csv",
            "peaks.md"} <= names
    for p in out.iterdir():
        assert p.stat().st_size > 0
    md = (out / "peaks.md").read_text()
    assert "Global maximum in a cusp" in md and "random wave" in md.lower()
    key = rows[0]["key"]
    one = tmp_path / "one"
    assert main(["figures", str(small_store), "--out", str(one), "--key", key]) == 0
    assert any(p.name.startswith("form_") for p in one.iterdir())


@pytest.mark.parametrize("argv_tail, needle", [
    (["--key", "no-such-form"], "no-such-form"),
    (["--Y-cusp", "0.5"], "Y_c"),
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


def test_cusp_share_counts(small_store):
    main(["scan", str(small_store), "-q"])
    scans = load_scans(small_store)
    share = cusp_share(scans)
    total = sum(d["forms"] for d in share["by_level"])
    assert total == len(scans) == sum(d["forms"] for d in share["by_R"])
    k = sum(s.global_region != "compact" for s in scans)
    assert sum(d["in_cusp"] for d in share["by_level"]) == k
