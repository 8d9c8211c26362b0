"""One call that labels a confirmed form of any level: symmetries, new/old, twist.

:func:`label_form` is meant for the confirmation step of a search: given the form's group,
the form and the newforms already known at lower levels (as :class:`ParentForm`), it writes

* ``extra["atkin_lehner"]`` (:func:`maasscomp.spectrum.operators.label_atkin_lehner`), at
  levels N > 1 for a form that carries its expansion at every cusp (as every searched form
  does): the raw eigenvalue of every W_Q, Q || N, its residual and sign;
* ``extra["old_parents"]``, ``old_fit_residual``, ``old_fit_n``
  (:func:`maasscomp.spectrum.oldforms.label_old`) when the form lies in the oldspace of the
  parents;
* otherwise ``extra["twist_of"]``, ``twist_character``, ``twist_residual``, ``twist_n``
  (:func:`maasscomp.spectrum.twists.label_twist`) when it is a quadratic twist of a parent.

The meaning of every key is documented in those modules and in
docs/theory.md §9.2-§9.5.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

from maasscomp.spectrum.form import Form
from maasscomp.spectrum.oldforms import OldformDescription, ParentForm, label_old
from maasscomp.spectrum.operators import label_atkin_lehner
from maasscomp.spectrum.twists import TwistDescription, label_twist

__all__ = ["LevelLabels", "label_form"]


@dataclass(frozen=True)
class LevelLabels:
    """What :func:`label_form` found (the same data are in ``form.extra``)."""

    atkin_lehner: dict
    old: OldformDescription | None
    twist: TwistDescription | None


def label_form(group, form: Form, parents: Sequence[ParentForm] = ()) -> LevelLabels:
    """Label ``form`` with its Atkin--Lehner eigenvalues, oldform parents or twist origin.

    Parameters
    ----------
    group : Gamma0
        The form's group.
    form : Form
        A confirmed form (coefficients at every cusp; a form given at infinity only gets
        no Atkin--Lehner labels).
    parents : sequence of ParentForm
        Newforms of lower levels (and, for twists inside one level, of the same level) that
        may explain the form.
    """
    all_cusps = form.coeffs.shape[0] == group.n_cusps
    al = label_atkin_lehner(group, form) if group.level > 1 and all_cusps else {}
    old = label_old(group, form, parents) if parents else None
    twist = None
    if old is None and parents:
        twist = label_twist(group, form, parents)
    return LevelLabels(atkin_lehner=al, old=old, twist=twist)
