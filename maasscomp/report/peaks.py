"""Peak statistics across scanned forms: where the maximum of |f|/||f|| lies, and why.

Input: :class:`maasscomp.supnorm.scan.ScanResult` objects (one per form). Regions, predictions
and constants are those of the scanner (docs/theory.md §11):

* per form and region: the peak, its location relative to the transition height Y_T, the grid
  guarantee, the region's area and L2 mass, the prediction (first term for transition zones,
  random-wave median maximum for Omega and the intermediate region) and the exponent
  log(peak) / log(lambda);
* across forms: the share of global maxima by region per band of R and per level
  (:func:`region_share`), least-squares fits of log(peak) against log(lambda) with 95%
  confidence intervals (:func:`peak_fits`), the distribution of L(1, sym^2 f)
  (:func:`sym2_summary`), the mean of |f|^2 over Omega against 1/vol (:func:`equidistribution`),
  the fraction of forms whose transition peak beats the bulk per band, with Wilson intervals,
  and its extrapolation (:func:`transition_beats_bulk`, :func:`extrapolate_beats_bulk`).

Bands of R are half-decades centred on powers of sqrt(10): [10^{(2k-1)/4}, 10^{(2k+1)/4}), so
R = 10, 31.6, 100, 316, 1000, 3162, 10^4 each sit in the middle of their own band.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable, Sequence

import numpy as np

from maasscomp.report.tables import Column
from maasscomp.supnorm.scan import ScanResult

KINDS = ("transition", "omega", "intermediate")

#: Columns of the per-form table (``peaks.csv``).
FORM_COLUMNS: list[Column] = [
    Column("key", "store key of the form"),
    Column("level", "N"),
    Column("symmetry", "parity and Atkin-Lehner signs"),
    Column("R", "spectral parameter (lambda = 1/4 + R^2)", digits=10),
    Column("new", "newform (yes), oldform (no), unknown (empty)"),
    Column("n0", "first non-zero frequency at the cusp of the largest transition peak"),
    Column("overlap", "the transition zone would reach below Y_omega (it starts at Y_omega instead)"),
    Column("global_region", "region holding the global maximum of |f|/||f||"),
    Column("global_peak", "the global maximum of |f|/||f||", digits=5),
    Column("global_y_rel", "its height in its cusp's coordinate divided by Y_T", digits=3),
    Column("transition_peak", "largest maximum over the transition zones", digits=5),
    Column("transition_pred", "first-term prediction |c(n0)| max|A_n0| / ||F|| for that zone", digits=5),
    Column("transition_rest", "bound for |f - first term| / ||f|| on that zone", digits=2),
    Column("transition_y_rel", "height of the transition peak / Y_T", digits=4),
    Column("omega_peak", "maximum on the fixed compact set Omega", digits=5),
    Column("omega_rw", "random-wave median maximum for Omega's area", digits=4),
    Column("omega_y", "height of the Omega peak (highest representative)", digits=4),
    Column("intermediate_peak", "largest maximum over the intermediate regions (empty: none)", digits=5),
    Column("intermediate_rw", "random-wave median maximum for that region's area", digits=4),
    Column("intermediate_y_rel", "height of that peak / Y_T", digits=4),
    Column("bulk_peak", "maximum outside the transition zones", digits=5),
    Column("bulk_rw", "random-wave median maximum for the bulk's area", digits=4),
    Column("transition_over_bulk", "transition peak / bulk peak", digits=4),
    Column("exp_transition", "log(transition peak) / log(lambda)", digits=4),
    Column("exp_omega", "log(Omega peak) / log(lambda)", digits=4),
    Column("exp_intermediate", "log(intermediate peak) / log(lambda)", digits=4),
    Column("omega_mean_sq_vol", "mean of |f|^2/||f||^2 over Omega times vol (equidistribution: 1)", digits=5),
    Column("omega_var_vol", "variance of f/||f|| on Omega times vol (random wave model: 1)", digits=4),
    Column("omega_skew", "skewness of f/||f|| on Omega (Gaussian: 0)", digits=3),
    Column("omega_exkurt", "excess kurtosis of f/||f|| on Omega (Gaussian: 0)", digits=3),
    Column("L_sym2", "L(1, sym^2 f) from the norm (Rankin-Selberg; newforms of squarefree level)", digits=8),
    Column("L_sym2_coeffs", "L(1, sym^2 f) from the coefficients (approximate functional equation)", digits=8),
    Column("grid_bound_rel", "largest relative grid bound over the regions (sup <= value (1 + bound))", digits=2),
    Column("seconds", "scan time", digits=3),
]

#: Columns of the per-region table (``regions.csv``).
REGION_COLUMNS: list[Column] = [
    Column("key", "store key of the form"),
    Column("level", "N"),
    Column("R", "spectral parameter", digits=10),
    Column("region", "omega, transition <j> or intermediate <j>"),
    Column("kind", "omega, transition or intermediate"),
    Column("cusp", "cusp of the coordinate of (x, y)"),
    Column("peak", "max |f|/||f|| on the region (empty: the region is empty)", digits=6),
    Column("grid_bound", "sup <= peak + grid_bound", digits=2),
    Column("x", "location in the cusp's coordinate", digits=6),
    Column("y", "height in the cusp's coordinate", digits=6),
    Column("z_re", "location in the upper half plane", digits=6),
    Column("z_im", "", digits=6),
    Column("y_rel", "y / Y_T of that cusp", digits=4),
    Column("Y_T", "transition height of that cusp", digits=6),
    Column("area", "hyperbolic area of the region", digits=5),
    Column("mass", "integral of |f|^2/||f||^2 over the region", digits=5),
    Column("prediction", "first-term prediction (transition) or random-wave median maximum", digits=5),
    Column("exponent", "log(peak) / log(lambda)", digits=4),
]


def _nan(v) -> float:
    return math.nan if v is None else float(v)


def form_rows(results: Iterable[ScanResult]) -> list[dict[str, Any]]:
    """One row per scan with the keys of :data:`FORM_COLUMNS`."""
    rows = []
    for r in results:
        ll = math.log(r.eigenvalue)
        t = r.transition
        om = r.omega
        inter = r.best("intermediate")
        jt = t.cusp
        rows.append({
            "key": r.form_key, "level": r.level, "symmetry": r.symmetry, "R": r.R,
            "new": {1: True, 0: False}.get(r.is_new), "n0": r.n0[jt], "overlap": r.overlap,
            "global_region": r.global_region, "global_peak": r.global_value, "global_y_rel": r.global_y_rel,
            "transition_peak": t.value, "transition_pred": t.prediction, "transition_rest": r.rest_bound[jt],
            "transition_y_rel": t.y_rel,
            "omega_peak": om.value, "omega_rw": om.prediction, "omega_y": om.y,
            "intermediate_peak": inter.value if inter else math.nan,
            "intermediate_rw": inter.prediction if inter else math.nan,
            "intermediate_y_rel": inter.y_rel if inter else math.nan,
            "bulk_peak": r.bulk_value, "bulk_rw": r.bulk_prediction, "transition_over_bulk": t.value / r.bulk_value,
            "exp_transition": math.log(t.value) / ll, "exp_omega": math.log(om.value) / ll,
            "exp_intermediate": math.log(inter.value) / ll if inter else math.nan,
            "omega_mean_sq_vol": r.omega_mean_sq * r.volume, "omega_var_vol": r.omega_var * r.volume,
            "omega_skew": r.omega_skew, "omega_exkurt": r.omega_exkurt,
            "L_sym2": r.sym2_L1_norm, "L_sym2_coeffs": r.sym2_L1_coeffs,
            "grid_bound_rel": r.grid_bound_rel, "seconds": r.elapsed,
        })
    return rows


def region_rows(results: Iterable[ScanResult]) -> list[dict[str, Any]]:
    """One row per scan and region with the keys of :data:`REGION_COLUMNS`."""
    rows = []
    for r in results:
        ll = math.log(r.eigenvalue)
        for p in r.regions:
            rows.append({
                "key": r.form_key, "level": r.level, "R": r.R, "region": p.region, "kind": p.kind,
                "cusp": p.cusp, "peak": p.value, "grid_bound": p.grid_bound, "x": p.x, "y": p.y,
                "z_re": p.z_re, "z_im": p.z_im, "y_rel": p.y_rel, "Y_T": r.Y_T[p.cusp], "area": p.area,
                "mass": p.mass, "prediction": p.prediction,
                "exponent": math.log(p.value) / ll if not p.empty and p.value > 0 else math.nan,
            })
    return rows


# ------------------------------------------------------------------------------------------
# bands of R


def band_of(R: float) -> tuple[float, float]:
    """The half-decade [10^{(2k-1)/4}, 10^{(2k+1)/4}) holding R (see module notes)."""
    k = math.floor(2.0 * math.log10(R) + 0.5)
    return 10.0 ** ((2 * k - 1) / 4.0), 10.0 ** ((2 * k + 1) / 4.0)


def band_label(band: tuple[float, float]) -> str:
    """'562–1780': the band's ends to 3 significant digits."""
    return "–".join(f"{float(f'{v:.3g}'):g}" for v in band)


