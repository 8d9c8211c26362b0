"""Weyl's law with lower-order terms for Gamma0(N), every level N, and completeness reports.

The counting function is

    N_N(T) = #{Maass cusp forms on Gamma0(N) (with multiplicity, all symmetry classes,
               newforms and oldforms) with 0 < R_j <= T},

and the smooth part of its trace-formula expansion, for every level N, is
(docs/theory-additions/weyl.md §W2-W3, derived by the project)

    W_N(T) = (mu/12) T^2 - (2 h T / pi) log((T/e) sqrt(2/pi)) - (T/pi) log A_N + C_N
             + osc_N(T),
    C_N    = -mu/144 + nu2/8 + 2 nu3/9 - h/4 + (k - n_1)/2 - 1,

with mu the index of Gamma0(N) in SL2(Z), h the number of cusps, nu2, nu3 the numbers of
elliptic points of order 2 and 3, and the scattering data of Gamma0(N)
(:mod:`maasscomp.spectrum.scattering`): k = the multiplicity of the eigenvalue -1 of the
involution Phi(1/2) (so that Tr(I - Phi(1/2)) = 2k), n_1 the number of zeta-ratio factors
in det Phi, A_N the "scattering conductor" (the linear growth of the phase of det Phi on
Re s = 1/2), and osc_N a bounded oscillating term: -(1/pi) times the sum of
n_chi arg L(1 + 2iT, chi*) over the primitive characters chi* in det Phi, plus one periodic
term per prime p | N (period 2 pi / log p).  N_N(T) = W_N(T) + S_N(T) + O(1/T) with S_N a
mean-zero remainder.

Special cases (exact reductions, tested):

* N = 1: W(T) = T^2/12 - (2T/pi) log(T/(e sqrt(pi/2))) - 131/144 - (1/pi) arg zeta(1+2iT)
  (R. Steil, DESY report 94-028 (1994); H. Then, Math. Comp. 74 (2005) 363-381; from memory
  of these sources; the arg zeta term is the part of the scattering phase that those
  papers keep inside the remainder);
* squarefree N: det Phi_N(s) = phi_1(s)^h prod_{p|N} ((p^{2-2s} - 1)/(p^{2s} - 1))^{h/2},
  h = 2^omega(N), k = n_1 = h, A_N = N^h, osc_N = -(h/pi) arg zeta(1+2iT)
  - (h/(2 pi)) sum_{p|N} arg(1 - p^{-1-2iT}) (structure as in M. N. Huxley, "Scattering
  matrices for congruence subgroups", in *Modular Forms*, ed. R. A. Rankin, Ellis Horwood
  1984, 141-156); this closed form is used for squarefree levels, the general
  computation agrees with it (tests);
* every other N: the scattering determinant is computed from the exact constant terms of
  the Eisenstein series (:mod:`maasscomp.spectrum.scattering`); for example A_4 = 2^5,
  A_8 = 2^10, A_9 = 3^7, and k < h first at N = 25 (k = 5, h = 6).

General structure (area term, elliptic and cusp terms, Tr(I - Phi(1/2)), winding of the
scattering determinant): H. Iwaniec, *Spectral Methods of Automorphic Forms*, 2nd ed.
(2002), Thm 10.2 (trace formula) and Ch. 11; D. A. Hejhal, *The Selberg Trace Formula for
PSL(2,R)*, Vol. 2, Springer LNM 1001 (1983).  The constants: every elliptic point of order
m contributes (m^2 - 1)/(12 m), every cusp -1/4, the identity -area/(48 pi) = -mu/144, the
removed constant eigenfunction -1, and (1/4) Tr(I - Phi(1/2)) = k/2 with -n_1/2 from the
value -pi/2 of arg zeta(1 + 2iT) at T -> 0+.

Checks: the level-1 formula is the published one; for N = 2 and for N = 4, 8, 9 the counts
of complete lists of eigenvalues computed here agree with W_N within the size of the
remainder (tests/spectrum/test_weyl_law.py).  The formula assumes no exceptional
eigenvalues 0 < lambda < 1/4 (Selberg's conjecture, true for the small levels used here).

Counts per symmetry class (parity, Atkin-Lehner signs) are **not** provided: the
lower-order terms of the split are not known to the project in a checked form, so only
the total over all classes is returned.

The module also holds the completeness report (:func:`completeness`: window counts,
a Turing-style integral test and a small-gap test) and the old/new count identity
(:func:`count_identity`).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from typing import Any, Sequence

import mpmath
import numpy as np

from maasscomp.errors import InputError

__all__ = [
    "weyl_count",
    "weyl_density",
    "expected_in_window",
    "weyl_constant",
    "weyl_terms",
    "WeylTerms",
    "CompletenessWindow",
    "CompletenessReport",
    "completeness",
    "turing_bound",
    "count_identity",
    "CountIdentityRow",
]


# --------------------------------------------------------------------------- level data


@dataclass(frozen=True)
class WeylTerms:
    """The level-dependent constants of Weyl's law for Gamma0(N) (module docstring).

    Attributes
    ----------
    level : int
    mu : int
        Index [SL2(Z) : Gamma0(N)].
    n_cusps : int
        h.
    nu2, nu3 : int
        Elliptic points of order 2 and 3.
    minus_one_multiplicity : int
        k: multiplicity of the eigenvalue -1 of Phi(1/2); Tr(I - Phi(1/2)) = 2k.
    n_zeta : int
        n_1: number of zeta(2s-1)/zeta(2s) factors in det Phi.
    log_conductor : float
        log A_N.
    constant : float
        C_N.
    closed_form : bool
        True for squarefree levels (closed form), False where the scattering determinant
        is computed (:mod:`maasscomp.spectrum.scattering`).
    """

    level: int
    mu: int
    n_cusps: int
    nu2: int
    nu3: int
    minus_one_multiplicity: int
    n_zeta: int
    log_conductor: float
    constant: float
    closed_form: bool

    def as_text(self) -> str:
        """One line per term, for reports."""
        N, h = self.level, self.n_cusps
        return "\n".join([
            f"Weyl's law for Gamma0({N}): mu = {self.mu}, h = {h} cusps, nu2 = {self.nu2}, nu3 = {self.nu3}",
            f"  W(T) = ({self.mu}/12) T^2 - ({2 * h}/pi) T log((T/e) sqrt(2/pi)) - (T/pi) log A + C + osc(T)",
            f"  log A = {self.log_conductor:.12g} (A = {math.exp(self.log_conductor):.12g}),"
            f" Tr(I - Phi(1/2)) = {2 * self.minus_one_multiplicity}, zeta factors n_1 = {self.n_zeta}",
            f"  C = -mu/144 + nu2/8 + 2 nu3/9 - h/4 + (k - n_1)/2 - 1 = {self.constant:.12g}",
            "  (scattering data: " + ("closed form for squarefree N)" if self.closed_form else
                                     "computed from the Eisenstein constant terms)"),
        ])


def _check_level(level: object) -> int:
    if isinstance(level, bool) or not isinstance(level, (int, np.integer)):
        raise InputError(f"level {level!r} is not allowed; use a positive integer")
    N = int(level)
    if N < 1:
        raise InputError(f"level {N} is not allowed; use a positive integer")
    return N


@functools.lru_cache(maxsize=64)
def weyl_terms(level: int) -> WeylTerms:
    """Constants of Weyl's law for Gamma0(level), any level (module docstring).

    Index, cusps and elliptic points come from :func:`maasscomp.groups.gamma0` (Shimura
    1971, Prop. 1.43; Diamond & Shurman 2005, §3.8-3.9); k, n_1 and A_N from the
    scattering determinant (closed form for squarefree N, else
    :func:`maasscomp.spectrum.scattering.scattering_determinant`, a few seconds for
    N around 100 the first time a level is used).
    """
    from maasscomp.groups import gamma0

    N = _check_level(level)
    g = gamma0(N)
    h = g.n_cusps
    if g.is_squarefree:
        k = n1 = h
        logA = h * math.log(N)
        closed = True
    else:
        from maasscomp.spectrum.scattering import scattering_determinant

        D = scattering_determinant(N)
        k, n1, logA = D.minus_one_multiplicity, D.n_trivial, D.log_conductor
        closed = False
    C = -g.index / 144.0 + g.nu2 / 8.0 + 2.0 * g.nu3 / 9.0 - h / 4.0 + (k - n1) / 2.0 - 1.0
    return WeylTerms(N, g.index, h, g.nu2, g.nu3, k, n1, float(logA), float(C), closed)


def weyl_constant(level: int) -> float:
    """Constant term C_N of Weyl's law for Gamma0(level), any level.

    C_N = -mu/144 (identity) + nu2/8 + 2 nu3/9 (elliptic points, (m^2-1)/(12m) each)
    - h/4 (cusps) + (k - n_1)/2 (Tr(I - Phi(1/2))/4 and the zeta-ratio factors' value at
    T = 0) - 1 (the constant eigenfunction).  Equals -131/144 for level 1 and
    -mu/144 + nu2/8 + 2 nu3/9 - h/4 - 1 for squarefree levels (k = n_1 = h there).

    Parameters
    ----------
    level : int
        Positive integer N.

    Returns
    -------
    float
    """
    return weyl_terms(level).constant


# --------------------------------------------------------------------------- oscillatory terms


def _zeta_em(s: np.ndarray) -> np.ndarray:
    """zeta(s) for Re s >= 1, s != 1, by Euler-Maclaurin summation (DLMF 25.2.9); see
    :func:`maasscomp.spectrum.scattering.dirichlet_L` (vectorised, relative error < 1e-12)."""
    from maasscomp.spectrum.scattering import dirichlet_L

    return dirichlet_L(s, np.ones(1))


def _arg_zeta_1_plus_it(t: np.ndarray) -> np.ndarray:
    """Continuous branch of arg zeta(1 + it), zero at sigma -> +infinity (vectorised); -pi/2
    at t = 0 (the limit from t > 0)."""
    from maasscomp.spectrum.scattering import arg_L_1_plus_it

    return arg_L_1_plus_it(t, np.ones(1))


def _zeta_logderiv_1_plus_it(t: float) -> complex:
    with mpmath.workdps(20):
        s = mpmath.mpc(1, t)
        return complex(mpmath.zeta(s, derivative=1) / mpmath.zeta(s))


def _as_T(T: float | np.ndarray, name: str = "T") -> tuple[np.ndarray, bool]:
    arr = np.asarray(T, dtype=float)
    scalar = arr.ndim == 0
    arr = np.atleast_1d(arr)
    if not np.all(np.isfinite(arr)) or np.any(arr < 0):
        bad = arr[~(np.isfinite(arr) & (arr >= 0))][0]
        raise InputError(f"{name} = {bad!r} is not allowed; use finite values >= 0")
    return arr, scalar


def _oscillatory(level: int, T: np.ndarray) -> np.ndarray:
    """osc_N(T): the bounded oscillating part of W_N (module docstring)."""
    from maasscomp.groups import gamma0

    g = gamma0(level)
    # unique values only: completeness reports evaluate window edges repeatedly
    uniq, inv = np.unique(T, return_inverse=True)
    if g.is_squarefree:
        h = g.n_cusps
        out = -(h / math.pi) * _arg_zeta_1_plus_it(2.0 * uniq)
        for p in g.primes:
            # principal value: |p^{-1-2iT}| < 1, so 1 - p^{-1-2iT} stays in the right half-plane
            w = 1.0 - p ** (-1.0) * np.exp(-2j * uniq * math.log(p))
            out = out - (h / (2 * math.pi)) * np.angle(w)
    else:
        from maasscomp.spectrum.scattering import scattering_determinant

        out = scattering_determinant(level).oscillatory(uniq)
    return out[inv].reshape(T.shape)


def _oscillatory_derivative(level: int, T: np.ndarray) -> np.ndarray:
    from maasscomp.groups import gamma0

    g = gamma0(level)
    uniq, inv = np.unique(T, return_inverse=True)
    if g.is_squarefree:
        h = g.n_cusps
        zl = np.array([_zeta_logderiv_1_plus_it(2.0 * x).real for x in uniq])
        out = -(2 * h / math.pi) * zl
        for p in g.primes:
            q = p ** (-1.0) * np.exp(-2j * uniq * math.log(p))
            # d/dT arg(1 - q) with dq/dT = -2i log p q
            out = out - (h / math.pi) * math.log(p) * np.real(q / (1.0 - q))
    else:
        from maasscomp.spectrum.scattering import scattering_determinant

        D = scattering_determinant(level)
        out = np.zeros(uniq.shape)
        with mpmath.workdps(20):
            for f, chi, n in D.characters:
                v = [mpmath.mpc(complex(c).real, complex(c).imag) for c in chi]
                for i, x in enumerate(uniq):
                    s = mpmath.mpc(1, 2 * x)
                    if f == 1:
                        ld = mpmath.zeta(s, derivative=1) / mpmath.zeta(s)
                    else:
                        ld = mpmath.dirichlet(s, v, derivative=1) / mpmath.dirichlet(s, v)
                    out[i] -= (2 * n / math.pi) * float(mpmath.re(ld))
        for pp in D.primes:
            out = out + (pp.derivative(uniq) - pp.slope) / (2 * math.pi)
    return out[inv].reshape(T.shape)


# --------------------------------------------------------------------------- public API


def weyl_count(
    level: int, T: float | np.ndarray, *, oscillatory: bool = True
) -> float | np.ndarray:
    """Weyl's law with lower-order terms: expected number of cusp forms with R <= T.

    For every level N (module docstring; published for N = 1, derived by the project for
    N > 1)

        W_N(T) = (mu/12) T^2 - (2hT/pi) log((T/e) sqrt(2/pi)) - (T/pi) log A_N + C_N
                 + osc_N(T).

    For N = 1: W(T) = T^2/12 - (2T/pi) log(T/(e sqrt(pi/2))) - 131/144
    - (1/pi) arg zeta(1+2iT).  For squarefree N, log A_N = h log N and
    osc_N(T) = -(h/pi) arg zeta(1+2iT) - (h/(2pi)) sum_{p|N} arg(1 - p^{-1-2iT}).
    The count is the total over **all** symmetry classes (even and odd, all
    Atkin-Lehner sign classes, oldforms with multiplicity); a split by class is not
    provided because it is not verified.

    Parameters
    ----------
    level : int
        Level N >= 1.
    T : float or ndarray
        Spectral parameter(s) T >= 0.  The expansion is asymptotic: it is meaningful for
        T above a few units.
    oscillatory : bool, optional
        Include osc_N (arg zeta and Dirichlet L-functions by vectorised Euler-Maclaurin
        summation, checked against mpmath in the tests).  Default True.

    Returns
    -------
    float or ndarray
        Same shape as ``T``.

    Raises
    ------
    InputError
        For non-positive or non-integer levels, negative or non-finite T.
    """
    d = weyl_terms(level)
    t, scalar = _as_T(T)
    with np.errstate(divide="ignore", invalid="ignore"):
        logterm = np.where(
            t > 0, t * np.log(np.where(t > 0, t, 1.0) / math.e * math.sqrt(2 / math.pi)), 0.0
        )
    w = (d.mu / 12.0 * t**2 - (2 * d.n_cusps / math.pi) * logterm
         - (t / math.pi) * d.log_conductor + d.constant)
    if oscillatory:
        w = w + _oscillatory(d.level, t)
    return float(w[0]) if scalar else w


def weyl_density(
    level: int, T: float | np.ndarray, *, oscillatory: bool = False
) -> float | np.ndarray:
    """Derivative dW_N/dT of :func:`weyl_count` (mean number of forms per unit of R).

        W'_N(T) = (mu/6) T - (2h/pi) log(T sqrt(2/pi)) - (1/pi) log A_N  [ + osc_N'(T) ]

    For squarefree N, osc_N'(T) = -(2h/pi) Re zeta'/zeta(1+2iT)
    - (h/pi) sum_{p|N} log p Re(p^{-1-2iT}/(1 - p^{-1-2iT})).  The bracket is included
    only when ``oscillatory`` is True (default False: the mean density is what a
    scan-step rule needs).

    Parameters
    ----------
    level : int
        Level N >= 1.
    T : float or ndarray
        T > 0.
    oscillatory : bool, optional
        Include the derivative of the oscillating terms (mpmath per distinct T).

    Returns
    -------
    float or ndarray
    """
    d = weyl_terms(level)
    t, scalar = _as_T(T)
    if np.any(t <= 0):
        raise InputError("weyl_density needs T > 0 (the log T term is singular at 0)")
    w = (d.mu / 6.0 * t - (2 * d.n_cusps / math.pi) * np.log(t * math.sqrt(2 / math.pi))
         - d.log_conductor / math.pi)
    if oscillatory:
        w = w + _oscillatory_derivative(d.level, t)
    return float(w[0]) if scalar else w


def expected_in_window(
    level: int, T1: float | np.ndarray, T2: float | np.ndarray, *, oscillatory: bool = True
) -> float | np.ndarray:
    """Expected number of cusp forms (all classes) with T1 < R <= T2: W_N(T2) - W_N(T1).

    Parameters
    ----------
    level : int
        Level N >= 1.
    T1, T2 : float or ndarray
        Window ends, 0 <= T1 <= T2 (broadcast together).
    oscillatory : bool, optional
        Passed to :func:`weyl_count`.

    Returns
    -------
    float or ndarray
    """
    a, sa = _as_T(T1, "T1")
    b, sb = _as_T(T2, "T2")
    a, b = np.broadcast_arrays(a, b)
    if np.any(b < a):
        raise InputError("expected_in_window needs T1 <= T2")
    both = np.concatenate([a.ravel(), b.ravel()])
    w = weyl_count(level, both, oscillatory=oscillatory)
    out = (w[a.size:] - w[: a.size]).reshape(a.shape)
    return float(out[0]) if (sa and sb) else out


# --------------------------------------------------------------------------- completeness


@dataclass(frozen=True)
class CompletenessWindow:
    """One window of a completeness report.

    Attributes
    ----------
    T_lo, T_hi : float
        The window is T_lo < R <= T_hi.
    found : int
        Number of supplied eigenvalues in the window.
    expected : float
        W(T_hi) - W(T_lo).
    deficit : float
        expected - found.
    remainder_end : float
        Running remainder N(T_hi) - W(T_hi) (N counted from the supplied list).
    drop_score : float
        Smallest change-point statistic C_g (see :func:`completeness`) over the gaps
        that overlap this window, for the supplied list: negative near a missing
        eigenvalue (about -n/2 with n eigenvalues above it), positive elsewhere.
    flagged : bool
        True if eigenvalues are probably missing in this window (rule in
        :func:`completeness`).
    """

    T_lo: float
    T_hi: float
    found: int
    expected: float
    deficit: float
    remainder_end: float
    drop_score: float
    flagged: bool


@dataclass(frozen=True)
class CompletenessReport:
    """Found-vs-expected table for a list of eigenvalues (see :func:`completeness`).

    Attributes
    ----------
    level : int
    T_min, T_max : float
    windows : tuple of CompletenessWindow
    R : ndarray
        The supplied eigenvalues in (T_min, T_max], sorted.
    remainder : ndarray
        N(R_j) - W(R_j) at each R_j with the midpoint convention N(R_j) = (number below)
        + (multiplicity at R_j)/2, which makes the remainder mean-zero for a complete list.
    mean_remainder, rms_remainder : float
        Mean and root mean square of ``remainder``.
    drop_threshold : float
        Threshold of the change-point statistic used for flags.
    suspect_gaps : tuple of (float, float)
        Intervals between consecutive supplied eigenvalues (or the range ends) in which
        an eigenvalue is probably missing, one entry per missing eigenvalue.
    total_found : int
    total_expected : float
    oscillatory : bool
    """

    level: int
    T_min: float
    T_max: float
    windows: tuple[CompletenessWindow, ...]
    R: np.ndarray
    remainder: np.ndarray
    mean_remainder: float
    rms_remainder: float
    drop_threshold: float
    suspect_gaps: tuple[tuple[float, float], ...]
    total_found: int
    total_expected: float
    oscillatory: bool

    @property
    def flagged(self) -> tuple[CompletenessWindow, ...]:
        """Windows where eigenvalues are probably missing."""
        return tuple(w for w in self.windows if w.flagged)

    @property
    def is_complete(self) -> bool:
        """True when no window is flagged (evidence, not proof, of completeness)."""
        return not any(w.flagged for w in self.windows)

    def as_text(self) -> str:
        """A plain-text table, one line per window."""
        lines = [
            f"level {self.level}: {self.total_found} found, {self.total_expected:.2f} expected "
            f"in ({self.T_min:g}, {self.T_max:g}]; remainder mean {self.mean_remainder:+.3f}, "
            f"rms {self.rms_remainder:.3f}, drop threshold {self.drop_threshold:.2f}",
            f"{'T_lo':>10} {'T_hi':>10} {'found':>6} {'expected':>9} {'deficit':>8} "
            f"{'N-W(end)':>9} {'drop':>6}  flag",
        ]
        for w in self.windows:
            lines.append(
                f"{w.T_lo:10.4f} {w.T_hi:10.4f} {w.found:6d} {w.expected:9.2f} "
                f"{w.deficit:+8.2f} {w.remainder_end:+9.2f} {w.drop_score:+6.2f}  "
                f"{'MISSING?' if w.flagged else ''}"
            )
        return "\n".join(lines)


def completeness(
    level: int,
    found_R: Sequence[float] | np.ndarray,
    T_min: float,
    T_max: float,
    window: float | Sequence[float] | None = None,
    *,
    count_below: int | None = None,
    oscillatory: bool = True,
    drop_threshold: float = 0.4,
) -> CompletenessReport:
    """Compare a list of eigenvalues with Weyl's law, window by window.

    Pure bookkeeping: no search is done.  The running remainder
    S(T) = N(T) - W(T) of a complete list is a mean-zero quantity of size O(1) for the
    heights this tool reaches (numerically |S| is a few tenths r.m.s. for T <= 25 on
    SL2(Z); docs/theory.md §2.2, and H. Then, arXiv:1212.3149, for its distribution at
    large T).  A missing eigenvalue lowers S by 1 from its position on, and a window
    with a missing eigenvalue shows a deficit (expected - found) of about 1 on top of the
    remainder noise.

    Flag rule: a missing eigenvalue lowers S by 1 from where it should be on.  Since S
    has mean 0 for a complete list, the list is scanned for such a unit drop with the
    likelihood-ratio statistic of a known-size step in a known mean (a standard
    change-point test): for the gap g between consecutive supplied eigenvalues (and
    above the last one),

        C_g = sum_{j >= g} (S_j + 1/2) + (S(T_max) + 1/2),

    is the change of the squared residual sum when S from gap g on is modelled as -1
    instead of 0 (up to a factor -2).  C_g < 0 favours a missing eigenvalue in gap g.

    1. The gap g* with the smallest C_g is taken; if C_{g*} <= -``drop_threshold``
       (default 0.4), it is reported in ``suspect_gaps``, and the windows overlapping
       it with a positive deficit (expected - found) are flagged (if none, the one with
       the largest deficit).
    2. S above the gap is raised by 1 and the scan repeats, so several missing
       eigenvalues give several gaps.

    On the ten PSL(2,Z) forms below R = 20 this rule gives no flag for the complete
    list and locates every single and every pair of deleted eigenvalues (measured for
    thresholds 0.25-0.5).  The rule relies on the constant term of Weyl's law: for
    levels whose constant is only derived (all N > 1, see the module docstring) a bias
    of the mean of S weakens it.  With few eigenvalues per window, read the table, not
    only the flags; completeness is made plausible this way, never proved.

    Parameters
    ----------
    level : int
        Squarefree level (Weyl's law as in :func:`weyl_count`).
    found_R : array_like
        Eigenvalues found (all symmetry classes, each repeated by multiplicity).  Values
        outside (T_min, T_max] are ignored apart from those <= T_min, which are counted
        as ``count_below`` if that is not given.
    T_min, T_max : float
        Range of the report, 0 <= T_min < T_max.
    window : float or sequence of float, optional
        Window width, or explicit increasing edges from T_min to T_max.  Default: widths
        chosen so that each window expects about 4 eigenvalues, and at least width 0.5.
    count_below : int, optional
        Number of eigenvalues with R <= T_min.  Default: the number of supplied values
        <= T_min if T_min is below the first eigenvalue region or any are supplied;
        if none are supplied and T_min > 0, W(T_min) is used (remainder measured
        relative to T_min).
    oscillatory : bool, optional
        Use the oscillating terms of Weyl's law (default True).
    drop_threshold : float, optional
        Threshold of the change-point statistic C_g (default 0.4).

    Returns
    -------
    CompletenessReport
    """
    d = weyl_terms(_check_level(level))
    if not (math.isfinite(T_min) and math.isfinite(T_max)) or T_min < 0 or T_max <= T_min:
        raise InputError(f"need 0 <= T_min < T_max, got T_min={T_min!r}, T_max={T_max!r}")
    Rall = np.sort(np.asarray(found_R, dtype=float).ravel())
    if Rall.size and (not np.all(np.isfinite(Rall)) or Rall[0] <= 0):
        raise InputError("found_R must contain finite positive spectral parameters R")
    below = int(np.sum(Rall <= T_min))
    R = Rall[(Rall > T_min) & (Rall <= T_max)]
    W_min = float(weyl_count(level, T_min, oscillatory=oscillatory)) if T_min > 0 else 0.0
    if count_below is not None:
        base = float(count_below)
    elif below > 0 or T_min == 0:
        base = float(below)
    else:
        base = W_min

    # window edges
    if window is None:
        dens = float(weyl_density(level, max(T_max, 1.0)))
        width = max(0.5, 4.0 / max(dens, 1e-9))
        n = max(1, int(math.ceil((T_max - T_min) / width)))
        edges = np.linspace(T_min, T_max, n + 1)
    elif np.ndim(window) == 0:
        width = float(window)  # type: ignore[arg-type]
        if not width > 0:
            raise InputError(f"window width {window!r} is not allowed; use a positive number")
        n = max(1, int(math.ceil((T_max - T_min) / width - 1e-12)))
        edges = np.minimum(T_min + width * np.arange(n + 1), T_max)
        edges[-1] = T_max
    else:
        edges = np.asarray(window, dtype=float)
        if (
            edges.ndim != 1
            or edges.size < 2
            or np.any(np.diff(edges) <= 0)
            or not math.isclose(edges[0], T_min)
            or not math.isclose(edges[-1], T_max)
        ):
            raise InputError("window edges must increase strictly from T_min to T_max")

    W_edges = np.asarray(weyl_count(level, edges, oscillatory=oscillatory), dtype=float)
    if T_min == 0:
        W_edges[0] = 0.0

    # midpoint remainder at each eigenvalue; equal values share the jump
    if R.size:
        W_R = np.asarray(weyl_count(level, R, oscillatory=oscillatory), dtype=float)
        left = np.searchsorted(R, R, side="left")
        right = np.searchsorted(R, R, side="right")
        N_mid = base + 0.5 * (left + right)
        S = N_mid - W_R
        mean = float(np.mean(S))
        rms = float(np.sqrt(np.mean(S**2)))
    else:
        W_R = np.zeros(0)
        S = np.zeros(0)
        mean = float("nan")
        rms = float("nan")

    nwin = edges.size - 1
    found = np.array([int(np.sum((R > edges[k]) & (R <= edges[k + 1]))) for k in range(nwin)])
    expected = np.diff(W_edges)
    deficit = expected - found
    S_top = base + R.size - float(W_edges[-1])
    # gap g (0..n) lies between R[g-1] and R[g] (T_min / T_max at the ends)
    gap_lo = np.concatenate([[T_min], R])
    gap_hi = np.concatenate([R, [T_max]])

    def scores(Sc: np.ndarray, top: float) -> np.ndarray:
        # C_g = sum_{j >= g} (S_j + 1/2) + (S(T_max) + 1/2), g = 0..n
        x = np.concatenate([Sc + 0.5, [top + 0.5]])
        return np.cumsum(x[::-1])[::-1]

    C0 = scores(S, S_top)
    drop_w = np.zeros(nwin)
    for k in range(nwin):
        ov = (gap_lo < edges[k + 1]) & (gap_hi > edges[k])
        drop_w[k] = float(np.min(C0[ov])) if np.any(ov) else 0.0

    flagged = np.zeros(nwin, dtype=bool)
    gaps: list[tuple[float, float]] = []
    Sc = S.copy()
    top = S_top
    for _ in range(R.size + nwin):
        C = scores(Sc, top)
        g = int(np.argmin(C))
        if not C[g] <= -drop_threshold:
            break
        ov = np.nonzero((edges[:-1] < gap_hi[g]) & (edges[1:] > gap_lo[g]))[0]
        if ov.size == 0:  # pragma: no cover - every gap overlaps some window
            break
        # the gap is where the eigenvalue is missing; inside it, the windows with a
        # deficit are the candidates (at least the one with the largest deficit)
        cand = ov[deficit[ov] > 0.0]
        if cand.size == 0:
            cand = ov[[int(np.argmax(deficit[ov]))]]
        flagged[cand] = True
        gaps.append((float(gap_lo[g]), float(gap_hi[g])))
        Sc[g:] += 1.0
        top += 1.0

    windows = []
    for k in range(nwin):
        hi = float(edges[k + 1])
        N_end = base + int(np.sum(R <= hi))
        windows.append(
            CompletenessWindow(
                float(edges[k]), hi, int(found[k]), float(expected[k]), float(deficit[k]),
                N_end - float(W_edges[k + 1]), float(drop_w[k]), bool(flagged[k]),
            )
        )

    total_expected = float(W_edges[-1] - W_edges[0]) if T_min > 0 else float(W_edges[-1])
    return CompletenessReport(
        level=d.level,
        T_min=float(T_min),
        T_max=float(T_max),
        windows=tuple(windows),
        R=R,
        remainder=S,
        mean_remainder=mean,
        rms_remainder=rms,
        drop_threshold=float(drop_threshold),
        suspect_gaps=tuple(gaps),
        total_found=int(R.size),
        total_expected=total_expected,
        oscillatory=oscillatory,
    )
