"""Exact dihedral Maass forms of level D with character chi_D (D = 5, 8, 12, 13).

Writes ``data/reference/dihedral_forms.csv``. Independent of the package: ideal arithmetic
in the ring of integers of K = Q(sqrt D) with Python integers, values with mpmath.

Mathematics (docs/theory.md §12.5; H. Maass, Math. Ann. 121 (1949) 141-183;
D. Bump, *Automorphic Forms and Representations* (1997), §1.9): for a real quadratic field
of class number one with fundamental unit eps > 1, a Hecke character on ideals
(alpha) is psi((alpha)) = sgn(N alpha)^delta |alpha/alpha'|^{i t}, well defined when it is
1 on the units -1 and eps: |eps/eps'| = eps^2, so e^{2 i t log eps} sgn(N eps)^delta = 1,

    N(eps) = -1:  delta = 0, t = pi k / log eps (k >= 1)         -> even forms,
                  delta = 1, t = pi (k + 1/2) / log eps (k >= 0)  -> odd forms;
    N(eps) = +1:  delta = 0 and delta = 1, t = pi k / log eps (k >= 1) -> an even and an
                  odd form at each such t (delta = 1, t = 0 is the genus character, which
                  factors through the norm and gives an Eisenstein series).

The form f_psi(z) = sum_{n != 0} a(|n|) sgn(n)^delta sqrt(y) K_{it}(2 pi |n| y) e(n x) with
a(n) = sum_{N a = n} psi(a) is a newform of level D, character chi_D = (D/.), R = t,
parity delta (even/odd). a(p) = psi(p) + psi(p') for split p, 0 for inert p, psi(p) for
ramified p; a(n) is multiplicative with a(p^{e+1}) = a(p) a(p^e) - chi_D(p) a(p^{e-1}).

Run: ``python tests/spectrum/make_dihedral.py`` (a second or two).
"""

from __future__ import annotations

import math
from pathlib import Path

import mpmath as mp

mp.mp.dps = 40

DISCRIMINANTS = (5, 8, 12, 13)
R_MAX = 10.0
N_COEFFS = 40
OUT = Path(__file__).resolve().parents[2] / "data" / "reference" / "dihedral_forms.csv"


