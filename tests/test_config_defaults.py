"""Every config default is written once, in ``maasscomp.config.KEYS``: a minimal config
parses to exactly those defaults, and the section dataclasses carry none of their own."""

from __future__ import annotations

import dataclasses

from maasscomp import config as C


def test_minimal_config_takes_every_default_from_KEYS(tmp_path):
    cfg = C.parse({"job": {"output": "x.h5"}, "search": {"R_min": 9.0, "R_max": 10.0}}, cwd=tmp_path)
    norm = cfg.normalised()
    checked = 0
    for (sec, key), d in C.DEFAULTS.items():
        if d is None or key in ("R_min", "R_max", "windows"):
            continue  # required keys, or keys absent by default
        got = norm[sec][key]
        want = list(d) if isinstance(d, list) else d
        got = list(got) if isinstance(got, tuple) else got
        assert got == want, (sec, key, got, want)
        checked += 1
    assert checked >= 12
    assert cfg.scan.enabled is True  # scans are part of a run unless switched off


def test_section_dataclasses_have_no_defaults_of_their_own():
    for cls in (C.JobConfig, C.SearchConfig, C.ScanConfig):
        for f in dataclasses.fields(cls):
            assert f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING, (cls, f.name)
