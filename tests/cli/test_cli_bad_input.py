"""Every bad config or argument: its own message, exit code 2, no traceback, and no file
created or touched."""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import h5py
import pytest

from maasscomp.cli import main

GOOD = """[job]
name = "bad"
output = "out.h5"
[search]
levels = [1]
R_min = 9.4
R_max = 9.7
parities = ["odd"]
step = 0.05
n_coeffs = 20
[executor]
backend = "serial"
"""


def _snapshot(folder: Path) -> dict[str, tuple[str, int]]:
    out = {}
    for p in sorted(folder.rglob("*")):
        if p.is_file():
            out[str(p.relative_to(folder))] = (hashlib.sha256(p.read_bytes()).hexdigest(),
                                               p.stat().st_mtime_ns)
    return out


def _call(capsys, argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


def _expect_error(capsys, folder: Path, argv, *fragments: str) -> str:
    before = _snapshot(folder)
    code, out, err = _call(capsys, argv)
    assert code == 2, (out, err)
    assert "Traceback" not in err and "Traceback" not in out
    assert err.startswith("maasscomp: error:")
    for frag in fragments:
        assert frag in err, err
    assert _snapshot(folder) == before, "a bad call created or touched a file"
    return err


CONFIG_CASES = [
    ("unknown key", ("R_max = 9.7", "R_max = 9.7\nR_mx = 3"), ["unknown key 'R_mx'", "did you mean 'R_max'"]),
    ("unknown section", ("[executor]", "[scna]\nx = 1\n[executor]"), ["unknown section [scna]"]),
    ("R_min >= R_max", ("R_min = 9.4", "R_min = 9.8"), ["R_min=9.8 must be smaller than R_max=9.7"]),
    ("R equal", ("R_min = 9.4", "R_min = 9.7"), ["must be smaller"]),
    ("zero R", ("R_min = 9.4", "R_min = 0"), ["R_min=0 is not allowed", "positive finite"]),
    ("negative R", ("R_min = 9.4", "R_min = -2.5"), ["R_min=-2.5 is not allowed"]),
    ("infinite R", ("R_max = 9.7", "R_max = inf"), ["R_max=inf is not allowed"]),
    ("nan R", ("R_max = 9.7", "R_max = nan"), ["R_max=nan is not allowed"]),
    ("R wrong type", ("R_min = 9.4", 'R_min = "nine"'), ["R_min='nine' is not allowed"]),
    ("missing R", ("R_min = 9.4\n", ""), ["R_min is required"]),
    ("empty level list", ("levels = [1]", "levels = []"), ["levels=[] is empty"]),
    ("empty level rule", ("levels = [1]", 'levels = "primes up to 1"'), ["gives no level at all"]),
    ("bad level rule", ("levels = [1]", 'levels = "odd levels below 9"'), ["is not a level rule"]),
    ("level zero", ("levels = [1]", "levels = [0, 1]"), ["levels: 0 not allowed"]),
    ("bad parity", ('parities = ["odd"]', 'parities = ["odd", "sine"]'), ["parity 'sine' is not allowed"]),
    ("n_coeffs type", ("n_coeffs = 20", "n_coeffs = 20.5"), ["n_coeffs=20.5 is not allowed"]),
    ("eps range", ("n_coeffs = 20", "n_coeffs = 20\neps = 0.1"), ["eps=0.1 is not allowed"]),
    ("bad backend", ('backend = "serial"', 'backend = "dask2"'), ["backend='dask2' is not allowed"]),
    ("address without dask", ('backend = "serial"', 'backend = "serial"\naddress = "tcp://127.0.0.1:1"'),
     ["address is only used with backend = 'dask'"]),
    ("Omega below 1", ("[executor]", "[scan]\nenabled = true\nY_omega = 0.5\n[executor]"),
     ["[scan] Y_omega=0.5 is not allowed", ">= 1"]),
    ("old scan key", ("[executor]", "[scan]\nY_c = 1.0\n[executor]"), ["unknown key 'Y_c'"]),
    ("overlapping windows", ("R_min = 9.4\nR_max = 9.7", "windows = [[9.4, 9.7], [9.6, 10.0]]"), ["overlap"]),
    ("missing output", ('output = "out.h5"', ""), ["[job] output is required"]),
    ("output dir missing", ('output = "out.h5"', 'output = "nowhere/out.h5"'), ["does not exist"]),
    ("window needs too much memory", ("n_coeffs = 20", "n_coeffs = 20000\n[executor]\nmemory_limit_gb = 0.5"),
     ["one task needs about", "memory_limit_gb"]),
]


@pytest.mark.parametrize("what,edit,fragments", CONFIG_CASES, ids=[c[0] for c in CONFIG_CASES])
@pytest.mark.parametrize("command", ["run", "check"])
def test_bad_config(tmp_path, monkeypatch, capsys, command, what, edit, fragments):
    monkeypatch.chdir(tmp_path)
    text = GOOD.replace(*edit)
    if what == "window needs too much memory":  # the [executor] table may appear only once
        text = text.replace('[executor]\nbackend = "serial"', 'backend = "serial"')
    assert text != GOOD
    cfg = tmp_path / "job.toml"
    cfg.write_text(text)
    _expect_error(capsys, tmp_path, [command, cfg], *fragments)
    assert not (tmp_path / "out.h5").exists()


def test_all_problems_reported_together(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "job.toml"
    cfg.write_text(GOOD.replace("R_min = 9.4", "R_min = 10").replace("n_coeffs = 20", "n_coef = 20"))
    err = _expect_error(capsys, tmp_path, ["run", cfg], "2 problems", "R_min=10 must be smaller",
                        "unknown key 'n_coef'", "did you mean 'n_coeffs'")
    assert err.count("\n  - ") == 2


def test_non_squarefree_level_without_general_search(tmp_path, monkeypatch, capsys):
    import maasscomp.pipeline.tasks as tasks

    monkeypatch.setattr(tasks, "general_search", lambda: None)
    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "job.toml"
    cfg.write_text(GOOD.replace("levels = [1]", 'levels = "1..4"'))
    _expect_error(capsys, tmp_path, ["run", cfg], "levels 4 is not squarefree", "not yet supported")


def test_missing_and_unreadable_config(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    _expect_error(capsys, tmp_path, ["run", tmp_path / "nope.toml"], "does not exist")
    (tmp_path / "folder.toml").mkdir()
    _expect_error(capsys, tmp_path, ["run", tmp_path / "folder.toml"], "is not a file")
    (tmp_path / "bin.toml").write_bytes(b"\x89HDF\r\n\x1a\n\xff\xfe")
    _expect_error(capsys, tmp_path, ["run", tmp_path / "bin.toml"], "not UTF-8")
    (tmp_path / "broken.toml").write_text("[job\nname = 1")
    _expect_error(capsys, tmp_path, ["run", tmp_path / "broken.toml"], "not valid TOML")


@pytest.fixture
def foreign_files(tmp_path):
    text = tmp_path / "notes.h5"
    text.write_text("not an HDF5 file\n")
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as h:
        h["x"] = [1, 2, 3]
    return text, other


def test_files_that_are_not_ours(tmp_path, monkeypatch, capsys, foreign_files):
    monkeypatch.chdir(tmp_path)
    text, other = foreign_files
    for cmd in (["list"], ["export", "--json", tmp_path / "x.json"], ["report", "--out", tmp_path / "rep"],
                ["figures", "--out", tmp_path / "figs"], ["scan"]):
        _expect_error(capsys, tmp_path, [cmd[0], tmp_path / "missing.h5", *cmd[1:]], "does not exist")
        _expect_error(capsys, tmp_path, [cmd[0], text, *cmd[1:]], "is not an HDF5 file")
        _expect_error(capsys, tmp_path, [cmd[0], other, *cmd[1:]], "not a maasscomp store")
    # a run never writes into (or over) a file that is not a store
    for f in (text, other):
        cfg = tmp_path / "job.toml"
        cfg.write_text(GOOD.replace('output = "out.h5"', f'output = "{f.name}"'))
        _expect_error(capsys, tmp_path, ["run", cfg], f.name)
        cfg.unlink()


BAD_ARGS = [
    (["list", "x.h5", "--coeffs", "-1"], "-1 is not allowed"),
    (["list", "x.h5", "--coeffs", "three"], "'three' is not an integer"),
    (["run", "job.toml", "--workers", "0"], "0 is not allowed"),
    (["run", "job.toml", "--backend", "mpi"], "invalid choice: 'mpi'"),
    (["run", "job.toml", "-q", "-v"], "not allowed with argument"),
    (["run"], "the following arguments are required: config"),
    (["export", "x.h5"], "export needs at least one of --json PATH or --csv PATH"),
    (["frobnicate"], "invalid choice: 'frobnicate'"),
    (["list", "x.h5", "--nonsense"], "unrecognized arguments: --nonsense"),
]


@pytest.mark.parametrize("argv,fragment", BAD_ARGS, ids=[" ".join(a) for a, _ in BAD_ARGS])
def test_bad_arguments(tmp_path, monkeypatch, capsys, argv, fragment):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "job.toml").write_text(GOOD)
    from maasscomp.store import Store

    with Store.open(tmp_path / "x.h5", "w"):
        pass
    _expect_error(capsys, tmp_path, argv, fragment)


def test_no_command_prints_usage_and_exits_2(capsys):
    code, out, err = _call(capsys, [])
    assert code == 2 and "usage: maasscomp" in err


def test_changed_result_settings_are_refused(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "job.toml"
    cfg.write_text(GOOD.replace("R_max = 9.7", "R_max = 9.5"))
    code, out, err = _call(capsys, ["run", cfg, "-q"])
    assert code == 0, err
    # result-affecting settings: refused, naming what changed, nothing touched
    cfg.write_text(GOOD.replace("R_max = 9.7", "R_max = 9.5").replace("n_coeffs = 20", "n_coeffs = 30\neps = 1e-12"))
    _expect_error(capsys, tmp_path, ["run", cfg], "run 'bad'", "[search] eps: 1e-14 -> 1e-12",
                  "[search] n_coeffs: 20 -> 30", "new [job] output")
    # settings that do not change results: accepted (and nothing left to do)
    cfg.write_text(GOOD.replace("R_max = 9.7", "R_max = 9.5").replace('backend = "serial"', 'backend = "joblib"\nworkers = 2'))
    code, out, err = _call(capsys, ["run", cfg])
    assert code == 0, err
    assert "1 tasks (1 already done)" in out
    assert os.path.exists(tmp_path / "out.h5.log")