def kronecker(D: int, p: int) -> int:
    """(D/p) for a prime p."""
    if p == 2:
        return 0 if D % 2 == 0 else (1 if D % 8 in (1, 7) else -1)
    r = D % p
    return 0 if r == 0 else (1 if pow(r, (p - 1) // 2, p) == 1 else -1)


def primes_upto(n: int) -> list[int]:
    return [p for p in range(2, n + 1) if all(p % q for q in range(2, int(p ** 0.5) + 1))]


def fundamental_unit(D: int) -> tuple[int, int, int]:
    """(x, y, norm) of eps = (x + y sqrt D)/2 > 1, the least y > 0 with x^2 - D y^2 = +-4."""
    y = 1
    while True:
        for s in (-4, 4):
            x2 = D * y * y + s
            x = math.isqrt(x2) if x2 >= 0 else -1
            if x > 0 and x * x == x2:
                return x, y, s // 4
        y += 1


def element_of_norm(D: int, p: int) -> tuple[int, int]:
    """(x, y) with alpha = (x + y sqrt D)/2 in the ring of integers and |N alpha| = p
    (x = yD mod 2). Exists for split and ramified p because the class number is one."""
    for y in range(0, 10_000):
        for s in (4 * p, -4 * p):
            x2 = D * y * y + s
            if x2 < 0:
                continue
            x = math.isqrt(x2)
            if x * x == x2 and (x - y * D) % 2 == 0:
                return x, y
    raise AssertionError(f"no element of norm +-{p} in Q(sqrt {D})")


def psi(D: int, x: int, y: int, t, delta: int):
    """sgn(N alpha)^delta |alpha/alpha'|^{i t} for alpha = (x + y sqrt D)/2."""
    sD = mp.sqrt(D)
    a, ac = (x + y * sD) / 2, (x - y * sD) / 2
    norm = (x * x - D * y * y) // 4
    sgn = (1 if norm > 0 else -1) ** delta
    return sgn * mp.expj(t * mp.log(abs(a / ac)))


def families(D: int):
    """(parity, k, t) of every dihedral form with t <= R_MAX (module docstring)."""
    ex, ey, en = fundamental_unit(D)
    leps = mp.log((ex + ey * mp.sqrt(D)) / 2)
    out = []
    for delta in (0, 1):
        for k in range(0, 100):
            if en == -1:
                t = mp.pi * k / leps if delta == 0 else mp.pi * (k + mp.mpf(1) / 2) / leps
            else:
                t = mp.pi * k / leps
            if t == 0:
                continue
            if t > R_MAX:
                break
            out.append(("even" if delta == 0 else "odd", k, t, delta))
    # well defined on units: psi(eps) = 1 (self-check of the rule above)
    for par, k, t, delta in out:
        v = psi(D, ex, ey, t, delta)
        assert abs(v - 1) < mp.mpf(10) ** -30, (D, par, k, v)
    return out


def coefficients(D: int, t, delta: int, nmax: int) -> list:
    a = [mp.mpf(0)] * (nmax + 1)
    a[1] = mp.mpf(1)
    ap = {}
    for p in primes_upto(nmax):
        chi = kronecker(D, p)
        if chi == -1:
            ap[p] = mp.mpf(0)
            continue
        x, y = element_of_norm(D, p)
        v1 = psi(D, x, y, t, delta)
        if chi == 1:
            v = v1 + psi(D, x, -y, t, delta)  # the conjugate prime
        else:
            v = v1
        assert abs(mp.im(v)) < mp.mpf(10) ** -30, (D, p, v)
        ap[p] = mp.re(v)
    # prime powers by the Hecke recursion, then multiplicativity
    pp = {}
    for p in ap:
        chi = kronecker(D, p)
        pp[(p, 0)], pp[(p, 1)] = mp.mpf(1), ap[p]
        e, q = 1, p
        while q * p <= nmax:
            pp[(p, e + 1)] = ap[p] * pp[(p, e)] - chi * pp[(p, e - 1)]
            e, q = e + 1, q * p
    for n in range(2, nmax + 1):
        val, m = mp.mpf(1), n
        for p in ap:
            e = 0
            while m % p == 0:
                m //= p
                e += 1
            if e:
                val *= pp[(p, e)]
        a[n] = val
    return a[1:]


def main() -> None:
    lines = [
        "# Dihedral Maass newforms of level D with character chi_D = (D/.) (Kronecker symbol), R <= 10.",
        "# source: computed here with tests/spectrum/make_dihedral.py (mpmath %s, 40 digits) from the" % mp.__version__,
        "#   formulas of docs/theory.md §12.5: Hecke characters",
        "#   psi((alpha)) = sgn(N alpha)^delta |alpha/alpha'|^{i R} of Q(sqrt D) (class number one),",
        "#   a(n) = sum over ideals of norm n of psi; H. Maass, Math. Ann. 121 (1949) 141-183;",
        "#   D. Bump, Automorphic Forms and Representations (1997), §1.9.",
        "# columns: D, parity, k (R = pi k/log eps, or pi (k+1/2)/log eps for odd forms when N(eps) = -1),",
        "#   R (20 digits), then a(1..%d) (real, 20 digits)." % N_COEFFS,
        "D,parity,k,R," + ",".join(f"a{n}" for n in range(1, N_COEFFS + 1)),
    ]
    for D in DISCRIMINANTS:
        for par, k, t, delta in sorted(families(D), key=lambda r: r[2]):
            a = coefficients(D, t, delta, N_COEFFS)
            lines.append(f"{D},{par},{k},{mp.nstr(t, 20)}," + ",".join(mp.nstr(v, 20) for v in a))
    OUT.write_text("\n".join(lines) + "\n")
    print(f"wrote {OUT} ({len(lines) - 9} forms)")


if __name__ == "__main__":
    main()
