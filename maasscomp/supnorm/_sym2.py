"""L(1, sym^2 f) from Hecke eigenvalues by a smoothed approximate functional equation.

Private implementation used by :mod:`maasscomp.supnorm.norm` for the Rankin--Selberg
cross-check of the quadrature norm (method: Iwaniec & Kowalski, *Analytic Number Theory*
(2004), Thm 5.3; M. Rubinstein, arXiv:math/0412181; constants as derived in the formulas ref.
§5.3).

For a Hecke--Maass newform f of squarefree level N with eigenvalues lambda(n) (cos/sin
normalisation, a(1) = 1):

* L(s, sym^2 f) = zeta^{(N)}(2s) sum_n lambda(n^2) n^{-s} = sum_n b(n) n^{-s},
  b(n) = sum_{m^2 k = n, gcd(m, N) = 1} lambda(k^2) (for p | N the local factor is
  (1 - p^{-1-s})^{-1} because lambda(p^{2k}) = p^{-k});
* Lambda(s) = N^s gamma(s) L(s, sym^2 f), gamma(s) = Gamma_R(s) Gamma_R(s + 2iR) Gamma_R(s - 2iR),
  Gamma_R(s) = pi^{-s/2} Gamma(s/2), and Lambda(s) = Lambda(1 - s) (Gelbart--Jacquet 1978);
  gamma(1) = 1/cosh(pi R);
* with G(u) = exp(u^2 / A):  Lambda(1) = sum_n b(n) [I_1(n) + I_0(n)],
  I_sigma(n) = (1/2 pi i) int_{Re u = c} N^{sigma+u} gamma(sigma + u) n^{-sigma-u} G(u) du / u.

The integrals are done by the trapezoidal rule on Re u = c (the integrand is analytic and
decays like exp(-t^2/A), so the rule converges geometrically); the Gamma factors are handled
as logarithms (scipy.special.loggamma) relative to gamma(1), so nothing overflows for large R.
Two smoothing parameters A are used; their difference is the reported error estimate (a wrong
gamma factor or root number would make them disagree, formulas ref. §5.3).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy.special import loggamma

from maasscomp.supnorm._coeffs import smallest_prime_factor


@dataclass(frozen=True)
class Sym2Value:
    """L(1, sym^2 f) with its error estimate and the number of Dirichlet terms used."""

    value: float
    error: float
    n_terms: int
    smoothings: tuple[float, ...]


def _log_gamma_R(s: np.ndarray) -> np.ndarray:
    return -0.5 * s * math.log(math.pi) + loggamma(0.5 * s)


def _log_gamma_factor(s: np.ndarray, R: float) -> np.ndarray:
    return _log_gamma_R(s) + _log_gamma_R(s + 2j * R) + _log_gamma_R(s - 2j * R)


def sym2_dirichlet(lam: np.ndarray, level: int, n_max: int) -> np.ndarray:
    """b(1..n_max) of L(s, sym^2 f) from lambda(p) (lam[p-1]) for p <= n_max.

    lambda(k^2) is multiplicative with lambda(p^{2e}) from lambda(p^{j+1}) = lambda(p)
    lambda(p^j) - lambda(p^{j-1}) (p not dividing N) and lambda(p^{2e}) = lambda(p)^{2e}
    (p | N), formulas ref. §1.1.
    """
    spf = smallest_prime_factor(n_max)
    lam_sq = np.zeros(n_max + 1)  # lambda(k^2) for k^2 <= ... indexed by k (k <= n_max)
    lam_sq[1] = 1.0
    pp_cache: dict[tuple[int, int], float] = {}

    def lam_p2e(p: int, e: int) -> float:
        key = (p, e)
        if key not in pp_cache:
            lp = float(lam[p - 1])
            if level % p == 0:
                pp_cache[key] = lp ** (2 * e)
            else:
                prev, cur = 1.0, lp
                for _ in range(2, 2 * e + 1):
                    prev, cur = cur, lp * cur - prev
                pp_cache[key] = cur
        return pp_cache[key]

    for k in range(2, n_max + 1):
        n, v = k, 1.0
        while n > 1:
            p = int(spf[n])
            e = 0
            while n % p == 0:
                n //= p
                e += 1
            v *= lam_p2e(p, e)
        lam_sq[k] = v
    b = np.zeros(n_max + 1)
    m = 1
    while m * m <= n_max:
        if math.gcd(m, level) == 1:
            k = np.arange(1, n_max // (m * m) + 1)
            b[m * m * k] += lam_sq[k]
        m += 1
    return b[1:]


@functools.lru_cache(maxsize=16)
def _kernel(R: float, level: int, A: float, c: float = 1.0, h: float = 0.1):
    """n-independent part of I_sigma: nodes s = sigma + u and weights, for sigma = 1, 0."""
    # exp(-T^2/A) = exp(-144) is negligible; the step: the integrand is analytic in the strip
    # |Re u - c| < 1 (nearest poles: u = 0 and the Gamma poles at Re u = -sigma), so the
    # trapezoidal error is about exp(-2 pi / h) (Weideman & Trefethen, SIAM Rev. 56 (2014))
    T = 12.0 * math.sqrt(A)
    t = np.arange(-T, T + h / 2, h)
    u = c + 1j * t
    G = np.exp(u * u / A)
    lg1 = float(np.real(_log_gamma_factor(np.array([1.0 + 0j]), R))[0])
    logN = math.log(level)
    out = []
    for sigma in (1.0, 0.0):
        s = sigma + u
        lg = _log_gamma_factor(s, R) - lg1 + (s - 1.0) * logN  # N^{s} gamma(s) / (N gamma(1))
        # (1/2 pi i) int f(u) du = (1/2 pi) int f(c + i t) dt
        out.append((s, (h / (2 * math.pi)) * G / u * np.exp(lg)))
    return tuple(out)


def _weights(R: float, level: int, n: np.ndarray, A: float) -> np.ndarray:
    """I_1(n) + I_0(n), divided by N gamma(1) (so that L(1) = sum_n b(n) * weight(n))."""
    logn = np.log(n.astype(float))
    total = np.zeros(n.size)
    for s, base in _kernel(float(R), int(level), float(A)):
        total += np.real(np.exp(-np.outer(logn, s)) @ base)
    return total


def sym2_L1(lam: np.ndarray, R: float, level: int = 1, *, smoothings: tuple[float, ...] = (8.0, 16.0),
            rtol: float = 1e-13) -> Sym2Value:
    """L(1, sym^2 f) for a Hecke--Maass newform from its eigenvalues lambda(1..M).

    Parameters
    ----------
    lam : ndarray
        lambda(n) = a(n) for n = 1..M (a(1) = 1); every prime up to the cut-off must be covered.
    R : float
        Spectral parameter.
    level : int
        Squarefree level N (conductor of sym^2 f is N^2).
    smoothings : tuple of float
        Parameters A of G(u) = exp(u^2/A); the value for the last one is returned, the spread
        is the error estimate.
    rtol : float
        Terms are used while the weight is above rtol times the first weight.

    Returns
    -------
    Sym2Value
        ``value`` = nan when the coefficients do not reach the needed cut-off.
    """
    lam = np.asarray(lam, dtype=float)
    M = lam.size
    vals = []
    used = 0
    for A in smoothings:
        w = np.zeros(0)
        cut = None
        while cut is None:
            start = w.size
            if start >= M:
                return Sym2Value(math.nan, math.inf, M, tuple(smoothings))
            block = np.arange(start + 1, min(M, max(2 * start, 128)) + 1)
            w = np.concatenate([w, _weights(R, level, block, A)])
            tail = np.abs(w[start:]) <= rtol * abs(w[0])
            # stop once a whole block stays below the threshold
            if start > 0 and tail.all():
                big = np.nonzero(np.abs(w) > rtol * abs(w[0]))[0]
                cut = int(big[-1]) + 1 if big.size else 1
        b = sym2_dirichlet(lam, level, cut)
        vals.append(float(np.dot(b, w[:cut])))
        used = max(used, cut)
    err = float(max(vals) - min(vals)) if len(vals) > 1 else math.nan
    return Sym2Value(vals[-1], err, used, tuple(smoothings))
