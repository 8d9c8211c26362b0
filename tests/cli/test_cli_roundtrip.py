"""CLI round trip: run a small demo-like config, list, export to JSON and CSV, parse back,
report; the module and the console script both start the CLI."""

from __future__ import annotations

import csv
import json
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from maasscomp.cli import main
from maasscomp.config import keys_markdown
from maasscomp.store import Store

REPO = Path(__file__).resolve().parents[2]

CONFIG = """[job]
name = "roundtrip"
output = "forms.h5"
[search]
levels = [1]
windows = [[9.4, 9.7], [12.0, 12.3]]
parities = ["odd"]
step = 0.05
n_coeffs = 24
[scan]
enabled = false
[executor]
backend = "serial"
"""


@pytest.fixture(scope="module")
def ran(tmp_path_factory):
    d = tmp_path_factory.mktemp("cli")
    (d / "job.toml").write_text(CONFIG)
    import os

    old = os.getcwd()
    os.chdir(d)
    try:
        code = main(["run", str(d / "job.toml"), "-q"])
    finally:
        os.chdir(old)
    assert code == 0
    return d


def test_run_stores_the_forms_of_both_windows(ran):
    with Store.open(ran / "forms.h5", "r") as st:
        R = sorted(st.get(k).R for k in st.keys())
        assert st.runs() == ["roundtrip"]
    # R of the first two odd forms of PSL(2,Z): data/reference/maass_level1_published.csv
    # (F. Chamizo's table, 12 and 17 digits printed)
    assert len(R) == 2
    assert abs(R[0] - 9.53369526135) < 1e-10
    assert abs(R[1] - 12.173008324679677) < 1e-10
    assert (ran / "forms.h5.log").read_text().count("task search:N=1:odd") == 2


def test_list(ran, capsys):
    assert main(["list", str(ran / "forms.h5"), "--coeffs", "2"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].split()[:3] == ["key", "N", "class"] and "c(2)" in out[0]
    assert out[-1] == "2 forms"
    assert len(out) == 4 and all(" odd " in line for line in out[1:3])
    assert main(["list", str(ran / "forms.h5"), "--level", "2"]) == 0
    assert "no forms" in capsys.readouterr().out


def test_export_json_and_csv_parse_back(ran, capsys, tmp_path):
    js, cs, cc = tmp_path / "f.json", tmp_path / "f.csv", tmp_path / "c.csv"
    assert main(["export", str(ran / "forms.h5"), "--json", str(js), "--csv", str(cs),
                 "--coeffs-csv", str(cc), "--coeffs", "5"]) == 0
    out = capsys.readouterr().out
    assert "wrote 2 forms to" in out
    doc = json.loads(js.read_text())
    with open(cs, newline="") as fh:
        rows = list(csv.DictReader(fh))
    with open(cc, newline="") as fh:
        long = list(csv.DictReader(fh))
    with Store.open(ran / "forms.h5", "r") as st:
        keys = st.keys()
        assert [f["key"] for f in doc["forms"]] == keys == [r["key"] for r in rows]
        for rec, row, key in zip(doc["forms"], rows, keys):
            f = st.get(key)
            assert rec["R"] == f.R and float(row["R"]) == f.R  # shortest repr round-trips
            assert rec["level"] == 1 and rec["symmetry"]["parity"] == "odd"
            assert np.array_equal(np.array(rec["coeffs"]), f.coeffs)
            assert [float(row[f"c{n}"]) for n in range(1, 6)] == list(f.coeffs[0, :5])
            mine = [r for r in long if r["key"] == key]
            assert len(mine) == f.coeffs.size
            assert [float(r["c"]) for r in mine if r["cusp"] == "0"] == list(f.coeffs[0])


def test_report_command(ran, capsys, tmp_path):
    out = tmp_path / "rep"
    assert main(["report", str(ran / "forms.h5"), "--out", str(out)]) == 0
    assert "report written to" in capsys.readouterr().out
    readme = (out / "README.md").read_text()
    assert "roundtrip" in readme and "[9.4, 9.7]" in readme
    # only odd forms were searched: Weyl's law (all classes) is skipped with the reason
    assert "did not search even" in readme
    with open(out / "summary.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert rows == [{**rows[0], "level": "1", "class": "odd", "forms": "2", "new": "2"}]


def test_python_dash_m_and_console_script(tmp_path):
    r = subprocess.run([sys.executable, "-m", "maasscomp", "--version"], capture_output=True,
                       text=True, cwd=tmp_path)
    assert r.returncode == 0 and r.stdout.startswith("maasscomp ")
    r = subprocess.run([sys.executable, "-m", "maasscomp", "list", "missing.h5"],
                       capture_output=True, text=True, cwd=tmp_path)
    assert r.returncode == 2 and "does not exist" in r.stderr and "Traceback" not in r.stderr
    exe = shutil.which("maasscomp")
    if exe is None:
        pytest.skip("console script not installed (pip install -e .)")
    r = subprocess.run([exe, "keys"], capture_output=True, text=True, cwd=tmp_path)
    assert r.returncode == 0 and r.stdout == keys_markdown()


def test_docs_config_md_is_generated_from_the_schema():
    # docs/config.md is the output of `maasscomp keys`; regenerate it after editing KEYS
    assert (REPO / "docs" / "config.md").read_text(encoding="utf-8") == keys_markdown()


def test_demo_config_is_valid_and_small(capsys, monkeypatch, tmp_path):
    monkeypatch.chdir(tmp_path)
    assert main(["check", str(REPO / "configs" / "demo.toml")]) == 0
    out = capsys.readouterr().out
    assert "level    1: 2 classes (even, odd)" in out
    assert not list(tmp_path.iterdir())  # check writes nothing
