"""Job configuration: TOML files validated into frozen dataclasses.

Every key is documented once, in :data:`KEYS` (section, key, type, default, meaning); the
README's key table is generated from it (``maasscomp keys``). Validation collects one clear
message per problem and raises a single :class:`~maasscomp.errors.InputError` before any
work starts.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from maasscomp.errors import InputError

PARITIES = ("even", "odd")

# (section, key, type name, default, meaning)
KEYS: list[tuple[str, str, str, Any, str]] = [
    ("job", "name", "string", "job", "Name of the study, recorded in the store."),
    ("job", "output", "path", None, "HDF5 store to write (a relative path is taken relative to the working directory). Required."),
    ("search", "levels", "list of int", [1], "Levels N of Gamma0(N) to search."),
    ("search", "R_min", "float", None, "Lower end of the R window (R > 0, lambda = 1/4 + R^2). Required."),
    ("search", "R_max", "float", None, "Upper end of the R window (R_max > R_min). Required."),
    ("search", "parities", "list of string", ["even", "odd"], "Parities to search: 'even' (cosine) and/or 'odd' (sine)."),
    ("search", "eps", "float", 1e-14, "Target truncation error of every Hejhal system."),
    ("search", "n_coeffs", "int", 60, "Number of Fourier coefficients stored per form (at least 10)."),
    ("search", "step", "float or absent", None, "Grid step of the determinant-sign scan; default: a fortieth of the mean spacing of the class."),
]

_SECTIONS = sorted({s for s, *_ in KEYS})


@dataclass(frozen=True)
class JobConfig:
    name: str
    output: Path


@dataclass(frozen=True)
class SearchConfig:
    levels: tuple[int, ...]
    R_min: float
    R_max: float
    parities: tuple[str, ...]
    eps: float = 1e-14
    n_coeffs: int = 60
    step: float | None = None


@dataclass(frozen=True)
class Config:
    """A validated job configuration."""

    job: JobConfig
    search: SearchConfig
    source_text: str = ""
    source_path: Path | None = None


def _suggest(word: str, options: list[str]) -> str:
    close = difflib.get_close_matches(word, options, n=1)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _is_real(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def parse(data: dict, *, base_dir: Path | None = None, source_text: str = "", source_path: Path | None = None) -> Config:
    """Validate a parsed TOML document; raise InputError listing every problem."""
    problems: list[str] = []
    for sec in data:
        if sec not in _SECTIONS:
            problems.append(f"unknown section [{sec}]{_suggest(sec, _SECTIONS)}; allowed: {', '.join(_SECTIONS)}")
    for sec in _SECTIONS:
        body = data.get(sec, {})
        if not isinstance(body, dict):
            problems.append(f"[{sec}] must be a table")
            continue
        allowed = [k for s, k, *_ in KEYS if s == sec]
        for k in body:
            if k not in allowed:
                problems.append(f"unknown key {k!r} in [{sec}]{_suggest(k, allowed)}; allowed: {', '.join(allowed)}")

    job = data.get("job", {}) if isinstance(data.get("job", {}), dict) else {}
    srch = data.get("search", {}) if isinstance(data.get("search", {}), dict) else {}

    name = job.get("name", "job")
    if not isinstance(name, str) or not name:
        problems.append(f"[job] name={name!r} must be a non-empty string")
    output = job.get("output")
    if output is None:
        problems.append("[job] output is required: the path of the HDF5 store to write")
    elif not isinstance(output, str) or not output:
        problems.append(f"[job] output={output!r} must be a non-empty path string")

    levels = srch.get("levels", [1])
    if not isinstance(levels, list) or not levels:
        problems.append(f"[search] levels={levels!r} must be a non-empty list of positive integers")
        levels = []
    for N in levels:
        if not (isinstance(N, int) and not isinstance(N, bool) and N >= 1):
            problems.append(f"[search] level {N!r} is not allowed; levels must be integers >= 1")

    R_min, R_max = srch.get("R_min"), srch.get("R_max")
    for nm, v in (("R_min", R_min), ("R_max", R_max)):
        if v is None:
            problems.append(f"[search] {nm} is required")
        elif not _is_real(v) or not math.isfinite(v) or v <= 0:
            problems.append(f"[search] {nm}={v!r} is not allowed; it must be a positive finite number")
    if _is_real(R_min) and _is_real(R_max) and math.isfinite(R_min) and math.isfinite(R_max) and R_min >= R_max:
        problems.append(f"[search] R_min={R_min!r} must be smaller than R_max={R_max!r}")

    parities = srch.get("parities", list(PARITIES))
    if not isinstance(parities, list) or not parities:
        problems.append(f"[search] parities={parities!r} must be a non-empty list drawn from {list(PARITIES)}")
        parities = []
    for p in parities:
        if p not in PARITIES:
            problems.append(f"[search] parity {p!r} is not allowed; use 'even' and/or 'odd'")
    eps = srch.get("eps", 1e-14)
    if not _is_real(eps) or not (1e-16 <= eps <= 1e-4):
        problems.append(f"[search] eps={eps!r} is not allowed; it must lie in [1e-16, 1e-4]")
    n_coeffs = srch.get("n_coeffs", 60)
    if not isinstance(n_coeffs, int) or isinstance(n_coeffs, bool) or not (10 <= n_coeffs <= 20000):
        problems.append(f"[search] n_coeffs={n_coeffs!r} is not allowed; it must be an integer in [10, 20000]")
    step = srch.get("step")
    if step is not None and (not _is_real(step) or not math.isfinite(step) or step <= 0):
        problems.append(f"[search] step={step!r} is not allowed; it must be a positive finite number")

    if problems:
        where = f"{source_path}: " if source_path else ""
        raise InputError(where + "; ".join(problems) if len(problems) == 1 else where + "invalid config:\n  - " + "\n  - ".join(problems))

    out = Path(output)
    if not out.is_absolute() and base_dir is not None:
        out = base_dir / out
    return Config(
        job=JobConfig(name=name, output=out),
        search=SearchConfig(
            levels=tuple(int(N) for N in levels),
            R_min=float(R_min),
            R_max=float(R_max),
            parities=tuple(dict.fromkeys(parities)),
            eps=float(eps),
            n_coeffs=int(n_coeffs),
            step=None if step is None else float(step),
        ),
        source_text=source_text,
        source_path=source_path,
    )


def load(path: str | Path) -> Config:
    """Read and validate a TOML job config."""
    p = Path(path)
    if not p.exists():
        raise InputError(f"config file {str(p)!r} does not exist")
    if not p.is_file():
        raise InputError(f"config path {str(p)!r} is not a file")
    text = p.read_text(encoding="utf-8")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{p}: not valid TOML ({exc})") from None
    return parse(data, source_text=text, source_path=p)
