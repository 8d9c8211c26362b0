"""Every command of README.md works as written (tests/conftest.py: ``readme_session`` runs them
in order on the bundled demo config; installation, the test run and the docs build are the
skipped ones, named in ``README_SKIPPED``)."""

from __future__ import annotations

from pathlib import Path

from tests.conftest import README_SKIPPED, REPO, readme_blocks, readme_commands


def test_every_readme_command_runs_as_written(readme_session):
    folder, results = readme_session
    failed = [f"{cmd!r}: exit {r.returncode}\n{r.stderr[-2000:]}" for _, cmd, r in results if r.returncode != 0]
    assert not failed, "\n\n".join(failed)
    cmds = [cmd for kind, cmd, _ in results if kind == "bash"]
    # the README's tour: the demo run, its report, listing, export, the Python session
    for needed in ("maasscomp run configs/demo.toml", "maasscomp report demo-forms.h5 --out demo-report",
                   "maasscomp export demo-forms.h5 --out demo-export"):
        assert needed in cmds
    assert any(kind == "python" for kind, _, _ in results)
    assert (folder / "demo-report" / "README.md").is_file()
    assert (folder / "demo-export" / "forms.json").is_file()
    assert (folder / "form-map.png").is_file()


def test_the_readme_runs_no_more_and_no_less_than_it_shows():
    """The extraction sees every bash block; what it leaves out is exactly the skipped
    prefixes (so a new command in the README is run, not silently ignored)."""
    text = (REPO / "README.md").read_text(encoding="utf-8")
    shown = []
    for lang, body in readme_blocks(text):
        if lang == "bash":
            shown += [p.strip() for ln in body.splitlines() for p in ln.split("&&") if p.strip()]
    run = [c for k, c in readme_commands(text) if k == "bash"]
    left = [c for c in shown if c not in run]
    assert left and all(any(c.startswith(p) for p in README_SKIPPED) for c in left), left
    assert len(run) >= 5


def test_readme_session_leaves_no_stray_files(readme_session):
    """No empty files (such as a writer's lock file) are left beside the store after the runs."""
    folder, _ = readme_session
    empty = [str(p.relative_to(folder)) for p in Path(folder).rglob("*") if p.is_file() and p.stat().st_size == 0]
    assert not empty, empty
    assert not list(Path(folder).glob("*.lock"))
