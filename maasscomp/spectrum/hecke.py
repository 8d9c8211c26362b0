"""Hecke relations of Maass cusp forms in the cos/sin normalisation a(1) = 1.

For a Hecke eigenform on Gamma0(N) with a(1) = 1 the coefficients at infinity are the Hecke
eigenvalues and satisfy (Iwaniec, *Topics in Classical Automorphic Forms* (1997) §6;
Iwaniec, *Spectral Methods of Automorphic Forms* (2002) §8.5; common practice):

* a(mn) = a(m) a(n) for gcd(m, n) = 1;
* a(p^{k+1}) = a(p) a(p^k) - a(p^{k-1}) for p not dividing N (so a(p^2) = a(p)^2 - 1);
* a(p^k) = a(p)^k for p | N (newforms only).

Oldforms built from a form of lower level keep multiplicativity and the relation at p not
dividing N (their L-series factors as L(s, g) times polynomials in p^{-s} for p | N), so
:func:`hecke_residual` checks exactly those; :func:`atkin_lehner_residual` checks the p | N
relations of a newform.
"""

from __future__ import annotations

import math

import numpy as np

from maasscomp.arith import primes_up_to
from maasscomp.groups import factorint


def hecke_residual(a: np.ndarray, level: int = 1, nmax: int = 30) -> float:
    """Largest violation of the Hecke relations valid for new- and oldforms, up to nmax.

    Parameters
    ----------
    a : ndarray
        Coefficients a(1), a(2), ... at infinity (a[0] = a(1) = 1).
    level : int
        N; the prime-power recursion is checked for p not dividing N only.
    nmax : int
        Largest index used (capped by len(a)).

    Returns
    -------
    float
        max |a(mn) - a(m) a(n)| over coprime m, n >= 2 with mn <= nmax, and
        max |a(p^{k+1}) - a(p) a(p^k) + a(p^{k-1})| over p not dividing N, p^{k+1} <= nmax.
    """
    # at infinity the coefficients are real (parity-aligned expansion); a complex array
    # from the multi-cusp solver carries them in its real part
    a = np.real(np.asarray(a)).astype(float)
    nmax = min(int(nmax), a.size)
    A = lambda n: a[n - 1]  # noqa: E731
    worst = 0.0
    for m in range(2, nmax + 1):
        for n in range(m + 1, nmax // m + 1):
            if math.gcd(m, n) == 1:
                worst = max(worst, abs(A(m * n) - A(m) * A(n)))
    for p in primes_up_to(nmax):
        if level % p == 0:
            continue
        prev, cur, pk = 1.0, A(p), p
        while pk * p <= nmax:
            nxt = A(pk * p)
            worst = max(worst, abs(nxt - (A(p) * cur - prev)))
            prev, cur, pk = cur, nxt, pk * p
    return float(worst)


def atkin_lehner_residual(a: np.ndarray, level: int, al_signs: dict[int, int], nmax: int = 30) -> float:
    """Largest violation of the newform relations at primes p | N (squarefree N).

    For a newform of squarefree level with Atkin--Lehner signs eps_p (f(W_p z) = eps_p f(z)):
    a(p) = -eps_p / sqrt(p) (Atkin & Lehner, Math. Ann. 185 (1970), Thm 3, holomorphic
    analogue; the Maass version is common practice) and a(p^k) = a(p)^k.
    """
    a = np.real(np.asarray(a)).astype(float)
    nmax = min(int(nmax), a.size)
    worst = 0.0
    for p in sorted(factorint(level)):
        if p > nmax:
            continue
        ap = a[p - 1]
        worst = max(worst, abs(ap + al_signs[p] / math.sqrt(p)))
        pk = p * p
        k = 2
        while pk <= nmax:
            worst = max(worst, abs(a[pk - 1] - ap**k))
            pk *= p
            k += 1
    return float(worst)
