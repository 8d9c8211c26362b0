"""Forms near a target R: every form in a window, or the k forms nearest to R0.

At large R the eigenvalues are dense (mean spacing about 6/R on PSL(2,Z), shared by the
symmetry classes; docs/theory.md §2.2), so a user asks for forms *near* an R rather than for a
whole range. Both functions run the one search of the project
(:func:`maasscomp.spectrum.search.search_forms`, any level) over all symmetry classes of the
level together, and compare the number found with Weyl's law where it is available
(squarefree levels).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

from maasscomp.errors import InputError
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum.complete import merge_forms
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.search import SearchSettings, mean_spacing, search_forms


@dataclass(frozen=True)
class NearResult:
    """Forms found near a target, with what was searched and what Weyl's law expects.

    Attributes
    ----------
    forms : tuple of Form
        Sorted by distance from ``R0`` (for a window search: by R).
    R0 : float
        The target (window searches: the window's lower end).
    windows : tuple of (float, float)
        The R intervals searched; together they cover one interval.
    expected : float or None
        Weyl's law expectation for the union of the windows, summed over all symmetry
        classes (None when Weyl's law is not available for the level).
    found : int
        Number of forms found in the union of the windows (with multiplicity).
    rejected : int
        Eigenvalues proposed (roots at both heights) that failed confirmation.
    """

    forms: tuple[Form, ...]
    R0: float
    windows: tuple[tuple[float, float], ...]
    expected: float | None
    found: int
    rejected: int

    @property
    def interval(self) -> tuple[float, float]:
        return min(a for a, _ in self.windows), max(b for _, b in self.windows)


def _expected(level: int, a: float, b: float) -> float | None:
    from maasscomp.spectrum.weyl import expected_in_window

    try:
        return float(expected_in_window(level, a, b))
    except InputError:
        return None


def _search(group, parities, a, b, settings, progress):
    res = search_forms(group, a, b, tuple(parities), settings, progress=progress)
    return list(res.forms), len(res.rejected)


def forms_in_window(
    group,
    R_min: float,
    R_max: float,
    parities: Sequence[str] = ("even", "odd"),
    settings: SearchSettings | None = None,
    *,
    progress: Callable[[int, int], None] | None = None,
) -> NearResult:
    """Every form of every symmetry class of the level with R in [R_min, R_max] (any level)."""
    forms, rejected = _search(group, parities, R_min, R_max, settings, progress)
    forms = sorted(merge_forms(forms)[0], key=lambda f: f.R)
    return NearResult(tuple(forms), float(R_min), ((float(R_min), float(R_max)),),
                      _expected(group.level, R_min, R_max), len(forms), rejected)


def nearest_forms(
    group,
    R0: float,
    k: int = 1,
    parities: Sequence[str] = ("even", "odd"),
    settings: SearchSettings | None = None,
    *,
    progress: Callable[[int, int], None] | None = None,
) -> NearResult:
    """The k forms nearest to R0 (over all symmetry classes of the given parities).

    Searches [R0 - d, R0 + d] with d about k mean spacings, then rings of width d on both
    sides until at least k forms are found; since every form within the searched interval
    is found, the k nearest are exact once the k-th nearest lies inside it.
    """
    if not (isinstance(k, int) and not isinstance(k, bool) and k >= 1):
        raise InputError(f"k={k!r} is not allowed; it must be an integer >= 1")
    if not (isinstance(R0, (int, float)) and math.isfinite(R0) and R0 > 0):
        raise InputError(f"R0={R0!r} is not allowed; it must be a positive finite number")
    spacing = mean_spacing(group.level, 1, R0, group.index) * (2.0 / len(tuple(parities)))
    d = max(1.5 * k * spacing, 1e-3)
    lo, hi = max(R0 - d, 1e-3), R0 + d
    forms, rejected = _search(group, parities, lo, hi, settings, progress)
    windows = [(lo, hi)]
    for _ in range(60):
        forms = merge_forms(forms)[0]
        near = sorted(forms, key=lambda f: abs(f.R - R0))
        if len(near) >= k and abs(near[k - 1].R - R0) <= min(R0 - lo if lo > 1e-3 else math.inf, hi - R0):
            break
        new = []
        if lo > 1e-3:
            new.append((max(lo - d, 1e-3), lo))
        new.append((hi, hi + d))
        for a, b in new:
            f2, r2 = _search(group, parities, a, b, settings, progress)
            forms += f2
            rejected += r2
            windows.append((a, b))
        lo, hi = min(lo, new[0][0]), hi + d
    else:  # pragma: no cover - 60 rings would mean a broken search
        raise InputError(f"fewer than {k} forms found within {hi - R0:.3g} of R0={R0}")
    near = sorted(forms, key=lambda f: abs(f.R - R0))
    exp = _expected(group.level, lo, hi)
    return NearResult(tuple(near[:k]), float(R0), tuple(sorted(windows)), exp, len(forms), rejected)
