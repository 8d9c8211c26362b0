"""Statistical completeness tests for lists of eigenvalues, and the old/new count identity.

Two tests with power beyond a window count (docs/theory.md §8.4-§8.5):

* **Turing-style integral test.**  With S(t) = N(t) - W(t) the Weyl remainder of the list,
  F(t) = int_{T_min}^t S(u) du stays within a narrow band for a complete list (the mean of S
  is zero and its oscillations average out), while every missed form adds a slope -1 to F
  from its position on, and every accepted false candidate a slope +1.  If
  |int_s^t S_true| <= B for all s < t (B: :func:`turing_bound`), the list's own F gives for
  the net number M(t) of missed forms below t (misses minus false entries)

      M(t) >= (-B - (F(t) - F(s))) / (t - s)   for s < t   (a lower bound, "missing"),
      M(s) <= ( B - (F(t) - F(s))) / (t - s)   for s < t   (an upper bound, "certified").

  This is Turing's argument for the zeros of zeta (A. M. Turing, Proc. LMS (3) 3 (1953)
  99-117), used for Maass forms by H. Then, arXiv:1212.3149 and made rigorous for PSL(2,Z)
  by A. R. Booker and D. J. Platt, arXiv:1710.00603.  The bound B used here is **not**
  rigorous: it is z times the standard deviation sigma_F of int_s^t S measured on complete
  lists computed by the project (benchmarks/bench_completeness_power.py), so a complete
  list exceeds it with a small, measured probability.

* **Small-gap (spacing) test.**  Within one symmetry class the eigenvalues of arithmetic
  groups show Poisson spacing statistics (E. Bogomolny, B. Georgeot, M.-J. Giannoni,
  C. Schmit, Phys. Rev. Lett. 69 (1992) 1477; R. Steil, DESY 94-028 (1994); from memory of
  these sources), so the number of gaps below a fraction f of the mean spacing among n gaps
  is Binomial(n, 1 - e^{-f}).  A search that misses members of close pairs leaves too few
  small gaps.  The test is heuristic (Poisson statistics is a conjecture) and, at level
  N > 1, applies to the newforms of one class only (oldforms repeat eigenvalues of lower
  levels exactly).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from maasscomp.errors import InputError

__all__ = [
    "Entries",
    "as_entries",
    "turing_sigma",
    "remainder_scale",
    "turing_bound",
    "TuringResult",
    "turing_test",
    "SpacingResult",
    "spacing_test",
    "CountIdentityRow",
    "count_identity",
]


# --------------------------------------------------------------------------- input


@dataclass(frozen=True)
class Entries:
    """A list of eigenvalues with multiplicity and (optional) class data, sorted by R.

    Attributes
    ----------
    R : ndarray
        One entry per form counted (an eigenvalue of multiplicity m appears m times).
    label : ndarray of object or None
        Symmetry class label per entry (None if plain numbers were given).
    is_new : ndarray of object or None
        True / False / None per entry.
    has_classes : bool
    """

    R: np.ndarray
    label: np.ndarray | None
    is_new: np.ndarray | None
    has_classes: bool


def as_entries(found: Sequence[Any] | np.ndarray) -> Entries:
    """Normalise ``found``: plain numbers (each counted once; repeat a value for its
    multiplicity) or Form-like objects with ``.R``, ``.symmetry`` (``.label``, ``.parity``),
    ``.is_new`` and ``.multiplicity``.

    Form-like objects of one class whose R agree to 1e-9 relative form one eigenspace; it
    counts max(number of objects, largest ``multiplicity``) forms, so that both one object
    per basis member (as the searches return) and one object per eigenspace are counted
    correctly.
    """
    items = list(found) if not isinstance(found, np.ndarray) else list(found.ravel())
    if not items or not hasattr(items[0], "R"):
        try:
            R = np.sort(np.asarray(items, dtype=float).ravel())
        except (TypeError, ValueError) as exc:
            raise InputError(f"found must hold numbers R or objects with an attribute R ({exc})") from None
        if R.size and (not np.all(np.isfinite(R)) or R[0] <= 0):
            raise InputError("found must contain finite positive spectral parameters R")
        return Entries(R, None, None, False)
    rows = []
    for f in items:
        if not hasattr(f, "R"):
            raise InputError(f"found mixes numbers and objects; {f!r} has no attribute R")
        R = float(f.R)
        if not (math.isfinite(R) and R > 0):
            raise InputError(f"found contains the spectral parameter R = {R!r}; use finite R > 0")
        sym = getattr(f, "symmetry", None)
        lab = getattr(sym, "label", None) if sym is not None else None
        if lab is None and sym is not None:
            lab = getattr(sym, "parity", None)
        m = int(getattr(f, "multiplicity", 1) or 1)
        rows.append((lab if lab is not None else "", R, getattr(f, "is_new", None), m))
    rows.sort(key=lambda r: (r[0], r[1]))
    out: list[tuple[float, str, Any]] = []
    i = 0
    while i < len(rows):
        j = i + 1
        while j < len(rows) and rows[j][0] == rows[i][0] and abs(rows[j][1] - rows[i][1]) <= 1e-9 * max(1.0, rows[i][1]):
            j += 1
        grp = rows[i:j]
        n = max(len(grp), max(g[3] for g in grp))
        news = {g[2] for g in grp}
        new = grp[0][2] if len(news) == 1 else None
        out += [(grp[0][1], grp[0][0], new)] * n
        i = j
    out.sort(key=lambda r: r[0])
    return Entries(
        np.array([r[0] for r in out], dtype=float),
        np.array([r[1] for r in out], dtype=object),
        np.array([r[2] for r in out], dtype=object),
        True,
    )


# --------------------------------------------------------------------------- Turing test

# sigma_F(T): standard deviation of int_s^t S(u) du over intervals longer than the
# correlation length of S, for complete lists computed by the project; measured by
# benchmarks/bench_completeness_power.py (docs/theory.md §8.4 and §8.6 for the data):
# sigma_F = (n_classes / 2)^(1/2) * max(a, c T^b) with n_classes = 2 * 2^omega(N) symmetry
# classes.  The floor a is the value measured at R <= 300 (0.18-0.24 at R ~ 100 and 300,
# below it at levels 4 and 8); the growth c T^b is the least-squares fit of log sigma_F
# against log T over the PSL(2,Z) lists at R ~ 100, 300 and 1000 (0.20, 0.21, 0.285).
_SIGMA_F_A = 0.2
_SIGMA_F_C = 0.0894
_SIGMA_F_B = 0.162


# sigma_S(T): r.m.s. of the Weyl remainder S of complete lists near T, fitted like sigma_F
# (same script and section): sigma_S = c * (n_classes / 2)^(1/2) * T^e.
_SIGMA_S_C = 0.114
_SIGMA_S_E = 0.415


def remainder_scale(level: int, T: float | np.ndarray) -> float | np.ndarray:
    """Model of the r.m.s. size of the Weyl remainder S(T) of a complete list near T
    (calibrated on complete lists computed by the project; see :func:`turing_sigma`)."""
    from maasscomp.groups import gamma0

    g = gamma0(level)
    n_cls = 2 * 2 ** len(g.primes)
    T = np.asarray(T, dtype=float)
    out = _SIGMA_S_C * math.sqrt(n_cls / 2.0) * np.maximum(T, 1.0) ** _SIGMA_S_E
    return float(out) if out.ndim == 0 else out


def turing_sigma(level: int, T: float | np.ndarray) -> float | np.ndarray:
    """Model of the standard deviation of int_s^t S(u) du for a complete list near T.

    Calibrated on complete lists computed by the project (see the module docstring); not a
    rigorous bound.
    """
    from maasscomp.groups import gamma0

    g = gamma0(level)
    n_cls = 2 * 2 ** len(g.primes)
    T = np.asarray(T, dtype=float)
    out = math.sqrt(n_cls / 2.0) * np.maximum(_SIGMA_F_A, _SIGMA_F_C * np.maximum(T, 1.0) ** _SIGMA_F_B)
    return float(out) if out.ndim == 0 else out


def turing_bound(level: int, T: float | np.ndarray, z: float = 4.0) -> float | np.ndarray:
    """B = z sigma_F(T): the bound on |int_s^t S(u) du| used by the Turing-style test.

    A complete list exceeds it with the probability that a (roughly Gaussian) quantity
    exceeds z standard deviations somewhere in the range; the measured false-alarm rates
    are stated in docs/theory.md §8.6.
    """
    return z * turing_sigma(level, T)


@dataclass(frozen=True)
class TuringResult:
    """Outcome of :func:`turing_test` on one range.

    Attributes
    ----------
    t : ndarray
        Evaluation points (grid, eigenvalues, window edges).
    F : ndarray
        int_{t[0]}^{t} S(u) du at ``t`` (S with the given count below the range, or with
        the mean offset removed when that count is unknown).
    bound : ndarray
        B at each point.
    missing : tuple of float
        Estimated positions of missed forms (change points of slope -1 in F).
    surplus : tuple of float
        Estimated positions of false entries (change points of slope +1).
    suspect : tuple of (float, float)
        Intervals to search again, one per missing or surplus position.
    offset_estimated : bool
        True when the count below the range was unknown and the mean of S was removed (then
        only changes inside the range are visible).
    """

    t: np.ndarray
    F: np.ndarray
    bound: np.ndarray
    missing: tuple[float, ...]
    surplus: tuple[float, ...]
    suspect: tuple[tuple[float, float], ...]
    offset_estimated: bool

    def F_at(self, x: float | np.ndarray) -> np.ndarray:
        return np.interp(x, self.t, self.F)

    def missing_lower_bound(self, T_hi: float) -> int:
        """Least net number of forms missing below T_hi implied by the band (>= 0)."""
        m = (self.t < T_hi - 1e-12)
        if not np.any(m):
            return 0
        Fh = float(self.F_at(T_hi))
        B = float(np.interp(T_hi, self.t, self.bound))
        d = T_hi - self.t[m]
        val = (-B - (Fh - self.F[m])) / d
        best = float(np.max(val))
        return max(0, int(math.ceil(best - 1e-9))) if best > 0 else 0

    def missing_upper_bound(self, T_hi: float) -> int | None:
        """Largest net number of forms that can be missing below T_hi (None without data
        beyond T_hi)."""
        m = self.t > T_hi + 1e-12
        if not np.any(m):
            return None
        Fh = float(self.F_at(T_hi))
        B = float(np.interp(T_hi, self.t, self.bound))
        d = self.t[m] - T_hi
        val = (B - (self.F[m] - Fh)) / d
        # only intervals long enough to say something (a bound below 1 needs d > B)
        return max(0, int(math.floor(float(np.min(val)) + 1e-9)))


def _integrate_S(R: np.ndarray, base: float, W_fun, t: np.ndarray) -> np.ndarray:
    """F(t) = int_{t0}^{t} (base + #{R_j <= u} - W(u)) du at sorted points t (t0 = t[0]).

    The step part is exact; W is integrated by the trapezoidal rule on a grid of step
    <= 0.02 (W'' is O(mu/6 + oscillations), so the error is below 1e-5 per unit length).
    """
    t0, t1 = float(t[0]), float(t[-1])
    n = max(2, int(math.ceil((t1 - t0) / 0.02)) + 1)
    g = np.linspace(t0, t1, n)
    Wg = np.asarray(W_fun(g), dtype=float)
    IW = np.concatenate([[0.0], np.cumsum(0.5 * (Wg[1:] + Wg[:-1]) * np.diff(g))])
    # second-order correction between grid points: interpolate the integral with W linear
    idx = np.clip(np.searchsorted(g, t, side="right") - 1, 0, n - 2)
    h = t - g[idx]
    slope = (Wg[idx + 1] - Wg[idx]) / (g[idx + 1] - g[idx])
    IWt = IW[idx] + Wg[idx] * h + 0.5 * slope * h * h
    Rin = R[(R > t0) & (R <= t1)]
    # int_{t0}^{t} #{t0 < R_j <= u} du = sum_j (t - R_j)_+
    cs = np.concatenate([[0.0], np.cumsum(Rin)])
    k = np.searchsorted(Rin, t, side="right")
    INt = k * t - cs[k]
    return base * (t - t0) + INt - IWt


def turing_test(
    level: int,
    R: np.ndarray,
    T_min: float,
    T_end: float,
    W_fun,
    *,
    count_below: float | None,
    z: float = 4.0,
    extra_points: np.ndarray | None = None,
) -> TuringResult:
    """Integral test on [T_min, T_end] (see the module docstring).

    Misses are located one at a time: while the largest drawdown or drawup of F exceeds B,
    the unit step of S (down for a missed form, up for a false entry) that fits S best in
    the least-squares sense is located (u minimising int_u^{T_end} (S + 1/2) for a miss
    with the count below the range known; with it unknown the base level is fitted as
    well), S is corrected, and the kind of step that shrinks the excess most is kept.  The suspect interval around each located change point is
    [u - B, u + B] (the location is uncertain by about B: F changes by B within that
    distance of the true position).
    """
    R = np.sort(np.asarray(R, dtype=float))
    R = R[(R > T_min) & (R <= T_end)]
    grid = np.linspace(T_min, T_end, max(2, int(math.ceil((T_end - T_min) / 0.02)) + 1))
    pts = [grid, R, np.nextafter(R, -np.inf)]
    if extra_points is not None:
        pts.append(np.asarray(extra_points, dtype=float))
    t = np.unique(np.clip(np.concatenate(pts), T_min, T_end))
    offset_est = count_below is None
    base = 0.0 if count_below is None else float(count_below)
    F = _integrate_S(R, base, W_fun, t)
    if offset_est:
        # remove the mean of S (the unknown count below the range): F's linear trend
        L = t[-1] - t[0]
        F = F - (F[-1] / L) * (t - t[0]) if L > 0 else F
    bound = np.asarray(turing_bound(level, t, z), dtype=float)
    work = F.copy()
    missing: list[float] = []
    surplus: list[float] = []
    # candidate change points: the midpoints of the gaps of the list (and the ends)
    cand = np.unique(np.concatenate([[T_min], 0.5 * (R[1:] + R[:-1]) if R.size > 1 else [], R, [T_end]]))
    cand = cand[(cand >= T_min) & (cand < T_end)]
    def excess_of(w: np.ndarray) -> tuple[float, float]:
        return (float(np.max(np.maximum.accumulate(w) - w - bound)),
                float(np.max(w - np.minimum.accumulate(w) - bound)))

    def correct(w: np.ndarray, sign: int) -> tuple[np.ndarray, float]:
        # C(u) = int_u^{T_end} (S + 1/2) (missing) or -int_u^{T_end} (S - 1/2) (surplus)
        Fu = np.interp(cand, t, w)
        tail = w[-1] - Fu
        length = T_end - cand
        # least-squares fit of a unit step at u; with the offset unknown it is fitted too,
        # which turns the drift term length/2 into length (1 - length/L)/2
        half = 0.5 * length * (1.0 - length / (t[-1] - t[0])) if offset_est else 0.5 * length
        C = tail + half if sign < 0 else -(tail - half)
        u = float(cand[int(np.argmin(C))])
        step = np.where(t > u, t - u, 0.0)
        trial = w + step if sign < 0 else w - step
        if offset_est:
            L = t[-1] - t[0]
            trial = trial - (trial[-1] / L) * (t - t[0])
        return trial, u

    excess = max(excess_of(work))
    for _ in range(R.size + 2):
        if excess <= 0:
            break
        # try both kinds of change point; keep the one that shrinks the excess most (with
        # the offset unknown a miss shows as a peak of F with a drawup before it and a
        # drawdown after it, so the larger of the two does not tell the kind)
        best = None
        for sign in (-1, +1):
            trial, u = correct(work, sign)
            ex = max(excess_of(trial))
            if best is None or ex < best[0]:
                best = (ex, sign, u, trial)
        ex, sign, u, trial = best
        if ex >= excess:
            break  # no single change point helps: noise, not a step
        (missing if sign < 0 else surplus).append(u)
        work, excess = trial, ex
    suspect = []
    for u in missing + surplus:
        Bu = float(np.interp(u, t, bound))
        suspect.append((max(T_min, u - Bu), min(T_end, u + Bu)))
    return TuringResult(t, F, bound, tuple(sorted(missing)), tuple(sorted(surplus)),
                        tuple(sorted(suspect)), offset_est)


# --------------------------------------------------------------------------- spacing test


@dataclass(frozen=True)
class SpacingResult:
    """Small gaps in one window (see :func:`spacing_test`).

    Attributes
    ----------
    n_gaps : int
        Gaps between consecutive newforms of one class inside the window (all classes).
    small : int
        Gaps below ``fraction`` times the local mean spacing of their class.
    expected : float
        n_gaps (1 - e^{-fraction}) (Poisson).
    p_value : float
        P(Binomial(n_gaps, 1 - e^{-fraction}) <= small).
    applicable : bool
        False without class labels at level N > 1 (then the other fields are 0 / 1.0).
    """

    n_gaps: int
    small: int
    expected: float
    p_value: float
    applicable: bool


def _binom_cdf(k: int, n: int, p: float) -> float:
    from scipy.stats import binom

    return float(binom.cdf(k, n, p))


def spacing_test(level: int, entries: Entries, lo: float, hi: float, fraction: float,
                 density_span: tuple[float, float]) -> SpacingResult:
    """Count the small same-class gaps with both ends in (lo, hi].

    The mean spacing of a class is its number of members in ``density_span`` divided by
    the span's length (empirical, so the even/odd and Atkin-Lehner splits need no model).
    At level 1 without labels the two parities are pooled (a superposition of independent
    Poisson sequences is Poisson); at level N > 1 only newforms (is_new True) with labels
    are used.
    """
    R = entries.R
    if entries.has_classes:
        keep = np.ones(R.size, dtype=bool)
        if level > 1:
            keep = np.array([x is True for x in entries.is_new], dtype=bool)
        labels = entries.label
    elif level == 1:
        keep = np.ones(R.size, dtype=bool)
        labels = np.array(["all"] * R.size, dtype=object)
    else:
        return SpacingResult(0, 0, 0.0, 1.0, False)
    a, b = density_span
    n_gaps = 0
    small = 0
    for lab in sorted(set(labels[keep])):
        sel = keep & (labels == lab)
        x = np.unique(R[sel])  # exact repeats (multiplicity) are not gaps
        if x.size < 2:
            continue
        dens = np.sum((x > a) & (x <= b)) / max(b - a, 1e-300)
        if dens <= 0:
            continue
        gaps = np.diff(x)
        inside = (x[:-1] > lo) & (x[1:] <= hi)
        n_gaps += int(np.sum(inside))
        small += int(np.sum(inside & (gaps * dens < fraction)))
    p = 1.0 - math.exp(-fraction)
    exp_small = n_gaps * p
    pv = _binom_cdf(small, n_gaps, p) if n_gaps else 1.0
    return SpacingResult(n_gaps, small, exp_small, pv, True)


# --------------------------------------------------------------------------- count identity


@dataclass(frozen=True)
class CountIdentityRow:
    """One divisor M of the level in :func:`count_identity`.

    Attributes
    ----------
    M : int
    new_at_M : int or None
        Newforms of level M with R <= T (None if not supplied).
    weight : int
        sigma_0(N/M), the number of oldforms at level N per newform of level M.
    old_at_N : int
        Oldforms at level N stated to come from level M (``extra["old_from_level"]``),
        or, without that information, None.
    predicted_old : int or None
        weight * new_at_M for M < N.
    ok : bool or None
        old_at_N == predicted_old where both are known.
    """

    M: int
    new_at_M: int | None
    weight: int
    old_at_N: int | None
    predicted_old: int | None
    ok: bool | None


def count_identity(level: int, forms: Sequence[Any], T: float) -> tuple[list[CountIdentityRow], dict]:
    """Check N_N(T) = sum_{M | N} sigma_0(N/M) N_M^new(T) (Atkin & Lehner, Math. Ann. 185
    (1970) 134-160: a newform g of level M gives the sigma_0(N/M) oldforms g(dz), d | N/M,
    at level N).

    Parameters
    ----------
    level : int
        N.
    forms : sequence of Form-like
        Forms with ``.level``, ``.R``, ``.is_new`` and optionally ``extra["old_from_level"]``;
        forms of level N and of the divisor levels (their newforms) may be mixed.
    T : float
        Count forms with R <= T.

    Returns
    -------
    rows : list of CountIdentityRow
        One per divisor M of N.
    summary : dict
        ``total_N`` (forms of level N with R <= T), ``predicted_total``
        (sum_M sigma_0(N/M) N_M^new where every divisor level's newforms are supplied, else
        None), ``ok`` (equality, or None), ``unclassified`` (level-N forms with is_new None).
    """
    from maasscomp.groups import divisors

    N = int(level)
    if N < 1:
        raise InputError(f"level {level!r} is not allowed; use a positive integer")
    divs = divisors(N)
    by_level: dict[int, list] = {}
    for f in forms:
        lv = int(getattr(f, "level"))
        if float(f.R) <= T:
            by_level.setdefault(lv, []).append(f)
    atN = by_level.get(N, [])
    total_N = len(atN)  # one object per form (basis member), as the searches return them
    new_counts: dict[int, int | None] = {}
    for M in divs:
        fs = by_level.get(M)
        if M == N:
            new_counts[M] = sum(1 for f in atN if f.is_new is True)
        elif fs is None:
            new_counts[M] = None
        else:
            new_counts[M] = sum(1 for f in fs if f.is_new is True)
    old_from: dict[int, int] = {}
    have_origin = any(isinstance(getattr(f, "extra", None), dict) and "old_from_level" in f.extra for f in atN)
    for f in atN:
        if f.is_new is False and isinstance(getattr(f, "extra", None), dict):
            o = f.extra.get("old_from_level")
            if o is not None:
                old_from[int(o)] = old_from.get(int(o), 0) + 1
    rows = []
    for M in divs:
        w = len(divisors(N // M))
        nm = new_counts[M]
        if M == N:
            rows.append(CountIdentityRow(M, nm, 1, None, None, None))
            continue
        pred = w * nm if nm is not None else None
        old = old_from.get(M, 0) if have_origin else None
        ok = (old == pred) if (old is not None and pred is not None) else None
        rows.append(CountIdentityRow(M, nm, w, old, pred, ok))
    if all(new_counts[M] is not None for M in divs):
        pred_total = sum(len(divisors(N // M)) * new_counts[M] for M in divs)  # type: ignore[operator]
        ok_total: bool | None = pred_total == total_N
    else:
        pred_total, ok_total = None, None
    summary = {"total_N": total_N, "predicted_total": pred_total, "ok": ok_total,
               "unclassified": sum(1 for f in atN if f.is_new is None)}
    return rows, summary
