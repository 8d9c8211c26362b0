"""L-functions of Maass newforms: functional-equation check and L(1, sym^2 f).

Both use the smoothed approximate functional equation (Iwaniec-Kowalski, *Analytic
Number Theory* (2004), Thm 5.3; M. Rubinstein, "Computational methods and experiments in
analytic number theory", arXiv:math/0412181, §3): for a self-dual L-function with
completed form Lambda(s) = gamma(s) L(s), Lambda(s) = eps Lambda(1 - s), real
coefficients c(n), and an even entire weight G with G(0) = 1,

    Lambda(s) = sum_n c(n) [ I(s, n) + eps I(1 - s, n) ],
    I(s, n) = (1/(2 pi i)) int_{Re u = c} gamma(s + u) n^{-s-u} G(u) du/u      (c > 1 - Re s).

We take G(u) = exp(u^2/A).  The value of Lambda(s) does not depend on A; two values of A
giving the same result test the gamma factor, the sign and the coefficients at once
(a wrong R, parity, sign or conductor makes the two disagree).  The integral is evaluated
by the trapezoidal rule in t = Im u (exponentially accurate for analytic integrands;
step c/6, so the error is below exp(-12 pi)), vectorised over n.  Everything is divided
by |gamma(s)| analytically (log-gamma differences), so nothing under- or overflows for
large R.

Conventions: f(z) = sum a(n) sqrt(y) K_{iR}(2 pi n y) cs(2 pi n x), a(1) = 1, a(n) the
Hecke eigenvalues of a newform (docs/theory.md, conventions).

Standard L-function (degree 2, any level N, trivial character, parity delta = 0 even /
1 odd):

    Lambda(s, f) = N^{s/2} Gamma_R(s + delta + iR) Gamma_R(s + delta - iR) L(s, f),
    Gamma_R(s) = pi^{-s/2} Gamma(s/2),  Lambda(s, f) = eps Lambda(1 - s, f),

with eps = (-1)^delta eta_N, eta_N the Fricke eigenvalue, f(-1/(Nz)) = eta_N f(z)
(eta_1 = 1).  [Derived here by Mellin transform of f(iy) (even) and of d/dx f(iy) (odd)
under z -> -1/(Nz); the derivation uses only the Fricke symmetry, so it holds for every N;
for level 1 it gives eps = +1 for even and -1 for odd forms, which the check confirms
numerically.]  For a newform eta_N = prod_{Q} eta_Q over the prime powers Q = p^e || N
(W_N is the product of the W_Q modulo Gamma0(N); Atkin & Lehner, Math. Ann. 185 (1970)),
and for e = 1, eta_p = -sqrt(p) a(p) (Atkin-Lehner; docs/theory.md §1.1, from memory for
Maass forms).  For e >= 2 the coefficient a(p) vanishes and eta_{p^e} must be supplied
(computed from the cusp expansions by maasscomp.spectrum.operators).  The check determines
eps numerically and reports the prediction beside it.

Symmetric square (degree 3, conductor N^2 for squarefree N; root number +1):

    Lambda(s, sym^2 f) = N^s Gamma_R(s) Gamma_R(s + 2iR) Gamma_R(s - 2iR) L(s, sym^2 f),

L(s, sym^2 f) = zeta^{(N)}(2s) sum_n a(n^2) n^{-s} (Gelbart-Jacquet 1978 for the
analytic continuation; gamma factor and conductor as derived in docs/theory.md §5.3;
level 1 checked numerically there; squarefree levels 2, 3, 5, 11 checked by the functional
equation with conductor N^2 in tests/spectrum/test_lfunction_checks.py, slow).

Rankin-Selberg (docs/theory.md §5.1-5.2): ||f||^2 = N L(1, sym^2 f) / (8 cosh(pi R)) in
the cos/sin normalisation (checked against quadrature at level 1 and for newforms of
levels 2, 5, 11 in tests/supnorm/test_supnorm_norms.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Mapping, Sequence

import numpy as np
from scipy.special import loggamma

from maasscomp.arith import check_level, factorint, smallest_prime_factor
from maasscomp.errors import InputError

__all__ = [
    "sym2_L1",
    "rankin_selberg_norm2",
    "sym2_coefficients",
    "functional_equation_check",
    "FunctionalEquationCheck",
    "predicted_root_number",
    "DEFAULT_S_POINTS",
    "default_s_points",
    "sym2_functional_equation_residual",
]

# fixed points off the critical line, plus two that scale with R (see default_s_points)
DEFAULT_S_POINTS: tuple[complex, ...] = (0.5 + 0.3j, 0.7 + 0.0j, 0.2 + 1.0j)


class TooFewCoefficients(InputError):
    """A check needs more coefficients than were given; ``needed`` says how many."""

    def __init__(self, message: str, needed: int) -> None:
        super().__init__(message)
        self.needed = int(needed)


def default_s_points(R: float) -> tuple[complex, ...]:
    """The s points used by :func:`functional_equation_check` by default.

    0.5 + 0.3i, 0.7, 0.2 + i, and 0.5 + 1.2iR, 0.8 + 1.5iR, 0.6 + 1.7iR.  Points with
    Im s near 1.2-1.7 R lie where Gamma_R(s + delta - iR) turns from oscillation to
    decay; there the two smoothings weight the terms most differently, so an error in R
    shows up most strongly (measured: R off by 1e-6 gives residuals 1e-7..1e-3 there
    against 1e-8..1e-7 near the real axis, with the correct R still below 1e-11; the
    most sensitive point differs from form to form, hence three of them).
    """
    return DEFAULT_S_POINTS + (0.5 + 1.2j * R, 0.8 + 1.5j * R, 0.6 + 1.7j * R)
_LOGPI = math.log(math.pi)


# --------------------------------------------------------------------------- helpers


def _squarefree_primes(level: object) -> tuple[int, ...]:
    fac = _level_primes(level)
    if any(e > 1 for e in fac.values()):
        raise InputError(f"level {level} is not squarefree; only squarefree levels are supported")
    return tuple(sorted(fac))


def _level_primes(level: object) -> dict[int, int]:
    """Factorisation {p: e} of a positive integer level (any N), with a clear error."""
    return factorint(check_level(level))


def _check_R(R: object) -> float:
    if isinstance(R, bool) or not isinstance(R, (int, float, np.floating)):
        raise InputError(f"R = {R!r} is not allowed; use a positive float")
    r = float(R)
    if not (math.isfinite(r) and r > 0):
        raise InputError(f"R = {R!r} is not allowed; use a positive finite float")
    return r


def _coeff_array(coeffs: object, name: str = "coeffs") -> np.ndarray:
    a = np.asarray(coeffs, dtype=float).ravel()
    if a.size < 2 or not np.all(np.isfinite(a)):
        raise InputError(f"{name} must be a finite array a(1..M) with M >= 2")
    if abs(a[0] - 1.0) > 1e-8:
        raise InputError(
            f"{name}[0] = a(1) = {a[0]!r}; the coefficients must be normalised with a(1) = 1"
        )
    return a


def _log_gamma_factor(shifts: Sequence[complex], log_q: float) -> Callable[[np.ndarray], np.ndarray]:
    """log of q^{s/2} prod_j Gamma_R(s + mu_j) (principal branches, vectorised)."""
    mus = np.asarray(shifts, dtype=complex)

    def lg(s: np.ndarray) -> np.ndarray:
        s = np.asarray(s, dtype=complex)
        out = 0.5 * s * log_q
        for mu in mus:
            z = s + mu
            out = out - 0.5 * z * _LOGPI + loggamma(0.5 * z)
        return out

    return lg


@dataclass(frozen=True)
class _Kernel:
    """Trapezoid nodes for I(s, n) / gamma(s_ref) at one s and one A."""

    base: complex  # s + c
    t: np.ndarray
    g: np.ndarray  # h/(2 pi) * gamma(s+u)/gamma(s_ref) * G(u) / u, u = c + i t

    def weights(self, logn: np.ndarray) -> np.ndarray:
        """I(s, n)/gamma(s_ref) for n = exp(logn)."""
        out = np.empty(logn.size, dtype=complex)
        nt = self.t.size
        B = 32  # t is an arithmetic progression: exp(-i t_j ln) = exp(-i t_{32k} ln) exp(-i h r ln)
        h = float(self.t[1] - self.t[0]) if nt > 1 else 0.0
        nb = -(-nt // B)
        g = np.zeros(nb * B, dtype=complex)
        g[:nt] = self.g
        g = g.reshape(nb, B)
        for i0 in range(0, logn.size, 2048):
            ln = logn[i0 : i0 + 2048]
            coarse = np.exp(-1j * np.outer(ln, self.t[0] + h * B * np.arange(nb)))  # (n, nb)
            fine = np.exp(-1j * np.outer(ln, h * np.arange(B)))  # (n, B)
            # sum_k coarse[:, k] * sum_r fine[:, r] g[k, r]
            out[i0 : i0 + 2048] = np.exp(-self.base * ln) * np.sum(coarse * (fine @ g.T), axis=1)
        return out


def _kernel(lg: Callable, s: complex, A: float, lg_ref: complex, sigma_min: float) -> _Kernel:
    # contour Re u = c: right of the poles of gamma(s+u) (Re(s+u) > -min shift) and of
    # u = 0, and right of the abscissa of absolute convergence (Re(s+u) > 1)
    c = max(1.5 - s.real, 0.5, sigma_min - s.real + 0.5)
    h = min(0.1, c / 6.0)
    # |G(c+it)| = exp((c^2 - t^2)/A); gamma(s+u)/gamma(s) grows at most polynomially
    # before its own exponential decay sets in: cut where exp(-t^2/A) < 1e-22
    tmax = math.sqrt(A * (50.0 + 2 * c * c / A)) + 10.0
    t = np.arange(-tmax, tmax + h / 2, h)
    u = c + 1j * t
    g = (h / (2 * math.pi)) * np.exp(lg(s + u) - lg_ref + u * u / A) / u
    return _Kernel(s + c, t, g)


def _tail_cutoff(kern: _Kernel, tol: float, growth: float, n_hi: float = 1e6) -> int:
    """Smallest X with sum_{n > X} n^growth |I(s, n)| < tol (estimated on a log grid)."""
    x = np.exp(np.linspace(0.0, math.log(n_hi), 400))
    # the computed weights cannot fall below the rounding noise of the trapezoid sum
    # (~ eps * sum |g_j|); that floor is not a tail, so it is removed before the estimate
    floor = 8 * np.finfo(float).eps * float(np.sum(np.abs(kern.g)))
    w = np.maximum(np.abs(kern.weights(np.log(x))) - floor * np.exp(-kern.base.real * np.log(x)), 0.0)
    w = w * x**growth
    # tail integral int_X^inf w(x) dx on the log grid: w(x) x d(log x)
    dl = np.log(x[1]) - np.log(x[0])
    cum = np.cumsum((w * x * dl)[::-1])[::-1]
    ok = np.nonzero(cum < tol)[0]
    if ok.size == 0:
        return int(n_hi)
    return max(2, int(math.ceil(x[ok[0]])))


# --------------------------------------------------------------------------- sym^2


def sym2_coefficients(
    hecke: Callable[[int], float] | Sequence[float] | np.ndarray, X: int, level: int = 1
) -> np.ndarray:
    """Dirichlet coefficients b(1..X) of L(s, sym^2 f) from the Hecke eigenvalues a(p).

    b(p^k) = sum_{2i + j = k} a(p^{2j}) for p not dividing N, with
    a(p^{j+1}) = a(p) a(p^j) - a(p^{j-1}); b(p^k) = p^{-k} for p | N (local factor
    (1 - p^{-1-s})^{-1}); b multiplicative (docs/theory.md §5.2-5.3).

    Parameters
    ----------
    hecke : callable or array
        Either p -> a(p), or the array a(1..M) with M >= X (only a(p) is read).
    X : int
        Number of coefficients.
    level : int
        Squarefree level.

    Returns
    -------
    ndarray, shape (X,)
    """
    primes_N = _squarefree_primes(level)
    if isinstance(X, bool) or not isinstance(X, (int, np.integer)) or X < 1:
        raise InputError(f"X = {X!r} is not allowed; use a positive integer")
    if callable(hecke):
        ap = hecke
    else:
        arr = _coeff_array(hecke, "hecke")
        if arr.size < X:
            raise InputError(f"need a(p) for p <= {X}, but only a(1..{arr.size}) were given")
        ap = lambda p: float(arr[p - 1])  # noqa: E731
    spf = smallest_prime_factor(X)
    b = np.zeros(X + 1)
    b[1] = 1.0
    # prime powers
    for p in range(2, X + 1):
        if spf[p] != p:
            continue
        kmax = int(math.log(X) / math.log(p) + 1e-9)
        if p in primes_N:
            vals = [float(p) ** (-k) for k in range(kmax + 1)]
        else:
            lp = float(ap(p))
            lam = [1.0, lp]
            for _ in range(2 * kmax):
                lam.append(lp * lam[-1] - lam[-2])
            vals = [sum(lam[2 * j] for j in range(k % 2, k + 1, 2)) for k in range(kmax + 1)]
        pk = p
        for k in range(1, kmax + 1):
            b[pk] = vals[k]
            pk *= p
    # multiplicativity: b(n) = b(p^k) b(n / p^k)
    for n in range(2, X + 1):
        p = spf[n]
        m = n
        pk = 1
        while m % p == 0:
            m //= p
            pk *= p
        if m > 1:
            b[n] = b[pk] * b[m]
    return b[1:]


def _sym2_L_at(R: float, b: np.ndarray, level: int, A: float, s: complex, eps: int = 1):
    lg = _log_gamma_factor((0.0, 2j * R, -2j * R), 2 * math.log(level))
    lg_ref = complex(lg(np.array([s]))[0])
    logn = np.log(np.arange(1, b.size + 1, dtype=float))
    k1 = _kernel(lg, s, A, lg_ref, 0.0)
    k0 = _kernel(lg, 1 - s, A, lg_ref, 0.0)
    return complex(b @ k1.weights(logn) + eps * (b @ k0.weights(logn))), k1, k0


def sym2_L1(
    R: float,
    hecke: Callable[[int], float] | Sequence[float] | np.ndarray,
    level: int = 1,
    *,
    tol: float = 1e-11,
    A: tuple[float, float] = (8.0, 16.0),
    max_terms: int | None = None,
) -> tuple[float, float]:
    """L(1, sym^2 f) by the smoothed approximate functional equation.

    Lambda(1) = sum_n b(n) [I(1, n) + I(0, n)] with gamma(s) = N^s Gamma_R(s)
    Gamma_R(s + 2iR) Gamma_R(s - 2iR), root number +1, conductor N^2 (squarefree
    newform; level 1 checked numerically, level N derived: docs/theory.md §5.2-5.3),
    L(1, sym^2 f) = Lambda(1)/gamma(1), G(u) = exp(u^2/A) for the two values of A.

    Parameters
    ----------
    R : float
        Spectral parameter.
    hecke : callable or array
        p -> a(p), or the array a(1..M) (a(1) = 1; only prime indices are read).  With
        an array, the number of terms is limited to M and a clear error is raised if
        that is too few for ``tol``.
    level : int, optional
        Squarefree level (default 1).
    tol : float, optional
        Target absolute accuracy of the truncated sum (default 1e-11).
    A : pair of float, optional
        The two smoothing parameters; the value is taken from the second (larger A
        decays faster in n).
    max_terms : int, optional
        Upper bound of the number of terms for a callable ``hecke`` (default: the
        cutoff estimated for ``tol``).

    Returns
    -------
    value : float
        L(1, sym^2 f).
    error : float
        |L_{A1} - L_{A2}| + the estimated truncation tail; an estimate, not a bound.

    Raises
    ------
    InputError
        For bad R, level, coefficients, or too few coefficients (the message says how
        many are needed).
    """
    R = _check_R(R)
    _squarefree_primes(level)
    if len(A) != 2 or not all(a > 0 for a in A) or A[0] == A[1]:
        raise InputError(f"A = {A!r} is not allowed; give two different positive numbers")
    lg = _log_gamma_factor((0.0, 2j * R, -2j * R), 2 * math.log(level))
    lg_ref = complex(lg(np.array([1.0 + 0j]))[0])
    needed = 0
    for a_ in A:
        for s in (1.0 + 0j, 0.0 + 0j):
            needed = max(needed, _tail_cutoff(_kernel(lg, s, a_, lg_ref, 0.0), tol, 0.5))
    if callable(hecke):
        X = needed if max_terms is None else min(needed, int(max_terms))
    else:
        M = _coeff_array(hecke, "hecke").size
        if M < needed:
            raise InputError(
                f"L(1, sym^2 f) at R = {R:g} to {tol:g} needs a(p) for p <= {needed}, "
                f"but only a(1..{M}) were given"
            )
        X = needed
    b = sym2_coefficients(hecke, X, level)
    vals = []
    for a_ in A:
        v, _, _ = _sym2_L_at(R, b, int(level), a_, 1.0 + 0j)
        vals.append(v)
    value = vals[1].real
    err = abs(vals[0] - vals[1]) + tol
    return float(value), float(err)


def sym2_functional_equation_residual(
    R: float,
    hecke: Callable[[int], float] | Sequence[float] | np.ndarray,
    level: int = 1,
    s_points: Sequence[complex] | None = None,
    *,
    A: tuple[float, float] = (8.0, 16.0),
    tol: float = 1e-11,
) -> tuple[float, float]:
    """Test the assumed functional equation of L(s, sym^2 f) (gamma factor, conductor
    N^2, root number +1) by comparing two smoothings at points off s = 1.

    Default points: 0.7, 0.3 + 2i, 0.5 + 0.8iR and 0.5 + 1.8iR (the last two are where
    an error in R shows most strongly: R off by 1e-6 gives residuals ~1e-6 there,
    against ~1e-13 for the correct R, measured for R = 9.53 and 19.48).

    Returns
    -------
    residual : float
        max over s of |L_{A1}(s) - L_{A2}(s)| / max(1, |L|) with root number +1.
    other_sign_residual : float
        The same with root number -1 (large when the data fit the assumption).
    """
    R = _check_R(R)
    _squarefree_primes(level)
    if s_points is None:
        s_points = (0.7 + 0.0j, 0.3 + 2.0j, 0.5 + 0.8j * R, 0.5 + 1.8j * R)
    lg = _log_gamma_factor((0.0, 2j * R, -2j * R), 2 * math.log(level))
    needed = 2
    for s in s_points:
        s = complex(s)
        lg_ref = complex(lg(np.array([s]))[0])
        for a_ in A:
            needed = max(
                needed,
                _tail_cutoff(_kernel(lg, s, a_, lg_ref, 0.0), tol, 0.5),
                _tail_cutoff(_kernel(lg, 1 - s, a_, lg_ref, 0.0), tol, 0.5),
            )
    if not callable(hecke) and _coeff_array(hecke, "hecke").size < needed:
        raise InputError(
            f"the sym^2 check at R = {R:g} needs a(p) for p <= {needed}, "
            f"but only a(1..{len(hecke)}) were given"
        )
    b = sym2_coefficients(hecke, needed, level)
    out = {1: 0.0, -1: 0.0}
    for s in s_points:
        for eps in (1, -1):
            v1, _, _ = _sym2_L_at(R, b, int(level), A[0], complex(s), eps)
            v2, _, _ = _sym2_L_at(R, b, int(level), A[1], complex(s), eps)
            out[eps] = max(out[eps], abs(v1 - v2) / max(1.0, abs(v1)))
    return float(out[1]), float(out[-1])


def rankin_selberg_norm2(
    R: float, coeffs: Sequence[float] | np.ndarray, level: int = 1, **kwargs
) -> tuple[float, float]:
    """Scaled L2 norm e^{pi R} ||f||^2 from L(1, sym^2 f) (Rankin-Selberg).

    ||f||^2 = N L(1, sym^2 f) / (8 cosh(pi R)) over Gamma0(N)\\H with dmu = dx dy/y^2,
    cos/sin normalisation a(1) = 1 (docs/theory.md §5.1, level 1 checked numerically
    there; §5.2 for squarefree N, checked against quadrature for newforms of levels 2, 5,
    11 in tests/supnorm/test_supnorm_norms.py::test_squarefree_level_formula).  ||f||^2
    itself underflows for R above about 220, so the function returns

        e^{pi R} ||f||^2 = N L(1, sym^2 f) / (4 (1 + e^{-2 pi R})),

    and ||f||^2 = returned value * e^{-pi R}.

    Parameters
    ----------
    R : float
    coeffs : array
        a(1..M), Hecke eigenvalues of a newform.
    level : int, optional
        Squarefree level.
    **kwargs
        Passed to :func:`sym2_L1` (tol, A).

    Returns
    -------
    scaled_norm2 : float
    error : float
        Propagated from :func:`sym2_L1`.
    """
    R = _check_R(R)
    L, e = sym2_L1(R, coeffs, level, **kwargs)
    fac = level / (4.0 * (1.0 + math.exp(-2 * math.pi * R)))
    return L * fac, e * fac


# --------------------------------------------------------------------------- standard L


@dataclass(frozen=True)
class FunctionalEquationCheck:
    """Result of :func:`functional_equation_check`.

    Attributes
    ----------
    sign : int
        The root number eps in {+1, -1} that makes the two smoothings agree best, or 0
        if neither sign gives a residual below 1e-3 (the data are not an L-function
        with this gamma factor).
    residual : float
        max over s of |L_{A1}(s) - L_{A2}(s)| / max(1, |L_{A1}(s)|) for that sign.
    residuals : tuple of float
        The same per s point.
    other_sign_residual : float
        The residual with the opposite sign (large when the sign is determined).
    predicted_sign : int or None
        (-1)^delta eta_N from :func:`predicted_root_number` (None if the Atkin--Lehner
        data needed are missing or not close to +-1); see the module docstring.
    values : tuple of complex
        L(s, f) at the s points (first smoothing, chosen sign).
    s_points : tuple of complex
    cutoff : int
        Number of coefficients used.
    A : tuple of float
    """

    sign: int
    residual: float
    residuals: tuple[float, ...]
    other_sign_residual: float
    predicted_sign: int | None
    values: tuple[complex, ...]
    s_points: tuple[complex, ...]
    cutoff: int
    A: tuple[float, float]

    @property
    def passed(self) -> bool:
        """True when a sign was found, it matches the prediction (if any), and the
        residual is below 1e-8."""
        ok_sign = self.sign != 0 and (self.predicted_sign in (None, self.sign))
        return ok_sign and self.residual <= 1e-8


def predicted_root_number(
    parity: str,
    coeffs: Sequence[float] | np.ndarray,
    level: int = 1,
    *,
    al_eigenvalues: Mapping[int, float] | None = None,
) -> int | None:
    """eps = (-1)^delta eta_N for a newform of level N (module docstring).

    eta_N is taken from ``al_eigenvalues[N]`` if given; otherwise it is the product over
    the prime powers Q = p^e || N of eta_Q, with eta_Q = ``al_eigenvalues[Q]`` when given
    and, for e = 1, eta_p = -sqrt(p) a(p) (Atkin-Lehner, docs/theory.md §1.1).  Each
    eigenvalue must be within 1e-6 of +-1.  Returns None when some eta_Q is missing (e >= 2
    and not supplied) or not close to +-1 (not a newform, or inaccurate data).

    Parameters
    ----------
    parity : {"even", "odd"}
    coeffs : array
        a(1..M) at infinity (only a(p) for p || N is read).
    level : int
    al_eigenvalues : mapping Q -> eta_Q, optional
        Atkin--Lehner eigenvalues f|W_Q = eta_Q f for exact divisors Q of N (e.g. from
        :func:`maasscomp.spectrum.operators.atkin_lehner_eigenvalues`).
    """
    if parity not in ("even", "odd"):
        raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
    fac = _level_primes(level)
    N = int(level)
    a = np.asarray(coeffs, dtype=float).ravel()
    given = {int(Q): float(v) for Q, v in (al_eigenvalues or {}).items()}
    for Q in given:
        if Q < 1 or N % Q or math.gcd(Q, N // Q) != 1:
            raise InputError(f"al_eigenvalues has Q={Q}, not an exact divisor of N={N}")

    def as_sign(v: float) -> int | None:
        return (1 if v > 0 else -1) if abs(abs(v) - 1.0) <= 1e-6 else None

    eps = 1 if parity == "even" else -1
    if N in given and N > 1:
        s = as_sign(given[N])
        return None if s is None else eps * s
    for p, e in fac.items():
        Q = p**e
        if Q in given:
            v = given[Q]
        elif e == 1 and p <= a.size:
            v = -math.sqrt(p) * a[p - 1]
        else:
            return None
        s = as_sign(v)
        if s is None:
            return None
        eps *= s
    return eps


def functional_equation_check(
    R: float,
    coeffs: Sequence[float] | np.ndarray,
    parity: str,
    level: int = 1,
    s_points: Sequence[complex] | None = None,
    *,
    A: tuple[float, float] = (6.0, 16.0),
    tol: float = 1e-12,
    al_eigenvalues: Mapping[int, float] | None = None,
) -> FunctionalEquationCheck:
    """Check Lambda(s) = eps Lambda(1 - s) for the standard L-function of a newform.

    Lambda(s) = N^{s/2} Gamma_R(s + delta + iR) Gamma_R(s + delta - iR) L(s, f),
    delta = 0 (even) or 1 (odd).  For each s, L(s) is computed by the smoothed
    approximate functional equation with G(u) = exp(u^2/A) for two values of A, once
    with eps = +1 and once with eps = -1.  The correct sign makes the two smoothings
    agree to the accuracy of the coefficients; a wrong R, parity or level makes them
    disagree (numbers in the tests).  Points on the line Re s = 1/2 alone cannot
    decide the sign (there Lambda(1 - s) = conj Lambda(s)), so the default points lie
    off it as well.

    Parameters
    ----------
    R : float
    coeffs : array
        a(1..M), a(1) = 1, Hecke eigenvalues.
    parity : {"even", "odd"}
    level : int, optional
        Level N (default 1), any positive integer; the conductor is N.
    s_points : sequence of complex, optional
        Points s (default :func:`default_s_points`: 0.5+0.3i, 0.7, 0.2+i,
        0.5+1.2iR, 0.8+1.5iR, 0.6+1.7iR).
    A : pair of float, optional
        Smoothing parameters (default (6, 16); smaller A needs many more terms).
    tol : float, optional
        Truncation target used to choose the number of terms.
    al_eigenvalues : mapping Q -> eta_Q, optional
        Atkin--Lehner eigenvalues for the predicted sign (:func:`predicted_root_number`);
        needed at levels with p^2 | N.

    Returns
    -------
    FunctionalEquationCheck

    Raises
    ------
    InputError
        Bad arguments, or M too small for ``tol`` (the message gives the cutoff needed).
    """
    R = _check_R(R)
    if parity not in ("even", "odd"):
        raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
    _level_primes(level)
    a = _coeff_array(coeffs)
    pts = tuple(complex(s) for s in (default_s_points(R) if s_points is None else s_points))
    if not pts:
        raise InputError("s_points must contain at least one point")
    if len(A) != 2 or not all(x > 0 for x in A) or A[0] == A[1]:
        raise InputError(f"A = {A!r} is not allowed; give two different positive numbers")
    delta = 0 if parity == "even" else 1
    lg = _log_gamma_factor((delta + 1j * R, delta - 1j * R), math.log(level))

    kernels = []
    needed = 2
    for s in pts:
        lg_ref = complex(lg(np.array([s]))[0])
        row = []
        for a_ in A:
            k1 = _kernel(lg, s, a_, lg_ref, -delta)
            k0 = _kernel(lg, 1 - s, a_, lg_ref, -delta)
            needed = max(needed, _tail_cutoff(k1, tol, 0.2), _tail_cutoff(k0, tol, 0.2))
            row.append((k1, k0))
        kernels.append(row)
    if a.size < needed:
        raise TooFewCoefficients(
            f"the functional-equation check at R = {R:g} needs a(n) for n <= {needed} "
            f"(truncation {tol:g}), but only a(1..{a.size}) were given",
            needed,
        )
    c = a[:needed]
    logn = np.log(np.arange(1, needed + 1, dtype=float))

    res = {1: [], -1: []}
    vals = {1: [], -1: []}
    for row in kernels:
        S = [complex(c @ k1.weights(logn)) for k1, _ in row]
        T = [complex(c @ k0.weights(logn)) for _, k0 in row]
        for eps in (1, -1):
            L1 = S[0] + eps * T[0]
            L2 = S[1] + eps * T[1]
            res[eps].append(abs(L1 - L2) / max(1.0, abs(L1)))
            vals[eps].append(L1)
    r_plus, r_minus = max(res[1]), max(res[-1])
    sign = 1 if r_plus <= r_minus else -1
    best, other = (r_plus, r_minus) if sign == 1 else (r_minus, r_plus)
    if best > 1e-3:
        sign_out = 0
    else:
        sign_out = sign
    return FunctionalEquationCheck(
        sign=sign_out,
        residual=float(best),
        residuals=tuple(float(x) for x in res[sign]),
        other_sign_residual=float(other),
        predicted_sign=predicted_root_number(parity, a, level, al_eigenvalues=al_eigenvalues),
        values=tuple(vals[sign]),
        s_points=pts,
        cutoff=int(needed),
        A=(float(A[0]), float(A[1])),
    )


# ------------------------------------------------------- standard L with a character


@dataclass(frozen=True)
class CharacterFunctionalEquationCheck:
    """Result of :func:`functional_equation_check_character`.

    Attributes
    ----------
    root_number : complex
        eps fitted by least squares over the s points (Lambda(s, f) = eps Lambda(1-s, f~)).
    residual : float
        max over s of |L_{A1}(s) - L_{A2}(s)| / max(1, |L_{A1}(s)|) with that eps.
    residuals : tuple of float
    unit_defect : float
        | |eps| - 1 |: a root number has absolute value 1.
    predicted : complex or None
        (-1)^delta eta from the Fricke pseudo-eigenvalue, when given.
    prediction_gap : float or None
        |eps - predicted|.
    values : tuple of complex
        L(s, f) at the s points (first smoothing).
    s_points : tuple of complex
    cutoff : int
    A : tuple of float
    """

    root_number: complex
    residual: float
    residuals: tuple[float, ...]
    unit_defect: float
    predicted: complex | None
    prediction_gap: float | None
    values: tuple[complex, ...]
    s_points: tuple[complex, ...]
    cutoff: int
    A: tuple[float, float]

    @property
    def passed(self) -> bool:
        """Residual below 1e-8, |eps| = 1 to 1e-6 and eps equal to the prediction (if any)
        to 1e-6."""
        ok = self.residual <= 1e-8 and self.unit_defect <= 1e-6
        return ok and (self.prediction_gap is None or self.prediction_gap <= 1e-6)


def functional_equation_check_character(
    R: float,
    coeffs: Sequence[complex] | np.ndarray,
    parity: str,
    level: int,
    s_points: Sequence[complex] | None = None,
    *,
    A: tuple[float, float] = (6.0, 16.0),
    tol: float = 1e-12,
    fricke_pseudo_eigenvalue: complex | None = None,
) -> CharacterFunctionalEquationCheck:
    """Check Lambda(s, f) = eps Lambda(1 - s, f~) for a newform with a character.

    For a newform f of level N and character chi with Hecke eigenvalues a(n) (complex),
    f~(z) = conj f(-conj z) has the coefficients conj a(n) and the character conj chi, and

        Lambda(s, f) = N^{s/2} Gamma_R(s + delta + iR) Gamma_R(s + delta - iR) L(s, f)

    satisfies Lambda(s, f) = eps Lambda(1 - s, f~) with eps = (-1)^delta eta, where
    f(-1/(Nz)) = eta f~(z) defines the Fricke pseudo-eigenvalue eta (docs/theory.md §12.8;
    for a real character and real a(n) this is the check of :func:`functional_equation_check`).
    The smoothed approximate functional equation (module docstring) gives, for each s and
    each smoothing A, L_A(s) = S_A(s) + eps T_A(s) with S over a(n) and T over conj a(n).
    eps is not known in advance, so it is fitted: the least-squares solution of
    S_{A1}(s) - S_{A2}(s) + eps (T_{A1}(s) - T_{A2}(s)) = 0 over all s points. The residual
    at the fitted eps, |eps| = 1 and agreement with the prediction from eta are three
    independent tests (six points, one unknown).

    Parameters
    ----------
    R : float
    coeffs : array of complex
        a(1..M), a(1) = 1.
    parity : {"even", "odd"}
    level : int
        Level N (the conductor of a newform).
    s_points : sequence of complex, optional
        Default :func:`default_s_points`.
    A : pair of float
    tol : float
        Truncation target used to choose the number of terms.
    fricke_pseudo_eigenvalue : complex, optional
        eta, measured from the form's values (``charforms.fricke_pseudo_eigenvalue``).

    Returns
    -------
    CharacterFunctionalEquationCheck

    Raises
    ------
    TooFewCoefficients
        M below the cutoff needed for ``tol`` (``needed`` says how many).
    """
    R = _check_R(R)
    if parity not in ("even", "odd"):
        raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
    _level_primes(level)
    a = np.asarray(coeffs, dtype=complex).ravel()
    if a.size < 1 or not np.all(np.isfinite(a)):
        raise InputError("coeffs must be a non-empty array of finite numbers")
    pts = tuple(complex(s) for s in (default_s_points(R) if s_points is None else s_points))
    if len(pts) < 2:
        raise InputError("s_points must contain at least two points (eps is fitted)")
    if len(A) != 2 or not all(x > 0 for x in A) or A[0] == A[1]:
        raise InputError(f"A = {A!r} is not allowed; give two different positive numbers")
    delta = 0 if parity == "even" else 1
    lg = _log_gamma_factor((delta + 1j * R, delta - 1j * R), math.log(level))
    kernels = []
    needed = 2
    for s in pts:
        lg_ref = complex(lg(np.array([s]))[0])
        row = []
        for a_ in A:
            k1 = _kernel(lg, s, a_, lg_ref, -delta)
            k0 = _kernel(lg, 1 - s, a_, lg_ref, -delta)
            needed = max(needed, _tail_cutoff(k1, tol, 0.2), _tail_cutoff(k0, tol, 0.2))
            row.append((k1, k0))
        kernels.append(row)
    if a.size < needed:
        raise TooFewCoefficients(
            f"the functional-equation check at R = {R:g} needs a(n) for n <= {needed} "
            f"(truncation {tol:g}), but only a(1..{a.size}) were given", needed)
    c = a[:needed]
    cb = np.conj(c)
    logn = np.log(np.arange(1, needed + 1, dtype=float))
    S = np.array([[complex(c @ k1.weights(logn)) for k1, _ in row] for row in kernels])
    T = np.array([[complex(cb @ k0.weights(logn)) for _, k0 in row] for row in kernels])
    D, E = S[:, 0] - S[:, 1], T[:, 0] - T[:, 1]
    eps = complex(-np.vdot(E, D) / np.vdot(E, E))
    L1 = S[:, 0] + eps * T[:, 0]
    res = np.abs(D + eps * E) / np.maximum(1.0, np.abs(L1))
    pred = None
    gap = None
    if fricke_pseudo_eigenvalue is not None:
        pred = complex((1 if delta == 0 else -1) * complex(fricke_pseudo_eigenvalue))
        gap = float(abs(eps - pred))
    return CharacterFunctionalEquationCheck(
        root_number=eps, residual=float(np.max(res)), residuals=tuple(float(x) for x in res),
        unit_defect=float(abs(abs(eps) - 1.0)), predicted=pred, prediction_gap=gap,
        values=tuple(complex(v) for v in L1), s_points=pts, cutoff=int(needed),
        A=(float(A[0]), float(A[1])))
