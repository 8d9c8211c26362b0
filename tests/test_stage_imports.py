"""Each pipeline stage imports only the stages before it (architecture rule)."""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "maasscomp"
ORDER = ["errors", "config", "special", "groups", "hejhal", "spectrum", "store", "supnorm", "pipeline", "cli"]
# numerical stages must not import the parallel back ends
NUMERICAL = {"special", "groups", "hejhal", "spectrum", "store", "supnorm"}
FORBIDDEN_IN_NUMERICAL = {"joblib", "dask", "distributed"}


def _stage(path: Path) -> str:
    rel = path.relative_to(PKG)
    return rel.parts[0].removesuffix(".py")


def _imports(path: Path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield a.name
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            yield node.module


def test_stages_import_only_earlier_stages():
    bad = []
    for path in PKG.rglob("*.py"):
        stage = _stage(path)
        if stage not in ORDER:
            continue
        rank = ORDER.index(stage)
        for mod in _imports(path):
            parts = mod.split(".")
            if parts[0] == "maasscomp" and len(parts) > 1 and parts[1] in ORDER:
                if ORDER.index(parts[1]) > rank:
                    bad.append(f"{path.relative_to(PKG)} imports {mod}")
            if stage in NUMERICAL and parts[0] in FORBIDDEN_IN_NUMERICAL:
                bad.append(f"{path.relative_to(PKG)} imports {mod} (parallel back ends belong to pipeline)")
    assert not bad, "\n".join(bad)
