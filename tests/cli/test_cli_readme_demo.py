"""The README's first commands on a fresh clone: the demo store and its report.

Slow (the whole demo: five R chunks in two classes and three scans); run with -m slow.
"""

from __future__ import annotations

import csv
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import published_level1_R

REPO = Path(__file__).resolve().parents[2]


@pytest.mark.slow
def test_demo_on_a_fresh_clone(tmp_path):
    if shutil.which("git") is None or not (REPO / ".git").exists():
        pytest.skip("needs a git checkout to clone")
    clone = tmp_path / "clone"
    subprocess.run(["git", "clone", "--quiet", str(REPO), str(clone)], check=True)
    env = dict(os.environ, PYTHONPATH=str(clone))

    def cli(*args):
        return subprocess.run([sys.executable, "-m", "maasscomp", *args], cwd=clone, env=env,
                              capture_output=True, text=True)

    r = cli("run", "configs/demo.toml")
    assert r.returncode == 0, r.stderr
    assert "3 forms of this config" in r.stdout
    r = cli("report", "demo-forms.h5", "--out", "demo-report")
    assert r.returncode == 0, r.stderr
    for name in ("README.md", "summary.csv", "weyl_N1.png", "peaks.csv"):
        assert (clone / "demo-report" / name).is_file()
    with Store.open(clone / "demo-forms.h5", "r") as st:
        found = sorted((st.get(k).symmetry.parity, st.get(k).R) for k in st.keys())
    # data/reference/maass_level1_published.csv (sources in its header)
    pub = sorted((p, R) for p, R, _ in published_level1_R().values() if 9.0 <= R <= 14.0)
    assert [p for p, _ in found] == [p for p, _ in pub]
    for (_, R), (_, P) in zip(found, pub):
        assert abs(R - P) < 1e-10
    with open(clone / "demo-report" / "peaks.csv", newline="") as fh:
        assert len(list(csv.DictReader(fh))) == 3
