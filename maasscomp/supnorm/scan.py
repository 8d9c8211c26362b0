"""Sup-norm scanner: the maximum of |f| / ||f|| in each cusp region and on the compact part.

Regions (each in the cusp's own coordinate w = sigma_j^{-1} z):

* cusp region j: {|Re w| <= 1/2, Im w >= Y_c}. For Y_c >= 1 these are disjoint modulo the group
  and lie inside the fundamental domain (two points of height > 1 in cusp coordinates are
  equivalent only through the cusp's stabiliser; Iwaniec, *Spectral Methods* (2002), Lemma
  2.10 with c >= 1 for Gamma0(N) and the project's scaling matrices).
* compact part: the rest of the fundamental domain. Every point of it pulls back
  (``Gamma0.pullback``) to some cusp j and height Y0 <= Im w < Y_c, so it is scanned as the
  slabs {Y0 <= Im w <= Y_c} of all cusps, keeping the points whose own height is the largest
  of their orbit (those are the points of the fundamental domain; points a little outside are
  kept as a margin, see below).

Values are those of the L2-normalised form scale * F (F = e^{pi R/2} f, see
:mod:`maasscomp.supnorm.norm`).

Grid and bound (derived here). Every region is covered by horocycles Im w = y_i. On a
horocycle F is a trigonometric polynomial, so all L samples x_k = -1/2 + k/L come from one FFT
(:meth:`FormEvaluator.horocycle`). The spacing follows the local wavelength: Delta y ~ 2 pi y /
(rho sqrt(lambda)) between horocycles and L ~ rho n_t(y) samples (n_t = number of terms at
that height, about R / (2 pi y)), rho samples per wavelength. Let z* be a maximiser of |F| on
the region. Either z* is interior, where grad F = 0 (F is real and smooth), or it lies on the
boundary horocycle Im w = Y_c, which is itself a grid horocycle and where F_x = 0. Taylor's
theorem around z* then gives, for the nearest sample (|dx| <= h/2 with h = 1/L, |dy| <=
Delta/2 in the band [y_i, y_{i+1}] holding z*):

    |F(z*)| <= |F(sample)| + (1/2) [dx^2 H_xx + 2 |dx dy| H_xy + dy^2 H_yy] + (truncation),

with H.. bounds of the second derivatives on the band:

* H_xx = min( sum_n |c_n| (2 pi n)^2 a_n ,  (2 pi n_t)^2 U )  (termwise; Bernstein's inequality
  for trigonometric polynomials of degree n_t, common practice),
* H_yy = lambda U / y^2 + H_xx  (the eigen-equation F_yy = -lambda F / y^2 - F_xx),
* H_xy = sum_n |c_n| 2 pi n p_n,

where a_n, p_n bound |A_n|, |A_n'| on the band (A_n(y) = sqrt(y) Kt(2 pi n y)) from their
values at the band ends and A_n'' = ((2 pi n)^2 - lambda / y^2) A_n, and U is a bound for
sup |F| on the region (started from the termwise bound, then improved by the same inequality;
each U stays a valid bound). The guaranteed statement is

    sup_region |F| <= U = max over bands (largest sample in the band + band error),

and the grid is refined (more horocycles where the y-part dominates, longer FFTs where the
x-part does) in exactly the bands with U_band > best * (1 + rtol) until U <= best (1 + rtol).
The best sample is finally refined by Newton's method on the analytic gradient and Hessian,
which only raises the reported value. The reported value v is a true value of |F| in the
region and satisfies v <= sup <= v + grid_bound.

Compact slabs keep every sample whose own height is at least exp(-eta) times the largest
height of its orbit (eta twice the hyperbolic size of the adjacent grid cells; heights change
by at most a factor e^d over a hyperbolic distance d) and whose largest height is at most Y_c.
These are genuine points of the compact part (moved by the group), and a cell containing a
point of the fundamental domain has its nearest samples in the kept set unless some of them
lie in a cusp region. The compact part is closed: its boundary horocycles Im w = Y_c are the
bottom horocycles of the cusp scans and enter its maximum with the 1-D bound
(1/2)(h/2)^2 H_xx. For a band that drops samples because they lie in a cusp region, a
maximiser z* (where grad F = 0) within the cell size d of a cusp region is at most Y_c d below
the boundary horocycle of that cusp in its coordinate, so
|F(z*)| <= (boundary maximum) + (1/2) (Y_c d)^2 U (lambda / y^2 + (2 pi n_t)^2) (the eigen-
equation and Bernstein's inequality bound F_yy); that term is added to such bands.

Cusp regions are scanned up to y_top, where sum_n |c_n| A_n(y) (which bounds |F| above
y_top because every A_n decreases beyond its turning point, DLMF 10.40.2) is below 1e-8 of
the region's peak; the transition zone of the first term is near y ~ R / (2 pi).
"""

from __future__ import annotations

import math
import time
from dataclasses import asdict, dataclass, field, fields

import numpy as np
import scipy.fft
import scipy.optimize

from maasscomp.errors import InputError
from maasscomp.supnorm.evaluate import FormEvaluator, ktilde, ktilde_and_derivative
from maasscomp.supnorm.norm import NormResult, compact_quadrature, l2_norm

TWO_PI = 2.0 * math.pi

#: Name of the store attachment written by :func:`scan_store` / read by :func:`load_scan`.
SCAN_ATTACHMENT = "supnorm_scan"
NORM_ATTACHMENT = "l2_norm"


