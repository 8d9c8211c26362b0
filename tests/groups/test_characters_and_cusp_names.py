"""Dirichlet characters on fixed generators, and canonical cusp names.

Checks against brute force over (Z/NZ)^x (the definitions themselves), so they can fail
if a generator, an order, a discrete logarithm or a conductor rule is wrong.
"""

from __future__ import annotations

import itertools
import math
from fractions import Fraction

import pytest

from maasscomp.errors import InputError
from maasscomp.groups import DirichletCharacter, gamma0, unit_generators


def _units(N):
    return [n for n in range(1, N + 1) if math.gcd(n, N) == 1]


@pytest.mark.parametrize("N", [1, 2, 3, 4, 5, 8, 9, 12, 16, 20, 24, 25, 27, 32, 45, 63])
def test_generators_generate_the_unit_group_with_the_stated_orders(N):
    gens = unit_generators(N)
    phi = len(_units(N)) if N > 1 else 1
    assert math.prod(o for _, o in gens) == phi
    for g, o in gens:
        assert math.gcd(g, N) == 1
        assert pow(g, o, N) == 1 % N
        assert all(pow(g, d, N) != 1 % N for d in range(1, o))  # order exactly o
    # the products g_1^k_1 ... g_r^k_r are pairwise distinct: the group is the direct product
    seen = set()
    for ks in itertools.product(*[range(o) for _, o in gens]):
        seen.add(math.prod(pow(g, k, N) for (g, _), k in zip(gens, ks)) % N)
    assert len(seen) == phi


@pytest.mark.parametrize("N", [3, 4, 8, 9, 12, 15, 16, 24, 25, 27, 40])
def test_every_character_is_multiplicative_and_its_conductor_is_the_brute_force_one(N):
    orders = [o for _, o in unit_generators(N)]
    units = _units(N)
    for ks in itertools.product(*[range(o) for o in orders]):
        chi = DirichletCharacter(N, tuple(ks))
        vals = {n: chi.value(n) for n in units}
        for a in units[:8]:
            for b in units[:8]:
                assert vals[a * b % N] == (vals[a] + vals[b]) % 1
        for (g, o), k in zip(unit_generators(N), ks):
            assert vals[g] == Fraction(k, o)
        # conductor: least d | N with chi(n) = 1 for every unit n = 1 mod d
        brute = min(d for d in range(1, N + 1) if N % d == 0
                    and all(vals[n] == 0 for n in units if (n - 1) % d == 0))
        assert chi.conductor == brute, (N, ks)
        assert chi.is_trivial == all(v == 0 for v in vals.values())
        assert DirichletCharacter.from_label(chi.label) == chi


def test_trivial_character_labels_and_bad_input():
    assert DirichletCharacter.trivial(11).label == "X11.0"
    assert DirichletCharacter.trivial(1).label == "X1"
    assert DirichletCharacter.trivial(12).label == "X12.0.0"
    assert DirichletCharacter.trivial(12).conductor == 1
    assert DirichletCharacter(12, (1, 0)).conductor == 4
    assert DirichletCharacter(12, (1, 0)).value(5) is not None
    with pytest.raises(InputError, match="exponents"):
        DirichletCharacter(11, (10,))
    with pytest.raises(InputError, match="label"):
        DirichletCharacter.from_label("chi11")


@pytest.mark.parametrize("N", [1, 2, 4, 6, 8, 9, 12, 16, 18, 25, 36, 49, 72])
def test_cusp_names_are_canonical_and_name_the_right_class(N):
    g = gamma0(N)
    names = [c.name for c in g.cusps]
    assert names[0] == "inf" and len(set(names)) == len(names)
    if N > 1:
        assert names[1] == "0"
    for c in g.cusps:
        a, cc = c.representative
        assert math.gcd(a, cc) == 1
        # the scaling matrix maps infinity onto the named cusp
        (m11, _), (m21, _) = c.scaling
        assert m11 * cc == m21 * a
        if c.index > 1:
            # c | N and a is the least positive integer prime to c in its class
            # modulo gcd(c, N/c) (so the name does not depend on the cusp order)
            h = math.gcd(cc, N // cc)
            assert N % cc == 0 and 1 < cc < N
            assert a == min(x for x in range(1, a + 1) if x % h == a % h and math.gcd(x, cc) == 1)
            assert c.name == f"{a}/{cc}"
