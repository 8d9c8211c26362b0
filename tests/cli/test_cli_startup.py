"""Start-up of the command line: ``--help``, ``keys`` and a listing load only what they need
(no numpy, scipy or h5py for --help and keys; no scipy, matplotlib or the numerical stages for
``list``), checked in fresh interpreters. Timings are measured by
benchmarks/bench_cli_startup.py, not asserted here."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
PROBE = """
import json, sys
from maasscomp.cli import main
try:
    code = main(sys.argv[1:])
except SystemExit as e:
    code = e.code
print(json.dumps(sorted(sys.modules)), file=sys.stderr)
"""


def _modules(*argv: str, cwd: Path | None = None) -> set[str]:
    env = dict(os.environ, PYTHONPATH=str(REPO))
    r = subprocess.run([sys.executable, "-c", PROBE, *argv], capture_output=True, text=True, env=env,
                       cwd=cwd or REPO, timeout=120)
    assert r.returncode == 0, r.stderr
    return {m.split(".")[0] for m in json.loads(r.stderr.strip().splitlines()[-1])} | set(
        json.loads(r.stderr.strip().splitlines()[-1]))


@pytest.mark.parametrize("argv", [("--help",), ("keys",), ("list", "--help"), ("export", "--help")])
def test_help_and_keys_import_no_numerics(argv):
    mods = _modules(*argv)
    for heavy in ("numpy", "scipy", "h5py", "matplotlib", "numba", "mpmath"):
        assert heavy not in mods, (argv, heavy)


def test_python_dash_m_help_imports_no_numerics():
    """The module entry point as a user starts it, with -X importtime as the witness."""
    env = dict(os.environ, PYTHONPATH=str(REPO))
    r = subprocess.run([sys.executable, "-X", "importtime", "-m", "maasscomp", "--help"], capture_output=True,
                       text=True, env=env, timeout=120)
    assert r.returncode == 0 and "usage: maasscomp" in r.stdout
    imported = {ln.split("|")[-1].strip() for ln in r.stderr.splitlines() if ln.startswith("import time:")}
    assert "maasscomp.cli" in imported
    assert not {"numpy", "scipy", "h5py"} & imported, sorted({"numpy", "scipy", "h5py"} & imported)


def test_list_loads_the_store_reader_only(tmp_path):
    from tests.store.store_form_factory import random_form  # noqa: F401  (a store to list)
    import numpy as np

    from maasscomp.store import Store

    rng = np.random.default_rng(1)
    with Store.open(tmp_path / "s.h5", "a", create=True) as st:
        st.add_forms([random_form(rng, level=1) for _ in range(12)])
    mods = _modules("list", str(tmp_path / "s.h5"))
    assert "h5py" in mods  # the store is HDF5
    for heavy in ("scipy", "matplotlib", "numba", "mpmath", "maasscomp.spectrum", "maasscomp.hejhal",
                  "maasscomp.special", "maasscomp.supnorm", "maasscomp.pipeline"):
        assert heavy not in mods, heavy
