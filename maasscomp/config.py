"""Job configuration: TOML files validated into frozen dataclasses.

Every key is documented once, in :data:`KEYS` (section, key, type, default, meaning);
``docs/config.md`` is generated from it by ``maasscomp keys``. Validation collects one
clear message per problem and raises a single :class:`~maasscomp.errors.InputError`
before any work starts (the pipeline adds the checks that need the groups: levels the
search cannot handle yet, memory per task).

Levels may be given as a list (``[1, 2, 3]``), a range (``"1..12"``) or a rule
(``"squarefree up to 50"``, ``"primes up to 100"``, ``"squarefree 10..50"``), see
:func:`parse_levels`.

The *fingerprint* of a config (:func:`fingerprint_settings`) is the part that changes
the numbers stored for a form (accuracy target, number of coefficients, grid step, scan
settings). A store refuses results made under a different fingerprint; everything else
(levels, windows, classes, chunking, backend, workers, paths) may change between runs.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import math
import os
import re
import tomllib
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from maasscomp.arith import is_prime, is_squarefree
from maasscomp.errors import InputError

PARITIES = ("even", "odd")
ATKIN_LEHNER = ("all", "plus", "minus")
BACKENDS = ("serial", "joblib", "dask")
LEVEL_KINDS = ("all", "squarefree", "primes")

#: Largest level accepted by a level rule or list (a guard against typos like 10000000).
MAX_LEVEL = 100_000

# Size limits of one job, checked before any work unless ``[job] size_limits = false``.
# Beyond them planning alone (group tables for every level, the task list) takes minutes
# and the job weeks; they are limits of this version's planning, not of the mathematics.
#: Levels in one job.
MAX_JOB_LEVELS = 100
#: Largest level of a job (setting up Gamma0(N) takes seconds at N ~ 1000).
MAX_PLANNED_LEVEL = 1000
#: Search tasks (level x symmetry class x R chunk) in one job.
MAX_TASKS = 100_000
#: Grid points of the determinant scan in one task.
MAX_GRID_POINTS_PER_TASK = 2_000_000
#: Grid points of the determinant scan in the whole job.
MAX_GRID_POINTS = 200_000_000

# (section, key, type name, default, meaning); default None with "required" in the type
# means the key must be given.
KEYS: list[tuple[str, str, str, Any, str]] = [
    ("job", "name", "string", "job",
     "Name of the study. Also the run id under which the store records finished tasks "
     "(letters, digits and _ . + - only)."),
    ("job", "output", "path (required)", None,
     "HDF5 store to write. A relative path is taken relative to the working directory; a "
     "symlink is followed. Rerunning the same config resumes into this file. An existing "
     "store must be writable by the user (a read-only one is refused before any work)."),
    ("job", "log", "path", "<output>.log",
     "Log file (appended to). Default: the store path with '.log' added. Must be neither "
     "the config file nor the store, and its directory must be writable."),
    ("job", "size_limits", "bool", True,
     "Refuse jobs beyond the planning limits (number of levels, largest level, number of "
     "tasks, grid points of the determinant scan; see 'Size limits' below) before any work. "
     "Set to false (or pass --no-size-limits) to run such a job anyway."),
    ("search", "levels", "list of int, or string", [1],
     "Levels N of Gamma0(N): a list like [1, 2, 3]; a range \"1..12\" (inclusive); or a "
     "rule \"squarefree up to 50\", \"primes up to 100\", \"all up to 12\", "
     "\"squarefree 10..50\"."),
    ("search", "R_min", "float", None,
     "Lower end of the R window (lambda = 1/4 + R^2), R_min > 0. Give R_min and R_max, "
     "or windows."),
    ("search", "R_max", "float", None,
     "Upper end of the R window, R_max > R_min. Both ends are included."),
    ("search", "windows", "list of [float, float]", None,
     "Several R windows [[R_min, R_max], ...] instead of R_min/R_max; they must not "
     "overlap."),
    ("search", "parities", "list of string", ["even", "odd"],
     "Parities to search: 'even' (cosine series) and/or 'odd' (sine series)."),
    ("search", "atkin_lehner", "string", "all",
     "Atkin-Lehner sign classes at squarefree levels N > 1: 'all' (every sign pattern), "
     "'plus' (all signs +1) or 'minus' (all signs -1). Ignored at level 1."),
    ("search", "eps", "float", 1e-14,
     "Target accuracy: truncation error of every Hejhal system, in [1e-16, 1e-4]."),
    ("search", "n_coeffs", "int", 60,
     "Number of Fourier coefficients stored per form, in [10, 20000]."),
    ("search", "step", "float", None,
     "Largest distance between the expansion points of the search (each finds every "
     "eigenvalue near it, however close two are). Default (absent): the search's own rule, "
     "one point per mean eigenvalue spacing of a class (Weyl's law), at most 0.1."),
    ("search", "chunk_width", "float", 1.0,
     "Width in R of one search task. Chunk edges sit at multiples of this width, so "
     "changing a window keeps the finished chunks it shares with the old one."),
    ("search", "characters", "string or list", "trivial",
     "Dirichlet characters chi of the forms, f(gamma z) = chi(d) f(z): 'trivial'; 'all-even' "
     "(every even character modulo each level); or a list whose entries are 'trivial', a "
     "label \"X<M>.<k1>.<k2>...\" (exponents k_i on the fixed generators of (Z/MZ)^x, "
     "see maasscomp.groups.characters; used at every level that M divides, induced), a table "
     "{conductor = q, index = i} (the i-th primitive character of conductor q in the order "
     "of maasscomp.groups.characters.primitive_characters, induced to every level q "
     "divides) or {modulus = M, exponents = [k1, ...]}. At weight 0 an odd character "
     "(chi(-1) = -1) is an error. Of a pair chi, conj(chi) one is searched and the other "
     "derived by complex conjugation with the reflection z -> -conj(z)."),
    ("search", "recheck", "bool", True,
     "After the search, compare the forms of every level searched in all its classes with "
     "Weyl's law where the project has it (squarefree levels), window by window, and search "
     "each window flagged as incomplete once more with a shifted lattice of expansion "
     "points, twice as many of them, and lower sample heights."),
    ("scan", "enabled", "bool", True,
     "After the search, L2-normalise every form of the config and scan it for the maximum of "
     "|f|/||f|| on the fixed compact set, in each cusp's transition zone and in between (one "
     "task per form; results stored beside the form). Set to false for a search alone."),
    ("scan", "Y_omega", "float", 2.0,
     "Height (in each cusp's coordinate) below which a point belongs to the fixed compact "
     "set Omega; >= 1. The default gives Omega 52% of the area of PSL(2,Z)\\H."),
    ("scan", "rtol", "float", 1e-3,
     "Relative accuracy the scan grid guarantees for each region's maximum, in [1e-9, 0.5]."),
    ("scan", "samples_per_wavelength", "float", 9.0,
     "Initial density of the scan grid, in [2, 100]."),
    ("executor", "backend", "string", "joblib",
     "Where tasks run: 'serial' (this process), 'joblib' (worker processes on this "
     "machine) or 'dask' (a Dask cluster: a local one, or the scheduler at 'address')."),
    ("executor", "workers", "int", "number of cores",
     "Number of worker processes (joblib, local Dask cluster)."),
    ("executor", "address", "string", None,
     "Dask only: address of a running scheduler, 'tcp://HOST:PORT' or 'tls://HOST:PORT' "
     "(HOST:PORT alone means tcp; the port defaults to 8786), e.g. 'tcp://10.0.0.5:8786'. "
     "Before any work the address is probed: it must answer as a Dask scheduler within "
     "15 s. Absent: start a local cluster with 'workers' processes."),
    ("executor", "memory_limit_gb", "float", "80% of RAM / workers",
     "Memory one task may use. A window whose systems would need more is refused before "
     "any work starts (and a local Dask cluster gets this limit per worker)."),
]

#: The default of every key whose default is a value (the others are computed: the log path,
#: the worker count, the memory limit); written once, in :data:`KEYS`.
DEFAULTS: dict[tuple[str, str], Any] = {(s, k): d for s, k, t, d, _ in KEYS
                                        if not (isinstance(d, str) and t != "string")}


def default(section: str, key: str) -> Any:
    """The default of ``[section] key`` from :data:`KEYS` (a fresh copy of lists)."""
    d = DEFAULTS[(section, key)]
    return list(d) if isinstance(d, list) else d


# keys of the executor section and job paths do not change results (see module docstring)
_RESULT_KEYS = {("search", "eps"), ("search", "n_coeffs"), ("search", "step")}
# compared only when both runs scanned (enabling scans later adds results, changes none)
_SCAN_RESULT_KEYS = {("scan", "Y_omega"), ("scan", "rtol"), ("scan", "samples_per_wavelength")}

_SECTIONS = list(dict.fromkeys(s for s, *_ in KEYS))


# ---------------------------------------------------------------- dataclasses


# The sections as validated by :func:`parse`, which fills every field (defaults: KEYS only).


@dataclass(frozen=True)
class JobConfig:
    name: str
    output: Path
    log: Path
    size_limits: bool


@dataclass(frozen=True)
class SearchConfig:
    levels: tuple[int, ...]
    windows: tuple[tuple[float, float], ...]
    parities: tuple[str, ...]
    atkin_lehner: str
    eps: float
    n_coeffs: int
    step: float | None
    chunk_width: float
    recheck: bool
    characters: Any

    @property
    def R_min(self) -> float:
        return self.windows[0][0]

    @property
    def R_max(self) -> float:
        return self.windows[-1][1]


@dataclass(frozen=True)
class ScanConfig:
    enabled: bool
    Y_omega: float
    rtol: float
    samples_per_wavelength: float


@dataclass(frozen=True)
class ExecutorConfig:
    backend: str
    workers: int
    address: str | None
    memory_limit_gb: float
    memory_explicit: bool = False


@dataclass(frozen=True)
class Config:
    """A validated job configuration."""

    job: JobConfig
    search: SearchConfig
    scan: ScanConfig
    executor: ExecutorConfig
    source_text: str = ""
    source_path: Path | None = None

    def normalised(self) -> dict[str, Any]:
        """Every key with its value after defaults and level rules are applied (JSON-ready)."""
        d = {
            "job": {"name": self.job.name, "output": str(self.job.output), "log": str(self.job.log),
                    "size_limits": self.job.size_limits},
            "search": asdict(self.search),
            "scan": asdict(self.scan),
            "executor": asdict(self.executor),
        }
        d["search"]["levels"] = list(self.search.levels)
        d["search"]["windows"] = [list(w) for w in self.search.windows]
        d["search"]["parities"] = list(self.search.parities)
        if isinstance(self.search.characters, tuple):
            d["search"]["characters"] = list(self.search.characters)
        return d

    def without_size_limits(self) -> "Config":
        """A copy with ``[job] size_limits = false``."""
        from dataclasses import replace

        return replace(self, job=replace(self.job, size_limits=False))

    def with_executor(self, backend: str | None = None, workers: int | None = None) -> "Config":
        """A copy with the backend and/or worker count replaced (they never change results).

        A scheduler address is dropped when the backend is no longer Dask; the default
        memory limit follows the new worker count.
        """
        from dataclasses import replace

        ex = self.executor
        if backend is not None:
            ex = replace(ex, backend=backend, address=ex.address if backend == "dask" else None)
        if workers is not None:
            mem = ex.memory_limit_gb if ex.memory_explicit else _default_memory_gb(workers)
            ex = replace(ex, workers=workers, memory_limit_gb=mem)
        _check_executor(ex)
        return replace(self, executor=ex)


def fingerprint_settings(normalised: dict[str, Any]) -> dict[str, Any]:
    """The result-affecting part of a normalised config, as ``{"section.key": value}``.

    Scan settings are included only when the config scans.
    """
    keys = set(_RESULT_KEYS)
    if normalised.get("scan", {}).get("enabled"):
        keys |= _SCAN_RESULT_KEYS
    out = {}
    for sec, key in sorted(keys):
        out[f"{sec}.{key}"] = normalised.get(sec, {}).get(key)
    return out


def fingerprint(normalised: dict[str, Any]) -> str:
    """A short hash of :func:`fingerprint_settings`."""
    text = json.dumps(fingerprint_settings(normalised), sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def fingerprint_changes(old: dict[str, Any], new: dict[str, Any]) -> list[str]:
    """Human-readable list of result-affecting differences between two normalised configs
    (settings present in only one of them, like scan settings of a run without scans,
    are not differences)."""
    a, b = fingerprint_settings(old), fingerprint_settings(new)
    out = []
    for k in sorted(set(a) & set(b)):
        if a[k] != b[k]:
            sec, key = k.split(".", 1)
            out.append(f"[{sec}] {key}: {a[k]!r} -> {b[k]!r}")
    return out


# ---------------------------------------------------------------- helpers


def _suggest(word: str, options: list[str]) -> str:
    close = difflib.get_close_matches(word, options, n=1, cutoff=0.6)
    if not close:  # case slips like r_min for R_min
        close = [o for o in options if o.lower() == word.lower()]
    return f" (did you mean {close[0]!r}?)" if close else ""


def _is_real(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _is_int(v: Any) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


_RULE = re.compile(
    r"^\s*(?:(?P<kind>all|squarefree|primes?)\s*(?:levels?\s*)?)?"
    r"(?:(?:up\s*to|<=)\s*(?P<upto>\d+)|(?P<lo>\d+)\s*(?:\.\.|to|-)\s*(?P<hi>\d+))\s*$",
    re.IGNORECASE,
)


_CHAR_LABEL_RE = re.compile(r"^X[1-9][0-9]*(\.[0-9]+)*$")


def parse_characters(spec: Any) -> Any:
    """Check the form of ``[search] characters`` (the values are checked per level when
    the job is planned, :func:`maasscomp.pipeline.tasks.build_plan`); returns "trivial",
    "all-even" or a tuple of entries (labels as str, tables as dicts)."""
    allowed = ("use \"trivial\", \"all-even\" or a list of characters: \"trivial\", a label such as "
               "\"X7.2\", {conductor = q, index = i} or {modulus = M, exponents = [k1, ...]}")
    if spec in ("trivial", "all-even"):
        return spec
    if not isinstance(spec, list) or not spec:
        raise InputError(f"[search] characters={spec!r} is not allowed; {allowed}")
    out = []
    for e in spec:
        if e == "trivial" or (isinstance(e, str) and _CHAR_LABEL_RE.match(e)):
            out.append(e)
        elif isinstance(e, dict) and set(e) == {"conductor", "index"} and all(
                _is_int(e[k]) and e[k] >= (1 if k == "conductor" else 0) for k in e):
            out.append({"conductor": int(e["conductor"]), "index": int(e["index"])})
        elif isinstance(e, dict) and set(e) == {"modulus", "exponents"} and _is_int(e["modulus"]) \
                and e["modulus"] >= 1 and isinstance(e["exponents"], list) and all(_is_int(k) and k >= 0
                                                                                 for k in e["exponents"]):
            out.append({"modulus": int(e["modulus"]), "exponents": [int(k) for k in e["exponents"]]})
        else:
            raise InputError(f"[search] characters: entry {e!r} is not allowed; {allowed}")
    return tuple(out)


def parse_levels(spec: Any) -> tuple[int, ...]:
    """Expand a level specification into a sorted tuple of levels.

    Parameters
    ----------
    spec : list of int or str
        A list of levels; a range ``"A..B"`` (also ``"A to B"``, both ends included); or a
        rule ``"<kind> up to B"`` / ``"<kind> A..B"`` with kind ``all``, ``squarefree`` or
        ``primes``.

    Raises
    ------
    InputError
        Malformed rule, a level < 1 or > :data:`MAX_LEVEL`, or an empty result.
    """
    if isinstance(spec, list):
        if not spec:
            raise InputError("[search] levels=[] is empty; give at least one level >= 1")
        bad = [v for v in spec if not (_is_int(v) and 1 <= v <= MAX_LEVEL)]
        if bad:
            raise InputError(
                f"[search] levels: {', '.join(repr(b) for b in bad)} not allowed; levels must be "
                f"integers in [1, {MAX_LEVEL}]"
            )
        return tuple(sorted(set(spec)))
    if not isinstance(spec, str):
        raise InputError(
            f"[search] levels={spec!r} must be a list of integers or a string such as "
            "\"1..12\" or \"squarefree up to 50\""
        )
    m = _RULE.match(spec)
    if not m:
        raise InputError(
            f"[search] levels={spec!r} is not a level rule; use a range \"A..B\", or "
            "\"squarefree up to B\", \"primes up to B\", \"all up to B\", \"squarefree A..B\""
        )
    kind = (m.group("kind") or "all").lower()
    kind = "primes" if kind.startswith("prime") else kind
    if m.group("upto") is not None:
        lo, hi = 1, int(m.group("upto"))
    else:
        lo, hi = int(m.group("lo")), int(m.group("hi"))
    if lo < 1 or hi > MAX_LEVEL:
        raise InputError(f"[search] levels={spec!r}: levels must lie in [1, {MAX_LEVEL}]")
    pred = {"all": lambda n: True, "squarefree": is_squarefree, "primes": is_prime}[kind]
    out = tuple(n for n in range(lo, hi + 1) if pred(n))
    if not out:
        raise InputError(f"[search] levels={spec!r} gives no level at all; widen the range")
    return out


def _total_memory_gb() -> float:
    try:
        return os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") / 2**30
    except (ValueError, OSError, AttributeError):  # pragma: no cover - non-POSIX
        return 8.0


def _default_memory_gb(workers: int) -> float:
    return 0.8 * _total_memory_gb() / max(1, workers)


def _check_executor(ex: ExecutorConfig) -> None:
    if ex.backend not in BACKENDS:
        raise InputError(f"backend {ex.backend!r} is not allowed; use one of {', '.join(BACKENDS)}")
    if not _is_int(ex.workers) or ex.workers < 1:
        raise InputError(f"workers={ex.workers!r} is not allowed; use an integer >= 1")


_HOST_LABEL = re.compile(r"^(?!-)[A-Za-z0-9-]{1,63}(?<!-)$")
DASK_SCHEMES = ("tcp", "tls")
DASK_DEFAULT_PORT = 8786


def parse_dask_address(address: str) -> tuple[str, str, int]:
    """Split a scheduler address into (scheme, host, port); raise InputError if malformed.

    Accepted: ``tcp://HOST:PORT``, ``tls://HOST:PORT``, ``HOST:PORT`` (tcp), with HOST a
    host name, an IPv4 address or a bracketed IPv6 address, and PORT in 1..65535 (8786 if
    omitted).
    """
    text = address.strip()
    shape = "use 'tcp://HOST:PORT' or 'tls://HOST:PORT', e.g. 'tcp://10.0.0.5:8786'"
    scheme, sep, rest = text.partition("://")
    if not sep:
        scheme, rest = "tcp", text
    if scheme not in DASK_SCHEMES:
        raise InputError(f"[executor] address={address!r}: scheme {scheme!r} is not supported; {shape}")
    if not rest or "/" in rest or "@" in rest or any(c.isspace() for c in rest):
        raise InputError(f"[executor] address={address!r} is not a scheduler address; {shape}")
    if rest.startswith("["):
        host, br, tail = rest[1:].partition("]")
        if not br or ":" not in host:
            raise InputError(f"[executor] address={address!r}: bad IPv6 host; {shape}")
        port_text = tail[1:] if tail.startswith(":") else ("" if not tail else None)
        if port_text is None:
            raise InputError(f"[executor] address={address!r} is not a scheduler address; {shape}")
    else:
        host, _, port_text = rest.partition(":")
        if ":" in port_text:
            raise InputError(f"[executor] address={address!r}: write an IPv6 host in brackets; {shape}")
        labels = host.split(".")
        if not host or len(host) > 253 or not all(_HOST_LABEL.match(x) for x in labels):
            raise InputError(f"[executor] address={address!r}: {host!r} is not a host name or "
                             f"IP address; {shape}")
    if port_text == "":
        port = DASK_DEFAULT_PORT
    elif not port_text.isdigit() or not (1 <= int(port_text) <= 65535):
        raise InputError(f"[executor] address={address!r}: port {port_text!r} is not a number "
                         f"in 1..65535; {shape}")
    else:
        port = int(port_text)
    return scheme, host, port


# ---------------------------------------------------------------- validation


def parse(data: dict, *, source_text: str = "", source_path: Path | None = None,
          cwd: Path | None = None) -> Config:
    """Validate a parsed TOML document; raise one InputError listing every problem."""
    problems: list[str] = []
    for sec in data:
        if sec not in _SECTIONS:
            problems.append(f"unknown section [{sec}]{_suggest(sec, _SECTIONS)}; allowed: "
                            f"{', '.join('[' + s + ']' for s in _SECTIONS)}")
    body: dict[str, dict] = {}
    for sec in _SECTIONS:
        b = data.get(sec, {})
        if not isinstance(b, dict):
            problems.append(f"[{sec}] must be a table, got {b!r}")
            b = {}
        allowed = [k for s, k, *_ in KEYS if s == sec]
        for k in b:
            if k not in allowed:
                problems.append(f"unknown key {k!r} in [{sec}]{_suggest(k, allowed)}; allowed: "
                                f"{', '.join(allowed)}")
        body[sec] = b
    job, srch, exe = body["job"], body["search"], body["executor"]

    # [job]
    name = job.get("name", default("job", "name"))
    if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z0-9_.+-]+", name) or name in (".", ".."):
        problems.append(f"[job] name={name!r} is not allowed; use a non-empty name of letters, "
                        "digits and _ . + -")
    output = job.get("output")
    if output is None:
        problems.append("[job] output is required: the path of the HDF5 store to write")
    elif not isinstance(output, str) or not output.strip():
        problems.append(f"[job] output={output!r} must be a non-empty path string")
    log = job.get("log")
    if log is not None and (not isinstance(log, str) or not log.strip()):
        problems.append(f"[job] log={log!r} must be a non-empty path string")
    for nm, v in (("output", output), ("log", log)):
        if isinstance(v, str) and "\0" in v:
            problems.append(f"[job] {nm}={v!r} contains a NUL character; give a plain path")
    size_limits = job.get("size_limits", default("job", "size_limits"))
    if not isinstance(size_limits, bool):
        problems.append(f"[job] size_limits={size_limits!r} must be true or false")

    # [search]
    levels: tuple[int, ...] = ()
    try:
        levels = parse_levels(srch.get("levels", default("search", "levels")))
    except InputError as exc:
        problems.append(str(exc))

    windows: list[tuple[float, float]] = []
    has_pair = "R_min" in srch or "R_max" in srch
    if "windows" in srch and has_pair:
        problems.append("[search] give either R_min and R_max, or windows, not both")
    elif "windows" in srch:
        ws = srch["windows"]
        if not isinstance(ws, list) or not ws:
            problems.append(f"[search] windows={ws!r} must be a non-empty list of [R_min, R_max] pairs")
            ws = []
        for w in ws:
            if not (isinstance(w, list) and len(w) == 2):
                problems.append(f"[search] window {w!r} must be a pair [R_min, R_max]")
                continue
            ok = True
            for nm, v in zip(("R_min", "R_max"), w):
                if not _is_real(v) or not math.isfinite(v) or v <= 0:
                    problems.append(f"[search] window {w!r}: {nm}={v!r} is not allowed; it must "
                                    "be a positive finite number")
                    ok = False
            if ok and w[0] >= w[1]:
                problems.append(f"[search] window {w!r}: R_min={w[0]!r} must be smaller than "
                                f"R_max={w[1]!r}")
                ok = False
            if ok:
                windows.append((float(w[0]), float(w[1])))
        windows.sort()
        for (a0, b0), (a1, b1) in zip(windows, windows[1:]):
            if a1 <= b0:
                problems.append(f"[search] windows [{a0}, {b0}] and [{a1}, {b1}] overlap; merge them")
    else:
        R_min, R_max = srch.get("R_min"), srch.get("R_max")
        ok = True
        for nm, v in (("R_min", R_min), ("R_max", R_max)):
            if v is None:
                problems.append(f"[search] {nm} is required (or give windows = [[R_min, R_max], ...])")
                ok = False
            elif not _is_real(v) or not math.isfinite(v) or v <= 0:
                problems.append(f"[search] {nm}={v!r} is not allowed; it must be a positive finite number")
                ok = False
        if ok and R_min >= R_max:
            problems.append(f"[search] R_min={R_min!r} must be smaller than R_max={R_max!r}")
        elif ok:
            windows = [(float(R_min), float(R_max))]

    parities = srch.get("parities", default("search", "parities"))
    if not isinstance(parities, list) or not parities:
        problems.append(f"[search] parities={parities!r} must be a non-empty list drawn from "
                        f"{list(PARITIES)}")
        parities = []
    for p in parities:
        if p not in PARITIES:
            problems.append(f"[search] parity {p!r} is not allowed; use 'even' and/or 'odd'")
    al = srch.get("atkin_lehner", default("search", "atkin_lehner"))
    if al not in ATKIN_LEHNER:
        problems.append(f"[search] atkin_lehner={al!r} is not allowed; use one of "
                        f"{', '.join(repr(a) for a in ATKIN_LEHNER)}")
    eps = srch.get("eps", default("search", "eps"))
    if not _is_real(eps) or not (1e-16 <= eps <= 1e-4):
        problems.append(f"[search] eps={eps!r} is not allowed; it must be a number in [1e-16, 1e-4]")
    n_coeffs = srch.get("n_coeffs", default("search", "n_coeffs"))
    if not _is_int(n_coeffs) or not (10 <= n_coeffs <= 20000):
        problems.append(f"[search] n_coeffs={n_coeffs!r} is not allowed; it must be an integer in "
                        "[10, 20000]")
    step = srch.get("step")
    if step is not None and (not _is_real(step) or not math.isfinite(step) or step <= 0):
        problems.append(f"[search] step={step!r} is not allowed; it must be a positive finite number")
    chunk = srch.get("chunk_width", default("search", "chunk_width"))
    if not _is_real(chunk) or not math.isfinite(chunk) or chunk < 0.01:
        problems.append(f"[search] chunk_width={chunk!r} is not allowed; it must be a number >= 0.01")

    recheck = srch.get("recheck", default("search", "recheck"))
    if not isinstance(recheck, bool):
        problems.append(f"[search] recheck={recheck!r} must be true or false")
    characters = srch.get("characters", "trivial")
    try:
        characters = parse_characters(characters)
    except InputError as exc:
        problems.append(str(exc))
        characters = "trivial"

    # [scan]
    scn = body["scan"]
    enabled = scn.get("enabled", default("scan", "enabled"))
    if not isinstance(enabled, bool):
        problems.append(f"[scan] enabled={enabled!r} must be true or false")
    Y_omega = scn.get("Y_omega", default("scan", "Y_omega"))
    if not _is_real(Y_omega) or not math.isfinite(Y_omega) or Y_omega < 1.0:
        problems.append(f"[scan] Y_omega={Y_omega!r} is not allowed; it must be a finite number >= 1")
    rtol = scn.get("rtol", default("scan", "rtol"))
    if not _is_real(rtol) or not (1e-9 <= rtol <= 0.5):
        problems.append(f"[scan] rtol={rtol!r} is not allowed; it must be a number in [1e-9, 0.5]")
    spw = scn.get("samples_per_wavelength", default("scan", "samples_per_wavelength"))
    if not _is_real(spw) or not (2.0 <= spw <= 100.0):
        problems.append(f"[scan] samples_per_wavelength={spw!r} is not allowed; it must be a "
                        "number in [2, 100]")

    # [executor]
    backend = exe.get("backend", default("executor", "backend"))
    if backend not in BACKENDS:
        problems.append(f"[executor] backend={backend!r} is not allowed{_suggest(str(backend), list(BACKENDS))}; "
                        f"use one of {', '.join(repr(b) for b in BACKENDS)}")
    workers = exe.get("workers", os.cpu_count() or 1)
    if not _is_int(workers) or not (1 <= workers <= 4096):
        problems.append(f"[executor] workers={workers!r} is not allowed; use an integer in [1, 4096]")
        workers = 1
    address = exe.get("address")
    if address is not None:
        if not isinstance(address, str) or not address.strip():
            problems.append(f"[executor] address={address!r} must be a scheduler address string "
                            "such as 'tcp://host:8786'")
        elif backend != "dask":
            problems.append(f"[executor] address is only used with backend = 'dask' (backend is "
                            f"{backend!r})")
        else:
            try:
                parse_dask_address(address)
            except InputError as exc:
                problems.append(str(exc))
    mem = exe.get("memory_limit_gb")
    mem_explicit = mem is not None
    if mem is None:
        mem = _default_memory_gb(workers)
    elif not _is_real(mem) or not math.isfinite(mem) or mem <= 0:
        problems.append(f"[executor] memory_limit_gb={mem!r} is not allowed; it must be a "
                        "positive number")
        mem = 1.0

    if problems:
        where = f"{source_path}: " if source_path else ""
        if len(problems) == 1:
            raise InputError(where + problems[0])
        raise InputError(where + f"{len(problems)} problems in the config:\n  - "
                         + "\n  - ".join(problems))

    base = cwd if cwd is not None else Path.cwd()
    out = Path(output).expanduser()
    if not out.is_absolute():
        out = base / out
    logp = Path(log).expanduser() if log is not None else out.with_name(out.name + ".log")
    if not logp.is_absolute():
        logp = base / logp
    return Config(
        job=JobConfig(name=name, output=out, log=logp, size_limits=bool(size_limits)),
        search=SearchConfig(
            levels=levels,
            windows=tuple(windows),
            parities=tuple(dict.fromkeys(parities)),
            atkin_lehner=al,
            eps=float(eps),
            n_coeffs=int(n_coeffs),
            step=None if step is None else float(step),
            chunk_width=float(chunk),
            recheck=bool(recheck),
            characters=characters,
        ),
        scan=ScanConfig(enabled=bool(enabled), Y_omega=float(Y_omega), rtol=float(rtol),
                        samples_per_wavelength=float(spw)),
        executor=ExecutorConfig(backend=backend, workers=int(workers),
                                address=address, memory_limit_gb=float(mem),
                                memory_explicit=mem_explicit),
        source_text=source_text,
        source_path=source_path,
    )


def load(path: str | os.PathLike) -> Config:
    """Read and validate a TOML job config (relative paths: relative to the working directory)."""
    p = Path(path)
    if not p.exists():
        raise InputError(f"config file {str(p)!r} does not exist")
    if not p.is_file():
        raise InputError(f"config path {str(p)!r} is not a file")
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise InputError(f"config file {str(p)!r} is not UTF-8 text; expected a TOML job config") from None
    except OSError as exc:
        raise InputError(f"cannot read config file {str(p)!r}: {exc.strerror or exc}") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{p}: not valid TOML ({exc})") from None
    return parse(data, source_text=text, source_path=p)


def keys_markdown() -> str:
    """The documentation of every config key, as Markdown (``docs/config.md``)."""
    lines = [
        "# Job config keys",
        "",
        "<!-- generated by `maasscomp keys > docs/config.md`; edit maasscomp/config.py instead -->",
        "",
        "A job config is a TOML file with the sections below. Unknown sections or keys, wrong",
        "types and impossible values are reported together, one line each, before any work",
        "starts (exit code 2). Check a config without running it: `maasscomp check CONFIG`.",
        "",
    ]
    for sec in _SECTIONS:
        lines += [f"## [{sec}]", "", "| key | type | default | meaning |", "|---|---|---|---|"]
        for s, key, typ, default, meaning in KEYS:
            if s != sec:
                continue
            if default is None:
                d = "required" if "required" in typ else "absent"
            elif isinstance(default, str) and (default.startswith("<") or " " in default):
                d = default
            else:
                d = f"`{json.dumps(default)}`"
            lines.append(f"| `{key}` | {typ.replace(' (required)', '')} | {d} | {meaning} |")
        lines.append("")
    lines += [
        "## Level rules",
        "",
        "`levels` accepts a list of integers, or one string:",
        "",
        "- a range: `\"1..12\"` (both ends included; `\"1 to 12\"` also works);",
        "- a rule: `\"<kind> up to B\"` or `\"<kind> A..B\"`, kind one of "
        + ", ".join(f"`{k}`" for k in LEVEL_KINDS) + ".",
        "",
        "## Size limits",
        "",
        "`maasscomp check` and `maasscomp run` estimate the size of a job from the config",
        "before any work (tasks, grid points of the determinant scan, memory per task, CPU",
        "time) and stop, with one line and exit code 2, when it is beyond these limits:",
        "",
        f"- at most {MAX_JOB_LEVELS} levels, none above {MAX_PLANNED_LEVEL};",
        f"- at most {MAX_TASKS:,} search tasks;",
        f"- at most {MAX_GRID_POINTS_PER_TASK:,} grid points in one task and "
        f"{MAX_GRID_POINTS:,} in the job.",
        "",
        "`[job] size_limits = false` (or `--no-size-limits`) lifts them. Never lifted: R must",
        "stay inside the range of the K-Bessel function (`maasscomp.special.R_MAX`, 10^5",
        "today) less the 0.001 that every chunk is searched beyond its ends; a grid step",
        "must be at least 1e-10 * max(1, R_max) (finer steps cannot move R in double",
        "precision); one task must fit in `memory_limit_gb`.",
        "",
        "## Executors and the store",
        "",
        "A job is split into tasks: one per level, symmetry class and R chunk (the classes of",
        "one level and chunk run together on one worker, which shares the K-Bessel tables",
        "they all use), then one sup-norm scan per form. Workers only compute: every result",
        "comes back to the process that runs `maasscomp run`, which commits each finished",
        "task's forms together with the task's done mark in one store transaction as results",
        "arrive. The store therefore has one writer, and a killed run loses only the tasks",
        "that were in flight. `backend = \"serial\"` runs tasks in that process, `\"joblib\"`",
        "on worker processes of the same machine, `\"dask\"` on a local Dask cluster or, with",
        "`address`, on any Dask cluster (its workers need maasscomp installed).",
        "",
        "## What a rerun may change",
        "",
        "Rerunning a config resumes it: finished tasks are skipped. These keys change the",
        "numbers stored for a form, so a store refuses a run whose values differ from the",
        "ones it was written with: "
        + ", ".join(f"`[{s}] {k}`" for s, k in sorted(_RESULT_KEYS)) + "; and, when both runs "
        "scan, " + ", ".join(f"`[{s}] {k}`" for s, k in sorted(_SCAN_RESULT_KEYS)) + ".",
        "Everything else (levels, windows, classes, chunk width, recheck, executor, paths,",
        "turning scans on) may change;",
        "new tasks are computed and forms already stored are not duplicated.",
        "",
    ]
    return "\n".join(lines)
