"""Complete lists of Maass forms with a character, for the check of Weyl's law with chi.

Writes ``data/reference/character_lists.csv``: every form (both parities, with
multiplicity) of (Gamma0(5), chi_5 = X5.2) with R <= 12 and of (Gamma0(7), X7.2) with
R <= 10, from two independent runs of the search per list (lattice offsets 0 and 0.5, i.e.
different expansion points and roots) that must agree; the script stops if they do not.

Run: ``python tests/spectrum/make_character_lists.py`` (several minutes of one core).
"""

from __future__ import annotations

import sys
from pathlib import Path

from maasscomp import __version__
from maasscomp.groups import DirichletCharacter, gamma0
from maasscomp.spectrum.search import SearchSettings, search_forms

LISTS = ((5, "X5.2", 12.0), (7, "X7.2", 10.0))
R_MIN = 1.0
OUT = Path(__file__).resolve().parents[2] / "data" / "reference" / "character_lists.csv"


def one(N: int, label: str, R_max: float, offset: float):
    res = search_forms(gamma0(N), R_MIN, R_max, character=DirichletCharacter.from_label(label),
                       settings=SearchSettings(offset=offset))
    return sorted((f.symmetry.parity, round(f.R, 9), f.multiplicity) for f in res.forms), res


def main() -> None:
    lines = [
        "# Every Maass cusp form with R_min < R <= R_max (both parities, with multiplicity) of Gamma0(N) with",
        "#   character chi: (5, X5.2 = chi_5, R <= 12) and (7, X7.2 of order 3, R <= 10).",
        f"# source: computed here with tests/spectrum/make_character_lists.py (maasscomp {__version__}):",
        "#   two independent runs of maasscomp.spectrum.search.search_forms per list (lattice offsets 0",
        "#   and 0.5), identical to 1e-9 in R; the lists start at R = 1 (not searched below).",
        "# columns: level, character, parity, R, multiplicity (one row per basis form).",
        "level,character,parity,R,multiplicity",
    ]
    for N, label, R_max in LISTS:
        a, res = one(N, label, R_max, 0.0)
        b, _ = one(N, label, R_max, 0.5)
        if a != b:
            print(f"level {N} {label}: the two runs differ:\n{a}\n{b}", file=sys.stderr)
            raise SystemExit(1)
        for f in sorted(res.forms, key=lambda f: (f.R, f.symmetry.parity, f.basis_index)):
            lines.append(f"{N},{label},{f.symmetry.parity},{f.R:.12f},{f.multiplicity}")
        print(f"level {N} {label}: {len(res.forms)} forms up to R = {R_max}")
    OUT.write_text("\n".join(lines) + "\n")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
