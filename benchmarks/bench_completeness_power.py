"""Power and false-alarm rates of the completeness tests, and the calibration of their noise.

Uses the complete eigenvalue lists in data/reference/ (project computations, see their
headers; made by tests/spectrum/make_spectrum_lists.py):

1. calibration: for each list the r.m.s. of the Weyl remainder S (sigma_S) and the standard
   deviation sigma_F of int_s^t S over intervals of several lengths; the models in
   maasscomp.spectrum.spectral_checks (remainder_scale, turing_sigma) are printed beside;
2. false alarms: reports over sliding ranges of each complete list (count below the range
   unknown, as at large R, or known for lists starting at R = 1): fraction of reports and of
   windows flagged, per test;
3. power, single deletion: every form (or a sample) is deleted in turn; the report range
   contains it with at least ``margin`` of list beyond it; detection = a window containing
   the form is flagged and the search-again intervals contain it;
4. power, close pair: both members of a same-class pair closer than 0.1 x the class mean
   spacing are deleted;
5. the coarse-grid scenario at R ~ 1000: every member of a same-parity pair closer than
   1e-3 but one is deleted in [999.5, 1000.5].

Run: ``python benchmarks/bench_completeness_power.py [--sample K] [--lists a,b,...]``.
Prints numbers only (no timing); CPU time of the run is printed at the end.
"""

from __future__ import annotations

import argparse
import csv
import math
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from maasscomp.spectrum.spectral_checks import _integrate_S, remainder_scale, turing_bound, turing_sigma
from maasscomp.spectrum.weyl import completeness, weyl_count

REF = Path(__file__).resolve().parents[1] / "data" / "reference"

# (file, level, range start is the bottom of the spectrum?)
LISTS = {
    "psl2z_R100": ("psl2z_R100_window.csv", 1),
    "psl2z_R300": ("psl2z_R300_window.csv", 1),
    "psl2z_R1000": ("psl2z_R1000_window.csv", 1),
    "level2": ("level2_small_R.csv", 2),
    "level3": ("level3_small_R.csv", 3),
    "level5": ("level5_small_R.csv", 5),
    "level6": ("level6_small_R.csv", 6),
    "level11": ("level11_small_R.csv", 11),
    "level4": ("weyl_level4_R12.csv", 4),
    "level8": ("weyl_level8_R12.csv", 8),
    "level9": ("weyl_level9_R12.csv", 9),
}


@dataclass
class Form:
    R: float
    label: str
    is_new: bool | None
    level: int

    @property
    def symmetry(self):
        return _Sym(self.label)

    multiplicity: int = 1


@dataclass
class _Sym:
    label: str


def load(name: str) -> tuple[int, list[Form], float, float]:
    fname, level = LISTS[name]
    lines = [ln for ln in open(REF / fname) if not ln.startswith("#")]
    rows = list(csv.DictReader(lines))
    forms = [Form(float(r["R"]), r["label"], {"1": True, "0": False}.get(r["is_new"]), level) for r in rows]
    lo = hi = None
    for ln in open(REF / fname):
        if ln.startswith("# PROJECT COMPUTATION"):
            # "... with LO <= R <= HI, ..."
            part = ln.split("with ")[1].split(",")[0]
            lo, hi = float(part.split("<=")[0]), float(part.split("<=")[2])
    return level, sorted(forms, key=lambda f: f.R), lo, hi


def calibration(level: int, R: np.ndarray, lo: float, hi: float, known: bool) -> dict:
    W = lambda x: weyl_count(level, x)  # noqa: E731
    t = np.linspace(lo, hi, int((hi - lo) / 0.005) + 1)
    base = 0.0 if known else 0.0
    F = _integrate_S(R, base, W, t)
    S = base + np.searchsorted(R, t, side="right") - W(t)
    if not known:
        F = F - (F[-1] / (hi - lo)) * (t - lo)
        S = S - np.mean(S)
    out = {"sigma_S": float(np.sqrt(np.mean(S**2)))}
    for L in (0.5, 1.0, 2.0, 4.0):
        k = int(round(L / 0.005))
        if k < t.size // 2:
            out[f"sdI_{L:g}"] = float(np.std(F[k:] - F[:-k]))
    out["max_drawdown"] = float(np.max(np.maximum.accumulate(F) - F))
    out["max_drawup"] = float(np.max(F - np.minimum.accumulate(F)))
    T = 0.5 * (lo + hi)
    out["model_sigma_S"] = float(remainder_scale(level, T))
    out["model_sigma_F"] = float(turing_sigma(level, T))
    return out


