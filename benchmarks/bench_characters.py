"""All Maass forms with R <= R_max for every even character modulo N <= N_max.

Goal: every form with R <= 10 for every even character mod N <= 20. Of each pair chi,
conj(chi) one is searched and the other derived by conjugation (docs/theory.md §12
§3); real characters are searched on their own. One task per level and character (both
parities), the most expensive first, on two worker processes. Printed per task: forms (with
multiplicity, derived conjugates included), CPU and wall seconds, CPU seconds per form,
singular cusps; as a reference measured in the same run, the trivial character of the same
level through the usual real system (Atkin--Lehner at squarefree levels, multi-cusp
elsewhere), with the ratio of CPU per form.

Run: ``python benchmarks/bench_characters.py [N_max] [R_max] [N_min]`` (defaults 20, 10, 1).
"""

from __future__ import annotations

import os
import sys
import time

from joblib import Parallel, delayed

R_MIN = 1.0


def task(N: int, label: str, R_max: float):
    os.environ["OPENBLAS_NUM_THREADS"] = "1"
    from maasscomp.groups import DirichletCharacter, gamma0
    from maasscomp.groups import characters as C
    from maasscomp.spectrum.charforms import conjugate_form
    from maasscomp.spectrum.search import search_forms

    G = gamma0(N)
    chi = DirichletCharacter.from_label(label)
    t, c = time.perf_counter(), time.process_time()
    res = search_forms(G, R_MIN, R_max, character=chi)
    forms = list(res.forms)
    derived = 0
    if not chi.is_trivial and not C.is_real(chi):
        derived = len([conjugate_form(G, f) for f in res.forms])
    bad = sum(1 for f in forms if not f.hecke_residual <= 1e-6)
    sing = ",".join(forms[0].extra["singular_cusps"]) if forms and "singular_cusps" in forms[0].extra else "all"
    return (N, label, chi.conductor, len(forms), derived, len(res.rejected), bad, sing,
            time.perf_counter() - t, time.process_time() - c)


def main() -> None:
    from maasscomp.groups import characters as C
    from maasscomp.groups import gamma0

    N_max = int(sys.argv[1]) if len(sys.argv) > 1 else 20
    R_max = float(sys.argv[2]) if len(sys.argv) > 2 else 10.0
    N_min = int(sys.argv[3]) if len(sys.argv) > 3 else 1
    jobs = []
    for N in range(N_min, N_max + 1):
        jobs.append((N, C.DirichletCharacter.trivial(N).label))
        for chi in C.even_characters(N):
            if chi.is_trivial:
                continue
            cb = C.conjugate(chi)
            if cb != chi and cb.exponents < chi.exponents:
                continue  # derived from its conjugate
            jobs.append((N, chi.label))
    # the complex systems of nontrivial characters first, biggest levels first
    jobs.sort(key=lambda j: (C.DirichletCharacter.from_label(j[1]).is_trivial, -gamma0(j[0]).index))
    print(f"characters: {len(jobs)} searches (levels {N_min}..{N_max}, R in [{R_MIN}, {R_max}]), 2 workers",
          flush=True)
    t0, c0 = time.perf_counter(), time.process_time()
    head = (f"{'N':>3} {'character':<12} {'cond':>4} {'forms':>5} {'+conj':>5} {'rej':>4} {'bad':>4} "
            f"{'singular cusps':<24} {'wall s':>8} {'CPU s':>8} {'CPU/form':>9}")
    print("as they finish:\n" + head, flush=True)
    out = []
    for r in Parallel(n_jobs=2, verbose=0, return_as="generator_unordered")(
            delayed(task)(N, lab, R_max) for N, lab in jobs):
        out.append(r)
        N, lab, cond, nf, nd, rej, bad, sing, w, c = r
        print(f"{N:>3} {lab:<12} {cond:>4} {nf:>5} {nd:>5} {rej:>4} {bad:>4} {sing:<24} {w:>8.1f} {c:>8.1f} "
              f"{c / max(nf, 1):>9.2f}", flush=True)
    wall = time.perf_counter() - t0
    out.sort(key=lambda r: (r[0], r[1]))
    print("\nsorted:\n" + head)
    triv = {}
    tot_forms = tot_cpu = 0
    for N, lab, cond, nf, nd, rej, bad, sing, w, c in out:
        per = c / max(nf, 1)
        if cond == 1:
            triv[N] = per
        tot_forms += nf + nd
        tot_cpu += c
        print(f"{N:>3} {lab:<12} {cond:>4} {nf:>5} {nd:>5} {rej:>4} {bad:>4} {sing:<24} {w:>8.1f} {c:>8.1f} "
              f"{per:>9.2f}")
    print(f"\ntotal: {tot_forms} forms (derived conjugates included), {tot_cpu:.0f} s CPU in tasks, "
          f"{wall:.0f} s wall on 2 workers ({time.process_time() - c0:.1f} s CPU in the parent)")
    print("CPU per form, nontrivial character / trivial character of the same level (reference):")
    for N, lab, cond, nf, nd, rej, bad, sing, w, c in out:
        if cond > 1 and N in triv and nf:
            print(f"  N={N:>2} {lab:<12} {c / nf / triv[N]:6.2f}")


if __name__ == "__main__":
    main()
