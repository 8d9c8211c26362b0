"""Window search with a completeness check against Weyl's law and automatic re-search.

A data set of Maass forms is only useful if it is complete in each window. After the
search of all symmetry classes of a level, the eigenvalues found (with multiplicity) are
compared with Weyl's law window by window (:func:`maasscomp.spectrum.weyl.completeness`).
A window flagged with a deficit is searched again with a finer grid and other sample
heights (a spurious root of the truncated system moves with the heights, so a true
eigenvalue hidden next to one at the first heights shows at the second), and the outcome
is logged. Forms found twice (at the common end of two windows, or by a re-search) are
merged; two distinct eigenvalues of one class closer than ``degenerate_tol`` are kept and
marked as a near-degenerate pair in ``Form.extra``.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable, Sequence

from maasscomp.errors import InputError
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.search import SearchSettings, search_classes, symmetry_classes


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
        available, i.e. non-squarefree levels, or when only one parity was searched).
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
        if (a.level, a.symmetry.label) == (b.level, b.symmetry.label) and abs(a.R - b.R) <= degenerate_tol * max(1.0, b.R):
            a.extra.setdefault("near_degenerate_with", []).append(float(b.R))
            b.extra.setdefault("near_degenerate_with", []).append(float(a.R))
    return sorted(out, key=lambda f: f.R), merged


def _search(group, parities, a, b, settings, progress) -> list[Form]:
    if group.is_squarefree:
        res = search_classes(group, symmetry_classes(group, tuple(parities)), a, b, settings, progress=progress)
        return [f for r in res.values() for f in r.forms]
    from maasscomp.spectrum.general import search_window_general

    return [f for p in parities for f in search_window_general(group, p, a, b, settings, progress=progress).forms]


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
    Weyl's law, and search flagged windows again (finer grid, other heights).

    Parameters
    ----------
    group : Gamma0
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
    from maasscomp.spectrum.weyl import completeness

    settings = settings or SearchSettings()
    if max_rounds < 0:
        raise InputError(f"max_rounds={max_rounds!r} is not allowed; use an integer >= 0")
    log: list[str] = []
    forms, merged = merge_forms(_search(group, parities, R_min, R_max, settings, progress))
    log.append(f"level {group.level}: searched [{R_min:g}, {R_max:g}], {len(forms)} forms")
    weyl_ok = group.is_squarefree and set(parities) == {"even", "odd"}
    if not weyl_ok:
        why = "level not squarefree" if not group.is_squarefree else "only one parity searched"
        log.append(f"level {group.level}: no Weyl's-law check ({why})")
        return CompleteSearch(group.level, tuple(forms), None, (), tuple(log), merged)
    if count_below is None and R_min <= 1.0:
        count_below = 0  # no cusp form of these levels has R below 1 (Weyl's law has W(1) < 0)
    researched: list[tuple[float, float]] = []
    finer = replace(settings, steps_per_spacing=4 * settings.steps_per_spacing, Y1_frac=0.86, Y2_frac=0.74)
    report = None
    for rnd in range(max_rounds + 1):
        Rs = [f.R for f in forms]
        report = completeness(group.level, Rs, R_min, R_max, window, count_below=count_below)
        flagged = [(w.T_lo, w.T_hi) for w in report.flagged]
        if not flagged:
            log.append(f"level {group.level}: complete against Weyl's law "
                       f"(found {report.total_found}, expected {report.total_expected:.2f}, "
                       f"remainder mean {report.mean_remainder:+.2f}, rms {report.rms_remainder:.2f})")
            break
        if rnd == max_rounds:
            log.append(f"level {group.level}: windows still flagged after {max_rounds} re-search rounds: "
                       + ", ".join(f"[{a:g}, {b:g}]" for a, b in flagged))
            break
        for a, b in flagged:
            before = len(forms)
            new = _search(group, parities, a, b, finer, None)
            forms, m = merge_forms(forms + new)
            merged += m
            researched.append((a, b))
            log.append(f"level {group.level}: re-searched [{a:g}, {b:g}] with a 4x finer grid and heights "
                       f"0.86/0.74 Y0: {len(forms) - before} new form(s)")
    return CompleteSearch(group.level, tuple(forms), report, tuple(researched), tuple(log), merged)