@dataclass(frozen=True)
class ScanSettings:
    """Knobs of the scanner.

    Attributes
    ----------
    Y_c : float
        Height (in every cusp's own coordinate) above which a point belongs to a cusp region;
        must be >= 1 so that the cusp regions are disjoint.
    rtol : float
        Relative accuracy guaranteed by the grid bound for each region's maximum.
    samples_per_wavelength : float
        Initial grid density rho.
    max_rounds : int
        Largest number of refinement rounds.
    max_points : int
        Cap on the number of grid samples per region (the achieved bound is reported).
    top_rel : float
        The cusp is scanned up to where the termwise bound of |F| falls below top_rel times
        the region's peak.
    eval_tol : float
        Absolute accuracy of F (coefficient normalisation c_0(1) = 1).
    hist_bins : int
        Number of histogram bins for the value distribution on the compact part.
    moment_nodes : float
        Node factor of the compact quadrature used for moments and histogram (1.0 = the
        norm's resolution).
    allow_incomplete : bool
        Scan a form whose stored coefficients do not cover the expansions at the lowest
        heights (the missing terms then enter every bound through the coefficient envelope
        and the guarantee is usually much weaker); by default such a form is refused.
    """

    Y_c: float = 1.0
    rtol: float = 1e-3
    samples_per_wavelength: float = 6.0
    max_rounds: int = 40
    max_points: int = 50_000_000
    top_rel: float = 1e-8
    eval_tol: float = 1e-12
    hist_bins: int = 60
    moment_nodes: float = 0.5
    allow_incomplete: bool = False

    def __post_init__(self) -> None:
        if not (isinstance(self.Y_c, (int, float)) and math.isfinite(self.Y_c) and self.Y_c >= 1.0):
            raise InputError(f"cusp height Y_c={self.Y_c!r} is not allowed; it must be a finite number >= 1")
        if not (isinstance(self.rtol, (int, float)) and 1e-9 <= self.rtol <= 0.5):
            raise InputError(f"scan tolerance rtol={self.rtol!r} is not allowed; it must lie in [1e-9, 0.5]")
        if not (isinstance(self.samples_per_wavelength, (int, float)) and 2.0 <= self.samples_per_wavelength <= 100.0):
            raise InputError(
                f"samples_per_wavelength={self.samples_per_wavelength!r} is not allowed; it must lie in [2, 100]"
            )
        if not (isinstance(self.max_rounds, int) and self.max_rounds >= 0):
            raise InputError(f"max_rounds={self.max_rounds!r} is not allowed; use an integer >= 0")


@dataclass(frozen=True)
class RegionPeak:
    """Maximum of |f|/||f|| on one region.

    Attributes
    ----------
    region : str
        "cusp <j>" or "compact".
    cusp : int
        Cusp whose coordinate (x, y) is given.
    value : float
        max |f| / ||f|| found (a true value at the point below).
    x, y : float
        Location in the cusp's coordinate w = sigma_j^{-1} z, at the representative of
        largest height (a point of the fundamental domain).
    z_re, z_im : float
        The same point z = sigma_j w in the upper half plane.
    grid_bound : float
        sup of |f|/||f|| on the region <= value + grid_bound (the grid guarantee).
    grid_points : int
        Number of samples in the final grid.
    rounds : int
        Refinement rounds used.
    """

    region: str
    cusp: int
    value: float
    x: float
    y: float
    z_re: float
    z_im: float
    grid_bound: float
    grid_points: int
    rounds: int


@dataclass(frozen=True)
class ScanResult:
    """Scanner output for one form (values of the L2-normalised form f/||f||).

    Attributes
    ----------
    form_key : str
        Store key ("" when scanned outside a store).
    level, R, symmetry, eigenvalue
    norm2, scale : float
        ||F||^2 (F = e^{pi R/2} f) and 1/||F|| from :func:`maasscomp.supnorm.norm.l2_norm`.
    cusp_peaks : tuple of RegionPeak
        One per cusp.
    compact_peak : RegionPeak
    global_region : str
        Region holding the global maximum ("cusp <j>" or "compact"). The horocycles
        Im w = Y_c close both regions; a maximum on them counts as compact.
    global_value : float
    ratio_cusp_compact : float
        Largest cusp peak / compact peak.
    exponent_cusp, exponent_compact : float
        log(peak) / log(lambda).
    grid_bound_rel : float
        Largest grid bound over the regions, relative to the region's peak.
    rtol : float
        The tolerance the grid was refined to.
    leading_profile_max, leading_profile_y : tuple of float
        Per cusp: max over y >= Y_c of A_1(y) = sqrt(y) Kt(2 pi y) and its location (the
        transition-zone peak of the first Fourier term, docs/theory.md §3.3).
    leading_term_peak : tuple of float
        Per cusp: |c_j(1)| * scale * leading_profile_max, the peak of the n = 1 term of the
        normalised form (= 2 |rho_j(1)| max_y sqrt(y) K_{iR}(2 pi y) in the exponential
        normalisation, physical units).
    transition_peak, transition_y : tuple of float
        Per cusp: the largest local maximum of |f|/||f|| in the transition zone
        y >= max(Y_c, y_0), 2 pi y_0 = R - 2.338 (R/2)^{1/3} the last zero of the first term,
        and its height (differs from the cusp peak when
        the region's maximum sits on its lower boundary Im w = Y_c, as for small R).
    n2_at_peak : tuple of float
        Per cusp: value of the n >= 2 terms at the cusp peak (normalised).
    n2_sup : tuple of float
        Per cusp: a bound for sup over the cusp region of |f - (n = 1 term)| / ||f||
        (termwise), so |cusp peak - leading_term_peak| <= n2_sup + grid bound.
    n2_sup_grid : tuple of float
        Per cusp: the largest |n >= 2 part| seen on the grid.
    y_top, tail_bound : tuple of float
        Per cusp: top of the scanned cusp region and the bound of |f|/||f|| above it.
    Y_c : float
    compact_mean, compact_var, compact_skew, compact_exkurt : float
        Moments of f/||f|| on the compact part (weights dmu of the scan grid).
    compact_area : float
        Hyperbolic area of the compact part from the quadrature weights (exact value:
        pi mu / 3 - n_cusps / Y_c).
    compact_l2 : float
        int over the compact part of |f|^2 / ||f||^2 dmu (1 minus the mass of the cusp regions).
    hist_edges, hist_density : tuple of float
        Histogram (probability density) of f/||f|| on the compact part.
    extended : bool
        Hecke-extended coefficients were used.
    elapsed : float
        Wall time of the scan (seconds).
    notes : tuple of str
    """

    form_key: str
    level: int
    R: float
    symmetry: str
    eigenvalue: float
    norm2: float
    scale: float
    cusp_peaks: tuple[RegionPeak, ...]
    compact_peak: RegionPeak
    global_region: str
    global_value: float
    ratio_cusp_compact: float
    exponent_cusp: float
    exponent_compact: float
    grid_bound_rel: float
    rtol: float
    leading_profile_max: tuple[float, ...]
    leading_profile_y: tuple[float, ...]
    leading_term_peak: tuple[float, ...]
    transition_peak: tuple[float, ...]
    transition_y: tuple[float, ...]
    n2_at_peak: tuple[float, ...]
    n2_sup: tuple[float, ...]
    n2_sup_grid: tuple[float, ...]
    y_top: tuple[float, ...]
    tail_bound: tuple[float, ...]
    Y_c: float
    compact_mean: float
    compact_var: float
    compact_skew: float
    compact_exkurt: float
    compact_area: float
    compact_l2: float
    hist_edges: tuple[float, ...]
    hist_density: tuple[float, ...]
    extended: bool
    elapsed: float
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def cusp_peak(self) -> RegionPeak:
        """The largest of the cusp peaks."""
        return max(self.cusp_peaks, key=lambda p: p.value)

    def as_dict(self) -> dict:
        """Plain dict (arrays for tuples of numbers) suitable for ``Store.put_attachment``."""
        d = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name == "cusp_peaks":
                d[f.name] = {str(i): asdict(p) for i, p in enumerate(v)}
            elif f.name == "compact_peak":
                d[f.name] = asdict(v)
            elif f.name == "notes":
                d[f.name] = "\n".join(v)  # the store keeps strings, not lists of strings
            elif isinstance(v, tuple):
                d[f.name] = np.asarray(v, dtype=float)
            else:
                d[f.name] = v
        return d

    @classmethod
    def from_dict(cls, d: dict) -> "ScanResult":
        kw = {}
        for f in fields(cls):
            v = d[f.name]
            if f.name == "cusp_peaks":
                kw[f.name] = tuple(RegionPeak(**v[k]) for k in sorted(v, key=int))
            elif f.name == "compact_peak":
                kw[f.name] = RegionPeak(**v)
            elif f.name == "notes":
                kw[f.name] = tuple(v.split("\n")) if isinstance(v, str) and v else tuple(v or ())
            elif isinstance(v, np.ndarray):
                kw[f.name] = tuple(float(t) for t in np.atleast_1d(v))
            else:
                kw[f.name] = v
        return cls(**kw)


