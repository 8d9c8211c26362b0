"""Window search with a completeness check against Weyl's law and automatic re-search.

A data set of Maass forms is only useful if it is complete in each window. After the
search of all symmetry classes of a level (:func:`maasscomp.spectrum.search.search_forms`), the
forms found are compared with Weyl's law window by window
(:func:`maasscomp.spectrum.weyl.completeness`, given the :class:`Form` objects, so that it
can count multiplicities and classes). Re-search rule:

* round r = 1, 2, ... searches every flagged window again with settings that change each
  round (:func:`research_settings`): the lattice of expansion points shifted by r times the
  golden ratio (mod 1), 2^r times as many expansion points, and sample heights lowered by
  0.06 r Y0 (a spurious root of the truncated system moves with the heights);
* it stops when no window is flagged, when a round adds no form (the flags then come from
  the fluctuation of the Weyl remainder, not from a miss), or after ``max_rounds`` rounds.

Every step is logged. Levels for which Weyl's law is not available (non-squarefree levels,
at present) are searched once and reported as unchecked. Forms found twice (at the common
end of two windows, or by a re-search) are merged; two distinct eigenvalues of one class
closer than ``degenerate_tol`` are kept and marked as a near-degenerate pair in ``Form.extra``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable, Sequence

from maasscomp.errors import InputError
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.search import SearchSettings, search_forms

_GOLDEN = 0.5 * (math.sqrt(5.0) - 1.0)


@dataclass(frozen=True)
class CompleteSearch:
    """Outcome of :func:`complete_search`.

    Attributes
    ----------
    level : int
    forms : tuple of Form
        All forms, sorted by R, duplicates merged.
    report : CompletenessReport or None
        Weyl's-law comparison after the last re-search (None where Weyl's law is not
        available for the level, or when only one parity was searched).
    researched : tuple of (float, float)
        Windows searched again.
    log : tuple of str
        What was done, in order.
    duplicates_merged : int
    """

    level: int
    forms: tuple[Form, ...]
    report: object
    researched: tuple[tuple[float, float], ...]
    log: tuple[str, ...]
    duplicates_merged: int


def merge_forms(forms: Sequence[Form], *, same_tol: float = 1e-8, degenerate_tol: float = 1e-5) -> tuple[list[Form], int]:
    """Merge repeated finds of one eigenvalue; mark near-degenerate pairs.

    Two forms of the same level, symmetry class and basis index whose R differ by at most
    ``same_tol`` (relative to max(1, R)) are the same form: the one with the smaller R error
    is kept. Distinct R closer than ``degenerate_tol`` are both kept, and each records the
    other in ``extra["near_degenerate_with"]``.
    """
    out: list[Form] = []
    merged = 0
    key = lambda f: (f.level, f.symmetry.label, f.basis_index, f.R)  # noqa: E731
    for f in sorted(forms, key=key):
        prev = out[-1] if out else None
        if (prev is not None and key(prev)[:3] == key(f)[:3]
                and abs(prev.R - f.R) <= same_tol * max(1.0, f.R)):
            merged += 1
            if f.R_error < prev.R_error:
                out[-1] = f
            continue
        out.append(f)
    for a, b in zip(out, out[1:]):
        if (a.level, a.symmetry.label) == (b.level, b.symmetry.label) and a.basis_index == b.basis_index \
                and abs(a.R - b.R) <= degenerate_tol * max(1.0, b.R):
            near = a.extra.setdefault("near_degenerate_with", [])
            if float(b.R) not in near:
                near.append(float(b.R))
            near = b.extra.setdefault("near_degenerate_with", [])
            if float(a.R) not in near:
                near.append(float(a.R))
    return sorted(out, key=lambda f: (f.R, f.symmetry.label, f.basis_index)), merged


@dataclass(frozen=True)
class FormSummary:
    """What the completeness check reads of a form, without its coefficients (for forms
    listed from a store): R, class, new/old and multiplicity, as on :class:`Form`."""

    R: float
    symmetry: object
    is_new: bool | None
    multiplicity: int
    basis_index: int = 0


def research_settings(settings: SearchSettings, round_no: int) -> SearchSettings:
    """Settings of re-search round ``round_no`` >= 1 (module docstring)."""
    if round_no < 1:
        raise InputError(f"re-search round {round_no!r} is not allowed; rounds count from 1")
    drop = 0.06 * round_no
    y1 = max(settings.Y1_frac - drop, 0.3)
    y2 = max(settings.Y2_frac - drop, 0.25)
    if y2 >= y1:
        y2 = 0.85 * y1
    return replace(settings, offset=(settings.offset + round_no * _GOLDEN) % 1.0,
                   steps_per_spacing=settings.steps_per_spacing * 2 ** round_no,
                   Y1_frac=y1, Y2_frac=y2)


def describe_round(settings: SearchSettings, round_no: int) -> str:
    s = research_settings(settings, round_no)
    return (f"round {round_no}: lattice offset {s.offset:.3f}, {s.steps_per_spacing:g} expansion points "
            f"per mean spacing, heights {s.Y1_frac:.2f}/{s.Y2_frac:.2f} Y0")


def weyl_report(level: int, forms: Sequence[Form], T_min: float, T_max: float, window=None,
                count_below: int | None = None):
    """Weyl's-law completeness report for the forms of a level, or None where Weyl's law is
    not available for the level.

    The Form objects are passed on (completeness counts multiplicities and classes from
    them); a completeness() that takes R values only is given one R per form, which repeats
    each eigenvalue by its multiplicity (one form per basis member).
    """
    from maasscomp.spectrum.weyl import completeness

    try:
        try:
            return completeness(level, list(forms), T_min, T_max, window, count_below=count_below)
        except TypeError:
            return completeness(level, [f.R for f in forms], T_min, T_max, window, count_below=count_below)
    except InputError:
        return None


def _search(group, parities, a, b, settings, progress) -> list[Form]:
    return list(search_forms(group, a, b, tuple(parities), settings, progress=progress).forms)


def complete_search(
    group,
    R_min: float,
    R_max: float,
    parities: Sequence[str] = ("even", "odd"),
    settings: SearchSettings | None = None,
    *,
    window: float | None = None,
    max_rounds: int = 2,
    progress: Callable[[int, int], None] | None = None,
    count_below: int | None = None,
) -> CompleteSearch:
    """Search every symmetry class of a level on [R_min, R_max], check completeness against
    Weyl's law, and search flagged windows again (rule in the module docstring).

    Parameters
    ----------
    group : Gamma0
        Any level; the Weyl's-law check runs where Weyl's law is available.
    R_min, R_max : float
    parities : sequence of str
        Weyl's law counts both parities; with one parity no report is made.
    settings : SearchSettings, optional
    window : float, optional
        Width of the completeness windows (default: about four expected forms each).
    max_rounds : int
        Re-search rounds at most.
    count_below : int, optional
        Number of eigenvalues with R <= R_min, if known (default: the report measures the
        remainder relative to R_min).
    """
    settings = settings or SearchSettings()
    if not (isinstance(max_rounds, int) and max_rounds >= 0):
        raise InputError(f"max_rounds={max_rounds!r} is not allowed; use an integer >= 0")
    log: list[str] = []
    forms, merged = merge_forms(_search(group, parities, R_min, R_max, settings, progress))
    log.append(f"level {group.level}: searched [{R_min:g}, {R_max:g}], {len(forms)} forms")
    if set(parities) != {"even", "odd"}:
        log.append(f"level {group.level}: no Weyl's-law check (only one parity searched)")
        return CompleteSearch(group.level, tuple(forms), None, (), tuple(log), merged)
    if count_below is None and R_min <= 1.0:
        count_below = 0  # no cusp form of these levels has R below 1 (Weyl's law has W(1) < 0)
    report = weyl_report(group.level, forms, R_min, R_max, window, count_below)
    if report is None:
        log.append(f"level {group.level}: no Weyl's-law check (Weyl's law not available for this level)")
        return CompleteSearch(group.level, tuple(forms), None, (), tuple(log), merged)
    researched: list[tuple[float, float]] = []
    for rnd in range(1, max_rounds + 2):
        flagged = [(w.T_lo, w.T_hi) for w in report.flagged]
        if not flagged:
            log.append(f"level {group.level}: complete against Weyl's law "
                       f"(found {report.total_found}, expected {report.total_expected:.2f}, "
                       f"remainder mean {report.mean_remainder:+.2f}, rms {report.rms_remainder:.2f})")
            break
        if rnd > max_rounds:
            log.append(f"level {group.level}: windows still flagged after {max_rounds} re-search rounds: "
                       + ", ".join(f"[{a:g}, {b:g}]" for a, b in flagged))
            break
        s_round = research_settings(settings, rnd)
        log.append(f"level {group.level}: re-search {describe_round(settings, rnd)}")
        before = len(forms)
        for a, b in flagged:
            n0 = len(forms)
            new = _search(group, parities, a, b, s_round, None)
            forms, m = merge_forms(forms + new)
            merged += m
            researched.append((a, b))
            log.append(f"level {group.level}: re-searched [{a:g}, {b:g}]: {len(forms) - n0} new form(s)")
        report = weyl_report(group.level, forms, R_min, R_max, window, count_below)
        if len(forms) == before:
            flagged = [(w.T_lo, w.T_hi) for w in report.flagged]
            log.append(f"level {group.level}: round {rnd} found nothing new; stopping"
                       + (" (still flagged: " + ", ".join(f"[{a:g}, {b:g}]" for a, b in flagged) + ")"
                          if flagged else ""))
            break
    return CompleteSearch(group.level, tuple(forms), report, tuple(researched), tuple(log), merged)
