"""Coefficient tables for evaluation: one row per cusp, extended by Hecke multiplicativity.

Convention (binding for the whole package, see ``maasscomp.spectrum.form.Form``): at cusp j with
scaling matrix sigma_j,

    F(sigma_j z) = sum_{n>=1} sqrt(y) Kt_R(2 pi n y) [Re c_j(n) cs(2 pi n x) + Im c_j(n) cs'(2 pi n x)],

Kt_R = e^{pi R/2} K_{iR}, cs = cos (even) / sin (odd), cs' the other one.  F is the form scaled by
e^{pi R/2}; the physical form is e^{-pi R/2} F.

Stored forms may carry fewer coefficients than an evaluation needs.  For a Hecke eigenform with
c_0(1) = 1 the coefficients at infinity are the Hecke eigenvalues and (Iwaniec, *Topics in
Classical Automorphic Forms* (1997) §6; docs/theory.md §1.1, common practice)

* c(mn) = c(m) c(n) for gcd(m, n) = 1,
* c(p^{k+1}) = c(p) c(p^k) - c(p^{k-1}) for p not dividing N,
* c(p^k) = c(p)^k for p | N (newforms only),

so every index whose prime factors are all in the stored range can be filled in.  Indices with a
prime factor beyond the stored range stay unknown; their contribution is bounded with the
coefficient envelope |c(n)| <= B d(n) n^theta (Kim--Sarnak: theta = 7/64 for newforms;
theta = 1/2 for oldforms, whose p | N coefficients carry factors sqrt(p)).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from maasscomp.arith import divisor_count, factor_with, smallest_prime_factor
from maasscomp.errors import InputError

#: Largest Hecke residual of a form whose coefficients may be extended multiplicatively.
HECKE_EXTENSION_TOL = 1e-6


@dataclass(frozen=True, eq=False)
class CoefficientTable:
    """Coefficients c_j(n), n = 1..M, of every cusp, possibly Hecke-extended.

    Attributes
    ----------
    rows : ndarray, shape (n_cusps, M)
        c_j(n) in column n - 1 (float or complex); unknown entries are 0.
    known : ndarray of bool, shape (n_cusps, M)
        False where a coefficient is neither stored nor obtainable from the Hecke relations.
    n_stored : int
        Number of coefficients per cusp in the stored form.
    extended : bool
        True when some entries beyond the stored range were filled in by the Hecke relations.
    env_B, env_theta : float
        The coefficient envelope |c_j(n)| <= env_B d(n) n^env_theta used to bound unknown and
        truncated terms (see :meth:`envelope`).
    parity : str
        "even" (cs = cos) or "odd" (cs = sin).
    """

    rows: np.ndarray
    known: np.ndarray
    n_stored: int
    extended: bool
    env_B: float
    env_theta: float
    parity: str

    def envelope(self, n_max: int) -> np.ndarray:
        """B d(n) n^theta for n = 1..n_max."""
        n = np.arange(1, n_max + 1, dtype=float)
        return self.env_B * divisor_count(n_max)[1:] * n**self.env_theta

    @property
    def M(self) -> int:
        return int(self.rows.shape[1])

    @property
    def n_cusps(self) -> int:
        return int(self.rows.shape[0])

    @property
    def is_complex(self) -> bool:
        return bool(np.iscomplexobj(self.rows))

    def exp_coeffs(self, cusp: int, n_max: int) -> np.ndarray:
        """d_n with F = Re sum_n d_n sqrt(y) Kt(2 pi n y) e^{2 pi i n x}, n = 1..n_max.

        Even: Re c cos + Im c sin = Re(conj(c) e^{i theta}); odd: Re c sin + Im c cos =
        Re(-i c e^{i theta}).
        """
        c = self.rows[cusp, :n_max].astype(complex)
        if n_max > self.M:
            c = np.concatenate([c, np.zeros(n_max - self.M, dtype=complex)])
        return np.conj(c) if self.parity == "even" else -1j * c

    def cos_sin(self, cusp: int, n_max: int) -> tuple[np.ndarray, np.ndarray]:
        """Real (alpha_n, beta_n), n = 1..n_max, with term = A_n (alpha cos + beta sin)(2 pi n x).

        Even forms: alpha = Re c, beta = Im c; odd forms: alpha = Im c, beta = Re c. Columns
        beyond the table are 0.
        """
        c = np.zeros(n_max, dtype=complex)
        k = min(n_max, self.M)
        c[:k] = self.rows[cusp, :k]
        if self.parity == "even":
            return c.real.copy(), c.imag.copy()
        return c.imag.copy(), c.real.copy()

    def missing_mask(self, cusp: int, n_max: int) -> np.ndarray:
        """True for n = 1..n_max where c_cusp(n) is unknown."""
        m = np.ones(n_max, dtype=bool)
        k = min(n_max, self.M)
        m[:k] = ~self.known[cusp, :k]
        return m


# ------------------------------------------------------------------------------------------
# arithmetic helpers


# ------------------------------------------------------------------------------------------


def cusp_rows(form, group) -> np.ndarray:
    """The coefficient rows c_j(n) of every cusp of ``group`` (shape (n_cusps, M)).

    A form of squarefree level may be stored with the row at infinity only; the other rows are
    then eps_Q c_0 with eps_Q the Atkin--Lehner sign of the cusp W_Q(infinity), because the
    group's scaling matrix of that cusp is W_Q / sqrt(Q) and f(W_Q z) = eps_Q f(z) (Atkin &
    Lehner, Math. Ann. 185 (1970); docs/theory.md §1.1).

    Raises
    ------
    InputError
        If the rows cannot be completed (non-squarefree level with a single row, missing
        Atkin--Lehner signs, or a row count that fits neither 1 nor the number of cusps).
    """
    C = np.asarray(form.coeffs)
    if C.ndim == 1:
        C = C[None, :]
    if C.ndim != 2 or C.shape[1] < 1:
        raise InputError(f"form coefficients must have shape (n_cusps, M) with M >= 1, got {C.shape}")
    h = group.n_cusps
    if C.shape[0] == h:
        return C
    if C.shape[0] == 1 and h > 1:
        if not group.is_squarefree:
            raise InputError(
                f"form at level {form.level} stores 1 coefficient row but Gamma0({form.level}) has {h} "
                "cusps and is not squarefree; rows for every cusp are needed"
            )
        have = {p for p, _ in form.symmetry.al_signs}
        if have != set(group.primes):
            raise InputError(
                f"form at level {form.level} stores only the row at infinity and Atkin-Lehner signs for "
                f"primes {sorted(have)}; signs for every prime in {list(group.primes)} are needed to "
                "build the other cusps' rows"
            )
        signs = np.array([form.symmetry.al_sign(c.atkin_lehner_Q) for c in group.cusps], dtype=float)
        return signs[:, None] * C[0][None, :]
    raise InputError(
        f"form at level {form.level} has {C.shape[0]} coefficient rows; Gamma0({form.level}) has {h} cusps "
        f"(allowed: 1 row for squarefree levels with Atkin-Lehner signs, or {h} rows)"
    )


def _hecke_extend(a: np.ndarray, level: int, n_max: int, is_new: bool) -> tuple[np.ndarray, np.ndarray]:
    """Extend a(1..M) to a(1..n_max) by the Hecke relations; returns (values, known)."""
    M = a.size
    out = np.zeros(n_max, dtype=a.dtype)
    known = np.zeros(n_max, dtype=bool)
    k = min(M, n_max)
    out[:k] = a[:k]
    known[:k] = True
    if n_max <= M:
        return out, known
    spf = smallest_prime_factor(n_max)
    cache: dict[int, complex | float | None] = {}

    def prime_power(p: int, e: int):
        q = p**e
        if q <= M:
            return a[q - 1]
        if (p, e) in cache:
            return cache[(p, e)]
        if p > M:
            val = None
        elif level % p == 0:
            val = a[p - 1] ** e if is_new else None
        else:
            prev, cur = (1.0, a[p - 1])
            val = cur
            for j in range(2, e + 1):
                qj = p**j
                nxt = a[qj - 1] if qj <= M else cur * a[p - 1] - prev
                prev, cur = cur, nxt
                val = cur
        cache[(p, e)] = val
        return val

    for n in range(M + 1, n_max + 1):
        v = 1.0
        ok = True
        for p, e in factor_with(n, spf):
            pv = prime_power(p, e)
            if pv is None:
                ok = False
                break
            v = v * pv
        if ok:
            out[n - 1] = v
            known[n - 1] = True
    return out, known


def _may_extend(form) -> bool:
    C = np.asarray(form.coeffs)
    c1 = C.reshape(C.shape[0] if C.ndim == 2 else 1, -1)[0, 0]
    return (
        abs(c1 - 1.0) < 1e-12
        and form.multiplicity == 1
        and math.isfinite(form.hecke_residual)
        and form.hecke_residual <= HECKE_EXTENSION_TOL
    )


def build_table(form, group, n_max: int | None = None) -> CoefficientTable:
    """Coefficient table of ``form`` with at least ``n_max`` columns (Hecke-extended).

    Only the row at infinity obeys the Hecke relations; for squarefree levels the other rows
    are eps_Q times it (see :func:`cusp_rows`), so they are extended with it. For other levels
    the rows of the other cusps are not extended (their entries beyond the stored range are
    marked unknown).
    """
    rows = cusp_rows(form, group)
    M = rows.shape[1]
    n_max = M if n_max is None else max(int(n_max), M)
    if rows.dtype.kind not in "fc":
        rows = rows.astype(float)
    single_row_form = np.asarray(form.coeffs).reshape(-1, M).shape[0] == 1
    ext = np.zeros((rows.shape[0], n_max), dtype=rows.dtype)
    known = np.zeros((rows.shape[0], n_max), dtype=bool)
    ext[:, :M] = rows
    known[:, :M] = True
    extended = False
    if n_max > M and _may_extend(form):
        is_new = bool(form.is_new) or form.level == 1
        a0, k0 = _hecke_extend(rows[0], form.level, n_max, is_new)
        ext[0], known[0] = a0, k0
        extended = bool(k0[M:].any())
        if group.is_squarefree and group.n_cusps > 1:
            # c_j = eps_Q c_0 (exact for the Atkin-Lehner scaling matrices of squarefree levels)
            if single_row_form:
                ratio = rows[:, 0] / rows[0, 0]
            else:
                ratio = np.array([form.symmetry.al_sign(c.atkin_lehner_Q) for c in group.cusps], dtype=float) \
                    if {p for p, _ in form.symmetry.al_signs} == set(group.primes) else None
                if ratio is not None and not np.allclose(rows, ratio[:, None] * rows[0][None, :], rtol=0, atol=1e-8):
                    ratio = None
            if ratio is not None:
                ext[1:, M:] = ratio[1:, None] * a0[None, M:]
                known[1:, M:] = k0[None, M:]
    theta = 7.0 / 64.0 if (form.is_new or form.level == 1) else 0.5
    n = np.arange(1, n_max + 1)
    d = divisor_count(n_max)[1:]
    base = d * n.astype(float) ** theta
    ratio_stored = np.abs(rows) / base[None, :M]
    B = max(1.0, float(np.max(ratio_stored)))
    return CoefficientTable(
        rows=ext, known=known, n_stored=M, extended=extended, env_B=B, env_theta=theta,
        parity=form.parity,
    )