# ------------------------------------------------------------------------------------------
# the n = 1 profile


def leading_profile_peak(R: float, y_lo: float, y_hi: float | None = None,
                         samples_per_wavelength: float = 8.0) -> tuple[float, float]:
    """max over y in [y_lo, y_hi] of A_1(y) = sqrt(y) |Kt_R(2 pi y)| and its location.

    A grid with the scanner's spacing (Delta y = 2 pi y / (rho sqrt(lambda))) is followed by
    Brent's method on A_1'(y) = 0 in the two cells around the best sample (or the end point
    when the maximum is there). Default y_hi: beyond the turning point, where A_1 decreases.
    """
    if y_hi is None:
        y_hi = max(2.0 * y_lo, (R + 6.0 * max(R, 1.0) ** (1 / 3) + 20.0) / TWO_PI)
    sq = math.sqrt(0.25 + R * R)
    ratio = 1.0 + TWO_PI / (samples_per_wavelength * sq)
    n = max(8, int(math.ceil(math.log(y_hi / y_lo) / math.log(ratio))) + 1)
    ys = np.geomspace(y_lo, y_hi, n)
    vals = np.sqrt(ys) * np.abs(ktilde(R, TWO_PI * ys))
    i = int(np.argmax(vals))
    best_y, best_v = float(ys[i]), float(vals[i])

    def dA(y: float) -> float:
        k, kp = ktilde_and_derivative(R, np.array([TWO_PI * y]))
        return float(k[0] / (2 * math.sqrt(y)) + math.sqrt(y) * TWO_PI * kp[0])

    for a, b in ((ys[max(i - 1, 0)], ys[i]), (ys[i], ys[min(i + 1, n - 1)])):
        if b <= a:
            continue
        fa, fb = dA(a), dA(b)
        if fa * fb < 0:
            yr = scipy.optimize.brentq(dA, a, b, xtol=1e-14 * b, rtol=1e-15)
            v = math.sqrt(yr) * abs(float(ktilde(R, [TWO_PI * yr])[0]))
            if v > best_v:
                best_y, best_v = yr, v
    return best_v, best_y


# ------------------------------------------------------------------------------------------
# horocycles and bands


@dataclass
class _Horo:
    y: float
    L: int
    nt: int
    vmax: float  # max |F| over kept samples (-1 if none)
    xmax: float
    kept: int
    A: np.ndarray
    Ap: np.ndarray
    n2max: float = 0.0
    eta: float = 0.0
    touch: bool = False  # some near samples were left out because they lie in a cusp region
    band: tuple | None = None  # (upper neighbour, cached U-independent band data)


