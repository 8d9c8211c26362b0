"""The Hejhal systems of every searched symmetry class of a level at one sample height.

This is where the search picks its linear system:

* ``"atkin-lehner"`` (squarefree levels, classes with one Atkin--Lehner sign per prime):
  one real expansion per class, :class:`maasscomp.hejhal.system.HejhalSystem`
  (docs/theory.md §1.5);
* ``"multi-cusp"`` (any level, parity classes): one expansion per cusp,
  :class:`maasscomp.hejhal.multicusp.MultiCuspSystem` (docs/theory.md §1.2);
* ``"character"`` (any level, parity classes, forms with a Dirichlet character chi):
  one complex expansion per cusp over the shifted frequencies kappa_j + Z,
  :class:`maasscomp.hejhal.charsystem.CharacterSystem` (docs/theory.md §12).

All classes of a family share the sample points, hence the values Kt(R, x) at
:attr:`SystemFamily.k_points`; every system is linear in those values
(``matrix_from_k(k)``), so the same call with dKt/dR gives the R-derivative of the matrix.

A system object offers ``size``, ``params``, ``k_points``, ``matrix_from_k(k)``,
``coefficients(vectors)`` (unknowns to the storage convention c_j(n), see
:class:`maasscomp.spectrum.form.Form`), ``storage_scale(unknown_scale)`` and
``real_coefficients``; the search uses nothing else, so another construction of the same
matrices (for instance a lower-memory assembly at large R) can take their place.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from maasscomp.errors import InputError
from maasscomp.hejhal.types import SolverParams, SymmetryClass

#: Names of the two kinds of system.
KINDS = ("atkin-lehner", "multi-cusp", "character")


def default_kind(group) -> str:
    """The system a level is searched with: Atkin--Lehner classes where every cusp is an
    Atkin--Lehner image of infinity (squarefree levels), the multi-cusp system elsewhere."""
    return "atkin-lehner" if group.is_squarefree else "multi-cusp"


def check_classes(group, classes: Sequence[SymmetryClass], kind: str) -> None:
    """Raise InputError unless every class fits the system kind at this level."""
    if kind not in KINDS:
        raise InputError(f"system {kind!r} is not allowed; use one of {', '.join(KINDS)}")
    if kind == "atkin-lehner":
        from maasscomp.hejhal.system import check_symmetry

        for c in classes:
            check_symmetry(group, c)
    else:
        for c in classes:
            if c.al_signs:
                raise InputError(
                    f"symmetry class {c.label!r} fixes Atkin-Lehner signs; the multi-cusp system of "
                    f"level {group.level} searches parity classes ('even', 'odd') only")


@dataclass
class SystemFamily:
    """Systems of several classes of one level sharing one set of sample points.

    Attributes
    ----------
    group : Gamma0
    params : SolverParams
    kind : str
        ``"atkin-lehner"`` or ``"multi-cusp"``.
    systems : dict
        One system per symmetry class.
    """

    group: object
    params: SolverParams
    kind: str
    systems: dict

    @property
    def k_points(self) -> np.ndarray:
        """Points x at which every system of the family needs Kt(R, x)."""
        return next(iter(self.systems.values())).k_points


def build_family(group, classes: Sequence[SymmetryClass], params: SolverParams, kind: str | None = None,
                 character=None) -> SystemFamily:
    """The systems of ``classes`` at one height, sharing sample points and pullbacks.

    Parameters
    ----------
    group : Gamma0
    classes : sequence of SymmetryClass
    params : SolverParams
    kind : str, optional
        Default :func:`default_kind`.
    character : maasscomp.groups.characters.DirichletCharacter, optional
        Required by (and only used with) ``kind="character"``.
    """
    kind = kind or default_kind(group)
    classes = list(dict.fromkeys(classes))
    check_classes(group, classes, kind)
    if kind == "atkin-lehner":
        from maasscomp.hejhal.system import HejhalSystem, SampleSet

        samples = SampleSet(group, params)
        systems = {c: HejhalSystem(group, c, params, samples) for c in classes}
    elif kind == "character":
        from maasscomp.hejhal.charsystem import CharacterSamples, CharacterSystem

        if character is None:
            raise InputError("the character system needs a character")
        samples = CharacterSamples(group, character, params)
        systems = {c: CharacterSystem(group, character, c.parity, params, samples) for c in classes}
    else:
        from maasscomp.hejhal.multicusp import MultiCuspSamples, MultiCuspSystem

        samples = MultiCuspSamples(group, params)
        systems = {c: MultiCuspSystem(group, c.parity, params, samples) for c in classes}
    return SystemFamily(group, params, kind, systems)
