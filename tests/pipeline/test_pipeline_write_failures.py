"""A run that cannot write ends with one clear line and exit code 1, the store as it was
and no temporary file; the package folder is never written to."""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import maasscomp
from maasscomp.cli import main
from maasscomp.store import _atomic

from tests.pipeline.pipeline_helpers import REPO, write_config


def test_full_disk_ends_the_run_with_exit_1(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    cfg = write_config(tmp_path / "c.toml", output="s.h5", R=(9.3, 9.8), name="disk")
    assert main(["run", str(cfg), "-q"]) == 0
    before = (tmp_path / "s.h5").read_bytes()
    write_config(tmp_path / "c.toml", output="s.h5", R=(9.3, 12.4), name="disk")
    monkeypatch.setattr(_atomic, "free_bytes", lambda d: 2 * 2**20)  # 2 MB: below the reserve
    assert main(["run", str(cfg), "-q"]) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("maasscomp: error: cannot write")
    assert "MB are free on the device" in err and "Traceback" not in err
    assert (tmp_path / "s.h5").read_bytes() == before
    assert not [p for p in tmp_path.iterdir() if ".tmp." in p.name]
    assert "stopped: cannot write" in (tmp_path / "s.h5.log").read_text()
    monkeypatch.undo()
    monkeypatch.chdir(tmp_path)
    assert main(["run", str(cfg), "-q"]) == 0  # with space again the run resumes


def _tree(folder: Path) -> dict[str, str]:
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file() and "__pycache__" not in p.parts}


def test_a_run_writes_nothing_into_the_package_folder(tmp_path):
    """A run, a listing and an export leave the package folder as they found it, apart from
    ``__pycache__`` folders (Python bytecode, off here, and the compiled-kernel cache, whose
    place the special stage decides)."""
    pkg = Path(maasscomp.__file__).resolve().parent
    before = _tree(pkg)
    cfg = write_config(tmp_path / "c.toml", output="s.h5", R=(9.3, 9.8), name="ro")
    env = dict(os.environ, PYTHONPATH=str(REPO), PYTHONDONTWRITEBYTECODE="1")
    script = ("import sys\nfrom maasscomp.cli import main\n"
              f"codes = [main(['run', {str(cfg)!r}, '-q']), main(['list', 's.h5']),\n"
              "         main(['export', 's.h5', '--json', 'o.json'])]\n"
              "sys.exit(max(codes))\n")
    res = subprocess.run([sys.executable, "-c", script], cwd=tmp_path, env=env,
                         capture_output=True, text=True, timeout=600)
    assert res.returncode == 0, res.stderr
    assert (tmp_path / "o.json").exists()
    assert _tree(pkg) == before


def test_file_size_limit_ends_the_run_with_exit_1(tmp_path, monkeypatch):
    """`maasscomp run` under a file size limit (ulimit -f) that the next commit would pass:
    one line naming the limit, exit 1, the store unchanged (no crash, no core dump)."""
    import resource

    monkeypatch.chdir(tmp_path)
    cfg = write_config(tmp_path / "c.toml", output="s.h5", R=(9.3, 9.8), name="fsize")
    assert main(["run", str(cfg), "-q"]) == 0
    write_config(tmp_path / "c.toml", output="s.h5", R=(9.3, 12.4), name="fsize")
    before = (tmp_path / "s.h5").read_bytes()
    limit = len(before) + 1000

    def cap() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))

    env = dict(os.environ, PYTHONPATH=str(REPO))
    res = subprocess.run([sys.executable, "-m", "maasscomp", "run", str(cfg), "-q"],
                         cwd=tmp_path, env=env, capture_output=True, text=True, timeout=600,
                         preexec_fn=cap)
    assert res.returncode == 1, res.stderr
    assert res.stderr.count("\n") == 1 and "file size limit" in res.stderr, res.stderr
    assert (tmp_path / "s.h5").read_bytes() == before
    assert not [p for p in tmp_path.iterdir() if ".tmp." in p.name]