def bands(results: Sequence[ScanResult]) -> list[tuple[float, float]]:
    return sorted({band_of(r.R) for r in results})


# ------------------------------------------------------------------------------------------
# shares and fractions


def wilson(k: int, n: int, z: float = 1.959963984540054) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion k/n (95% by default; Wilson, JASA 22
    (1927) 209-212)."""
    if n == 0:
        return math.nan, math.nan
    p = k / n
    den = 1 + z * z / n
    c = (p + z * z / (2 * n)) / den
    h = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / den
    return max(0.0, c - h), min(1.0, c + h)


def region_share(results: Sequence[ScanResult], by: str = "band") -> list[dict[str, Any]]:
    """Share of global maxima by region kind, per band of R (``by="band"``) or level.

    Columns: group, forms, marked (transition zone cut at Y_omega), the count and share of each
    region kind among all forms, and the same shares among the unmarked forms.
    """
    groups: dict[Any, list[ScanResult]] = {}
    for r in results:
        g = band_of(r.R) if by == "band" else r.level
        groups.setdefault(g, []).append(r)
    rows = []
    for g in sorted(groups):
        rs = groups[g]
        un = [r for r in rs if not r.overlap]
        row: dict[str, Any] = {"group": band_label(g) if by == "band" else int(g), "forms": len(rs),
                               "marked": len(rs) - len(un)}
        if by == "band":
            row["R_median"] = float(np.median([r.R for r in rs]))
        for kind in KINDS:
            k = sum(r.global_kind == kind for r in rs)
            row[kind] = k
            row[f"{kind}_share"] = k / len(rs)
            row[f"{kind}_share_unmarked"] = (sum(r.global_kind == kind for r in un) / len(un)) if un else math.nan
        rows.append(row)
    return rows


SHARE_COLUMNS = [Column("group"), Column("forms"), Column("marked", "forms whose transition zone starts at Y_omega"),
                 Column("transition"), Column("omega"), Column("intermediate"),
                 Column("transition_share", fixed=2), Column("omega_share", fixed=2),
                 Column("intermediate_share", fixed=2)]


def transition_beats_bulk(results: Sequence[ScanResult]) -> list[dict[str, Any]]:
    """Per band of R: how many forms have a transition peak above their bulk peak, with the
    Wilson 95% interval of the fraction (any level; forms whose transition zone is cut at
    Y_omega are left out and counted in ``marked``)."""
    rows = []
    for b in bands(results):
        allb = [r for r in results if band_of(r.R) == b]
        rs = [r for r in allb if not r.overlap]
        k = sum(r.transition.value > r.bulk_value for r in rs)
        lo, hi = wilson(k, len(rs))
        rows.append({"band": band_label(b), "R_median": float(np.median([r.R for r in allb])), "forms": len(rs),
                     "marked": len(allb) - len(rs), "beats": k, "fraction": k / len(rs) if rs else math.nan,
                     "ci_lo": lo, "ci_hi": hi,
                     "median_ratio": float(np.median([r.transition.value / r.bulk_value for r in rs])) if rs
                     else math.nan})
    return rows


BEATS_COLUMNS = [Column("band", "band of R"), Column("R_median", digits=5),
                 Column("forms", "forms whose transition zone starts at Y_T"),
                 Column("marked", "forms left out: transition zone cut at Y_omega"),
                 Column("beats", "forms whose transition peak exceeds their bulk peak"),
                 Column("fraction", fixed=2), Column("ci_lo", "Wilson 95% interval", fixed=2), Column("ci_hi", fixed=2),
                 Column("median_ratio", "median of transition peak / bulk peak", digits=3)]


# ------------------------------------------------------------------------------------------
# fits


@dataclass(frozen=True)
class PowerFit:
    """log(peak) = a + b log(lambda) by least squares, with the 95% interval of b."""

    what: str
    forms: int
    slope: float
    slope_lo: float
    slope_hi: float
    intercept: float
    rms: float
    lam_min: float
    lam_max: float
    expected: str


def _t95(dof: int) -> float:
    import scipy.stats

    return float(scipy.stats.t.ppf(0.975, dof)) if dof > 0 else math.nan


def power_fit(what: str, lam: np.ndarray, peak: np.ndarray, expected: str = "") -> PowerFit | None:
    """Fit log(peak) against log(lambda); None with fewer than 3 points or one distinct lambda."""
    ok = np.isfinite(lam) & np.isfinite(peak) & (peak > 0)
    x, yv = np.log(lam[ok]), np.log(peak[ok])
    if x.size < 3 or np.ptp(x) < 1e-9:
        return None
    A = np.column_stack([np.ones_like(x), x])
    coef, *_ = np.linalg.lstsq(A, yv, rcond=None)
    res = yv - A @ coef
    dof = x.size - 2
    s2 = float(res @ res) / dof if dof > 0 else math.nan
    se_b = math.sqrt(s2 / float(np.sum((x - x.mean()) ** 2))) if dof > 0 else math.nan
    t = _t95(dof)
    return PowerFit(what=what, forms=int(x.size), slope=float(coef[1]), slope_lo=float(coef[1] - t * se_b),
                    slope_hi=float(coef[1] + t * se_b), intercept=float(coef[0]), rms=math.sqrt(s2),
                    lam_min=float(np.exp(x.min())), lam_max=float(np.exp(x.max())), expected=expected)


def peak_fits(results: Sequence[ScanResult]) -> list[PowerFit]:
    """Fits of each region's peak against lambda over the forms without overlap.

    * transition peak (theory: slope 1/12 times the spread of L(1, sym^2 f));
    * transition peak times sqrt(N L(1, sym^2 f)) (theory: 2 max|A_1| ~ 2 c R^{1/6}, slope 1/12);
    * Omega, intermediate and bulk peaks (random-wave model: sqrt(log lambda) growth, i.e. a
      slope that tends to 0; the sup-norm conjecture on compact sets: lambda^eps).
    """
    rs = [r for r in results if not r.overlap]
    lam = np.array([r.eigenvalue for r in rs])
    out = []
    t = np.array([r.transition.value for r in rs])
    out.append(power_fit("transition peak", lam, t, "1/12 up to the spread of L(1, sym^2 f)"))
    L = np.array([r.sym2_L1_norm * r.level for r in rs])
    out.append(power_fit("transition peak x sqrt(N L(1, sym^2 f))", lam, t * np.sqrt(L),
                         "1/12 as lambda -> oo (first term; its R^(-2/3) correction raises the slope at small lambda)"))
    out.append(power_fit("Omega peak", lam, np.array([r.omega.value for r in rs]), "-> 0 (random waves)"))
    inter = np.array([r.best("intermediate").value if r.best("intermediate") else math.nan for r in rs])
    out.append(power_fit("intermediate peak", lam, inter, "-> 0 (random waves)"))
    out.append(power_fit("bulk peak", lam, np.array([r.bulk_value for r in rs]), "-> 0 (random waves)"))
    return [f for f in out if f is not None]


FIT_COLUMNS = [Column("what"), Column("forms"), Column("slope", "exponent b in peak ~ lambda^b", digits=3),
               Column("slope_lo", "95% interval", digits=3), Column("slope_hi", digits=3),
               Column("rms", "rms residual of log(peak)", digits=2), Column("lam_min", digits=3),
               Column("lam_max", digits=3), Column("expected", "theory")]


def fit_rows(fits: Sequence[PowerFit]) -> list[dict[str, Any]]:
    from dataclasses import asdict

    return [asdict(f) for f in fits]


# ------------------------------------------------------------------------------------------
# L(1, sym^2 f) and equidistribution


def sym2_summary(results: Sequence[ScanResult]) -> dict[str, Any]:
    """Distribution of L(1, sym^2 f) (from the norm) and its agreement with the coefficients."""
    L = np.array([r.sym2_L1_norm for r in results if math.isfinite(r.sym2_L1_norm)])
    both = [(r.sym2_L1_norm, r.sym2_L1_coeffs, r.sym2_L1_coeffs_error) for r in results
            if math.isfinite(r.sym2_L1_norm) and math.isfinite(r.sym2_L1_coeffs)]
    out: dict[str, Any] = {"forms": int(L.size)}
    if L.size:
        q = np.quantile(L, [0.05, 0.25, 0.5, 0.75, 0.95])
        out.update(mean=float(L.mean()), sd=float(L.std(ddof=1)) if L.size > 1 else math.nan, min=float(L.min()),
                   max=float(L.max()), q05=float(q[0]), q25=float(q[1]), median=float(q[2]), q75=float(q[3]),
                   q95=float(q[4]))
    out["checked"] = len(both)
    out["max_rel_diff"] = max((abs(a - b) / b for a, b, _ in both), default=math.nan)
    return out


def equidistribution(results: Sequence[ScanResult]) -> list[dict[str, Any]]:
    """Mean of |f|^2/||f||^2 over Omega times vol, per band of R: mean, spread, range over the
    forms (quantum unique ergodicity predicts 1 in the limit; no finite-lambda bound is claimed)."""
    rows = []
    for b in bands(results):
        v = np.array([r.omega_mean_sq * r.volume for r in results if band_of(r.R) == b])
        rows.append({"band": band_label(b), "forms": int(v.size), "mean": float(v.mean()),
                     "sd": float(v.std(ddof=1)) if v.size > 1 else math.nan, "min": float(v.min()),
                     "max": float(v.max())})
    return rows


EQUI_COLUMNS = [Column("band"), Column("forms"), Column("mean", "mean of vol x (mean of |f|^2/||f||^2 on Omega)", digits=4),
                Column("sd", "spread over the forms", digits=2), Column("min", digits=4), Column("max", digits=4)]


# ------------------------------------------------------------------------------------------
# extrapolation of the fraction "transition beats bulk"


def kt_profile_max(R: float) -> float:
    """max_y sqrt(y) |Kt_R(2 pi y)|: exact (special.airy_peak) for R <= 10^4; beyond, the Airy
    leading term c R^{1/6} (c = sqrt(pi) 2^{-1/6} Ai(a'_1), docs/theory.md §3.3) times
    (1 - kappa R^{-2/3}) with kappa matched to the exact value at R = 10^4."""
    from maasscomp.special import R_MAX, airy_peak

    c = math.sqrt(math.pi) * 2 ** (-1 / 6) * 0.53565665601569986114  # Ai(a'_1), DLMF Table 9.9.1
    if R <= R_MAX:
        return float(airy_peak(R)[1])
    v = float(airy_peak(R_MAX)[1])
    kappa = (1.0 - v / (c * R_MAX ** (1 / 6))) * R_MAX ** (2 / 3)
    return c * R ** (1 / 6) * (1.0 - kappa * R ** (-2 / 3))


@dataclass(frozen=True)
class BeatsExtrapolation:
    """Model of P(transition peak > bulk peak) at level 1 and its bootstrap interval.

    The transition peak is the first-term prediction 2 max|A_1| sqrt((1 + e^{-2 pi R}) / L)
    with L drawn from the measured L(1, sym^2 f); the bulk peak is the least-squares trend
    alpha + beta sqrt(log lambda) plus a measured residual. Rows: R, model fraction, 2.5% and
    97.5% bootstrap quantiles, whether R lies beyond the data.
    """

    forms: int
    alpha: float
    beta: float
    rows: tuple[tuple[float, float, float, float, bool], ...]


def extrapolate_beats_bulk(results: Sequence[ScanResult], R_targets: Sequence[float], *, n_boot: int = 400,
                           seed: int = 12345) -> BeatsExtrapolation | None:
    """Fraction of level-1 forms whose transition peak beats the bulk, modelled and extrapolated.

    Uses the level-1 forms without overlap that carry L(1, sym^2 f); None when fewer than 8.
    An extrapolation: it assumes the distribution of L(1, sym^2 f) does not change with R and
    the bulk trend continues.
    """
    rs = [r for r in results if r.level == 1 and not r.overlap and math.isfinite(r.sym2_L1_norm)]
    if len(rs) < 8:
        return None
    lam = np.array([r.eigenvalue for r in rs])
    B = np.array([r.bulk_value for r in rs])
    L = np.array([r.sym2_L1_norm for r in rs])
    X = np.column_stack([np.ones(len(rs)), np.sqrt(np.log(lam))])
    Rmin, Rmax = min(r.R for r in rs), max(r.R for r in rs)
    R_targets = [R for R in R_targets if R >= Rmin * 0.99]
    if not R_targets:
        return None
    prof = {R: kt_profile_max(R) for R in R_targets}

    def model(idx: np.ndarray) -> tuple[float, float, dict[float, float]]:
        coef, *_ = np.linalg.lstsq(X[idx], B[idx], rcond=None)
        res = B[idx] - X[idx] @ coef
        Ls = L[idx]
        out = {}
        for R in R_targets:
            lamR = 0.25 + R * R
            trend = coef[0] + coef[1] * math.sqrt(math.log(lamR))
            T = 2.0 * prof[R] * np.sqrt((1 + math.exp(-2 * math.pi * R)) / Ls)  # (n,)
            out[R] = float(np.mean(T[:, None] > (trend + res)[None, :]))
        return float(coef[0]), float(coef[1]), out

    a, b, point = model(np.arange(len(rs)))
    rng = np.random.default_rng(seed)
    boot = {R: [] for R in R_targets}
    for _ in range(n_boot):
        idx = rng.integers(0, len(rs), len(rs))
        if np.ptp(X[idx, 1]) < 1e-9:
            continue
        _, _, o = model(idx)
        for R in R_targets:
            boot[R].append(o[R])
    rows = tuple((float(R), point[R], float(np.quantile(boot[R], 0.025)), float(np.quantile(boot[R], 0.975)),
                  bool(R > Rmax * 1.01)) for R in R_targets)
    return BeatsExtrapolation(forms=len(rs), alpha=a, beta=b, rows=rows)


EXTRAP_COLUMNS = [Column("R", fixed=0), Column("model_fraction", "modelled P(transition > bulk)", fixed=2),
                  Column("boot_lo", "bootstrap 2.5%", fixed=2), Column("boot_hi", "bootstrap 97.5%", fixed=2),
                  Column("extrapolated", "R beyond the largest R measured")]


def extrapolation_rows(ex: BeatsExtrapolation) -> list[dict[str, Any]]:
    return [{"R": R, "model_fraction": f, "boot_lo": lo, "boot_hi": hi, "extrapolated": beyond}
            for R, f, lo, hi, beyond in ex.rows]
