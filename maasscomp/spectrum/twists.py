"""Quadratic twists: recognising a newform as g (x) chi for a lower-level newform g.

Theory (twists of newforms: A. O. L. Atkin and W.-C. W. Li, "Twists of newforms and
pseudo-eigenvalues of W-operators", Invent. Math. 48 (1978) 221-243, for holomorphic forms;
the Maass case is common practice): for a Hecke newform g of level M with trivial character
and a primitive Dirichlet character chi of conductor q, the twist

    (g (x) chi)(z) = sum_n chi(n) a_g(n) sqrt(y) K_{iR}(2 pi n y) cs(2 pi n x)

is a Hecke eigenform of level dividing lcm(M, q^2) with character chi^2, the same R, and
Hecke eigenvalues chi(p) a_g(p) for p not dividing qM. On Gamma0(N) (trivial character) only
quadratic chi occur, chi = chi_D = (D/.) the Kronecker symbol of a fundamental discriminant
D, conductor |D|, and chi_D(-1) = sign(D) (common practice). An odd character (D < 0)
exchanges cos and sin, so it flips the parity (derived: chi(-n) = chi(-1) chi(n)).

:func:`find_twist` compares c(n) with chi_D(n) a_g(n) at the well-determined n prime to D,
for every candidate parent g and every fundamental discriminant D with |D| | N and the
right parity whose twist can have level N: N = M D^2 when gcd(M, D) = 1 (the twist of a
newform of level prime to the conductor has exact level M D^2), N | lcm(M, D^2) otherwise.
Results go into ``Form.extra`` (:meth:`TwistDescription.as_extra`):

``twist_of``
    {"level": M, "R": R of g, "parity": parity of g, "label": ...};
``twist_character``
    {"discriminant": D, "conductor": |D|, "parity": "even" (D > 0) or "odd" (D < 0)};
``twist_residual``
    max |c(n) - chi_D(n) a_g(n)| over the n used, gcd(n, D) = 1;
``twist_n``
    the number of coefficients compared.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from maasscomp.errors import InputError
from maasscomp.arith import divisors, is_squarefree, kronecker
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.oldforms import DEFAULT_ERR_TOL, DEFAULT_FIT_TOL, ParentForm

__all__ = [
    "kronecker",
    "is_fundamental_discriminant",
    "fundamental_discriminants",
    "TwistDescription",
    "twist_coefficients",
    "find_twist",
    "label_twist",
]


def is_fundamental_discriminant(D: int) -> bool:
    """D = 1 mod 4 squarefree, or D = 4m with m = 2, 3 mod 4 squarefree (D != 1)."""
    D = int(D)
    if D in (0, 1):
        return False

    if D % 4 == 1:
        return is_squarefree(D)
    if D % 4 == 0:
        m = D // 4
        return m % 4 in (2, 3) and is_squarefree(m)
    return False


def fundamental_discriminants(N: int) -> tuple[int, ...]:
    """Fundamental discriminants D with |D| | N, ordered by |D| then sign (negative first)."""
    out = []
    for q in divisors(int(N)):
        for D in (-q, q):
            if is_fundamental_discriminant(D):
                out.append(D)
    return tuple(out)


def twist_coefficients(a: np.ndarray, D: int) -> np.ndarray:
    """chi_D(n) a(n) for n = 1..len(a)."""
    a = np.asarray(a, dtype=float).ravel()
    chi = np.array([kronecker(D, n) for n in range(1, a.size + 1)], dtype=float)
    return chi * a


@dataclass(frozen=True)
class TwistDescription:
    """A form found to be the twist of ``parent`` by chi_D."""

    parent: ParentForm
    discriminant: int
    residual: float
    n_used: int

    @property
    def conductor(self) -> int:
        return abs(self.discriminant)

    @property
    def character_parity(self) -> str:
        return "odd" if self.discriminant < 0 else "even"

    def as_extra(self) -> dict:
        """The ``Form.extra`` entries (module docstring)."""
        return {
            "twist_of": self.parent.describe(),
            "twist_character": {
                "discriminant": int(self.discriminant),
                "conductor": int(self.conductor),
                "parity": self.character_parity,
            },
            "twist_residual": float(self.residual),
            "twist_n": int(self.n_used),
        }


def _lcm(a: int, b: int) -> int:
    return a * b // math.gcd(a, b)


def find_twist(
    group,
    form: Form,
    parents: Sequence[ParentForm],
    *,
    R_tol: float = 1e-8,
    tol: float = DEFAULT_FIT_TOL,
    err_tol: float = DEFAULT_ERR_TOL,
    discriminants: Sequence[int] | None = None,
) -> TwistDescription | None:
    """Recognise a Hecke eigenform as the quadratic twist of one of ``parents``.

    Parameters
    ----------
    group : Gamma0
    form : Form
        A Hecke eigenform with c(1) = 1 (otherwise None is returned).
    parents : sequence of ParentForm
        Candidate newforms g of level M (see the module docstring for the levels allowed).
    R_tol : float
        Relative tolerance for matching R.
    tol : float
        Largest accepted max |c(n) - chi_D(n) a_g(n)| (relative to max |c|).
    err_tol : float
        Only coefficients with stored error below this take part.
    discriminants : sequence of int, optional
        The D to try (default: :func:`fundamental_discriminants` of N).

    Returns
    -------
    TwistDescription or None
        The match with the smallest residual, or None if none is below ``tol``. A parent
        whose coefficients equal the form's (no twist) is never reported.
    """
    if form.level != group.level:
        raise InputError(f"the form has level {form.level} but the group is Gamma0({group.level})")
    N = group.level
    if not form.extra.get("hecke_eigenform", True):
        return None
    c_all = np.real(np.asarray(form.coeffs)[0])
    if abs(c_all[0] - 1.0) > 1e-8:
        return None
    e = np.asarray(form.coeff_errors)[0]
    ok = np.isfinite(c_all) & (e <= err_tol * np.maximum(1.0, np.abs(c_all)))
    K_form = int(np.sum(np.cumprod(ok)))
    Ds = fundamental_discriminants(N) if discriminants is None else tuple(int(D) for D in discriminants)
    for D in Ds:
        if not is_fundamental_discriminant(D):
            raise InputError(f"D={D!r} is not a fundamental discriminant")
    best: TwistDescription | None = None
    for g in parents:
        if not isinstance(g, ParentForm):
            raise InputError(f"parents must be ParentForm objects, got {type(g).__name__}")
        if abs(g.R - form.R) > R_tol * max(1.0, form.R):
            continue
        K = min(K_form, g.coeffs.size)
        c = c_all[:K]
        n = np.arange(1, K + 1)
        for D in Ds:
            flips = D < 0
            if (g.parity != form.parity) != flips:
                continue
            # level of the twist: exactly M D^2 when gcd(M, D) = 1, a divisor of
            # lcm(M, D^2) otherwise (Atkin & Li 1978, recalled)
            if math.gcd(g.level, D) == 1 and N != g.level * D * D:
                continue
            if _lcm(g.level, D * D) % N:
                continue
            coprime = np.array([math.gcd(int(k), abs(D)) == 1 for k in n])
            if coprime.sum() < 4:
                continue
            tw = twist_coefficients(g.coeffs[:K], D)
            if np.max(np.abs(tw[coprime] - g.coeffs[:K][coprime])) <= tol:
                continue  # chi_D(n) = 1 wherever compared: no information about the twist
            res = float(np.max(np.abs(c[coprime] - tw[coprime])) / max(np.max(np.abs(c)), 1e-300))
            if res <= tol and (best is None or res < best.residual):
                best = TwistDescription(g, int(D), res, int(coprime.sum()))
    return best


def label_twist(group, form: Form, parents: Sequence[ParentForm], **kwargs) -> TwistDescription | None:
    """:func:`find_twist`, and on success write its entries into ``form.extra``."""
    desc = find_twist(group, form, parents, **kwargs)
    if desc is not None:
        form.extra.update(desc.as_extra())
    return desc