class _Slab:
    """Horocycles y in [y_lo, y_hi] of one cusp's coordinate."""

    def __init__(self, scan: "_RegionScan", cusp: int, y_lo: float, y_hi: float, compact: bool) -> None:
        self.scan = scan
        self.cusp = cusp
        self.compact = compact
        self.y_lo, self.y_hi = y_lo, y_hi
        self.horos: list[_Horo] = []

    # sizes ------------------------------------------------------------------------------
    def dy_for(self, y: float) -> float:
        s = self.scan
        return TWO_PI * y / (s.rho * s.sqlam)

    def L_for(self, nt: int) -> int:
        return int(scipy.fft.next_fast_len(max(16, int(math.ceil(self.scan.rho * nt)), 2 * nt + 2)))

    def initial(self) -> None:
        ys = [self.y_lo]
        while ys[-1] < self.y_hi:
            ys.append(min(self.y_hi, ys[-1] + self.dy_for(ys[-1])))
        if len(ys) < 3:
            ys = list(np.linspace(self.y_lo, self.y_hi, 3))
        ys = np.array(ys)
        specs = []
        for i, y in enumerate(ys):
            nt = self.scan.nterms(float(y))
            dyn = max(ys[min(i + 1, ys.size - 1)] - y, y - ys[max(i - 1, 0)])
            specs.append((float(y), self.L_for(nt), dyn))
        self.horos = self.make_many(specs)

    def make(self, y: float, L: int, dy_adj: float) -> _Horo:
        return self.make_many([(y, L, dy_adj)])[0]

    def make_many(self, specs: list[tuple[float, int, float]]) -> list[_Horo]:
        """Horocycles for (y, L, spacing to the neighbours); the K-Bessel values of all of them
        are computed in one call (the per-call cost of the tables dominates small calls)."""
        sc = self.scan
        ev = sc.ev
        nts = [sc.nterms(y) for y, _, _ in specs]
        t = np.concatenate([TWO_PI * y * np.arange(1, nt + 1) for (y, _, _), nt in zip(specs, nts)])
        K_all, Kp_all = ktilde_and_derivative(ev.R, t)
        out = []
        pos = 0
        for (y, L, dy_adj), nt in zip(specs, nts):
            K, Kp = K_all[pos:pos + nt], Kp_all[pos:pos + nt]
            pos += nt
            out.append(self._finish(y, L, dy_adj, nt, K, Kp))
        return out

    def _finish(self, y: float, L: int, dy_adj: float, nt: int, K: np.ndarray, Kp: np.ndarray) -> _Horo:
        sc = self.scan
        ev = sc.ev
        L = max(L, 2 * nt + 2)
        n = np.arange(1, nt + 1, dtype=float)
        sy = math.sqrt(y)
        A = sy * K
        Ap = K / (2 * sy) + sy * TWO_PI * n * Kp
        x, vals = ev.horocycle(self.cusp, y, L, nt, amplitudes=A)
        tab = ev.table
        eta = 0.0
        touch = False
        if self.compact:
            eta = 2.0 * math.hypot(1.0 / L, dy_adj) / y
            keep, touch = sc.compact_mask(self.cusp, x, y, eta)
        else:
            keep = None
        av = np.abs(vals)
        if keep is not None:
            av = np.where(keep, av, -1.0)
            kept = int(keep.sum())
        else:
            kept = L
        k = int(np.argmax(av))
        h = _Horo(y=y, L=L, nt=nt, vmax=float(av[k]) if kept else -1.0, xmax=float(x[k]), kept=kept,
                  A=A, Ap=Ap, eta=eta, touch=touch)
        if not self.compact:
            # n >= 2 part: remove the first term
            alpha, beta = tab.cos_sin(self.cusp, 1)
            first = A[0] * (alpha[0] * np.cos(TWO_PI * x) + beta[0] * np.sin(TWO_PI * x))
            h.n2max = float(np.max(np.abs(vals - first)))
        sc.points += L
        return h

    # bounds -----------------------------------------------------------------------------
    def _static(self, h0: _Horo, h1: _Horo) -> tuple:
        """U-independent part of a band's bound (cached on the lower horocycle)."""
        if h0.band is not None and h0.band[0] is h1:
            return h0.band[1]
        sc = self.scan
        nt = max(h0.nt, h1.nt)
        D, n, w2, k, a0, p0 = _band_terms(h0, h1, sc.lam, nt)
        den = 1.0 - D * D * k / 4.0
        cell = math.hypot(0.5 / min(h0.L, h1.L), 0.5 * D) / h0.y
        touch = h0.touch or h1.touch
        m = max(h0.vmax, h1.vmax)
        if np.any(den <= 0.25):
            st = (m, math.inf, math.inf, math.inf, math.inf, nt, 0.5 / min(h0.L, h1.L), 0.5 * D, h0.y, cell, touch)
        else:
            a = (a0 + 0.5 * D * p0) / den
            p = p0 + 0.5 * D * k * a
            c = sc.cabs(self.cusp, nt)
            td2 = sc.tail_d2(h0.y)
            st = (m, float(np.dot(c, a)) + sc.tail, float(np.dot(c, w2 * a)) + td2,
                  float(np.dot(c, TWO_PI * n * p)) + td2, (TWO_PI * nt) ** 2, nt, 0.5 / min(h0.L, h1.L),
                  0.5 * D, h0.y, cell, touch)
        h0.band = (h1, st)
        return st

    def band_bounds(self, U: float) -> list[tuple]:
        """For each band: (largest kept sample, x-part, y-and-mixed part, termwise sup bound,
        hyperbolic size of the nearest-sample displacement, touches a cusp region)."""
        sc = self.scan
        out = []
        for h0, h1 in zip(self.horos[:-1], self.horos[1:]):
            m, termsup, Hxx_t, Hxy, bern, nt, hx, hy, y0, cell, touch = self._static(h0, h1)
            if not math.isfinite(termsup):
                out.append((m, math.inf, math.inf, math.inf, cell, touch))
                continue
            Hxx = min(Hxx_t, bern * U + sc.tail_d2(y0))
            Hyy = sc.lam * U / y0**2 + Hxx
            dx_part = 0.5 * hx * hx * Hxx
            dy_part = 0.5 * (2 * hx * hy * Hxy + hy * hy * Hyy)
            out.append((m, dx_part, dy_part, termsup, cell, touch))
        return out


def _pad(a: np.ndarray, n: int) -> np.ndarray:
    if a.size >= n:
        return a[:n]
    return np.concatenate([a, np.zeros(n - a.size)])


