"""Random and deterministic Form records for the store tests (data of our own making)."""

from __future__ import annotations

import math

import numpy as np

from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form

# squarefree levels with their prime divisors, and how many cusps Gamma0(N) has
# (number of cusps of Gamma0(N) for squarefree N is 2^omega(N): common practice)
LEVELS = {1: (), 2: (2,), 3: (3,), 6: (2, 3), 11: (11,), 30: (2, 3, 5)}
N_CUSPS = {1: 1, 2: 2, 3: 2, 6: 4, 11: 2, 30: 8}


def random_form(rng: np.random.Generator, level: int | None = None, M: int | None = None,
                with_al: bool | None = None, complex_coeffs: bool = False) -> Form:
    """A Form with random content in every field (not a real Maass form)."""
    if level is None:
        level = int(rng.choice(list(LEVELS)))
    primes = LEVELS[level]
    if with_al is None:
        with_al = bool(rng.integers(2))
    al = tuple((p, int(rng.choice([-1, 1]))) for p in primes) if with_al else ()
    sym = SymmetryClass(str(rng.choice(["even", "odd"])), al)
    n_cusps = min(N_CUSPS[level], 4)
    M = int(rng.integers(1, 40)) if M is None else M
    coeffs = rng.normal(size=(n_cusps, M))
    if complex_coeffs:
        coeffs = coeffs + 1j * rng.normal(size=(n_cusps, M))
    coeffs[0, 0] = 1.0
    errs = 10.0 ** rng.uniform(-15, -3, size=(n_cusps, M))
    multiplicity = int(rng.integers(1, 3))
    extra = {
        "hecke": {str(p): float(rng.normal()) for p in (2, 3, 5)},
        "found_al": tuple((p, s) for p, s in al),
        "note": "made by store tests \u2014 \u00e9t\u00e9",
        "vec": rng.normal(size=int(rng.integers(0, 5))),
        "ints": rng.integers(-5, 5, size=(2, 3)).astype(np.int32),
        "mask": rng.integers(0, 2, size=4).astype(bool),
        "z": complex(rng.normal(), rng.normal()),
        "cz": (rng.normal(size=3) + 1j * rng.normal(size=3)).astype(np.complex64),
        "scalar0d": np.array(rng.normal()),
        "nothing": None,
        "flags": [True, False, 3, -2.5, "s", [1, (2, 3)]],
        "nan": math.nan,
        "inf": -math.inf,
        "np_int": np.int64(7),
        "big": 2**70,
    }
    return Form(
        level=level, R=float(rng.uniform(0.5, 40.0)), symmetry=sym, coeffs=coeffs,
        coeff_errors=errs, R_error=float(10 ** rng.uniform(-14, -6)),
        hecke_residual=float(10 ** rng.uniform(-14, -4)),
        params=SolverParams(Y=float(rng.uniform(0.05, 0.8)), M0=int(rng.integers(10, 300)),
                            Q=int(rng.integers(20, 400)), eps=float(10 ** rng.uniform(-16, -8))),
        is_new=[True, False, None][int(rng.integers(3))], multiplicity=multiplicity,
        basis_index=int(rng.integers(multiplicity)), extra=extra,
    )


def indexed_form(i: int, M: int = 30) -> Form:
    """Deterministic form number i (used by the crash-safety writer and its checker)."""
    rng = np.random.default_rng(10_000 + i)
    f = random_form(rng, level=list(LEVELS)[i % len(LEVELS)], M=M)
    # a distinct R per index keeps duplicate detection out of the crash test
    return Form(level=f.level, R=1.0 + 0.001 * i, symmetry=f.symmetry, coeffs=f.coeffs,
                coeff_errors=f.coeff_errors, R_error=f.R_error, hecke_residual=f.hecke_residual,
                params=f.params, is_new=f.is_new, multiplicity=1, basis_index=0,
                extra={"index": i, "vec": f.extra["vec"]})


def _same(a, b) -> bool:
    if isinstance(a, np.ndarray) or isinstance(b, np.ndarray):
        return (isinstance(a, np.ndarray) and isinstance(b, np.ndarray) and a.dtype == b.dtype
                and a.shape == b.shape and a.tobytes() == b.tobytes())
    # numpy scalars in extra come back as Python scalars (documented store behaviour)
    if isinstance(a, np.generic):
        a = a.item()
    if isinstance(b, np.generic):
        b = b.item()
    if isinstance(a, dict):
        return isinstance(b, dict) and a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, (list, tuple)):
        return (type(a) is type(b) and len(a) == len(b)
                and all(_same(x, y) for x, y in zip(a, b)))
    if isinstance(a, float) and math.isnan(a):
        return isinstance(b, float) and math.isnan(b)
    return type(a) is type(b) and a == b


def assert_forms_equal(a: Form, b: Form) -> None:
    """Every field equal; arrays bit-identical with the same dtype and shape."""
    assert a.level == b.level
    assert a.R == b.R and a.R_error == b.R_error and a.hecke_residual == b.hecke_residual
    assert a.symmetry == b.symmetry
    assert a.params == b.params
    assert a.is_new is b.is_new
    assert a.multiplicity == b.multiplicity and a.basis_index == b.basis_index
    for name in ("coeffs", "coeff_errors"):
        x, y = getattr(a, name), getattr(b, name)
        assert x.dtype == y.dtype and x.shape == y.shape and x.tobytes() == y.tobytes(), name
    assert _same(a.extra, b.extra), (a.extra, b.extra)
