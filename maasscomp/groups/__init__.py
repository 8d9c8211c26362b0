"""Stage: groups. Gamma0(N) geometry with exact integer matrices.

Public API
----------
gamma0(N) -> Gamma0
    The Hecke congruence group Gamma0(N), N >= 1 (N = 1: the modular group), cached.
Gamma0
    Index, cusps, elliptic points, genus, coset representatives, Atkin--Lehner matrices,
    the reflection J, and the vectorised ``pullback`` into the fundamental domain.
Cusp
    A cusp a/c with its width, an SL2(Z) matrix A and the scaling matrix.
Pullback
    Result of ``Gamma0.pullback``: gamma z = sigma_j w with w in the strip of cusp j.
DirichletCharacter, unit_generators
    Dirichlet characters mod N by their exponents on fixed generators of (Z/NZ)^x.
"""

from maasscomp.arith import divisors, factorint

from .characters import DirichletCharacter, unit_generators
from .gamma0 import Cusp, Gamma0, Pullback, gamma0

__all__ = ["divisors", "factorint", "Cusp", "Gamma0", "Pullback", "gamma0", "DirichletCharacter",
           "unit_generators"]
