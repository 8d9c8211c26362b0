"""Small frozen dataclasses that the Hejhal stage hands to later stages."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

PARITIES = ("even", "odd")


@dataclass(frozen=True)
class SymmetryClass:
    """A symmetry class of Maass forms on Gamma0(N).

    Attributes
    ----------
    parity : {"even", "odd"}
        Behaviour under the reflection J: z -> -conj(z); even forms have a cosine
        expansion, odd forms a sine expansion.
    al_signs : tuple of (p, sign)
        Atkin--Lehner signs eps_p = +-1 for the primes p | N (squarefree N only);
        empty when Atkin--Lehner symmetry is not imposed. Convention:
        f(W_p z) = eps_p f(z) with W_p any integer matrix of determinant p in the
        Atkin--Lehner coset (Atkin & Lehner, Math. Ann. 185 (1970)).
    """

    parity: str
    al_signs: tuple[tuple[int, int], ...] = ()

    def __post_init__(self) -> None:
        from maasscomp.errors import InputError

        if self.parity not in PARITIES:
            raise InputError(f"parity {self.parity!r} is not allowed; use 'even' or 'odd'")
        for p, s in self.al_signs:
            if s not in (1, -1):
                raise InputError(f"Atkin-Lehner sign {s!r} for p={p} is not allowed; use +1 or -1")

    def al_sign(self, Q: int) -> int:
        """eps_Q = prod_{p | Q} eps_p."""
        s = 1
        for p, e in self.al_signs:
            if Q % p == 0:
                s *= e
        return s

    @property
    def label(self) -> str:
        """Short text label such as ``odd`` or ``even,2+,3-``."""
        parts = [self.parity] + [f"{p}{'+' if s > 0 else '-'}" for p, s in self.al_signs]
        return ",".join(parts)

    @classmethod
    def from_label(cls, label: str) -> "SymmetryClass":
        parts = label.split(",")
        signs = tuple((int(t[:-1]), 1 if t[-1] == "+" else -1) for t in parts[1:])
        return cls(parts[0], signs)


@dataclass(frozen=True)
class SolverParams:
    """Parameters of one Hejhal linear system (docs/theory.md §1.2-1.3).

    Y is the horocycle height of the sample points in each cusp's coordinate, M0 the
    truncation of every cusp expansion, Q the number of sample points per cusp
    (Q > M0) and eps the target truncation error.
    """

    Y: float
    M0: int
    Q: int
    eps: float = 1e-14

    def as_dict(self) -> dict:
        return {"Y": self.Y, "M0": self.M0, "Q": self.Q, "eps": self.eps}
