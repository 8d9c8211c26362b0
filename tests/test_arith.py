"""The ground-floor arithmetic module against brute-force definitions (common practice:
phi(n) counts units mod n; mu is (-1)^k on products of k distinct primes and 0 otherwise;
(a/p) = a^((p-1)/2) mod p for odd primes p, Euler's criterion)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp import arith as A
from maasscomp.errors import InputError

N = 400


def _brute_primes(n):
    return [p for p in range(2, n + 1) if all(p % q for q in range(2, p))]


def test_factorisation_divisors_primes_by_brute_force():
    primes = _brute_primes(N)
    assert A.primes_up_to(N) == primes and A.primes_up_to(1) == []
    spf = A.smallest_prime_factor(N)
    for n in range(1, N + 1):
        f = A.factorint(n)
        assert math.prod(p**e for p, e in f.items()) == n and all(p in primes for p in f)
        assert A.factor_with(n, spf) == sorted(f.items())
        assert A.divisors(n) == [d for d in range(1, n + 1) if n % d == 0]
        assert A.prime_factors(n) == sorted(f)
        assert A.is_prime(n) == (n in primes)
        assert A.is_squarefree(n) == all(n % (p * p) for p in primes)
        assert A.euler_phi(n) == sum(math.gcd(k, n) == 1 for k in range(1, n + 1))
        assert A.mobius(n) == (0 if not A.is_squarefree(n) else (-1) ** len(f))
    assert A.divisor_count(N)[1:].tolist() == [len(A.divisors(n)) for n in range(1, N + 1)]
    # sum_{d | n} mu(d) = [n == 1]: the Moebius function inverts the constant 1
    assert all(sum(A.mobius(d) for d in A.divisors(n)) == (n == 1) for n in range(1, 200))


def test_bezout_and_kronecker():
    rng = np.random.default_rng(3)
    for a, b in rng.integers(-10**6, 10**6, size=(200, 2)).tolist():
        g, x, y = A.egcd(a, b)
        assert g == math.gcd(a, b) and a * x + b * y == g
    for p in _brute_primes(60)[1:]:
        for D in range(-30, 31):
            e = pow(D % p, (p - 1) // 2, p)
            assert A.kronecker(D, p) == (0 if D % p == 0 else (1 if e == 1 else -1))
    for bad in (lambda: A.factorint(0), lambda: A.kronecker(5, 0), lambda: A.jacobi(3, 4)):
        with pytest.raises(InputError):
            bad()


def test_no_stage_defines_its_own_arithmetic_helpers():
    """Factorisation, prime tests, sieves, totients and Kronecker symbols live in arith only."""
    import ast
    from pathlib import Path

    pkg = Path(A.__file__).parent
    names = {"factorint", "factor", "_factor", "prime_factors", "_prime_factors", "divisors", "is_prime",
             "_is_prime", "is_squarefree", "primes_up_to", "_primes_upto", "_prime_sieve", "egcd",
             "euler_phi", "_euler_phi", "mobius", "jacobi", "_jacobi", "kronecker", "smallest_prime_factor",
             "divisor_count", "totient"}
    bad = []
    for path in pkg.rglob("*.py"):
        if path.name == "arith.py":
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.FunctionDef) and node.name in names:
                bad.append(f"{path.relative_to(pkg)}: {node.name}")
    assert not bad, bad