def reports(level, forms, lo, hi, length, known, margin):
    """Report ranges for the false-alarm count: from R = 1 upwards with the count below known
    (lists that start at R = 1), else sliding ranges [a, a + length] with half overlap and
    the count below unknown; the list beyond each range (up to ``margin``) is the look-ahead."""
    out = []
    if known:
        b = lo + length
        while b <= hi - margin + 1e-9:
            out.append((lo, b, 0))
            b += 0.5 * length
        return out
    a = lo
    while a + length <= hi - margin + 1e-9:
        out.append((a, a + length, None))
        a += 0.5 * length
    return out


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sample", type=int, default=60, help="deletions per list")
    ap.add_argument("--lists", default=",".join(LISTS))
    args = ap.parse_args()
    rng = np.random.default_rng(12345)
    c0 = time.process_time()
    totals = {"fa_reports": 0, "fa_flagged": 0, "single": 0, "single_hit": 0, "pair": 0, "pair_hit": 0}
    for name in args.lists.split(","):
        if not (REF / LISTS[name][0]).exists():
            print(f"{name}: list missing, skipped")
            continue
        level, forms, lo, hi = load(name)
        R = np.array([f.R for f in forms])
        known = lo <= 1.0
        cal = calibration(level, R, lo, hi, known)
        print(f"\n== {name}: level {level}, {len(forms)} forms in [{lo:g}, {hi:g}]")
        print("   calibration: " + ", ".join(f"{k} {v:.3f}" for k, v in cal.items()))
        # report length: a miss in the middle of a range with the count below unknown shows
        # as a peak of height length/4 in the integral, so ranges of about 5 B; look-ahead B
        B = float(turing_bound(level, 0.5 * (lo + hi)))
        margin = min(B, 0.2 * (hi - lo))
        length = min(hi - lo - margin, max(5.0 * B, 1.0))
        # ---- false alarms
        n_rep = n_flag = 0
        per_test = {"count": 0, "turing": 0, "spacing": 0}
        n_win = n_win_flag = 0
        for a, b, cb in reports(level, forms, lo, hi, length, known, margin):
            rep = completeness(level, forms, a, b, count_below=cb, complete_to=min(hi, b + margin))
            n_rep += 1
            n_flag += (not rep.is_complete)
            n_win += len(rep.windows)
            n_win_flag += len(rep.flagged)
            for w in rep.flagged:
                for r in w.reasons:
                    per_test[r] += 1
        print(f"   false alarms: {n_flag}/{n_rep} reports flagged, {n_win_flag}/{n_win} windows "
              f"(count {per_test['count']}, turing {per_test['turing']}, spacing {per_test['spacing']}); "
              f"report length {length:.3g}, look-ahead {margin:.3g}")
        totals["fa_reports"] += n_rep
        totals["fa_flagged"] += n_flag
        # ---- single deletions: the form lies in the middle of its report range
        idx = np.arange(len(forms))
        inner = idx[(R > lo + 0.5 * length) & (R < hi - 0.5 * length - margin)]
        if inner.size == 0:
            inner = idx[(R > lo + 0.25 * length) & (R < hi - 0.25 * length - margin)]
        pick = rng.choice(inner, size=min(args.sample, inner.size), replace=False) if inner.size else []
        hit = 0
        by_test = {"count": 0, "turing": 0, "spacing": 0}
        for k in pick:
            x = R[k]
            a = lo if known else max(lo, x - 0.5 * length)
            b = min(hi - margin, max(x + 0.5 * length, a + length))
            cb = 0 if known else None
            rest = forms[:k] + forms[k + 1:]
            rep = completeness(level, rest, a, b, count_below=cb, complete_to=min(hi, b + margin))
            ok = any(w.T_lo < x <= w.T_hi for w in rep.flagged) and any(p <= x <= q for p, q in rep.research_intervals())
            hit += ok
            for w in rep.flagged:
                if w.T_lo < x <= w.T_hi:
                    for r in w.reasons:
                        by_test[r] += 1
        if len(pick):
            print(f"   one form deleted: detected {hit}/{len(pick)} (window flagged and x inside the "
                  f"search-again intervals); by test: {by_test}")
        totals["single"] += len(pick)
        totals["single_hit"] += hit
        # ---- edge effect: a miss at distance d below the top of the list (no look-ahead)
        if hi - lo >= 8 * B:
            msg = []
            for d in (0.25 * B, 0.5 * B, B, 1.5 * B, 2 * B):
                cand = R[(R > lo + 4 * B) & (R < hi - d)]
                if cand.size == 0:
                    continue
                xs = rng.choice(cand, size=min(30, cand.size), replace=False)
                hits = 0
                for x in xs:
                    k = int(np.searchsorted(R, x))
                    rest = forms[:k] + forms[k + 1:]
                    a, b = x - 4 * B, x + d
                    rep = completeness(level, rest, a, b, count_below=None, complete_to=b)
                    hits += any(w.T_lo < x <= w.T_hi for w in rep.flagged)
                msg.append(f"d = {d:.2f}: {hits}/{len(xs)}")
            print("   miss at distance d below the top of the list (count below unknown): " + ", ".join(msg))
        # ---- close pairs
        pairs = []
        for lab in sorted({f.label for f in forms}):
            xs = np.array([f.R for f in forms if f.label == lab and f.is_new is not False])
            if xs.size < 3:
                continue
            sp = (xs[-1] - xs[0]) / (xs.size - 1)
            for i in np.nonzero(np.diff(xs) < 0.1 * sp)[0]:
                pairs.append((xs[i], xs[i + 1]))
        pairs = [p for p in pairs if lo + 0.25 * length < p[0] and p[1] < hi - 0.25 * length - margin]
        hitp = 0
        for p, q in pairs:
            a = lo if known else max(lo, p - 0.5 * length)
            b = min(hi - margin, max(q + 0.5 * length, a + length))
            cb = 0 if known else None
            rest = [f for f in forms if f.R not in (p, q)]
            rep = completeness(level, rest, a, b, count_below=cb, complete_to=min(hi, b + margin))
            ok = all(any(w.T_lo < x <= w.T_hi for w in rep.flagged) and
                     any(u <= x <= v for u, v in rep.research_intervals()) for x in (p, q))
            hitp += ok
        if pairs:
            print(f"   close pair deleted: detected {hitp}/{len(pairs)}")
        totals["pair"] += len(pairs)
        totals["pair_hit"] += hitp
        # ---- coarse-grid scenario near R = 1000
        if name == "psl2z_R1000":
            sel = [f for f in forms if 999.5 <= f.R <= 1000.5]
            drop = set()
            for lab in ("even", "odd"):
                xs = sorted(f.R for f in sel if f.label == lab)
                for u, v in zip(xs, xs[1:]):
                    if v - u < 1e-3:
                        drop.add(v)
            rest = [f for f in forms if f.R not in drop]
            rep = completeness(1, rest, 999.0, 1001.0, complete_to=min(hi, 1001.5))
            print(f"   coarse-grid scenario: {len(drop)} close-pair members deleted in [999.5, 1000.5]; "
                  f"flagged windows {[(round(w.T_lo, 3), round(w.T_hi, 3), w.reasons) for w in rep.flagged]}")
            rep0 = completeness(1, forms, 999.0, 1001.0, complete_to=min(hi, 1001.5))
            print(rep0.as_text(limitations=False))
    print("\n== totals: false alarms {}/{} reports; single deletions detected {}/{}; close pairs {}/{}".format(
        totals["fa_flagged"], totals["fa_reports"], totals["single_hit"], totals["single"],
        totals["pair_hit"], totals["pair"]))
    print(f"CPU time {time.process_time() - c0:.1f} s")


if __name__ == "__main__":
    main()
