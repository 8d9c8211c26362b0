"""R chunks: edges where they should be, and no eigenvalue lost or doubled at an edge."""

from __future__ import annotations

import random

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from maasscomp.errors import InputError
from maasscomp.pipeline.tasks import ETA, OVERLAP, Chunk, chunk_window, parse_task_id, SearchTask
from maasscomp.store import DEFAULT_DUPLICATE_TOL

from tests.pipeline.pipeline_helpers import published_level1_R, store_content, write_config


def test_chunk_edges_sit_at_multiples_of_the_width():
    cs = chunk_window(9.3, 12.1, 1.0)
    assert [(c.lo, c.hi) for c in cs] == [(9.3, 10.0), (10.0, 11.0), (11.0, 12.0), (12.0, 12.1)]
    assert [c.inner_lo for c in cs] == [False, True, True, True]
    assert [c.inner_hi for c in cs] == [True, True, True, False]
    # a window inside one chunk, and a window ending on an edge
    assert [(c.lo, c.hi) for c in chunk_window(9.2, 9.7, 1.0)] == [(9.2, 9.7)]
    assert [(c.lo, c.hi) for c in chunk_window(9.0, 11.0, 1.0)] == [(9.0, 10.0), (10.0, 11.0)]
    # the shared chunks of two windows get the same task ids
    t = lambda c: SearchTask(1, "odd", c, 1e-14, 20, None).task_id  # noqa: E731
    ids_a = {t(c) for c in chunk_window(9.0, 14.0, 1.0)}
    ids_b = {t(c) for c in chunk_window(9.0, 16.0, 1.0)}
    # [9,10] .. [13,14] are reused; [13,14] was closed at 14 before, and its new neighbour
    # [14,15] keeps the band [14 - ETA, 14 + ETA] as well, so nothing near 14 is lost
    assert len(ids_a & ids_b) == 5
    p = parse_task_id(t(cs[1]))
    assert p == {"level": 1, "label": "odd", "lo": 10.0, "hi": 11.0}


def test_bad_chunking_is_refused():
    with pytest.raises(InputError):
        chunk_window(5.0, 4.0, 1.0)
    with pytest.raises(InputError):
        chunk_window(4.0, 5.0, 0.0)


def test_keep_rule_at_outer_and_inner_edges():
    a, b = chunk_window(9.0, 11.0, 1.0)
    assert a.keeps(9.0) and not a.keeps(9.0 - 1e-12)  # outer ends are exact
    assert b.keeps(11.0) and not b.keeps(11.0 + 1e-12)
    assert a.keeps(10.0 + 0.5 * ETA) and b.keeps(10.0 - 0.5 * ETA)  # both keep the edge band
    assert not a.keeps(10.0 + 2 * ETA) and not b.keeps(10.0 - 2 * ETA)
    assert a.search_hi == 10.0 + OVERLAP and b.search_lo == 10.0 - OVERLAP


def _simulate(chunks: list[Chunk], roots: list[float], noise: float, rng: random.Random) -> list[float]:
    """Each chunk reports every root inside its search window with its own error (at most
    ``noise``); results arrive in random order and the writer drops a form whose R lies
    within the store's duplicate tolerance of a stored one (Store.add_forms, skip)."""
    reports = []
    for c in chunks:
        found = []
        for r in roots:
            est = r + rng.uniform(-noise, noise)
            if c.search_lo + 1e-6 < r < c.search_hi - 1e-6 and c.keeps(est):
                found.append(est)
        reports.append(found)
    rng.shuffle(reports)
    stored: list[float] = []
    for found in reports:
        for R in found:
            if all(abs(R - s) > DEFAULT_DUPLICATE_TOL for s in stored):
                stored.append(R)
    return sorted(stored)


@settings(max_examples=200, deadline=None)
@given(
    width=st.sampled_from([0.1, 0.25, 0.5, 1.0, 0.37]),
    offsets=st.lists(st.sampled_from([0.0, 1e-15, -1e-15, 1e-9, -1e-9, 0.9 * ETA, -0.9 * ETA,
                                      3 * ETA, -3 * ETA, 0.3, 0.61]), min_size=1, max_size=6),
    seed=st.integers(0, 2**31),
)
def test_every_root_near_an_edge_is_stored_exactly_once(width, offsets, seed):
    # roots on and around every inner edge, with estimates that differ per chunk by up to
    # 2e-8 (confirmation at two heights guarantees |R - R_true| <= R_tol = 1e-8)
    rng = random.Random(seed)
    R_min, R_max = 9.05, 11.95
    chunks = chunk_window(R_min, R_max, width)
    edges = [c.lo for c in chunks[1:]]
    roots = set()
    for e in edges:
        for o in offsets:
            roots.add(round(e + o * min(1.0, width), 15))
    roots = sorted(r for r in roots if R_min + 1e-6 < r < R_max - 1e-6)
    # keep roots apart by more than the duplicate tolerance (distinct eigenvalues)
    kept_roots = []
    for r in roots:
        if not kept_roots or r - kept_roots[-1] > 10 * DEFAULT_DUPLICATE_TOL:
            kept_roots.append(r)
    stored = _simulate(chunks, kept_roots, 1e-8, rng)
    assert len(stored) == len(kept_roots)
    for r, s in zip(kept_roots, stored):
        assert abs(r - s) <= 1e-8


def test_eigenvalue_on_a_chunk_edge_is_stored_once(tmp_path):
    """A real search whose chunk edge falls on the first eigenvalue of PSL(2,Z)."""
    from maasscomp.config import load
    from maasscomp.pipeline.job import run_job
    from maasscomp.store import Store

    parity, R1, digits = published_level1_R()[1]  # data/reference/maass_level1_published.csv
    width = R1 / 10  # the edge 10 * width equals R1 up to rounding
    edge_cfg = write_config(tmp_path / "edge.toml", output=str(tmp_path / "edge.h5"),
                            R=(9.4, 9.7), chunk_width=width, parities=f'["{parity}"]')
    one_cfg = write_config(tmp_path / "one.toml", output=str(tmp_path / "one.h5"),
                           R=(9.4, 9.7), chunk_width=10.0, parities=f'["{parity}"]')
    cfg = load(edge_cfg)
    s = run_job(cfg, quiet=True)
    assert s.ok and s.tasks_run == 2
    chunks = chunk_window(9.4, 9.7, width)
    assert len(chunks) == 2 and abs(chunks[0].hi - R1) < 1e-12
    content = store_content(cfg.job.output)
    assert len(content) == 1
    assert abs(content[0]["R"] - R1) < 10 ** (-(digits - 2))
    with Store.open(cfg.job.output, "r") as st_:
        done = st_.done_tasks(cfg.job.name)
    # both neighbours found it (the edge band), the store kept one copy
    assert len(done) == 2 and all(keys == [st_key] for keys in done.values()
                                  for st_key in [next(iter(done.values()))[0]])
    s1 = run_job(load(one_cfg), quiet=True)
    assert s1.ok
    single = store_content(tmp_path / "one.h5")
    assert len(single) == 1 and abs(single[0]["R"] - content[0]["R"]) < 1e-10