class _RegionScan:
    """Scan of one region (a cusp region, or the compact part as a list of slabs)."""

    def __init__(self, ev: FormEvaluator, settings: ScanSettings) -> None:
        self.ev = ev
        self.settings = settings
        self.lam = ev.lam
        self.sqlam = math.sqrt(ev.lam)
        self.rho = float(settings.samples_per_wavelength)
        self.points = 0
        self.tail = 2.0 * ev.tol
        self._cabs: dict[tuple[int, int], np.ndarray] = {}

    def nterms(self, y: float) -> int:
        return self.ev.terms_needed(y)

    def tail_d2(self, y: float) -> float:
        # the truncated tail is below tol in value; its second derivatives are below
        # (2 pi n)^2 tol at the truncation index ~ (R + ...)/(2 pi y): generous allowance
        n = self.nterms(y) + 1
        return (TWO_PI * n) ** 2 * self.ev.tol * 4.0 + self.lam * self.ev.tol / y**2

    def cabs(self, cusp: int, nt: int) -> np.ndarray:
        key = (cusp, nt)
        if key not in self._cabs:
            self._cabs[key] = self._cabs_uncached(cusp, nt)
        return self._cabs[key]

    def _cabs_uncached(self, cusp: int, nt: int) -> np.ndarray:
        tab = self.ev.ensure_terms(nt)
        alpha, beta = tab.cos_sin(cusp, nt)
        c = np.hypot(alpha, beta)
        miss = tab.missing_mask(cusp, nt)
        if miss.any():
            c = np.where(miss, tab.envelope(nt), c)
        return c

    def compact_mask(self, cusp: int, x: np.ndarray, y: float, eta: float) -> tuple[np.ndarray, bool]:
        """(kept samples, whether near samples were dropped for lying in a cusp region)."""
        G = self.ev.group
        zx, zy = G.cusps[cusp].apply_scaling(x, np.full_like(x, y))
        pb = G.pullback(zx, zy)
        ystar = np.asarray(pb.y, dtype=float)
        near = y >= ystar * math.exp(-eta)
        inside = ystar <= self.settings.Y_c * (1.0 + 1e-12)
        return near & inside, bool(np.any(near & ~inside))

    # --------------------------------------------------------------------------------
    def _boundary_bound(self, boundary, U: float) -> float:
        """Largest |F| on the boundary horocycles Im w = Y_c, with the 1-D Taylor bound."""
        out = -1.0
        for slab, idx in boundary:
            h = slab.horos[idx]
            c = self.cabs(slab.cusp, h.nt)
            n = np.arange(1, h.nt + 1, dtype=float)
            Hxx = min(float(np.dot(c, (TWO_PI * n) ** 2 * np.abs(h.A))), (TWO_PI * h.nt) ** 2 * U)
            Hxx += self.tail_d2(h.y)
            out = max(out, h.vmax + 0.5 * (0.5 / h.L) ** 2 * Hxx + self.tail)
        return out

    def _touch_bound(self, Bbd: float, cell: float, U: float) -> float:
        """Bound for a maximiser within ``cell`` of a cusp region (see module notes)."""
        Yc = self.settings.Y_c
        ylo = Yc * math.exp(-cell)
        nt = self.nterms(ylo)
        Hyy = U * (self.lam / ylo**2 + (TWO_PI * nt) ** 2)
        return Bbd + 0.5 * (Yc * cell) ** 2 * Hyy

    def _bounds(self, slabs, boundary, U):
        all_b = [(s, s.band_bounds(U)) for s in slabs]
        Bbd = self._boundary_bound(boundary, U) if boundary else -1.0
        Ub = Bbd
        for _, bb in all_b:
            for m, dx, dy, _, cell, touch in bb:
                u = m + dx + dy
                if touch:
                    u = max(u, self._touch_bound(Bbd, cell, U))
                Ub = max(Ub, u)
        return all_b, Bbd, Ub

    def run(self, slabs: list[_Slab], boundary: list | None = None) -> dict:
        """Refine the grid of ``slabs`` until the bound meets rtol; ``boundary`` lists the
        (cusp slab, index) of the horocycles Im w = Y_c that close the compact part."""
        st = self.settings
        boundary = boundary or []
        for s in slabs:
            s.initial()
        rounds = 0
        notes: list[str] = []
        U = math.inf
        while True:
            best = max(max(h.vmax for h in s.horos) for s in slabs)
            if boundary:
                best = max(best, max(sl.horos[i].vmax for sl, i in boundary))
            if not math.isfinite(U):
                # termwise bound of sup |F|: valid without any assumption
                U = max(max((b[3] for b in s.band_bounds(1e300)), default=0.0) for s in slabs)
                if boundary:
                    U = max(U, max(float(np.dot(self.cabs(sl.cusp, sl.horos[i].nt), np.abs(sl.horos[i].A)))
                                   for sl, i in boundary) + self.tail)
            for _ in range(6):
                all_b, Bbd, Ub = self._bounds(slabs, boundary, U)
                Unew = max(Ub, best)
                if Unew >= U:
                    break
                improved = Unew < U * (1 - 1e-3)
                U = Unew
                if not improved:
                    break
            if U <= best * (1 + st.rtol) or best <= 0:
                break
            if rounds >= st.max_rounds or self.points > st.max_points:
                notes.append(
                    f"grid refinement stopped after {rounds} rounds ({self.points} samples) with relative "
                    f"bound {(U - best) / best:.2e} above rtol={st.rtol:.0e}"
                )
                break
            rounds += 1
            target = best * (1 + st.rtol)
            for s, bb in all_b:
                self._refine(s, bb, target, Bbd, U)
            for sl, i in boundary:
                h = sl.horos[i]
                c = self.cabs(sl.cusp, h.nt)
                n = np.arange(1, h.nt + 1, dtype=float)
                Hxx = min(float(np.dot(c, (TWO_PI * n) ** 2 * np.abs(h.A))), (TWO_PI * h.nt) ** 2 * U)
                if h.vmax + 0.5 * (0.5 / h.L) ** 2 * Hxx > target:
                    sl.horos[i] = sl.make(h.y, 2 * h.L, 0.0)
        return {"best": best, "U": U, "rounds": rounds, "notes": notes}

    def _refine(self, s: _Slab, bb, target: float, Bbd: float, U: float) -> None:
        Lup: dict[int, int] = {}
        inserts: dict[int, float] = {}
        for i, (m, dx, dy, _, cell, touch) in enumerate(bb):
            tb = self._touch_bound(Bbd, cell, U) if touch else -1.0
            if max(m + dx + dy, tb) <= target:
                continue
            excess = max(m + dx + dy, tb) - target
            L = 2 * max(s.horos[i].L, s.horos[i + 1].L)
            if dx >= 0.25 * excess or tb > target:
                Lup[i] = max(Lup.get(i, 0), L)
                Lup[i + 1] = max(Lup.get(i + 1, 0), L)
            if dy >= 0.25 * excess or not math.isfinite(dy) or tb > target:
                inserts[i] = math.sqrt(s.horos[i].y * s.horos[i + 1].y)
        if not Lup and not inserts:
            return
        horos = s.horos
        specs: list[tuple[float, int, float]] = []
        plan: list = []  # an existing horocycle, or the index of a new one in specs
        for i, h in enumerate(horos):
            if i in Lup and Lup[i] > h.L:
                dyn = max(horos[min(i + 1, len(horos) - 1)].y - h.y, h.y - horos[max(i - 1, 0)].y)
                if i in inserts or (i - 1) in inserts:
                    dyn *= 0.5
                plan.append(len(specs))
                specs.append((h.y, Lup[i], dyn))
            else:
                plan.append(h)
            if i in inserts:
                ym = inserts[i]
                L = max(Lup.get(i, horos[i].L), Lup.get(i + 1, horos[i + 1].L), s.L_for(self.nterms(ym)))
                plan.append(len(specs))
                specs.append((ym, L, 0.5 * (horos[i + 1].y - horos[i].y)))
        made = s.make_many(specs)
        out = [made[p] if isinstance(p, int) else p for p in plan]
        s.horos = out


