"""Each pipeline stage imports only the stages before it (architecture rule)."""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "maasscomp"
ORDER = ["errors", "arith", "config", "special", "groups", "hejhal", "spectrum", "store", "supnorm", "pipeline",
         "report", "cli"]
# The only imports of a later stage: thin notebook conveniences on the objects a user holds,
# each importing inside its own body (so importing the earlier stage never loads the later
# one) and doing nothing but call one function there. Listed by file and qualified name;
# anything else that imports a later stage fails the test.
UPWARD_CALLS = {
    ("spectrum/form.py", "Form.__call__"): "maasscomp.supnorm.evaluate",
    ("spectrum/form.py", "Form.plot"): "maasscomp.report.figures",
    ("spectrum/form.py", "Form.to_dataframe"): "maasscomp.report.frames",
    ("supnorm/scan.py", "ScanResult.to_dataframe"): "maasscomp.report.frames",
}
# numerical stages must not import the parallel back ends
NUMERICAL = {"special", "groups", "hejhal", "spectrum", "store", "supnorm"}
FORBIDDEN_IN_NUMERICAL = {"joblib", "dask", "distributed"}


def _stage(path: Path) -> str:
    rel = path.relative_to(PKG)
    return rel.parts[0].removesuffix(".py")


def _imports(path: Path, with_scope: bool = False):
    """Every imported module name (with the qualified name of the enclosing function, "" at
    module level, when ``with_scope``)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))

    def walk(node, scope):
        for child in ast.iter_child_nodes(node):
            if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                yield from walk(child, f"{scope}.{child.name}" if scope else child.name)
                continue
            if isinstance(child, ast.Import):
                for a in child.names:
                    yield a.name, scope
            elif isinstance(child, ast.ImportFrom) and child.module and child.level == 0:
                yield child.module, scope
            yield from walk(child, scope)

    for mod, scope in walk(tree, ""):
        yield (mod, scope) if with_scope else mod


def test_stages_import_only_earlier_stages():
    bad = []
    for path in PKG.rglob("*.py"):
        stage = _stage(path)
        if stage not in ORDER:
            continue
        rank = ORDER.index(stage)
        rel = path.relative_to(PKG).as_posix()
        for mod, scope in _imports(path, with_scope=True):
            parts = mod.split(".")
            if parts[0] == "maasscomp" and len(parts) > 1 and parts[1] in ORDER:
                if ORDER.index(parts[1]) > rank and UPWARD_CALLS.get((rel, scope)) != mod:
                    bad.append(f"{rel} imports {mod}" + (f" in {scope}" if scope else ""))
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


def test_upward_calls_are_thin_and_lazy():
    """Each listed convenience exists, imports its later stage inside its body only, and is a
    thin delegation (at most one import and one call statement besides its docstring)."""
    for (rel, qual), mod in UPWARD_CALLS.items():
        tree = ast.parse((PKG / rel).read_text(encoding="utf-8"))
        node = tree
        for name in qual.split("."):
            node = next(n for n in ast.iter_child_nodes(node)
                        if isinstance(n, (ast.ClassDef, ast.FunctionDef)) and n.name == name)
        body = [b for b in node.body if not (isinstance(b, ast.Expr) and isinstance(b.value, ast.Constant))]
        assert len(body) == 2 and isinstance(body[0], ast.ImportFrom) and body[0].module == mod, (rel, qual)
        assert isinstance(body[1], ast.Return), (rel, qual)
        top = [m for m, scope in _imports(PKG / rel, with_scope=True) if scope == ""]
        assert mod not in top, f"{rel} imports {mod} at module level"
