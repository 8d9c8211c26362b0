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
[scan]
enabled = false
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
    ("Omega below 1", ("[scan]\nenabled = false", "[scan]\nenabled = true\nY_omega = 0.5"),
     ["[scan] Y_omega=0.5 is not allowed", ">= 1"]),
    ("old scan key", ("[scan]\nenabled = false", "[scan]\nenabled = false\nY_c = 1.0"), ["unknown key 'Y_c'"]),
    ("overlapping windows", ("R_min = 9.4\nR_max = 9.7", "windows = [[9.4, 9.7], [9.6, 10.0]]"), ["overlap"]),
    ("missing output", ('output = "out.h5"', ""), ["[job] output is required"]),
    ("output dir missing", ('output = "out.h5"', 'output = "nowhere/out.h5"'), ["does not exist"]),
    ("window needs too much memory", ("n_coeffs = 20", "n_coeffs = 20000"),
     ["one task needs about", "memory_limit_gb"]),
    ("bool as a number", ("R_min = 9.4", "R_min = true"), ["R_min=True is not allowed"]),
    ("bool as workers", ('backend = "serial"', 'backend = "serial"\nworkers = true'),
     ["workers=True is not allowed"]),
    ("log is the config", ('output = "out.h5"', 'output = "out.h5"\nlog = "job.toml"'),
     ["is the config file itself"]),
    ("log is the store", ('output = "out.h5"', 'output = "out.h5"\nlog = "out.h5"'), ["is the store"]),
    ("output is the config", ('output = "out.h5"', 'output = "job.toml"'), ["is the config file itself"]),
    ("log under a file", ('output = "out.h5"', 'output = "out.h5"\nlog = "job.toml/run.log"'),
     ["job.toml does not exist"]),
    ("over-long output name", ('output = "out.h5"', 'output = "' + "x" * 300 + '.h5"'),
     ["bytes long", "per name"]),
    ("over-long log path", ('output = "out.h5"', 'output = "out.h5"\nlog = "' + "d/" * 2100 + 'l.log"'),
     ["bytes long"]),
    ("NUL in a path", ('output = "out.h5"', 'output = "out\\u0000.h5"'), ["NUL character"]),
    ("address not a url", ('backend = "serial"', 'backend = "dask"\naddress = "not a url"'),
     ["is not a scheduler address"]),
    ("address port", ('backend = "serial"', 'backend = "dask"\naddress = "tcp://localhost:99999"'),
     ["port '99999' is not a number in 1..65535"]),
    ("address scheme", ('backend = "serial"', 'backend = "dask"\naddress = "http://localhost:80"'),
     ["scheme 'http' is not supported"]),
    ("size_limits type", ('output = "out.h5"', 'output = "out.h5"\nsize_limits = "no"'),
     ["size_limits='no' must be true or false"]),
]

#: Configs that used to run for minutes, eat memory or fail only in the workers: each must
#: now be refused at once (the test fails if one takes more than HANG_SECONDS).
HANG_SECONDS = 60
HANG_CASES = [
    ("R_max 1e9", ("R_max = 9.7", "R_max = 1e9"), ["R_max=1e+09 is beyond the supported range",
                                                    "R <= 100000;"]),
    ("R_max 1e300", ("R_max = 9.7", "R_max = 1e300"), ["beyond the supported range"]),
    ("R_max at the limit", ("R_min = 9.4\nR_max = 9.7", "R_min = 99999.0\nR_max = 100000.0"),
     ["use R_max <= 99999.999"]),
    ("all levels up to 100000", ("levels = [1]", 'levels = "all up to 100000"'),
     ["100000 levels, more than the 100 of one job", "size_limits = false"]),
    ("a level beyond planning", ("levels = [1]", "levels = [1009]"), ["level 1009 is above 1000"]),
    ("step 1e-300", ("step = 0.05", "step = 1e-300"), ["step=1e-300 is below the resolution of R"]),
    ("step that explodes", ("step = 0.05", "step = 1e-8"), ["one task would scan 3e+07 grid points"]),
    ("chunks that explode", ("R_min = 9.4\nR_max = 9.7", "R_min = 1.0\nR_max = 2000.0\nchunk_width = 0.01"),
     ["search tasks, more than 100,000"]),
]


