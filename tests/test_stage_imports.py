"""Each pipeline stage imports only the stages before it (architecture rule)."""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "maasscomp"
ORDER = ["errors", "config", "special", "groups", "hejhal", "spectrum", "store", "supnorm", "pipeline", "report", "cli"]
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


def test_every_module_belongs_to_a_stage():
    """A new folder or top-level module must be placed in ORDER (else the rule above skips it)."""
    top = {"__init__", "__main__"}
    found = {p.name.removesuffix(".py") for p in PKG.iterdir()
             if (p.is_dir() and (p / "__init__.py").exists()) or p.suffix == ".py"}
    assert found - top == set(ORDER), sorted(found.symmetric_difference(set(ORDER) | top))


def test_report_stage_sits_between_pipeline_and_cli():
    """Tables and figures are written by the report stage only: the numerical stages and the
    pipeline never import it, and it is the only stage that imports matplotlib."""
    assert ORDER.index("pipeline") < ORDER.index("report") < ORDER.index("cli")
    bad = []
    for path in PKG.rglob("*.py"):
        stage = _stage(path)
        for mod in _imports(path):
            if mod.split(".")[0] == "matplotlib" and stage != "report":
                bad.append(f"{path.relative_to(PKG)} imports {mod}")
    assert not bad, "\n".join(bad)
