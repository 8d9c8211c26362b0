"""Edge inputs of the special-function stage: tiny R, subnormal x, booleans, read-only installs.

Oracles: python-flint (arb) ball arithmetic, ``acb(x).bessel_k(acb(0, R))``, for values (1e-18
relative); mpmath ``besselk`` at 30 digits for derivatives, dK_nu/dx = -(K_{nu-1} + K_{nu+1}) / 2
(DLMF 10.29.1) with nu = iR (arb's enclosures of K_{+-1+iR}(x) stay ~1e-5..1e-8 wide for
x <= 1e-300 at any precision, so they cannot serve there).
"""

from __future__ import annotations

import math
import os
import shutil
import stat
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import maasscomp
from maasscomp.errors import InputError
from maasscomp.special import airy_peak, kbessel_table, ktilde, ktilde_dx, ktilde_many

from .kbessel_refdata import arb_ktilde_re




def _mp_x_dk(R: float, x: float) -> float:
    """x dKt/dx = -x exp(pi R/2) (K_{iR-1}(x) + K_{iR+1}(x)) / 2 (DLMF 10.29.1), mpmath at 30
    digits; finite for every x > 0 (about R cos(R log(x/2) - arg Gamma(1 + iR)) for tiny x)."""
    import mpmath

    with mpmath.workdps(30):
        nu, X = mpmath.mpc(0, R), mpmath.mpf(x)
        v = -X * (mpmath.besselk(nu - 1, X) + mpmath.besselk(nu + 1, X)) / 2 * mpmath.exp(mpmath.pi * R / 2)
        return float(mpmath.re(v))


@pytest.mark.parametrize("R", [1e-99, 1e-101, 1e-200, 5e-324])
@pytest.mark.parametrize("x", [5e-324, 1e-300, 1e-160, 0.5, 3.0])
def test_tiny_R_against_arb(R, x):
    """R down to the smallest subnormal: no ZeroDivisionError, and K_{iR} -> K_0 (python-flint arb)."""
    ref = arb_ktilde_re(R, x)
    got = float(ktilde(R, x))
    assert abs(got - ref) <= 1e-14 * max(1.0, abs(ref))


@pytest.mark.parametrize("R", [1e-200, 1e-99])
def test_tiny_R_derivative_against_arb(R):
    """dKt/dx at tiny R (the K_0 branch and the series branch) against mpmath."""
    for x in (1e-300, 0.5, 3.0):
        ref = _mp_x_dk(R, x) / x
        assert abs(float(ktilde_dx(R, x)) - ref) <= 1e-12 * abs(ref)


def test_tiny_R_is_continuous_across_the_K0_branch():
    """Both sides of R = 1e-100 (series / K_0 branch) give the same values and derivatives."""
    x = np.array([5e-324, 1e-200, 0.01, 0.7, 5.0, 30.0])
    a, b = ktilde(1.0001e-100, x), ktilde(0.9999e-100, x)
    np.testing.assert_allclose(a, b, rtol=1e-14, atol=0)
    da, db = ktilde_dx(1.0001e-100, x), ktilde_dx(0.9999e-100, x)
    fin = np.isfinite(da)
    np.testing.assert_allclose(da[fin], db[fin], rtol=1e-12, atol=0)
    assert np.array_equal(np.isinf(da), np.isinf(db)) and np.array_equal(np.sign(da), np.sign(db))


@pytest.mark.parametrize("R", [1e-8, 0.3, 5.0, 30.0, 10000.0])
def test_derivative_at_subnormal_x_is_signed_inf(R):
    """Where |dKt/dx| ~ R/x exceeds the double range the result is +-inf with the sign of the
    true value (mpmath value of x dKt/dx, which is finite); never nan."""
    for x in (5e-324, 1e-310):
        sgn = math.copysign(1.0, _mp_x_dk(R, x))
        got = float(ktilde_dx(R, x))
        assert got == sgn * math.inf, (x, got)
    # where the value still fits, it is the finite arb value
    x = 1e-300
    ref = _mp_x_dk(R, x) / x
    assert abs(float(ktilde_dx(R, x)) - ref) <= 1e-11 * abs(ref)


@pytest.mark.parametrize(
    "call",
    [
        lambda: ktilde(True, 1.0),
        lambda: ktilde(np.bool_(True), 1.0),
        lambda: ktilde(2.0, True),
        lambda: ktilde(2.0, [1.0, False]),
        lambda: ktilde(2.0, np.array([True, True])),
        lambda: ktilde_dx(True, 1.0),
        lambda: ktilde_dx(2.0, [[1.0], [True]]),
        lambda: ktilde_many([1.0, True], [1.0, 2.0]),
        lambda: ktilde_many(np.array([True]), 1.0),
        lambda: ktilde_many(2.0, np.array([False])),
        lambda: airy_peak(True),
        lambda: kbessel_table(False),
    ],
)
def test_booleans_are_not_numbers(call):
    """numpy reads True as 1.0; the public functions refuse booleans instead."""
    with pytest.raises(InputError, match="boolean"):
        call()


def test_plain_numbers_still_accepted():
    v = float(ktilde(2, 1))
    assert v == float(ktilde(np.float32(2.0), np.int64(1))) == float(ktilde(2.0, [1.0])[0])


def _blocked_copy(tmp_path: Path) -> Path:
    """A copy of the package in which no ``__pycache__`` folder can be created.

    Every package folder gets a regular *file* named ``__pycache__`` (so not even root can
    create the cache folder there), and the copy is made read-only for good measure.
    """
    src = Path(maasscomp.__file__).resolve().parent
    site = tmp_path / "site"
    shutil.copytree(src, site / "maasscomp", ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    for d in [p for p in (site / "maasscomp").rglob("*") if p.is_dir()] + [site / "maasscomp"]:
        (d / "__pycache__").write_text("not a folder\n")
    for p in sorted(site.rglob("*"), reverse=True):
        p.chmod(p.stat().st_mode & ~(stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))
    return site


def test_import_and_evaluate_on_a_read_only_install(tmp_path):
    """With neither the package folder nor any cache folder writable, importing and calling
    the compiled kernels works (they are compiled without a disk cache)."""
    site = _blocked_copy(tmp_path)
    blocker = tmp_path / "blocker"
    blocker.write_text("a file, so nothing can be created below it\n")
    env = {k: v for k, v in os.environ.items() if not k.startswith("NUMBA_")}
    env.update(PYTHONPATH=str(site), HOME=str(blocker / "home"), XDG_CACHE_HOME=str(blocker / "cache"),
               NUMBA_CACHE_DIR=str(blocker / "numba"), PYTHONDONTWRITEBYTECODE="1", OMP_NUM_THREADS="1")
    code = ("import maasscomp, maasscomp.special as s, maasscomp.cli\n"
            "assert maasscomp.__file__.startswith(%r), maasscomp.__file__\n"
            "print(repr(float(s.ktilde(500.0, 400.0))), repr(float(s.ktilde(5.0, 1.0))))\n" % str(site))
    try:
        p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env,
                           cwd=str(tmp_path), timeout=600)
    finally:
        for q in site.rglob("*"):
            q.chmod(q.stat().st_mode | stat.S_IWUSR)
    assert p.returncode == 0, p.stderr[-3000:]
    a, b = (float(t) for t in p.stdout.split())
    assert a == float(ktilde(500.0, 400.0)) and b == float(ktilde(5.0, 1.0))