# ------------------------------------------------------------------------------------------
# local refinement


def _newton_refine(ev: FormEvaluator, cusp: int, x0: float, y0: float, y_lo: float, y_hi: float,
                   step_scale: float, max_iter: int = 40) -> tuple[float, float, float]:
    """Local maximum of |F| near (x0, y0) in a cusp's coordinate, y kept in [y_lo, y_hi].

    Newton's method on s F (s = sign F(x0, y0)) with the analytic gradient and Hessian of
    :meth:`FormEvaluator.derivatives`, steps limited to ``step_scale`` and accepted only if
    |F| increases (gradient steps when the Hessian is not negative definite).
    Returns (x, y, |F|).
    """
    x, y = float(x0), float(y0)
    F, Fx, Fy, Fxx, Fxy, Fyy = (float(v[0]) for v in ev.derivatives(cusp, [x], [y]))
    s = 1.0 if F >= 0 else -1.0
    best = abs(F)
    for _ in range(max_iter):
        g = s * np.array([Fx, Fy])
        H = s * np.array([[Fxx, Fxy], [Fxy, Fyy]])
        at_lo = y <= y_lo * (1 + 1e-15) and g[1] < 0
        at_hi = y >= y_hi * (1 - 1e-15) and g[1] > 0
        if at_lo or at_hi:
            # on the boundary horocycle: 1-D Newton in x
            step = np.array([-g[0] / H[0, 0] if H[0, 0] < 0 else g[0] * step_scale / (abs(g[0]) + 1e-300), 0.0])
        else:
            det = H[0, 0] * H[1, 1] - H[0, 1] * H[1, 0]
            if H[0, 0] < 0 and det > 0:  # negative definite
                step = -np.array([H[1, 1] * g[0] - H[0, 1] * g[1], H[0, 0] * g[1] - H[1, 0] * g[0]]) / det
            else:
                gn = np.linalg.norm(g)
                step = g * (step_scale / gn) if gn > 0 else np.zeros(2)
        nrm = float(np.linalg.norm(step))
        if nrm > step_scale:
            step *= step_scale / nrm
        if nrm < 1e-13 * max(1.0, abs(y)):
            break
        improved = False
        for _ in range(30):
            xn = x + step[0]
            yn = min(max(y + step[1], y_lo), y_hi)
            vals = ev.derivatives(cusp, [xn], [yn])
            Fn = float(vals[0][0])
            if abs(Fn) > best:
                x, y = xn, yn
                F, Fx, Fy, Fxx, Fxy, Fyy = (float(v[0]) for v in vals)
                best = abs(Fn)
                improved = True
                break
            step *= 0.5
        if not improved:
            break
    return x, y, best


def _refine_candidates(ev: FormEvaluator, cands, U: float, ybounds, accept=None, with_cusp: bool = False):
    """Newton-refine every horocycle maximum that could lie in the basin of the true maximum.

    A sample with value below best - 2 (U - best) cannot be within (U - best) of the global
    maximum's nearest sample, so only the others are refined; results closer than a wavelength
    to an earlier one are skipped. Returns (x, y, |F|[, cusp]) of the best point found (a grid
    sample when no refinement improves on it or leaves the region).
    """
    best_h = max(cands, key=lambda sh: sh[1].vmax)
    top = best_h[1].vmax
    floor = top - 2.0 * max(U - top, 0.0) - 1e-12 * top
    pool = sorted((c for c in cands if c[1].vmax >= floor), key=lambda sh: -sh[1].vmax)[:12]
    sl0, h0 = best_h
    res = (h0.xmax, h0.y, h0.vmax, sl0.cusp)
    done: list[tuple[int, float, float]] = []
    for sl, h in pool:
        wl = TWO_PI * h.y / max(ev.R, 1.0)
        if any(j == sl.cusp and abs(x - h.xmax) < wl and abs(y - h.y) < wl for j, x, y in done):
            continue
        lo, hi = ybounds(sl)
        x, y, v = _newton_refine(ev, sl.cusp, h.xmax, h.y, lo, hi, step_scale=sl.dy_for(h.y))
        x = (x + 0.5) % 1.0 - 0.5
        done.append((sl.cusp, x, y))
        if v > res[2] and (accept is None or accept(sl.cusp, x, y)):
            res = (x, y, v, sl.cusp)
    return res if with_cusp else res[:3]


# ------------------------------------------------------------------------------------------


def _cusp_top(ev: FormEvaluator, cusp: int, Y_c: float, peak_guess: float, top_rel: float
              ) -> tuple[float, float]:
    """(y_top, termwise bound of |F| for y >= y_top) for one cusp region."""
    R = ev.R
    y = max(1.5 * Y_c, (R + 4.0 * max(R, 1.0) ** (1 / 3) + 4.0) / TWO_PI)
    while True:
        nt = ev.terms_needed(y)
        tab = ev.ensure_terms(nt)
        alpha, beta = tab.cos_sin(cusp, nt)
        c = np.hypot(alpha, beta)
        miss = tab.missing_mask(cusp, nt)
        c = np.where(miss, tab.envelope(nt), c)
        S = float(np.dot(c, np.abs(ev.amplitudes([y], nt)[0]))) + ev.tol
        if S <= top_rel * peak_guess or S <= 10 * ev.tol:
            return y, S
        y *= 1.1


