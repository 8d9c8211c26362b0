"""``[search] characters`` through config, plan and run: bad values are one-line errors
(exit 2, nothing written), a pair chi, conj(chi) is searched once and the other derived,
and the store holds the forms of both with their characters."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from maasscomp.cli import main
from maasscomp.config import load
from maasscomp.pipeline.tasks import build_plan, parse_task_id

CFG = """[job]
name = "chars"
output = "out.h5"
[search]
levels = {levels}
R_min = 3.6
R_max = 3.8
characters = {chars}
[executor]
backend = "serial"
"""


def _write(tmp_path: Path, levels: str, chars: str) -> Path:
    p = tmp_path / "job.toml"
    p.write_text(CFG.format(levels=levels, chars=chars))
    return p


@pytest.mark.parametrize("chars,fragments", [
    ('["X7.1"]', ["X7.1", "odd"]),
    ('["X7.9"]', ["exponents"]),
    ('[{conductor = 7}]', ["not allowed"]),
    ('"some"', ["characters='some' is not allowed"]),
    ('[{conductor = 7, index = 5}]', ["index 5", "conductor 7"]),
])
def test_bad_characters_are_refused(tmp_path, monkeypatch, capsys, chars, fragments):
    monkeypatch.chdir(tmp_path)
    code = main(["check", str(_write(tmp_path, "[7]", chars))])
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err and err.count("\n") == 1, err
    for f in fragments:
        assert f in err, err
    assert not (tmp_path / "out.h5").exists()


def test_plan_searches_one_of_each_conjugate_pair(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    cfg = load(_write(tmp_path, "[5, 7]", '["X7.2", "X7.4", "trivial", {conductor = 5, index = 1}]'))
    plan = build_plan(cfg)
    chars = {(t.level, t.character, t.derive_conjugate) for t in plan.tasks}
    assert (7, "X7.2", True) in chars and not any(c == "X7.4" for _, c, _ in chars)
    assert (5, "X5.2", False) in chars  # real: searched on its own
    assert plan.char_derived == {(7, "X7.2"): "X7.4"}
    assert set(plan.classes) == {5, 7}
    ids = [parse_task_id(t.task_id) for t in plan.tasks if t.character == "X7.2"]
    assert ids and all(d["character"] == "X7.2" and d["level"] == 7 for d in ids)
    assert "derived by conjugation" in plan.describe()


def test_run_stores_both_characters(tmp_path, monkeypatch):
    """Level 7, R in [3.6, 3.8]: the odd form with chi of order 3 at R = 3.70742467 (found by
    the search) and its conjugate (derived) are stored with their characters; no trivial-
    character form is asked for."""
    from maasscomp.spectrum.charforms import two_sided
    from maasscomp.store import Store

    monkeypatch.chdir(tmp_path)
    assert main(["run", "--quiet", str(_write(tmp_path, "[7]", '["X7.2", "X7.4"]'))]) == 0
    with Store.open(tmp_path / "out.h5", "r") as st:
        a, b = st.select(level=7, character="X7.2"), st.select(level=7, character="X7.4")
        assert len(a) == len(b) >= 1
        fa, fb = st.get(a[0]), st.get(b[0])
    assert abs(fa.R - 3.70742467) < 1e-6 and fa.R == fb.R
    assert fa.character.label == "X7.2" and fb.character.label == "X7.4"
    assert np.allclose(fb.coeffs[0], np.conj(fa.coeffs[0]), atol=1e-12)
    assert two_sided(fb).shape == two_sided(fa).shape
