"""Shared fixtures: published reference values and searched spectra (computed once per session)."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

REF = Path(__file__).resolve().parents[1] / "data" / "reference"


def read_reference_csv(name: str) -> list[dict[str, str]]:
    """Rows of a data/reference CSV file (lines starting with '#' are the source header)."""
    with open(REF / name, encoding="utf-8") as fh:
        lines = [ln for ln in fh if not ln.startswith("#")]
    return list(csv.DictReader(lines))


@pytest.fixture(scope="session")
def level1_published() -> dict[tuple[int, str], tuple[float, int]]:
    """{(form, quantity): (value, digits printed)} from data/reference/maass_level1_published.csv."""
    out = {}
    for row in read_reference_csv("maass_level1_published.csv"):
        out[(int(row["form"]), row["quantity"])] = (float(row["value"]), int(row["digits_printed"]))
    return out


@pytest.fixture(scope="session")
def level1_window_9_14():
    """Both parities of PSL(2,Z) searched on [9, 14] with the default settings."""
    from maasscomp.groups import gamma0
    from maasscomp.spectrum.search import search_forms

    g = gamma0(1)
    return {p: search_forms(g, 9.0, 14.0, (p,)) for p in ("even", "odd")}


# ------------------------------------------------------------------ the README, run as written

REPO = Path(__file__).resolve().parents[1]

#: Commands of README.md that the README session does not run, with the reason.
README_SKIPPED = {
    "pip install": "installing the package is the test environment's own first step",
    "python -m pip install": "installing the package is the test environment's own first step",
    "python -m pytest": "the test run itself",
    "python -m sphinx": "the documentation build is tests/test_docs_build.py",
}


def readme_blocks(text: str) -> list[tuple[str, str]]:
    """(language, body) of every fenced code block of a Markdown text."""
    import re

    return [(m.group(1), m.group(2)) for m in re.finditer(r"^```(\w*)\n(.*?)^```", text, re.S | re.M)]


def readme_commands(text: str) -> list[tuple[str, str]]:
    """What the README session runs, in order: ("bash", one command) for every command of a
    bash block (a line with ``&&`` gives several) except the :data:`README_SKIPPED` ones, and
    ("python", block) for every Python block."""
    out = []
    for lang, body in readme_blocks(text):
        if lang == "bash":
            for line in body.splitlines():
                for part in line.split("&&"):
                    cmd = part.strip()
                    if cmd and not cmd.startswith("#") and not any(cmd.startswith(p) for p in README_SKIPPED):
                        out.append(("bash", cmd))
        elif lang == "python":
            out.append(("python", body))
    return out


@pytest.fixture(scope="session")
def readme_session(tmp_path_factory):
    """Every command of README.md run as written, in order, in a fresh folder holding a copy of
    ``configs/`` (``maasscomp`` on PATH runs this interpreter on this checkout). Returns
    (folder, [(kind, command, CompletedProcess)]). The demo it runs is the README's own: every
    form of PSL(2,Z) with 9 <= R <= 14, scanned (about 30 s on two cores)."""
    import os
    import shutil
    import subprocess
    import sys

    d = tmp_path_factory.mktemp("readme")
    shutil.copytree(REPO / "configs", d / "configs")
    bindir = d / ".bin"
    bindir.mkdir()
    (bindir / "maasscomp").write_text(f'#!/bin/sh\nexec "{sys.executable}" -m maasscomp "$@"\n')
    (bindir / "maasscomp").chmod(0o755)
    env = dict(os.environ, PYTHONPATH=str(REPO), PATH=f"{bindir}{os.pathsep}{os.environ.get('PATH', '')}",
               MPLBACKEND="Agg")
    results = []
    for kind, cmd in readme_commands((REPO / "README.md").read_text(encoding="utf-8")):
        argv = ["bash", "-c", cmd] if kind == "bash" else [sys.executable, "-c", cmd]
        r = subprocess.run(argv, cwd=d, env=env, capture_output=True, text=True, timeout=900)
        results.append((kind, cmd, r))
    return d, results