def check_coefficients(ev: FormEvaluator, settings: ScanSettings) -> list[str]:
    """Check that the stored coefficients cover the expansions at the lowest heights.

    The grid guarantee needs every c_j(n) up to the number of terms used at the bottom of the
    compact slabs (stored or given by the Hecke relations). Raises InputError naming how many
    coefficients to store, unless ``settings.allow_incomplete``; then returns a note.
    """
    G = ev.group
    Y0 = G.fundamental_domain_height
    n_need = ev.terms_needed(Y0 * math.exp(-0.05 / max(1.0, math.sqrt(ev.lam))))
    tab = ev.ensure_terms(n_need)
    gaps = [j for j in range(G.n_cusps) if tab.missing_mask(j, n_need).any()]
    if not gaps:
        return []
    form = ev.form
    first = int(np.nonzero(tab.missing_mask(gaps[0], n_need))[0][0]) + 1
    msg = (f"form at level {form.level}, R={form.R:.10g} stores {tab.n_stored} coefficients per cusp; the scan "
           f"needs c(n) for n <= {n_need} and c({first}) (cusp {gaps[0]}) is neither stored nor given by "
           f"the Hecke relations; store at least {n_need} coefficients")
    if not settings.allow_incomplete:
        raise InputError(msg + " (or pass allow_incomplete=True to bound the missing terms instead)")
    return [msg + "; missing terms are bounded by the coefficient envelope"]


def scan_form(form, *, settings: ScanSettings | None = None, norm: NormResult | None = None,
              form_key: str = "", evaluator: FormEvaluator | None = None) -> ScanResult:
    """Scan one form: peaks of |f|/||f|| in every cusp region and on the compact part.

    Parameters
    ----------
    form : Form
    settings : ScanSettings, optional
    norm : NormResult, optional
        A precomputed L2 norm (computed with :func:`l2_norm` otherwise).
    form_key : str
        Store key recorded in the result.
    evaluator : FormEvaluator, optional

    Returns
    -------
    ScanResult
    """
    st = settings or ScanSettings()
    t0 = time.perf_counter()
    ev = evaluator if evaluator is not None else FormEvaluator(form, tol=st.eval_tol)
    G = ev.group
    Y0 = G.fundamental_domain_height
    notes: list[str] = []
    if st.Y_c <= Y0:
        raise InputError(f"Y_c={st.Y_c} must exceed the fundamental-domain height {Y0:.4g}")
    notes += check_coefficients(ev, st)
    if norm is None:
        norm = l2_norm(form, evaluator=ev)
    scale = norm.scale
    notes = list(norm.notes) + notes

    # ---- cusp regions
    pmax, py = leading_profile_peak(ev.R, st.Y_c)
    tab = ev.ensure_terms(2)
    cusp_peaks, cusp_slabs = [], []
    lead_peak, trans_v, trans_y, n2_peak, n2_sup, n2_grid, y_tops, tails = ([] for _ in range(8))
    for j in range(G.n_cusps):
        c1 = float(abs(tab.rows[j, 0]))
        guess = max(c1 * pmax, abs(float(ev.expansion(j, [0.25], [st.Y_c])[0][0])), 1e-300)
        y_top, tail = _cusp_top(ev, j, st.Y_c, guess, st.top_rel)
        rs = _RegionScan(ev, st)
        slab = _Slab(rs, j, st.Y_c, y_top, compact=False)
        out = rs.run([slab])
        cusp_slabs.append(slab)
        x, y, v = _refine_candidates(ev, [(slab, hh) for hh in slab.horos], out["U"], lambda sl: (st.Y_c, y_top))
        zx, zy = G.cusps[j].apply_scaling([x], [y])
        U = max(out["U"], tail)
        cusp_peaks.append(RegionPeak(
            region=f"cusp {j}", cusp=j, value=v * scale, x=float(x), y=float(y), z_re=float(zx[0]),
            z_im=float(zy[0]), grid_bound=max(U - v, 0.0) * scale, grid_points=rs.points, rounds=out["rounds"],
        ))
        notes += [f"cusp {j}: {m}" for m in out["notes"]]
        # the transition-zone peak: the largest local maximum above the last zero of the first
        # term, at 2 pi y = R + a_1 (R/2)^{1/3} with a_1 = -2.33810741 the first zero of Ai
        # (DLMF Table 9.9.1; leading order of the uniform expansion, docs/theory.md §3.1)
        y_tr = max(st.Y_c, (ev.R - 2.33810741 * (ev.R / 2.0) ** (1 / 3)) / TWO_PI)
        cand = [hh for hh in slab.horos if hh.y >= y_tr] or slab.horos
        ht = max(cand, key=lambda hh: hh.vmax)
        xt, yt, vt = _newton_refine(ev, j, ht.xmax, ht.y, y_tr, y_top, step_scale=slab.dy_for(ht.y))
        if vt < ht.vmax:
            xt, yt, vt = ht.xmax, ht.y, ht.vmax
        trans_v.append(vt * scale)
        trans_y.append(yt)
        # first term and the rest at the peak
        F = float(ev.expansion(j, [x], [y])[0][0])
        A1 = float(ev.amplitudes([y], 1)[0, 0])
        alpha, beta = tab.cos_sin(j, 1)
        T1 = A1 * (alpha[0] * math.cos(TWO_PI * x) + beta[0] * math.sin(TWO_PI * x))
        lead_peak.append(c1 * pmax * scale)
        n2_peak.append(float((F - T1) * scale))
        n2_sup.append((_rest_bound(rs, slab, j) + ev.tol) * scale)
        n2_grid.append(max(hh.n2max for hh in slab.horos) * scale)
        y_tops.append(y_top)
        tails.append(tail * scale)

    # ---- compact part (closed: its boundary horocycles Im w = Y_c are the cusp slabs' bottoms)
    rs = _RegionScan(ev, st)
    slabs = [_Slab(rs, j, Y0 * math.exp(-0.05 / max(1.0, rs.sqlam)), st.Y_c, compact=True)
             for j in range(G.n_cusps)]
    out = rs.run(slabs, boundary=[(sl, 0) for sl in cusp_slabs])
    cands = [(s_, h_) for s_ in slabs for h_ in s_.horos] + [(sl, sl.horos[0]) for sl in cusp_slabs]

    def in_compact(j: int, x: float, y: float) -> bool:
        zx, zy = G.cusps[j].apply_scaling([x], [y])
        return float(G.pullback(zx, zy).y[0]) <= st.Y_c * (1 + 1e-9)

    x, y, v, jb = _refine_candidates(ev, cands, out["U"], lambda sl: (slabs[sl.cusp].y_lo, st.Y_c),
                                     accept=in_compact, with_cusp=True)
    zx, zy = G.cusps[jb].apply_scaling([x], [y])
    pb = G.pullback(zx, zy)
    compact_peak = RegionPeak(
        region="compact", cusp=int(pb.cusp[0]), value=v * scale, x=float(pb.x[0]), y=float(pb.y[0]),
        z_re=float(zx[0]), z_im=float(zy[0]), grid_bound=max(out["U"] - v, 0.0) * scale,
        grid_points=rs.points, rounds=out["rounds"],
    )
    notes += [f"compact: {m}" for m in out["notes"]]
    moments = _compact_moments(ev, scale, st, G)

    best_cusp = max(cusp_peaks, key=lambda p: p.value)
    # the horocycles Im w = Y_c belong to both regions; a tie (a maximum on that boundary)
    # is not a cusp phenomenon, so the cusp wins only when strictly higher
    if best_cusp.value > compact_peak.value * (1 + 1e-9):
        glob, gval = best_cusp.region, best_cusp.value
    else:
        glob, gval = "compact", compact_peak.value
    loglam = math.log(ev.lam)
    rel_bounds = [p.grid_bound / p.value for p in cusp_peaks + [compact_peak] if p.value > 0]
    if ev.extended:
        notes.append(f"coefficients beyond the stored {ev.table.n_stored} filled in by Hecke multiplicativity")
    return ScanResult(
        form_key=form_key, level=int(form.level), R=float(form.R), symmetry=form.symmetry.label,
        eigenvalue=float(ev.lam), norm2=float(norm.norm2), scale=float(scale),
        cusp_peaks=tuple(cusp_peaks), compact_peak=compact_peak, global_region=glob, global_value=float(gval),
        ratio_cusp_compact=float(best_cusp.value / compact_peak.value) if compact_peak.value > 0 else math.inf,
        exponent_cusp=math.log(best_cusp.value) / loglam if loglam != 0 else math.nan,
        exponent_compact=math.log(compact_peak.value) / loglam if loglam != 0 else math.nan,
        grid_bound_rel=float(max(rel_bounds)) if rel_bounds else math.nan, rtol=float(st.rtol),
        leading_profile_max=(pmax,) * G.n_cusps, leading_profile_y=(py,) * G.n_cusps,
        leading_term_peak=tuple(lead_peak), transition_peak=tuple(trans_v), transition_y=tuple(trans_y),
        n2_at_peak=tuple(n2_peak), n2_sup=tuple(n2_sup), n2_sup_grid=tuple(n2_grid), y_top=tuple(y_tops),
        tail_bound=tuple(tails), Y_c=float(st.Y_c), **moments, extended=bool(ev.extended),
        elapsed=time.perf_counter() - t0, notes=tuple(notes),
    )


