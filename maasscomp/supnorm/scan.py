"""Sup-norm scanner: the maximum of |f| / ||f|| on the transition zones, a fixed compact set
and the region between them, with predictions beside every measurement.

Regions (docs/theory.md §11.1). Every point z of Gamma0(N)\\H has a highest
representative: the cusp j and the point w = sigma_j^{-1} gamma z of largest height y* in
any cusp's period-1 coordinate (``Gamma0.pullback``). With n0_j the first frequency whose
coefficient c_j(n) is non-zero and

    Y_T,j = (R - c_T R^{1/3}) / (2 pi n0_j),   c_T = |a_1| 2^{-1/3} = 1.8557571...,

(a_1 the first zero of Ai, DLMF Table 9.9.1: 2 pi n0 Y_T,j is the last zero of the first
non-zero term to leading order of the uniform expansion, docs/theory.md §3.1), the regions are

* ``omega`` -- the fixed compact set Omega = {y* <= Y_omega}, independent of R (Y_omega >= 1);
* ``transition j`` -- {cusp j, y* >= max(Y_T,j, Y_omega)}: the first term's last lobe and
  its decaying tail, where it dominates every other term;
* ``intermediate j`` -- {cusp j, Y_omega < y* < Y_T,j} (empty when Y_T,j <= Y_omega).

They partition the surface. Where the transition zone would reach into Omega (Y_T,j <
Y_omega, small R or large n0) Omega keeps its points and the transition zone starts at
Y_omega: the form is marked ``overlap`` (its first-term peak may then lie in Omega). Each
region reports its maximum, location, grid guarantee, hyperbolic area, L2 mass and a
prediction: the first-term prediction for transition zones, the random-wave median
maximum for Omega and the intermediate region (:func:`random_wave_max`).

Values are those of the L2-normalised form scale * F (F = e^{pi R/2} f, see
:mod:`maasscomp.supnorm.norm`).

How each region is covered. Since Y_omega >= 1 and two points of height > 1 in cusp
coordinates are equivalent only through the cusp's stabiliser (Iwaniec, *Spectral Methods*
(2002), Lemma 2.10 with c >= 1 for Gamma0(N) and the project's scaling matrices), the sets
{cusp j, y* > Y} for Y >= 1 are the strips {|Re w| <= 1/2, Im w > Y} of the cusp's
coordinate: transition and intermediate regions are scanned as such strips (no masks), and
their areas are 1/Y_lo - 1/Y_hi. Omega is covered through the fundamental domain
D = union of the translates R_k F_1 of the standard domain by right coset representatives:
in the coordinate of the coset's cusp j, R_k F_1 is {|X - X_k| <= r_j/2, (X - X_k)^2 + Y^2
>= r_j^2} with r_j = 1/width_j (the translates of one cusp fill a period), so
Omega is the union over j of the slabs {Y <= Y_omega} above these arcs -- an explicit mask,
no pullback per sample. (Points of D in chart j at height Y > 1 have y* = Y by the lemma, so
Omega cap D is exactly this set.) Area of Omega: vol - n_cusps / Y_omega.

Grid and bound (derived here). Every region is covered by horocycles Im w = y_i. On a
horocycle F is a trigonometric polynomial, so all L samples x_k = -1/2 + k/L come from one FFT
(batched over horocycles of equal length). The spacing follows the local wavelength:
Delta y ~ 2 pi y / (rho sqrt(lambda)) between horocycles and L ~ rho n_t(y) samples (n_t =
number of terms at that height, about R / (2 pi y)); the transition zones need only the few
terms that are not negligible there. Let z* be a maximiser of |F| on the region. Either z*
is interior, where grad F = 0 (F is real and smooth), or it lies on a boundary horocycle,
which is itself a grid horocycle and where F_x = 0 (the arcs bounding the translates of F_1
are interior lines of Omega). Taylor's theorem around z* then gives, for the nearest sample
(|dx| <= h/2 with h = 1/L, |dy| <= Delta/2 in the band [y_i, y_{i+1}] holding z*):

    |F(z*)| <= |F(sample)| + (1/2) [dx^2 H_xx + 2 |dx dy| H_xy + dy^2 H_yy] + (truncation),

with H.. bounds of the second derivatives on the band:

* H_xx = min( sum_n |c_n| (2 pi n)^2 a_n ,  (2 pi n_t)^2 U )  (termwise; Bernstein's inequality
  for trigonometric polynomials of degree n_t, common practice),
* H_yy = lambda U / y^2 + H_xx  (the eigen-equation F_yy = -lambda F / y^2 - F_xx),
* H_xy = sum_n |c_n| 2 pi n p_n,

where a_n, p_n bound |A_n|, |A_n'| on the band (A_n(y) = sqrt(y) Kt(2 pi n y)) from the
values at the band ends and A_n'' = ((2 pi n)^2 - lambda / y^2) A_n: with k_n >= |A_n''/A_n| on
the band and D its width, linear interpolation gives a_n = max(|A_n(y_i)|, |A_n(y_{i+1})|) /
(1 - k_n D^2 / 8) and p_n = |A_n(y_{i+1}) - A_n(y_i)| / D + k_n a_n D / 2 (no derivative values
are needed), and U is a bound for
sup |F| on the region (started from the termwise bound, then improved by the same inequality;
each U stays a valid bound). The guaranteed statement is

    sup_region |F| <= U = max over bands (largest sample in the band + band error),

and the grid is refined (more horocycles where the y-part dominates, longer FFTs where the
x-part does) in exactly the bands with U_band > best * (1 + rtol) until U <= best (1 + rtol).
The band bounds are computed for all bands at once (arrays, in chunks). The best sample is
finally refined by Newton's method on the analytic gradient and Hessian, which only raises
the reported value. The reported value v is a true value of |F| in the region and satisfies
v <= sup <= v + grid_bound.

Omega's slabs keep the samples above the arcs and, as a margin, those at most one grid cell
(Euclidean, in the chart) below them, so that the nearest samples of every point of Omega are
kept. A margin sample is a point of another translate; it is kept only if its orbit lies in
Omega (checked by the pullback, for the margin samples alone). For a band that drops a margin
sample because its orbit lies above Y_omega, a maximiser z* (grad F = 0) within the cell size
d of that cusp region is at most Y_omega d below the boundary horocycle of that cusp in its
coordinate, so |F(z*)| <= (boundary maximum) + (1/2) (Y_omega d)^2 U (lambda / y^2 +
(2 pi n_t)^2) (the eigen-equation and Bernstein's inequality bound F_yy); that term is added
to such bands.

Transition zones are scanned up to y_top, where sum_n |c_n| A_n(y) (which bounds |F| above
y_top because every A_n decreases beyond its turning point, DLMF 10.40.2) is below 1e-8 of
the region's peak.
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
from maasscomp.supnorm.norm import NormResult, coset_charts, l2_norm, strip_mass

TWO_PI = 2.0 * math.pi

#: |a_1| 2^{-1/3}: a_1 = -2.338107410459767 is the first zero of Ai (DLMF Table 9.9.1); the
#: last zero of Kt_R(x) lies at x = R - C_T R^{1/3} to leading order (docs/theory.md §3.1).
AIRY_A1 = -2.338107410459767
C_T = -AIRY_A1 * 2.0 ** (-1.0 / 3.0)

#: Name of the store attachment written by :func:`scan_store` / read by :func:`load_scans`.
SCAN_ATTACHMENT = "supnorm_scan"
NORM_ATTACHMENT = "l2_norm"

#: Relative size below which a coefficient counts as zero when n0 is determined.
ZERO_COEFF_REL = 1e-6


@dataclass(frozen=True)
class ScanSettings:
    """Knobs of the scanner.

    Attributes
    ----------
    Y_omega : float
        Height (in every cusp's own coordinate) below which a point belongs to the fixed
        compact set Omega; must be >= 1 so that the regions above it are disjoint strips.
        Default 2: Omega then covers vol - n_cusps / 2 (52% of PSL(2,Z)\\H).
    rtol : float
        Relative accuracy guaranteed by the grid bound for each region's maximum.
    samples_per_wavelength : float
        Initial grid density rho.
    max_rounds : int
        Largest number of refinement rounds per region.
    max_points : int
        Cap on the number of grid samples per region (the achieved bound is reported).
    top_rel : float
        Transition zones are scanned up to where the termwise bound of |F| falls below
        top_rel times the region's peak.
    eval_tol : float
        Absolute accuracy of F (coefficient normalisation c_0(1) = 1).
    hist_bins : int
        Number of histogram bins of the value distribution on Omega.
    dist_horocycles : int
        Horocycles per cusp chart of the value sample on Omega (midpoint rule in 1/y, all
        FFT samples of each horocycle).
    allow_incomplete : bool
        Scan a form whose stored coefficients do not cover the expansions at the lowest
        heights (the missing terms then enter every bound through the coefficient envelope
        and the guarantee is usually much weaker); by default such a form is refused.
    """

    Y_omega: float = 2.0
    rtol: float = 1e-3
    samples_per_wavelength: float = 9.0
    max_rounds: int = 40
    max_points: int = 2_000_000_000
    top_rel: float = 1e-8
    eval_tol: float = 1e-12
    hist_bins: int = 80
    dist_horocycles: int = 200
    allow_incomplete: bool = False

    def __post_init__(self) -> None:
        Y = self.Y_omega
        if not (isinstance(Y, (int, float)) and not isinstance(Y, bool) and math.isfinite(Y) and Y >= 1.0):
            raise InputError(f"Y_omega={Y!r} is not allowed; it must be a finite number >= 1")
        if not (isinstance(self.rtol, (int, float)) and 1e-9 <= self.rtol <= 0.5):
            raise InputError(f"scan tolerance rtol={self.rtol!r} is not allowed; it must lie in [1e-9, 0.5]")
        if not (isinstance(self.samples_per_wavelength, (int, float)) and 2.0 <= self.samples_per_wavelength <= 100.0):
            raise InputError(
                f"samples_per_wavelength={self.samples_per_wavelength!r} is not allowed; it must lie in [2, 100]"
            )
        if not (isinstance(self.max_rounds, int) and self.max_rounds >= 0):
            raise InputError(f"max_rounds={self.max_rounds!r} is not allowed; use an integer >= 0")
        if not (isinstance(self.dist_horocycles, int) and self.dist_horocycles >= 4):
            raise InputError(f"dist_horocycles={self.dist_horocycles!r} is not allowed; use an integer >= 4")


@dataclass(frozen=True)
class RegionPeak:
    """Maximum of |f|/||f|| on one region, with the region's size and the prediction.

    Attributes
    ----------
    region : str
        "omega", "transition <j>" or "intermediate <j>".
    kind : str
        "omega", "transition" or "intermediate".
    cusp : int
        Cusp whose coordinate (x, y) is given (for Omega: the cusp of the highest
        representative of the peak).
    value : float
        max |f| / ||f|| found (a true value at the point below); NaN for an empty region.
    x, y : float
        Location in the cusp's coordinate w = sigma_j^{-1} z, at the representative of
        largest height.
    z_re, z_im : float
        The same point z = sigma_j w in the upper half plane.
    y_rel : float
        y / Y_T of that cusp (1 is the lower edge of the transition zone).
    grid_bound : float
        sup of |f|/||f|| on the region <= value + grid_bound (the grid guarantee).
    area : float
        Hyperbolic area of the region.
    mass : float
        Integral of |f|^2 / ||f||^2 over the region (Parseval; the masses add up to 1).
    prediction : float
        Transition zones: the first-term prediction |c_j(n0)| max |A_n0| / ||F||; Omega and
        intermediate regions: the random-wave median maximum for a region of this area
        (:func:`random_wave_max`).
    grid_points : int
        Number of samples in the final grid.
    rounds : int
        Refinement rounds used.
    """

    region: str
    kind: str
    cusp: int
    value: float
    x: float
    y: float
    z_re: float
    z_im: float
    y_rel: float
    grid_bound: float
    area: float
    mass: float
    prediction: float
    grid_points: int
    rounds: int

    @property
    def empty(self) -> bool:
        return not math.isfinite(self.value)


_FLOAT_TUPLES = ("Y_T", "c_n0", "profile_max", "profile_y", "rest_bound", "rest_grid", "y_top", "tail_bound",
                 "hist_edges", "hist_density")


@dataclass(frozen=True)
class ScanResult:
    """Scanner output for one form (values of the L2-normalised form f/||f||).

    Attributes
    ----------
    form_key : str
        Store key ("" when scanned outside a store).
    level, R, symmetry, eigenvalue, is_new
        The form (``is_new``: 1 newform, 0 oldform, -1 unknown).
    volume : float
        Area of Gamma0(N)\\H.
    norm2, scale : float
        ||F||^2 (F = e^{pi R/2} f) and 1/||F|| from :func:`maasscomp.supnorm.norm.l2_norm`.
    Y_omega, rtol : float
        The settings the scan used.
    regions : tuple of RegionPeak
        Omega first, then per cusp its intermediate region and its transition zone.
    n0 : tuple of int
        Per cusp: the first frequency with a non-zero coefficient.
    Y_T : tuple of float
        Per cusp: the lower edge (R - c_T R^{1/3}) / (2 pi n0) of the transition zone.
    c_n0 : tuple of float
        Per cusp: |c_j(n0)| * scale (the first non-zero coefficient of the normalised form).
    profile_max, profile_y : tuple of float
        Per cusp: max over the transition zone of |A_n0(y)| = sqrt(y) |Kt(2 pi n0 y)| (exact
        K-Bessel values, Brent's method) and its height.
    rest_bound : tuple of float
        Per cusp: a bound for sup over the transition zone of |f - (n0 term)| / ||f||
        (termwise), so |transition peak - prediction| <= rest_bound + grid bound.
    rest_grid : tuple of float
        Per cusp: the largest |f - (n0 term)| / ||f|| seen on the transition grid.
    y_top, tail_bound : tuple of float
        Per cusp: top of the scanned transition zone and the bound of |f|/||f|| above it.
    overlap : bool
        Some Y_T,j < Y_omega: that transition zone starts at Y_omega instead of Y_T,j.
    global_region, global_kind : str
        Region holding the global maximum (by the rule of the module notes).
    global_value : float
    global_cusp : int
    global_y, global_y_rel : float
        Height of the global maximum in its cusp's coordinate, and that height / Y_T.
    bulk_value : float
        max over everything but the transition zones (Omega and intermediate regions).
    bulk_region : str
        The region holding it.
    bulk_area, bulk_prediction : float
        Area of that part of the surface and the random-wave median maximum for it.
    omega_mean_sq : float
        Mean of |f|^2 / ||f||^2 over Omega (mass / area; equidistribution: 1/vol).
    omega_sample_mean_sq, omega_var, omega_skew, omega_exkurt : float
        From the value sample on Omega (dmu weights): mean of the squares (a check of the
        sample against omega_mean_sq), variance, skewness, excess kurtosis of f/||f||.
    omega_samples : int
    hist_edges, hist_density : tuple of float
        Histogram (probability density) of t = f sqrt(vol) / ||f|| on Omega: the random
        wave model predicts the standard Gaussian.
    sym2_L1_norm : float
        L(1, sym^2 f) from the norm by Rankin--Selberg (newforms of squarefree level with
        c(1) != 0; NaN otherwise).
    sym2_L1_coeffs, sym2_L1_coeffs_error : float
        L(1, sym^2 f) from the coefficients (approximate functional equation), NaN where
        too few coefficients are stored.
    grid_bound_rel : float
        Largest grid bound over the regions, relative to the region's peak.
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
    is_new: int
    volume: float
    norm2: float
    scale: float
    Y_omega: float
    rtol: float
    regions: tuple[RegionPeak, ...]
    n0: tuple[int, ...]
    Y_T: tuple[float, ...]
    c_n0: tuple[float, ...]
    profile_max: tuple[float, ...]
    profile_y: tuple[float, ...]
    rest_bound: tuple[float, ...]
    rest_grid: tuple[float, ...]
    y_top: tuple[float, ...]
    tail_bound: tuple[float, ...]
    overlap: bool
    global_region: str
    global_kind: str
    global_value: float
    global_cusp: int
    global_y: float
    global_y_rel: float
    bulk_value: float
    bulk_region: str
    bulk_area: float
    bulk_prediction: float
    omega_mean_sq: float
    omega_sample_mean_sq: float
    omega_var: float
    omega_skew: float
    omega_exkurt: float
    omega_samples: int
    hist_edges: tuple[float, ...]
    hist_density: tuple[float, ...]
    sym2_L1_norm: float
    sym2_L1_coeffs: float
    sym2_L1_coeffs_error: float
    grid_bound_rel: float
    extended: bool
    elapsed: float
    notes: tuple[str, ...] = field(default_factory=tuple)

    # ------------------------------------------------------------------ access

    def __repr__(self) -> str:
        key = f"{self.form_key!r}: " if self.form_key else ""
        return (f"<ScanResult {key}level {self.level}, {self.symmetry}, R = {float(self.R)!r}: global "
                f"maximum {float(self.global_value):.6g} in {self.global_region} (y/Y_T = "
                f"{float(self.global_y_rel):.3g}), bulk {float(self.bulk_value):.6g}, {len(self.regions)} regions>")

    def to_dataframe(self):
        """The regions as a pandas DataFrame, one row each (needs the extra ``pandas``;
        :func:`maasscomp.report.frames.scan_frame`)."""
        from maasscomp.report.frames import scan_frame  # tables are a later stage

        return scan_frame(self)

    def region(self, name: str) -> RegionPeak:
        """The region called ``name`` ("omega", "transition 0", ...)."""
        for p in self.regions:
            if p.region == name:
                return p
        raise KeyError(name)

    def of_kind(self, kind: str) -> tuple[RegionPeak, ...]:
        return tuple(p for p in self.regions if p.kind == kind)

    @property
    def omega(self) -> RegionPeak:
        return self.region("omega")

    def best(self, kind: str) -> RegionPeak | None:
        """The largest non-empty region peak of a kind (None when all are empty)."""
        ps = [p for p in self.of_kind(kind) if not p.empty]
        return max(ps, key=lambda p: p.value) if ps else None

    @property
    def transition(self) -> RegionPeak:
        """The largest transition-zone peak over the cusps."""
        return self.best("transition")

    @property
    def n_cusps(self) -> int:
        return len(self.n0)

    # ------------------------------------------------------------------ store round trip

    def as_dict(self) -> dict:
        """Plain dict (arrays for tuples of numbers) suitable for ``Store.put_attachment``."""
        d = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name == "regions":
                d[f.name] = {str(i): asdict(p) for i, p in enumerate(v)}
            elif f.name == "notes":
                d[f.name] = "\n".join(v)  # the store keeps strings, not lists of strings
            elif f.name == "n0":
                d[f.name] = np.asarray(v, dtype=np.int64)
            elif isinstance(v, tuple):
                d[f.name] = np.asarray(v, dtype=float)
            elif isinstance(v, bool):
                d[f.name] = int(v)
            else:
                d[f.name] = v
        return d

    @classmethod
    def from_dict(cls, d: dict) -> "ScanResult":
        missing = [f.name for f in fields(cls) if f.name not in d and f.name != "notes"]
        if missing:
            raise InputError(f"stored scan lacks {missing[0]!r}: it was made by an older scanner; rescan the "
                             "form (maasscomp scan STORE --overwrite)")
        kw = {}
        for f in fields(cls):
            v = d.get(f.name, "")
            if f.name == "regions":
                kw[f.name] = tuple(RegionPeak(**{k: (str(t) if k in ("region", "kind") else
                                                     int(t) if k in ("cusp", "grid_points", "rounds") else float(t))
                                                 for k, t in v[i].items()})
                                   for i in sorted(v, key=int))
            elif f.name == "notes":
                kw[f.name] = tuple(v.split("\n")) if isinstance(v, str) and v else tuple(v or ())
            elif f.name == "n0":
                kw[f.name] = tuple(int(t) for t in np.atleast_1d(v))
            elif f.name in _FLOAT_TUPLES:
                kw[f.name] = tuple(float(t) for t in np.atleast_1d(v))
            elif f.name in ("overlap", "extended"):
                kw[f.name] = bool(v)
            elif f.name in ("level", "is_new", "global_cusp", "omega_samples"):
                kw[f.name] = int(v)
            elif f.name in ("form_key", "symmetry", "global_region", "global_kind", "bulk_region"):
                kw[f.name] = str(v)
            else:
                kw[f.name] = float(v)
        return cls(**kw)


# ------------------------------------------------------------------------------------------
# predictions


def random_wave_max(area: float, lam: float, volume: float) -> float:
    """Random-wave median of max |f|/||f|| over a region of hyperbolic area ``area``.

    Random wave model (Berry, J. Phys. A 10 (1977) 2083; for Maass forms Hejhal & Rackner,
    Experimental Math. 1 (1992) 275-305): locally f/||f|| is a Gaussian field of variance
    sigma^2 = 1/vol with covariance sigma^2 J_0(k r), k^2 = lambda, so the gradient variance is
    sigma^2 lambda / 2 per direction. For such a field the expected number of local maxima of
    |f| above u = t sigma is, to leading order in t (expected Euler characteristic of the
    excursion set, Adler & Taylor, *Random Fields and Geometry* (2007), Ch. 12 -- recalled from
    memory -- applied to f and -f),

        E N(t) = area * lambda * (2 pi)^{-3/2} * t * exp(-t^2 / 2),

    and P(max |f| <= t sigma) ~ exp(-E N(t)). The median solves E N(t) = ln 2 (t > 1); NaN when
    the region is too small for that (E N(1) < ln 2). Boundary terms are left out.
    """
    if not (area > 0 and lam > 0 and volume > 0):
        return math.nan
    a = area * lam * (TWO_PI ** -1.5)
    target = math.log(2.0)
    if a * math.exp(-0.5) <= target:
        return math.nan

    def g(t: float) -> float:
        return math.log(a) + math.log(t) - 0.5 * t * t - math.log(target)

    hi = 2.0
    while g(hi) > 0:
        hi *= 1.5
    t = scipy.optimize.brentq(g, 1.0, hi, xtol=1e-12)
    return t / math.sqrt(volume)


def first_nonzero(row: np.ndarray, n_max: int = 40) -> int:
    """n0: the first n with |c(n)| > ZERO_COEFF_REL * max_{m <= n_max} |c(m)| (1-based)."""
    a = np.abs(np.asarray(row)[:n_max])
    big = float(a.max()) if a.size else 0.0
    if big == 0:
        raise InputError("the coefficient row is zero: the form has no non-zero coefficient at this cusp")
    return int(np.nonzero(a > ZERO_COEFF_REL * big)[0][0]) + 1


def transition_height(R: float, n0: int = 1) -> float:
    """Y_T = (R - c_T R^{1/3}) / (2 pi n0), the lower edge of the transition zone (see module notes).

    For R <= c_T^{3/2} = 2.53 this is <= 0 (the first term has no Airy regime); the transition
    zone then starts at Y_omega like every zone with Y_T < Y_omega.
    """
    return (R - C_T * R ** (1.0 / 3.0)) / (TWO_PI * n0)


# ------------------------------------------------------------------------------------------
# the first-term profile


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


class _Horo:
    """One grid horocycle: its samples' maximum and the term amplitudes at its height."""

    __slots__ = ("serial", "y", "L", "nt", "vmax", "xmax", "kept", "A", "restmax", "touch")

    def __init__(self, serial, y, L, nt, vmax, xmax, kept, A, restmax=0.0, touch=False):
        self.serial = serial
        self.y = y
        self.L = L
        self.nt = nt
        self.vmax = vmax  # max |F| over kept samples (-1 if none)
        self.xmax = xmax
        self.kept = kept
        self.A = A
        self.restmax = restmax  # max |F - n0 term| (transition slabs)
        self.touch = touch  # a margin sample was dropped because its orbit lies above Y_omega


class _Chart:
    """The translates of F_1 in one cusp's coordinate: arcs of radius r centred at c0 + m r."""

    def __init__(self, r: float, c0: float) -> None:
        self.r = r
        self.c0 = c0

    def arc_gap(self, x: np.ndarray, y: np.ndarray | float) -> np.ndarray:
        """r - distance from (x, y) to the nearest arc centre (> 0: below that arc)."""
        t = (x - self.c0) / self.r
        d = self.r * (t - np.round(t))
        return self.r - np.sqrt(d * d + np.asarray(y) ** 2)


class _Slab:
    """Horocycles y in [y_lo, y_hi] of one cusp's coordinate.

    kind: "strip" (the full period, no mask), "omega" (above the arcs of the chart, with a
    margin), "transition" (a strip that also records the part of F beyond the n0 term).
    """

    def __init__(self, scan: "_RegionScan", cusp: int, y_lo: float, y_hi: float, kind: str,
                 chart: _Chart | None = None, n0: int = 1) -> None:
        self.scan = scan
        self.cusp = cusp
        self.kind = kind
        self.chart = chart
        self.n0 = n0
        self.y_lo, self.y_hi = y_lo, y_hi
        self.horos: list[_Horo] = []

    # sizes ------------------------------------------------------------------------------
    def dy_for(self, y: float) -> float:
        s = self.scan
        return TWO_PI * y / (s.rho * s.sqlam)

    def L_for(self, nt: int) -> int:
        return int(scipy.fft.next_fast_len(max(16, int(math.ceil(self.scan.rho * nt)), 2 * nt + 2)))

    def initial(self) -> None:
        # geometric spacing Delta y = 2 pi y / (rho sqrt(lambda)) from y_lo, the last step shortened
        q = 1.0 + TWO_PI / (self.scan.rho * self.scan.sqlam)
        n = max(2, int(math.ceil(math.log(self.y_hi / self.y_lo) / math.log(q))))
        ys = self.y_lo * q ** np.arange(n + 1, dtype=float)
        ys = ys[ys < self.y_hi * (1 - 1e-12)]
        ys = np.append(ys, self.y_hi)
        if ys.size < 3:
            ys = np.linspace(self.y_lo, self.y_hi, 3)
        nts = self.scan.nterms_many(ys)
        gaps = np.diff(ys)
        dyn = np.maximum(np.append(gaps, gaps[-1]), np.insert(gaps, 0, gaps[0]))
        specs = [(float(y), self.L_for(int(nt)), float(d)) for y, nt, d in zip(ys, nts, dyn)]
        self.horos = self.make_many(specs)

    def make_many(self, specs: list[tuple[float, int, float]]) -> list[_Horo]:
        """Horocycles for (y, L, spacing to the neighbours). The K-Bessel values of all of them
        come from one call and the FFTs of equal length run as one batch."""
        sc = self.scan
        ev = sc.ev
        ys = np.array([s[0] for s in specs])
        nts = sc.nterms_many(ys)
        nt_max = int(nts.max())
        tab = ev.ensure_terms(nt_max + 1)
        t = np.concatenate([TWO_PI * y * np.arange(1, nt + 1) for y, nt in zip(ys, nts)])
        K_all = ktilde(ev.R, t)
        starts = np.concatenate([[0], np.cumsum(nts)])
        A_list = [math.sqrt(y) * K_all[starts[i]:starts[i + 1]] for i, y in enumerate(ys)]
        Ls = np.array([max(int(L), 2 * int(nt) + 2) for (_, L, _), nt in zip(specs, nts)])
        Ls = np.array([int(scipy.fft.next_fast_len(int(L))) for L in Ls])
        d_all = tab.exp_coeffs(self.cusp, nt_max) * np.where(np.arange(1, nt_max + 1) % 2 == 1, -1.0, 1.0)
        if self.kind == "transition":
            alpha, beta = tab.cos_sin(self.cusp, self.n0)
            a0, b0 = float(alpha[self.n0 - 1]), float(beta[self.n0 - 1])
        out: list[_Horo | None] = [None] * len(specs)
        for L in np.unique(Ls):
            idx = np.nonzero(Ls == L)[0]
            L = int(L)
            x = -0.5 + np.arange(L) / L
            chunk = max(1, (1 << 22) // L)
            for s0 in range(0, idx.size, chunk):
                sel = idx[s0:s0 + chunk]
                buf = np.zeros((sel.size, L), dtype=complex)
                for row, i in enumerate(sel):
                    nt = int(nts[i])
                    buf[row, 1:nt + 1] = d_all[:nt] * A_list[i]
                vals = scipy.fft.ifft(buf, axis=1, workers=1).real * L
                av = np.abs(vals)
                touch = np.zeros(sel.size, dtype=bool)
                kept = np.full(sel.size, L)
                if self.kind == "omega":
                    keep, touch = self._omega_mask(x, ys[sel], np.array([specs[i][2] for i in sel]), L)
                    av = np.where(keep, av, -1.0)
                    kept = keep.sum(axis=1)
                k = np.argmax(av, axis=1)
                vmax = av[np.arange(sel.size), k]
                restmax = np.zeros(sel.size)
                if self.kind == "transition":
                    th = TWO_PI * self.n0 * x
                    first = np.outer([A_list[i][self.n0 - 1] if nts[i] >= self.n0 else 0.0 for i in sel],
                                     a0 * np.cos(th) + b0 * np.sin(th))
                    restmax = np.max(np.abs(vals - first), axis=1)
                for row, i in enumerate(sel):
                    out[i] = _Horo(sc.next_serial(), float(ys[i]), L, int(nts[i]),
                                   float(vmax[row]) if kept[row] else -1.0, float(x[k[row]]), int(kept[row]),
                                   A_list[i], float(restmax[row]), bool(touch[row]))
                sc.points += sel.size * L
        return out  # type: ignore[return-value]

    def _omega_mask(self, x: np.ndarray, ys: np.ndarray, dyn: np.ndarray, L: int):
        """(kept samples, whether a margin sample was dropped) for rows of Omega's slab."""
        sc = self.scan
        gap = self.chart.arc_gap(x[None, :], ys[:, None])  # > 0 below an arc
        delta = np.hypot(1.0 / L, dyn)[:, None]  # one grid cell, Euclidean in the chart
        inside = gap <= 0.0
        margin = (~inside) & (gap <= delta)
        keep = inside.copy()
        touch = np.zeros(ys.size, dtype=bool)
        if margin.any():
            rows, cols = np.nonzero(margin)
            G = sc.ev.group
            zx, zy = G.cusps[self.cusp].apply_scaling(x[cols], ys[rows])
            ystar = np.asarray(G.pullback(zx, zy).y, dtype=float)
            ok = ystar <= sc.Y_omega * (1.0 + 1e-12)
            keep[rows[ok], cols[ok]] = True
            if not ok.all():
                touch[np.unique(rows[~ok])] = True
        return keep, touch


def _pad(a: np.ndarray, n: int) -> np.ndarray:
    if a.size >= n:
        return a[:n]
    return np.concatenate([a, np.zeros(n - a.size)])


class _Bands:
    """U-independent data of every band of a slab (arrays; cached by horocycle serials)."""

    FIELDS = ("m", "termsup", "Hxx_t", "Hxy", "bern", "hx", "hy", "y0", "cell", "touch", "rest", "nt")

    def __init__(self, **arrays) -> None:
        for k in self.FIELDS:
            setattr(self, k, arrays[k])


class _RegionScan:
    """Scan of one region (a list of slabs refined together)."""

    def __init__(self, ev: FormEvaluator, settings: ScanSettings) -> None:
        self.ev = ev
        self.settings = settings
        self.Y_omega = float(settings.Y_omega)
        self.lam = ev.lam
        self.sqlam = math.sqrt(ev.lam)
        self.rho = float(settings.samples_per_wavelength)
        self.points = 0
        self.tail = 2.0 * ev.tol
        self._serial = 0
        self._cabs: dict[tuple[int, int], np.ndarray] = {}
        self._band_cache: dict[tuple[int, int], tuple] = {}

    def next_serial(self) -> int:
        self._serial += 1
        return self._serial

    def nterms_many(self, ys: np.ndarray) -> np.ndarray:
        """terms_needed for many heights (one call per distinct cache cell of the evaluator)."""
        ys = np.asarray(ys, dtype=float)
        q = np.floor(np.log(ys) * 64.0)
        uq, inv = np.unique(q, return_inverse=True)
        vals = np.array([self.ev.terms_needed(float(math.exp(v / 64.0) * (1 + 1e-12))) for v in uq], dtype=np.int64)
        return vals[inv]

    def tail_d2(self, y: np.ndarray | float) -> np.ndarray:
        # the truncated tail is below tol in value; its second derivatives are below
        # (2 pi n)^2 tol at the truncation index ~ (R + ...)/(2 pi y): generous allowance
        y = np.asarray(y, dtype=float)
        n = self.nterms_many(np.atleast_1d(y)).reshape(y.shape) + 1
        return (TWO_PI * n) ** 2 * self.ev.tol * 4.0 + self.lam * self.ev.tol / y**2

    def cabs(self, cusp: int, nt: int) -> np.ndarray:
        key = (cusp, nt)
        if key not in self._cabs:
            tab = self.ev.ensure_terms(nt)
            alpha, beta = tab.cos_sin(cusp, nt)
            c = np.hypot(alpha, beta)
            miss = tab.missing_mask(cusp, nt)
            if miss.any():
                c = np.where(miss, tab.envelope(nt), c)
            self._cabs[key] = c
        return self._cabs[key]

    # --------------------------------------------------------------------------------
    def bands(self, s: _Slab) -> _Bands:
        """Band data of a slab, from the cache where the two horocycles are unchanged."""
        hs = s.horos
        keys = [(hs[i].serial, hs[i + 1].serial) for i in range(len(hs) - 1)]
        cache = self._band_cache
        todo = [i for i, k in enumerate(keys) if k not in cache]
        for c0 in range(0, len(todo), 512):
            idx = todo[c0:c0 + 512]
            res = self._band_static(s, [(hs[i], hs[i + 1]) for i in idx])
            cols = np.column_stack([np.asarray(res[k], dtype=float) for k in _Bands.FIELDS])
            for j, i in enumerate(idx):
                cache[keys[i]] = cols[j]
        arr = np.array([cache[k] for k in keys]).reshape(len(keys), len(_Bands.FIELDS))
        out = {k: arr[:, c] for c, k in enumerate(_Bands.FIELDS)}
        out["touch"] = out["touch"] > 0.5
        return _Bands(**out)

    def _band_static(self, s: _Slab, pairs: list[tuple[_Horo, _Horo]]) -> dict:
        nb = len(pairs)
        nt = np.array([max(h0.nt, h1.nt) for h0, h1 in pairs], dtype=np.int64)
        nmax = int(nt.max())
        a0 = np.zeros((nb, nmax))
        dA = np.zeros((nb, nmax))
        for b, (h0, h1) in enumerate(pairs):
            m = int(nt[b])
            A0, A1 = _pad(h0.A, m), _pad(h1.A, m)
            a0[b, :m] = np.maximum(np.abs(A0), np.abs(A1))
            dA[b, :m] = np.abs(A1 - A0)
        y0 = np.array([h0.y for h0, _ in pairs])
        y1 = np.array([h1.y for _, h1 in pairs])
        D = (y1 - y0)[:, None]
        n = np.arange(1, nmax + 1, dtype=float)
        w2 = (TWO_PI * n) ** 2
        k = np.maximum(np.abs(w2[None, :] - self.lam / y0[:, None] ** 2), np.abs(w2[None, :] - self.lam / y1[:, None] ** 2))
        # |A''| <= k a on the band (A'' = (w2 - lam/y^2) A), so linear interpolation between the
        # ends gives a = max|A| <= max(|A0|, |A1|) / (1 - k D^2 / 8) and
        # |A'| <= |A1 - A0| / D + k a D / 2 (error of the interpolant and of its slope)
        den = 1.0 - D * D * k / 8.0
        bad = np.any((den <= 0.25) & (a0 > 0), axis=1)
        den = np.where(den <= 0.25, 0.25, den)
        a = a0 / den
        p = dA / D + 0.5 * D * k * a
        c = self.cabs(s.cusp, nmax)
        td2 = self.tail_d2(y0)
        termsup = a @ c + self.tail
        Hxx_t = (a * w2) @ c + td2
        Hxy = (p * (TWO_PI * n)) @ c + td2
        if s.kind == "transition" and s.n0 <= nmax:
            rest = termsup - a[:, s.n0 - 1] * c[s.n0 - 1]
        else:
            rest = termsup.copy()
        Lmin = np.array([min(h0.L, h1.L) for h0, h1 in pairs], dtype=float)
        hx = 0.5 / Lmin
        hy = 0.5 * (y1 - y0)
        m = np.array([max(h0.vmax, h1.vmax) for h0, h1 in pairs])
        touch = np.array([h0.touch or h1.touch for h0, h1 in pairs])
        cell = np.hypot(hx, hy) / y0
        inf = np.full(nb, math.inf)
        return dict(m=m, termsup=np.where(bad, inf, termsup), Hxx_t=np.where(bad, inf, Hxx_t),
                    Hxy=np.where(bad, inf, Hxy), bern=(TWO_PI * nt) ** 2, hx=hx, hy=hy, y0=y0, cell=cell,
                    touch=touch, rest=np.where(bad, inf, rest), nt=nt.astype(float))

    def band_bounds(self, b: _Bands, U: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(largest kept sample, x-part, y-and-mixed part) of every band for a sup bound U."""
        with np.errstate(invalid="ignore"):
            Hxx = np.minimum(b.Hxx_t, b.bern * U + self.tail_d2(b.y0))
            Hyy = self.lam * U / b.y0**2 + Hxx
            dx = 0.5 * b.hx * b.hx * Hxx
            dy = 0.5 * (2 * b.hx * b.hy * b.Hxy + b.hy * b.hy * Hyy)
        return b.m, dx, dy

    # --------------------------------------------------------------------------------
    def _boundary_bound(self, boundary, U: float) -> float:
        """Largest |F| on the boundary horocycles Im w = Y_omega, with the 1-D Taylor bound."""
        out = -1.0
        for slab, idx in boundary:
            h = slab.horos[idx]
            c = self.cabs(slab.cusp, h.nt)
            n = np.arange(1, h.nt + 1, dtype=float)
            Hxx = min(float(np.dot(c, (TWO_PI * n) ** 2 * np.abs(h.A))), (TWO_PI * h.nt) ** 2 * U)
            Hxx += float(self.tail_d2(h.y))
            out = max(out, h.vmax + 0.5 * (0.5 / h.L) ** 2 * Hxx + self.tail)
        return out

    def _touch_bound(self, Bbd: float, cell: np.ndarray, U: float) -> np.ndarray:
        """Bound for a maximiser within ``cell`` of a region above Y_omega (see module notes)."""
        Yc = self.Y_omega
        ylo = Yc * np.exp(-cell)
        nt = self.nterms_many(ylo)
        Hyy = U * (self.lam / ylo**2 + (TWO_PI * nt) ** 2)
        return Bbd + 0.5 * (Yc * cell) ** 2 * Hyy

    def _bounds(self, slabs, all_b, boundary, U):
        Bbd = self._boundary_bound(boundary, U) if boundary else -1.0
        per = []
        Ub = Bbd
        for s, b in zip(slabs, all_b):
            m, dx, dy = self.band_bounds(b, U)
            u = m + dx + dy
            tb = np.full(u.size, -1.0)
            if b.touch.any():
                tb[b.touch] = self._touch_bound(Bbd, b.cell[b.touch], U)
                u = np.maximum(u, tb)
            u = np.where(np.isfinite(b.termsup), u, math.inf)
            per.append((m, dx, dy, tb))
            if u.size:
                Ub = max(Ub, float(np.max(u)))
        return per, Bbd, Ub

    def run(self, slabs: list[_Slab], boundary: list | None = None) -> dict:
        """Refine the grid of ``slabs`` until the bound meets rtol; ``boundary`` lists the
        (slab, index) of the horocycles Im w = Y_omega that close Omega."""
        st = self.settings
        boundary = boundary or []
        for s in slabs:
            s.initial()
        rounds = 0
        notes: list[str] = []
        U = math.inf
        while True:
            best = max(max(h.vmax for h in s.horos) for s in slabs)
            all_b = [self.bands(s) for s in slabs]
            if not math.isfinite(U):
                # termwise bound of sup |F|: valid without any assumption
                U = max(float(np.max(b.termsup)) if b.termsup.size else 0.0 for b in all_b)
                if boundary:
                    U = max(U, max(float(np.dot(self.cabs(sl.cusp, sl.horos[i].nt), np.abs(sl.horos[i].A)))
                                   for sl, i in boundary) + self.tail)
            for _ in range(6):
                per, Bbd, Ub = self._bounds(slabs, all_b, boundary, U)
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
            for s, pb in zip(slabs, per):
                self._refine(s, pb, target)
        return {"best": best, "U": U, "rounds": rounds, "notes": notes}

    def _refine(self, s: _Slab, pb, target: float) -> None:
        m, dx, dy, tb = pb
        u = np.maximum(m + dx + dy, tb)
        over = np.nonzero(~(u <= target))[0]
        if over.size == 0:
            return
        horos = s.horos
        Lup: dict[int, int] = {}
        inserts: dict[int, float] = {}
        for i in over:
            i = int(i)
            excess = u[i] - target if math.isfinite(u[i]) else math.inf
            L = 2 * max(horos[i].L, horos[i + 1].L)
            if dx[i] >= 0.25 * excess or tb[i] > target or not math.isfinite(dx[i]):
                Lup[i] = max(Lup.get(i, 0), L)
                Lup[i + 1] = max(Lup.get(i + 1, 0), L)
            if dy[i] >= 0.25 * excess or not math.isfinite(dy[i]) or tb[i] > target:
                inserts[i] = math.sqrt(horos[i].y * horos[i + 1].y)
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
                L = max(Lup.get(i, horos[i].L), Lup.get(i + 1, horos[i + 1].L))
                plan.append(len(specs))
                specs.append((ym, L, 0.5 * (horos[i + 1].y - horos[i].y)))
        if not specs:
            return
        # new horocycles need at least their own number of terms
        nts = self.nterms_many(np.array([sp[0] for sp in specs]))
        specs = [(y, max(L, s.L_for(int(nt))), d) for (y, L, d), nt in zip(specs, nts)]
        made = s.make_many(specs)
        s.horos = [made[p] if isinstance(p, int) else p for p in plan]


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


def _refine_candidates(ev: FormEvaluator, cands, U: float, ybounds, accept=None):
    """Newton-refine every horocycle maximum that could lie in the basin of the true maximum.

    A sample with value below best - 2 (U - best) cannot be within (U - best) of the global
    maximum's nearest sample, so only the others are refined; results closer than a wavelength
    to an earlier one are skipped. Returns (x, y, |F|, cusp) of the best point found (a grid
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
    return res


# ------------------------------------------------------------------------------------------


def _cusp_top(ev: FormEvaluator, cusp: int, y_start: float, peak_guess: float, top_rel: float
              ) -> tuple[float, float]:
    """(y_top, termwise bound of |F| for y >= y_top) for one transition zone."""
    R = ev.R
    y = max(1.5 * y_start, (R + 4.0 * max(R, 1.0) ** (1 / 3) + 4.0) / TWO_PI)
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


def omega_charts(group) -> list[_Chart]:
    """Per cusp: the arcs bounding the translates of F_1 in its coordinate (module notes)."""
    charts: dict[int, list[tuple[float, float]]] = {}
    for j, r, c in coset_charts(group):
        charts.setdefault(j, []).append((r, c))
    out = []
    for j in range(group.n_cusps):
        pieces = charts[j]
        r = pieces[0][0]
        cs = np.sort(np.mod([c for _, c in pieces], 1.0))
        # the translates of one cusp tile a period: centres c0 + m r
        t = (cs - cs[0]) / r
        if abs(r * len(pieces) - 1.0) > 1e-9 or np.max(np.abs(t - np.round(t))) > 1e-9:
            raise AssertionError(f"coset translates of cusp {j} do not tile a period ({pieces})")
        out.append(_Chart(r, float(cs[0])))
    return out


def _lowest_heights(group, lam: float) -> list[float]:
    """Bottom of Omega's slab in each chart: the arcs' corners r sqrt(3)/2, with a margin."""
    return [ch.r * math.sqrt(3.0) / 2.0 * math.exp(-0.05 / max(1.0, math.sqrt(lam))) for ch in omega_charts(group)]


def check_coefficients(ev: FormEvaluator, settings: ScanSettings) -> list[str]:
    """Check that the stored coefficients cover the expansions at the lowest heights.

    The grid guarantee needs every c_j(n) up to the number of terms used at the bottom of
    Omega's slab in chart j (stored or given by the Hecke relations). Raises InputError naming
    how many coefficients to store, unless ``settings.allow_incomplete``; then returns a note.
    """
    G = ev.group
    lows = _lowest_heights(G, ev.lam)
    gaps = []
    n_need_max = 0
    for j in range(G.n_cusps):
        n_need = ev.terms_needed(lows[j])
        n_need_max = max(n_need_max, n_need)
        tab = ev.ensure_terms(n_need)
        if tab.missing_mask(j, n_need).any():
            gaps.append((j, n_need))
    if not gaps:
        return []
    form = ev.form
    j, n_need = gaps[0]
    tab = ev.ensure_terms(n_need)
    first = int(np.nonzero(tab.missing_mask(j, n_need))[0][0]) + 1
    msg = (f"form at level {form.level}, R={form.R:.10g} stores {tab.n_stored} coefficients per cusp; the scan "
           f"needs c(n) for n <= {n_need_max} and c({first}) (cusp {j}) is neither stored nor given by "
           f"the Hecke relations; store at least {n_need_max} coefficients")
    if not settings.allow_incomplete:
        raise InputError(msg + " (or pass allow_incomplete=True to bound the missing terms instead)")
    return [msg + "; missing terms are bounded by the coefficient envelope"]


def _omega_sample(ev: FormEvaluator, scale: float, st: ScanSettings, charts: list[_Chart], volume: float) -> dict:
    """Value sample of f/||f|| on Omega with dmu weights, and its moments and histogram.

    In u = 1/y the measure is dmu = dx du, so the midpoint rule in u on [1/Y_omega, 1/Y_lo]
    times all FFT samples of each horocycle, restricted to the translates of F_1 (no margin),
    is a quadrature rule for Omega (module notes); its weights add up to Omega's area up to the
    discretisation of the arcs.
    """
    vals, wts = [], []
    K = st.dist_horocycles
    for j, ch in enumerate(charts):
        y_lo = ch.r * math.sqrt(3.0) / 2.0
        u_lo, u_hi = 1.0 / st.Y_omega, 1.0 / y_lo
        du = (u_hi - u_lo) / K
        us = u_lo + du * (np.arange(K) + 0.5)
        for u in us:
            y = 1.0 / u
            nt = ev.terms_needed(y)
            L = int(scipy.fft.next_fast_len(max(256, 2 * nt + 2)))
            x, v = ev.horocycle(j, y, L, nt)
            keep = ch.arc_gap(x, y) <= 0.0
            vals.append(v[keep])
            wts.append(np.full(int(keep.sum()), du / L))
    v = np.concatenate(vals) * scale
    w = np.concatenate(wts)
    W = float(w.sum())
    mean = float(np.dot(w, v) / W)
    d = v - mean
    var = float(np.dot(w, d * d) / W)
    skew = float(np.dot(w, d**3) / W / var**1.5) if var > 0 else math.nan
    exk = float(np.dot(w, d**4) / W / var**2 - 3.0) if var > 0 else math.nan
    edges = np.linspace(-6.0, 6.0, st.hist_bins + 1)
    hist, _ = np.histogram(v * math.sqrt(volume), bins=edges, weights=w)
    dens = hist / (W * np.diff(edges))
    return dict(omega_sample_mean_sq=float(np.dot(w, v * v) / W), omega_var=var, omega_skew=skew,
                omega_exkurt=exk, omega_samples=int(v.size),
                hist_edges=tuple(float(e) for e in edges), hist_density=tuple(float(t) for t in dens))


def _rel(y: float, Y_T: float) -> float:
    """y / Y_T; NaN when Y_T <= 0 (R <= c_T^{3/2} = 2.53: no Airy regime, see transition_height)."""
    return float(y / Y_T) if Y_T > 0 else math.nan


def _classify(cusp: int, y: float, Y_omega: float, Y_T: tuple[float, ...]) -> tuple[str, str]:
    """Region of a point given by its highest representative (cusp, height): the rule of the
    module notes (Omega is closed; the transition zone is closed at its lower edge)."""
    if y <= Y_omega * (1 + 1e-12):
        return "omega", "omega"
    if y >= Y_T[cusp] * (1 - 1e-12):
        return f"transition {cusp}", "transition"
    return f"intermediate {cusp}", "intermediate"


def scan_form(form, *, settings: ScanSettings | None = None, norm: NormResult | None = None,
              form_key: str = "", evaluator: FormEvaluator | None = None) -> ScanResult:
    """Scan one form: peaks of |f|/||f|| on Omega, every transition zone and intermediate region.

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
    R = ev.R
    lam = ev.lam
    vol = float(G.area)
    notes: list[str] = []
    notes += check_coefficients(ev, st)
    if norm is None:
        norm = l2_norm(form, evaluator=ev)
    scale = norm.scale
    notes = list(norm.notes) + notes
    Yo = float(st.Y_omega)
    h = G.n_cusps
    charts = omega_charts(G)

    # ---- per cusp: first non-zero frequency and the transition height
    tab = ev.ensure_terms(40)
    n0 = tuple(first_nonzero(tab.rows[j], min(40, tab.n_stored)) for j in range(h))
    Y_T = tuple(transition_height(R, n) for n in n0)
    Y_Tz = tuple(max(y, Yo) for y in Y_T)  # where each transition zone starts
    overlap = any(y < Yo for y in Y_T)
    if overlap:
        notes.append("transition zone below Y_omega at cusp(s) "
                     + ", ".join(str(j) for j in range(h) if Y_T[j] < Yo)
                     + f": it starts at Y_omega = {Yo:g} (Omega is fixed); the first-term peak may lie in Omega")
    tab = ev.ensure_terms(max(n0) + 1)
    c_n0 = tuple(float(abs(tab.rows[j, n0[j] - 1])) * scale for j in range(h))

    # ---- masses (Parseval): strip above Y of cusp j
    strip = {}
    for j in range(h):
        for Y in {Yo, Y_Tz[j]}:
            strip[(j, Y)] = strip_mass(ev, j, Y)[0] * scale * scale
    omega_mass = 1.0 - sum(strip[(j, Yo)] for j in range(h))
    omega_area = vol - h / Yo

    trans_scans = []
    prof_max, prof_y, rest_b, rest_g, y_tops, tails = ([] for _ in range(6))
    inter: list[RegionPeak] = []
    for j in range(h):
        # ---- intermediate region [Y_omega, Y_T]
        if Y_T[j] > Yo * (1 + 1e-9):
            rs = _RegionScan(ev, st)
            slab = _Slab(rs, j, Yo, Y_T[j], "strip")
            out = rs.run([slab])
            x, y, v, _ = _refine_candidates(ev, [(slab, hh) for hh in slab.horos], out["U"],
                                            lambda sl: (sl.y_lo, sl.y_hi))
            zx, zy = G.cusps[j].apply_scaling([x], [y])
            area = 1.0 / Yo - 1.0 / Y_T[j]
            inter.append(RegionPeak(
                region=f"intermediate {j}", kind="intermediate", cusp=j, value=v * scale, x=float(x), y=float(y),
                z_re=float(zx[0]), z_im=float(zy[0]), y_rel=_rel(y, Y_T[j]),
                grid_bound=max(out["U"] - v, 0.0) * scale, area=area,
                mass=strip[(j, Yo)] - strip[(j, Y_Tz[j])], prediction=random_wave_max(area, lam, vol),
                grid_points=rs.points, rounds=out["rounds"]))
            notes += [f"intermediate {j}: {m}" for m in out["notes"]]
        else:
            inter.append(RegionPeak(
                region=f"intermediate {j}", kind="intermediate", cusp=j, value=math.nan, x=math.nan, y=math.nan,
                z_re=math.nan, z_im=math.nan, y_rel=math.nan, grid_bound=0.0, area=0.0, mass=0.0,
                prediction=math.nan, grid_points=0, rounds=0))
        # ---- transition zone [max(Y_T, Y_omega), y_top]
        pmax, py = leading_profile_peak(R, n0[j] * Y_Tz[j])
        pmax /= math.sqrt(n0[j])  # sqrt(y) Kt(2 pi n0 y) = n0^{-1/2} sqrt(n0 y) Kt(2 pi n0 y)
        py /= n0[j]
        guess = max(c_n0[j] / scale * pmax, 1e-300)
        y_top, tail = _cusp_top(ev, j, Y_Tz[j], guess, st.top_rel)
        rs = _RegionScan(ev, st)
        slab = _Slab(rs, j, Y_Tz[j], y_top, "transition", n0=n0[j])
        out = rs.run([slab])
        x, y, v, _ = _refine_candidates(ev, [(slab, hh) for hh in slab.horos], out["U"], lambda sl: (sl.y_lo, sl.y_hi))
        zx, zy = G.cusps[j].apply_scaling([x], [y])
        U = max(out["U"], tail)
        trans_scans.append(RegionPeak(
            region=f"transition {j}", kind="transition", cusp=j, value=v * scale, x=float(x), y=float(y),
            z_re=float(zx[0]), z_im=float(zy[0]), y_rel=_rel(y, Y_T[j]), grid_bound=max(U - v, 0.0) * scale,
            area=1.0 / Y_Tz[j], mass=strip[(j, Y_Tz[j])], prediction=c_n0[j] * pmax,
            grid_points=rs.points, rounds=out["rounds"]))
        notes += [f"transition {j}: {m}" for m in out["notes"]]
        bands = rs.bands(slab)
        rest_b.append(float((np.max(bands.rest) + ev.tol) * scale))
        rest_g.append(float(max(hh.restmax for hh in slab.horos) * scale))
        prof_max.append(float(pmax))
        prof_y.append(float(py))
        y_tops.append(float(y_top))
        tails.append(float(tail * scale))

    # ---- Omega (closed: its top horocycles Im w = Y_omega are grid horocycles of its slabs)
    rs = _RegionScan(ev, st)
    lows = _lowest_heights(G, lam)
    slabs = [_Slab(rs, j, lows[j], Yo, "omega", chart=charts[j]) for j in range(h)]
    out = rs.run(slabs, boundary=[(s_, -1) for s_ in slabs])
    cands = [(s_, h_) for s_ in slabs for h_ in s_.horos]

    def in_omega(j: int, x: float, y: float) -> bool:
        zx, zy = G.cusps[j].apply_scaling([x], [y])
        return float(G.pullback(zx, zy).y[0]) <= Yo * (1 + 1e-9)

    x, y, v, jb = _refine_candidates(ev, cands, out["U"], lambda sl: (sl.y_lo, Yo), accept=in_omega)
    zx, zy = G.cusps[jb].apply_scaling([x], [y])
    pb = G.pullback(zx, zy)
    jo = int(pb.cusp[0])
    omega = RegionPeak(
        region="omega", kind="omega", cusp=jo, value=v * scale, x=float(pb.x[0]), y=float(pb.y[0]),
        z_re=float(zx[0]), z_im=float(zy[0]), y_rel=_rel(float(pb.y[0]), Y_T[jo]),
        grid_bound=max(out["U"] - v, 0.0) * scale, area=omega_area, mass=omega_mass,
        prediction=random_wave_max(omega_area, lam, vol), grid_points=rs.points, rounds=out["rounds"])
    notes += [f"omega: {m}" for m in out["notes"]]
    sample = _omega_sample(ev, scale, st, charts, vol)

    regions = [omega]
    for j in range(h):
        regions += [inter[j], trans_scans[j]]
    nonempty = [p for p in regions if not p.empty]
    gp = max(nonempty, key=lambda p: p.value)
    gname, gkind = _classify(gp.cusp, gp.y, Yo, Y_T)
    bulk = [p for p in nonempty if p.kind != "transition"]
    bp = max(bulk, key=lambda p: p.value)
    bulk_area = vol - sum(1.0 / y for y in Y_Tz)
    rel_bounds = [p.grid_bound / p.value for p in nonempty if p.value > 0]
    if ev.extended:
        notes.append(f"coefficients beyond the stored {ev.table.n_stored} filled in by Hecke multiplicativity")
    L_norm = _sym2_from_norm(form, ev, norm)
    is_new = {True: 1, False: 0}.get(form.is_new, -1) if form.level != 1 else 1
    return ScanResult(
        form_key=form_key, level=int(form.level), R=float(form.R), symmetry=form.symmetry.label,
        eigenvalue=float(lam), is_new=int(is_new), volume=vol, norm2=float(norm.norm2), scale=float(scale),
        Y_omega=Yo, rtol=float(st.rtol), regions=tuple(regions), n0=n0, Y_T=tuple(float(y) for y in Y_T),
        c_n0=c_n0, profile_max=tuple(prof_max), profile_y=tuple(prof_y), rest_bound=tuple(rest_b),
        rest_grid=tuple(rest_g), y_top=tuple(y_tops), tail_bound=tuple(tails), overlap=bool(overlap),
        global_region=gname, global_kind=gkind, global_value=float(gp.value), global_cusp=int(gp.cusp),
        global_y=float(gp.y), global_y_rel=_rel(gp.y, Y_T[gp.cusp]),
        bulk_value=float(bp.value), bulk_region=bp.region, bulk_area=float(bulk_area),
        bulk_prediction=random_wave_max(bulk_area, lam, vol),
        omega_mean_sq=float(omega_mass / omega_area), **sample,
        sym2_L1_norm=L_norm,
        sym2_L1_coeffs=float(norm.sym2_L1) if norm.sym2_L1 is not None else math.nan,
        sym2_L1_coeffs_error=float(norm.sym2_error) if norm.sym2_error is not None else math.nan,
        grid_bound_rel=float(max(rel_bounds)) if rel_bounds else math.nan, extended=bool(ev.extended),
        elapsed=time.perf_counter() - t0, notes=tuple(notes),
    )


def _sym2_from_norm(form, ev: FormEvaluator, norm: NormResult) -> float:
    """L(1, sym^2 f) = 4 (1 + e^{-2 pi R}) ||F||^2 / (N |c(1)|^2) for newforms of squarefree level
    (Rankin--Selberg, docs/theory.md §5.1-5.2 and §11.3); NaN for
    other forms."""
    G = ev.group
    if not (form.level == 1 or (G.is_squarefree and form.is_new)):
        return math.nan
    c1 = abs(complex(ev.table.rows[0, 0]))
    if c1 == 0 or form.multiplicity != 1:
        return math.nan
    return float(4.0 * (1.0 + math.exp(-TWO_PI * form.R)) * norm.norm2 / (form.level * c1 * c1))