@pytest.mark.parametrize("what,edit,fragments", HANG_CASES, ids=[c[0] for c in HANG_CASES])
@pytest.mark.parametrize("command", ["run", "check"])
def test_config_that_would_hang(tmp_path, monkeypatch, capsys, command, what, edit, fragments):
    import signal

    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "job.toml"
    cfg.write_text(GOOD.replace(*edit))

    def too_slow(signum, frame):
        raise AssertionError(f"{command} did not refuse the config within {HANG_SECONDS} s")

    old = signal.signal(signal.SIGALRM, too_slow)
    signal.alarm(HANG_SECONDS)
    try:
        _expect_error(capsys, tmp_path, [command, cfg], *fragments)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    assert not (tmp_path / "out.h5").exists()


def test_size_limits_can_be_lifted_explicitly(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "job.toml"
    cfg.write_text(GOOD.replace("step = 0.05", "step = 1e-7"))
    _expect_error(capsys, tmp_path, ["check", cfg], "size_limits = false")
    code, out, err = _call(capsys, ["check", cfg, "--no-size-limits"])
    assert code == 0 and "3e+06 determinant evaluations" in out, err
    cfg.write_text(GOOD.replace("step = 0.05", "step = 1e-7").replace(
        'output = "out.h5"', 'output = "out.h5"\nsize_limits = false'))
    code, out, err = _call(capsys, ["check", cfg])
    assert code == 0, err


def test_read_only_store_is_refused_before_any_work(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    from maasscomp.store import Store

    with Store.open(tmp_path / "out.h5", "w"):
        pass
    os.chmod(tmp_path / "out.h5", 0o444)
    cfg = tmp_path / "job.toml"
    cfg.write_text(GOOD)
    for command in ("check", "run"):
        _expect_error(capsys, tmp_path, [command, cfg], "not writable by this user",
                      "mode 0444")
    assert not (tmp_path / "out.h5.log").exists()


def test_scan_of_a_mistyped_store_creates_nothing(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    _expect_error(capsys, tmp_path, ["scan", tmp_path / "typo.h5"], "does not exist")
    assert not (tmp_path / "typo.h5").exists()


@pytest.mark.parametrize("what,edit,fragments", CONFIG_CASES, ids=[c[0] for c in CONFIG_CASES])
@pytest.mark.parametrize("command", ["run", "check"])
def test_bad_config(tmp_path, monkeypatch, capsys, command, what, edit, fragments):
    monkeypatch.chdir(tmp_path)
    text = GOOD.replace(*edit)
    if what == "window needs too much memory":  # and a small memory limit in [executor]
        text = text.replace('backend = "serial"', 'backend = "serial"\nmemory_limit_gb = 0.5')
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


def test_non_squarefree_levels_are_planned_like_the_others(tmp_path, monkeypatch, capsys):
    """Every level has a search (the multi-cusp system where Atkin-Lehner classes do not
    cover the cusps): `check` plans level 4 by parity, squarefree level 3 by Atkin-Lehner class."""
    monkeypatch.chdir(tmp_path)
    cfg = tmp_path / "job.toml"
    cfg.write_text(GOOD.replace("levels = [1]", "levels = [3, 4]"))
    code, out, err = _call(capsys, ["check", cfg])
    assert code == 0, err
    assert "level    4: 1 classes (odd)" in out, out
    assert "level    3: 2 classes (odd,3+, odd,3-)" in out, out


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
    (["export", "x.h5"], "export needs --out DIR (everything) or at least one of --json"),
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


def test_no_numeric_key_takes_a_boolean():
    """TOML true/false are Python bools, which are ints: every key documented as a number
    must still refuse them (all keys of config.KEYS are tried)."""
    import copy

    from maasscomp.config import KEYS, parse
    from maasscomp.errors import InputError

    base = {"job": {"output": "x.h5"}, "search": {"R_min": 1.0, "R_max": 2.0}}
    tried = 0
    for sec, key, typ, _, _ in KEYS:
        if "bool" in typ or typ.startswith("string") or typ.startswith("path"):
            continue
        for v in (True, False):
            d = copy.deepcopy(base)
            if key == "windows":
                del d["search"]["R_min"], d["search"]["R_max"]
                d["search"]["windows"] = [[v, 2.0]]
            elif key == "levels":
                d["search"]["levels"] = [v]
            else:
                d.setdefault(sec, {})[key] = v
            with pytest.raises(InputError, match="window" if key == "windows" else key):
                parse(d)
            tried += 1
    assert tried >= 2 * 14