def _band_terms(h0, h1, lam: float, nt: int):
    """Termwise data of the band between two horocycles: the height difference D, the
    frequencies w2 = (2 pi n)^2, the bound k of |w2 - lam/y^2| on the band, and the larger
    of the two amplitudes and of their y-derivatives (n = 1..nt)."""
    A0, A1 = _pad(h0.A, nt), _pad(h1.A, nt)
    P0, P1 = _pad(h0.Ap, nt), _pad(h1.Ap, nt)
    D = h1.y - h0.y
    n = np.arange(1, nt + 1, dtype=float)
    w2 = (TWO_PI * n) ** 2
    k = np.maximum(np.abs(w2 - lam / h0.y**2), np.abs(w2 - lam / h1.y**2))
    a0 = np.maximum(np.abs(A0), np.abs(A1))
    p0 = np.maximum(np.abs(P0), np.abs(P1))
    return D, n, w2, k, a0, p0


def _rest_bound(rs: _RegionScan, slab: _Slab, cusp: int) -> float:
    """Termwise bound of sup |F - first term| over the cusp region (bands of the final grid)."""
    worst = 0.0
    for h0, h1 in zip(slab.horos[:-1], slab.horos[1:]):
        nt = max(h0.nt, h1.nt)
        if nt < 2:
            continue
        D, _, _, k, a0, p0 = _band_terms(h0, h1, rs.lam, nt)
        a = (a0 + 0.5 * D * p0) / np.maximum(1.0 - D * D * k / 4.0, 0.25)
        c = rs.cabs(cusp, nt)
        worst = max(worst, float(np.dot(c[1:], a[1:])))
    return worst + rs.tail


def _compact_moments(ev: FormEvaluator, scale: float, st: ScanSettings, G) -> dict:
    """Moments and histogram of f/||f|| on the compact part (quadrature nodes of
    :func:`maasscomp.supnorm.norm.compact_quadrature`, weights dmu)."""
    v, w = compact_quadrature(ev, st.Y_c, factor=st.moment_nodes)
    v = v * scale
    W = float(w.sum())
    sigma = 1.0 / math.sqrt(G.area)
    edges = np.linspace(-6 * sigma, 6 * sigma, st.hist_bins + 1)
    mean = float(np.dot(w, v) / W)
    d = v - mean
    var = float(np.dot(w, d * d) / W)
    skew = float(np.dot(w, d**3) / W / var**1.5) if var > 0 else math.nan
    exk = float(np.dot(w, d**4) / W / var**2 - 3.0) if var > 0 else math.nan
    hist, _ = np.histogram(v, bins=edges, weights=w)
    dens = hist / (W * np.diff(edges))
    return dict(compact_mean=mean, compact_var=var, compact_skew=skew, compact_exkurt=exk, compact_area=W,
                compact_l2=float(np.dot(w, v * v)),
                hist_edges=tuple(float(e) for e in edges), hist_density=tuple(float(t) for t in dens))
