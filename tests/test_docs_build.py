"""The documentation site builds without a single warning, and its tutorial runs.

``python -m sphinx -W --keep-going -b html docs <out>`` turns every Sphinx and docutils
warning into a failure: a docstring that does not parse, a broken cross-reference inside the
site, a page missing from the table of contents, a math or MyST error in docs/theory.md.
The doctest builder then executes every block of docs/tutorial.md (a real search on
SL(2,Z), an evaluation, the L2 norm and the peak scan) and compares the printed output.

What this cannot detect: whether the prose of the theory page is right (the tests that check
the mathematics are named on that page), or how the math looks once MathJax renders it in a
browser.  Takes about 25 s of CPU (html build ~17 s, tutorial ~5 s, the rest start-up);
50-80 s of wall time were measured on a loaded 2-core machine.
"""

from __future__ import annotations

import os
import pkgutil
import re
import subprocess
import sys
from pathlib import Path

import pytest

import maasscomp

REPO = Path(__file__).resolve().parents[1]


def _sphinx(builder: str, out: Path, doctrees: Path) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(REPO), OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    cmd = [sys.executable, "-m", "sphinx", "-W", "--keep-going", "-q", "-b", builder,
           "-d", str(doctrees), str(REPO / "docs"), str(out)]
    return subprocess.run(cmd, cwd=REPO, env=env, capture_output=True, text=True, timeout=900)


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    base = tmp_path_factory.mktemp("docs")
    res = _sphinx("html", base / "html", base / "doctrees")
    return base, res


def test_site_builds_without_warnings(site):
    base, res = site
    assert res.returncode == 0, res.stdout[-3000:] + res.stderr[-5000:]
    html = base / "html"
    for page in ("index", "tutorial", "theory", "config", "store-schema", "api"):
        assert (html / f"{page}.html").is_file(), page
    theory = (html / "theory.html").read_text()
    # the numbered sections that code and tests cite exist, and the math went through MyST
    for anchor in ("conventions", "12-hejhals-linear-system", "2-weyls-law", "6-sup-norm-facts"):
        assert f'id="{anchor}"' in theory, anchor
    assert theory.count('class="math') > 100


def test_every_public_module_has_an_api_page(site):
    base, res = site
    assert res.returncode == 0
    modules = {"maasscomp"} | {
        m.name for m in pkgutil.walk_packages(maasscomp.__path__, prefix="maasscomp.")
        if not any(p.startswith("_") for p in m.name.split(".")[1:])
    }
    pages = {p.stem for p in (base / "html" / "api").glob("*.html")}
    assert modules <= pages, sorted(modules - pages)
    # every stage is there, with at least one documented function or class
    for stage in ("special", "groups", "hejhal", "spectrum", "store", "supnorm", "pipeline"):
        assert f"maasscomp.{stage}" in pages
    assert "maasscomp.cli" in pages
    kb = (base / "html" / "api" / "maasscomp.special.kbessel.html").read_text()
    assert 'id="maasscomp.special.kbessel.ktilde"' in kb


def test_tutorial_runs(site):
    base, _ = site
    res = _sphinx("doctest", base / "doctest", base / "doctrees")
    report = (base / "doctest" / "output.txt")
    text = report.read_text() if report.exists() else ""
    assert res.returncode == 0, text[-5000:] + res.stderr[-3000:]
    # the summary: "N tests" then "0 failures in tests"; the tutorial really ran its examples
    m = re.search(r"(\d+) tests\s+0 failures in tests", text)
    assert m is not None, text[-2000:]
    assert int(m.group(1)) >= 15, text[-2000:]
