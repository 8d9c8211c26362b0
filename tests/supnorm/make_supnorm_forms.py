"""Precompute the small store of Maass forms used by the supnorm tests.

Runs the project's own eigenvalue search (``maasscomp.spectrum.search.search_forms``) and
writes every confirmed form to ``tests/supnorm/data/supnorm_forms.h5``:

* level 1, all symmetry classes, 0.5 <= R <= 20, 400 coefficients (enough primes for
  L(1, sym^2 f) by the approximate functional equation at R < 20);
* levels 2, 5, 6, 11, all Atkin--Lehner/parity classes, 0.5 <= R <= 10, 200 coefficients
  (enough for the expansions at the lowest pulled-back heights, e.g. Y0 ~ 0.09 for N = 11);
* the first form of one class at levels 2, 5 and 11 again with 900 coefficients (enough for
  L(1, sym^2 f) of conductor N^2), stored under basis_index 0 of a separate file
  ``supnorm_forms_rs.h5`` so that keys do not clash;
* odd forms of the non-squarefree levels 4 (3 <= R <= 6.5, including a two-dimensional
  oldform space) and 9 (2 <= R <= 4) from the multi-cusp search, in ``supnorm_forms_general.h5``;
* the level-1 form nearest to R = 100 with 1200 coefficients (enough primes for L(1, sym^2 f)
  by the approximate functional equation) and the one nearest to R = 1000 with the search's
  own number of coefficients, in ``supnorm_forms_large.h5``
  (``spectrum.nearest_forms``).

Run from the repository root: ``python tests/supnorm/make_supnorm_forms.py`` (about 10
minutes on 2 cores), ``python tests/supnorm/make_supnorm_forms.py rs`` and
``python tests/supnorm/make_supnorm_forms.py general`` (under a minute each),
``python tests/supnorm/make_supnorm_forms.py large`` (about a minute).
The tests skip with a message when a file is missing.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from joblib import Parallel, delayed

from maasscomp.groups import gamma0
from maasscomp.spectrum.search import SearchSettings, search_forms, symmetry_classes
from maasscomp.store import Store

OUT = Path(__file__).resolve().parent / "data" / "supnorm_forms.h5"
OUT_RS = Path(__file__).resolve().parent / "data" / "supnorm_forms_rs.h5"
OUT_GENERAL = Path(__file__).resolve().parent / "data" / "supnorm_forms_general.h5"
OUT_LARGE = Path(__file__).resolve().parent / "data" / "supnorm_forms_large.h5"
PLAN_LARGE = [(100.0, 1200), (1000.0, 60)]
PLAN_GENERAL = [(4, "odd", 3.0, 6.5), (9, "odd", 2.0, 4.0)]
PLAN = [(1, 20.0, 400), (2, 10.0, 200), (5, 10.0, 200), (6, 10.0, 200), (11, 10.0, 200)]
# (level, parity, Atkin-Lehner signs, R window): windows around the first newform of the class
PLAN_RS = [(2, "odd", ((2, -1),), 5.3, 5.5), (5, "odd", ((5, -1),), 3.0, 3.1), (11, "odd", ((11, -1),), 2.0, 2.1)]


def _task(N: int, sym, R_max: float, n_coeffs: int):
    t = time.perf_counter()
    res = search_forms(gamma0(N), 0.5, R_max, settings=SearchSettings(n_coeffs=n_coeffs), classes=[sym])
    return N, sym.label, list(res.forms), time.perf_counter() - t


def _task_rs(N: int, parity: str, signs, lo: float, hi: float):
    from maasscomp.hejhal.types import SymmetryClass

    res = search_forms(gamma0(N), lo, hi, settings=SearchSettings(n_coeffs=900),
                       classes=[SymmetryClass(parity, signs)])
    return list(res.forms)


def _task_general(N: int, parity: str, lo: float, hi: float):
    return list(search_forms(gamma0(N), lo, hi, (parity,)).forms)


def _task_large(R0: float, n_coeffs: int):
    from maasscomp.spectrum import nearest_forms

    return list(nearest_forms(gamma0(1), R0, k=1, settings=SearchSettings(n_coeffs=n_coeffs)).forms)


def main() -> int:
    if sys.argv[1:] == ["large"]:
        out = Parallel(n_jobs=2)(delayed(_task_large)(*t) for t in PLAN_LARGE)
        forms = [f for fs in out for f in fs]
        with Store.open(OUT_LARGE, "w") as st:
            st.add_forms(forms, config_text="tests/supnorm/make_supnorm_forms.py large")
        print(f"wrote {len(forms)} forms to {OUT_LARGE}")
        return 0
    if sys.argv[1:] == ["general"]:
        out = Parallel(n_jobs=2)(delayed(_task_general)(*t) for t in PLAN_GENERAL)
        forms = [f for fs in out for f in fs]
        with Store.open(OUT_GENERAL, "w") as st:
            st.add_forms(forms, config_text="tests/supnorm/make_supnorm_forms.py general")
        print(f"wrote {len(forms)} forms to {OUT_GENERAL}")
        return 0
    if sys.argv[1:] == ["rs"]:
        out = Parallel(n_jobs=2)(delayed(_task_rs)(*t) for t in PLAN_RS)
        forms = [f for fs in out for f in fs]
        with Store.open(OUT_RS, "w") as st:
            st.add_forms(forms, config_text="tests/supnorm/make_supnorm_forms.py rs")
        print(f"wrote {len(forms)} forms to {OUT_RS}")
        return 0
    levels = {int(a) for a in sys.argv[1:]} or {N for N, *_ in PLAN}
    tasks = [(N, s, R_max, nc) for N, R_max, nc in PLAN if N in levels
             for s in symmetry_classes(gamma0(N), ("even", "odd"))]
    out = Parallel(n_jobs=2)(delayed(_task)(*t) for t in tasks)
    forms = []
    for N, label, fs, dt in out:
        print(f"level {N:>2} {label:<14} {len(fs):>3} forms  {dt:7.1f} s")
        forms.extend(fs)
    forms.sort(key=lambda f: (f.level, f.R))
    OUT.parent.mkdir(parents=True, exist_ok=True)
    with Store.open(OUT, "w") as st:
        st.add_forms(forms, on_duplicate="error", config_text="tests/supnorm/make_supnorm_forms.py")
    print(f"wrote {len(forms)} forms to {OUT}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
