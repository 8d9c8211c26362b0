"""Elementary number theory on Python ints: the one home of these helpers.

Every stage that needs a factorisation, divisors, primes, a gcd with Bezout coefficients,
Euler's totient, the Moebius function or a Kronecker symbol imports it from here (this
module sits below every stage and imports nothing of the package but its errors). Levels and indices are
small, so trial division and plain sieves suffice; the formulas are common practice (e.g.
H. Cohen, *A Course in Computational Algebraic Number Theory* (1993) §1.3-1.4; Hardy &
Wright, *An Introduction to the Theory of Numbers*, ch. XVI).
"""

from __future__ import annotations

import math
import numbers
from typing import TYPE_CHECKING

from maasscomp.errors import InputError

if TYPE_CHECKING:  # numpy is imported by the sieves only, so the CLI starts without it
    import numpy as np

__all__ = ["check_level", "factorint", "prime_factors", "divisors", "is_prime", "is_squarefree", "primes_up_to",
           "smallest_prime_factor", "factor_with", "divisor_count", "egcd", "euler_phi", "mobius",
           "jacobi", "kronecker"]


def check_level(level: object) -> int:
    """``level`` as a Python int after checking that it is a positive integer (InputError
    naming the value otherwise; bools are refused)."""
    if isinstance(level, bool) or not isinstance(level, numbers.Integral) or int(level) < 1:
        raise InputError(f"level {level!r} is not allowed; use a positive integer")
    return int(level)


def factorint(n: int) -> dict[int, int]:
    """Prime factorisation {p: e} of ``n >= 1`` by trial division ({} for n = 1)."""
    n = int(n)
    if n < 1:
        raise InputError(f"factorint needs n >= 1, got {n}")
    out: dict[int, int] = {}
    p = 2
    while p * p <= n:
        while n % p == 0:
            out[p] = out.get(p, 0) + 1
            n //= p
        p += 1 if p == 2 else 2
    if n > 1:
        out[n] = out.get(n, 0) + 1
    return out


def prime_factors(n: int) -> list[int]:
    """The distinct primes dividing ``n >= 1``, ascending."""
    return sorted(factorint(n))


def divisors(n: int) -> list[int]:
    """Sorted positive divisors of ``n >= 1``."""
    small = [d for d in range(1, math.isqrt(n) + 1) if n % d == 0]
    return sorted(set(small + [n // d for d in small]))


def is_prime(n: int) -> bool:
    """True for the primes 2, 3, 5, ... (trial division)."""
    n = int(n)
    return n >= 2 and all(n % q for q in range(2, math.isqrt(n) + 1))


def is_squarefree(n: int) -> bool:
    """True if no square of a prime divides ``n`` (1 and -1 are squarefree; 0 is not)."""
    n = abs(int(n))
    return n != 0 and all(e == 1 for e in factorint(n).values())


def primes_up_to(n: int) -> list[int]:
    """The primes p <= n, ascending."""
    if n < 2:
        return []
    import numpy as np

    spf = smallest_prime_factor(int(n))
    return [int(p) for p in np.flatnonzero(spf == np.arange(n + 1)) if p >= 2]


def smallest_prime_factor(n_max: int) -> np.ndarray:
    """spf[n] for 0 <= n <= n_max (spf[0] = spf[1] = 0), by a sieve."""
    import numpy as np

    spf = np.zeros(n_max + 1, dtype=np.int64)
    for p in range(2, math.isqrt(n_max) + 1):
        if spf[p] == 0:
            s = spf[p * p::p]
            s[s == 0] = p
    rest = np.flatnonzero(spf == 0)
    spf[rest] = rest
    spf[:2] = 0
    return spf


def factor_with(n: int, spf: np.ndarray) -> list[tuple[int, int]]:
    """Factorisation [(p, e), ...] (ascending p) of ``1 <= n < len(spf)`` from a sieve of
    :func:`smallest_prime_factor`."""
    out = []
    while n > 1:
        p = int(spf[n])
        k = 0
        while n % p == 0:
            n //= p
            k += 1
        out.append((p, k))
    return out


def divisor_count(n_max: int) -> np.ndarray:
    """d(n) for 0 <= n <= n_max (d(0) = 0)."""
    import numpy as np

    d = np.zeros(n_max + 1, dtype=np.int64)
    for k in range(1, n_max + 1):
        d[k::k] += 1
    return d


def egcd(a: int, b: int) -> tuple[int, int, int]:
    """Return ``(g, x, y)`` with ``a x + b y = g = gcd(a, b) >= 0``."""
    x0, y0, x1, y1 = 1, 0, 0, 1
    while b:
        q, a, b = a // b, b, a - (a // b) * b
        x0, x1 = x1, x0 - q * x1
        y0, y1 = y1, y0 - q * y1
    if a < 0:
        a, x0, y0 = -a, -x0, -y0
    return a, x0, y0


def euler_phi(n: int) -> int:
    """Euler's totient phi(n) = n prod_{p | n} (1 - 1/p) for n >= 1."""
    out = int(n)
    for p in factorint(n):
        out = out // p * (p - 1)
    return out


def mobius(n: int) -> int:
    """The Moebius function mu(n) for n >= 1."""
    f = factorint(n)
    return 0 if any(e > 1 for e in f.values()) else (-1) ** len(f)


def jacobi(a: int, n: int) -> int:
    """Jacobi symbol (a/n) for odd n > 0 (quadratic reciprocity)."""
    if n <= 0 or n % 2 == 0:
        raise InputError(f"the Jacobi symbol needs an odd n > 0, got {n}")
    a %= n
    result = 1
    while a:
        while a % 2 == 0:
            a //= 2
            if n % 8 in (3, 5):
                result = -result
        a, n = n, a
        if a % 4 == 3 and n % 4 == 3:
            result = -result
        a %= n
    return result if n == 1 else 0


def kronecker(D: int, n: int) -> int:
    """The Kronecker symbol (D/n) for integers D and n >= 1.

    (D/2) = 0 for even D, +1 for D = +-1 mod 8, -1 for D = +-3 mod 8; (D/p) the Legendre
    symbol for odd primes p; completely multiplicative in n (Cohen 1993, §1.4.2).
    """
    D, n = int(D), int(n)
    if n < 1:
        raise InputError(f"the Kronecker symbol here needs n >= 1, got {n}")
    result = 1
    while n % 2 == 0:
        n //= 2
        if D % 2 == 0:
            return 0
        if D % 8 in (3, 5):
            result = -result
    return result * jacobi(D, n) if n > 1 else result
