"""L2 norm of a stored form: quadrature over a fundamental domain, Rankin--Selberg cross-check.

All norms are of the scaled form F = e^{pi R/2} f:

    ||F||^2 = int_{Gamma0(N)\\H} |F|^2 dx dy / y^2,   ||f||^2 = e^{-pi R} ||F||^2,

and ``scale = 1 / ||F||`` makes ``scale * F`` (equivalently the physical form divided by ||f||)
L2-normalised.

Quadrature (derived here; checked against Rankin--Selberg, docs/theory.md §5.1-5.2). With right coset representatives R_k of
Gamma0(N)\\SL2(Z) the union of the R_k F_1 is a fundamental domain (F_1 the standard domain of
SL2(Z)). Split F_1 into its top {|x| <= 1/2, y >= 1} and bottom B = F_1 ∩ {y <= 1}:

* **Tops, by Parseval.** For the cosets R_k = A_j T^m of cusp j the tops fill one period of the
  strip {Im sigma_j^{-1} z >= Y_j}, Y_j = 1/width_j, in the cusp's coordinate. Integrating over
  the period first (int_0^1 cos^2 = int_0^1 sin^2 = 1/2, cross terms vanish),

      int_{strip} |F(sigma_j z)|^2 dmu = sum_n (|c_j(n)|^2 / 2) int_{Y_j}^inf Kt(2 pi n y)^2 dy / y
                                     = sum_n (|c_j(n)|^2 / 2) G(2 pi n Y_j),
      G(T) = int_T^inf Kt(t)^2 dt / t,

  and G is computed once for all n by Gauss--Legendre panels in u = ln t (in u the integrand
  oscillates with frequency at most 2R, DLMF 10.45.7).
* **Bottoms, by 2-D Gauss--Legendre.** Substituting y = sqrt(1 - s^2) (which removes the square
  root singularity of the arc at y = 1),

      int_B g dmu = int_0^{1/2} (s / y^3) [ int_{s <= |x| <= 1/2} g(x + i y) dx ] ds.

  The inner integral is done exactly when the coset's own cusp expansion converges on the
  piece with known coefficients: the piece is a horocycle segment there, the Fourier
  coefficients of F^2 on that horocycle come from two FFTs, and the integral over the
  segments of all translates of the cusp is a sum over them in closed form
  (:func:`_bottom_own`). Otherwise the inner integral uses Gauss--Legendre nodes evaluated
  through the pullback. Every node count is
  taken from the oscillation rate ~2R/y of |F|^2 and the whole sum is repeated with 1.5 times
  the nodes; the difference is the reported error estimate.

Rankin--Selberg (docs/theory.md §5.1, Iwaniec, *Spectral Methods* §8 and R. A. Smith, Proc. AMS
82 (1981), as cited there): for level 1 in the cos/sin normalisation with a(1) = 1,
||f||^2 = L(1, sym^2 f) / (8 cosh(pi R)), so ||F||^2 = L(1, sym^2 f) / (4 (1 + e^{-2 pi R})).
For newforms of squarefree level N the extra factor N is derived in docs/theory.md §5.2;
it is computed and labelled as such, and the quadrature tests it (it holds to ~1e-13 for the
level 2, 5 and 11 newforms of the tests). L(1, sym^2 f) comes from
:func:`maasscomp.spectrum.lfunction.sym2_L1` (smoothed approximate functional equation).
"""

from __future__ import annotations

import functools
import math
from dataclasses import asdict, dataclass

import numpy as np
import scipy.fft
import scipy.special

from maasscomp.errors import InputError
from maasscomp.spectrum.lfunction import sym2_L1
from maasscomp.supnorm.evaluate import FormEvaluator, ktilde

TWO_PI = 2.0 * math.pi
_GL_PANEL = 16


@functools.lru_cache(maxsize=64)
def _gl(n: int) -> tuple[np.ndarray, np.ndarray]:
    # numpy's leggauss solves an n x n eigenproblem (O(n^3), 0.5 s at n = 1000); scipy's
    # roots_legendre is faster but still takes seconds for thousands of nodes, so large rules
    # are composite: panels of 100 nodes, about 10% more nodes in all (each panel is exact for
    # polynomials of degree 199 on its own 1/p of the interval)
    if n <= 150:
        x, w = np.polynomial.legendre.leggauss(n)
    elif n <= 400:
        x, w = scipy.special.roots_legendre(n)
        x, w = np.array(x), np.array(w)
    else:
        p = int(math.ceil(n / 90.0))
        x0, w0 = np.polynomial.legendre.leggauss(100)
        edges = np.linspace(-1.0, 1.0, p + 1)
        c, h = 0.5 * (edges[1:] + edges[:-1]), 0.5 * np.diff(edges)
        x = (c[:, None] + h[:, None] * x0[None, :]).ravel()
        w = (h[:, None] * w0[None, :]).ravel()
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w


def _gl_on(a: float, b: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    x, w = _gl(n)
    return 0.5 * (a + b) + 0.5 * (b - a) * x, 0.5 * (b - a) * w


@dataclass(frozen=True)
class NormResult:
    """L2 norm of the scaled form F = e^{pi R/2} f over Gamma0(N)\\H.

    Attributes
    ----------
    level, R : int, float
    norm2 : float
        ||F||^2 by quadrature.
    scale : float
        1/||F||: ``scale * F`` is L2-normalised (so is f / ||f||).
    log_norm_physical : float
        ln ||f|| = ln ||F|| - pi R / 2 (||f|| itself underflows for large R).
    rel_error : float
        Estimated relative error of norm2 (difference to the run with 1.5x the nodes, plus
        the bound for unknown coefficients in the Parseval parts).
    cusp_parts : tuple of float
        Parseval contribution of each cusp's strip.
    compact_part : float
        Contribution of the bottoms of the coset translates of the standard domain.
    nodes : int
        Quadrature nodes of the final run (s-nodes times inner nodes, summed over cosets).
    rs_norm2 : float or None
        ||F||^2 predicted by Rankin--Selberg from L(1, sym^2 f) (None when not applicable).
    sym2_L1, sym2_error : float or None
        L(1, sym^2 f) and its error estimate.
    rs_rel_diff : float or None
        (norm2 - rs_norm2) / rs_norm2.
    rs_formula : str
        Which Rankin--Selberg formula was used ("" when none).
    extended : bool
        Hecke-extended coefficients were used.
    notes : tuple of str
    """

    level: int
    R: float
    norm2: float
    scale: float
    log_norm_physical: float
    rel_error: float
    cusp_parts: tuple[float, ...]
    compact_part: float
    nodes: int
    rs_norm2: float | None = None
    sym2_L1: float | None = None
    sym2_error: float | None = None
    rs_rel_diff: float | None = None
    rs_formula: str = ""
    extended: bool = False
    notes: tuple[str, ...] = ()

    def as_dict(self) -> dict:
        d = asdict(self)
        d["cusp_parts"] = np.asarray(self.cusp_parts, dtype=float)
        d["notes"] = "\n".join(self.notes)  # the store keeps strings, not lists of strings
        return d

    @classmethod
    def from_dict(cls, d: dict) -> "NormResult":
        kw = dict(d)
        kw["cusp_parts"] = tuple(float(v) for v in np.atleast_1d(kw["cusp_parts"]))
        n = kw.get("notes") or ()
        kw["notes"] = tuple(n.split("\n")) if isinstance(n, str) else tuple(n)
        return cls(**kw)


# ------------------------------------------------------------------------------------------
# Parseval part


def kt2_tail(R: float, T: np.ndarray) -> np.ndarray:
    """G(T) = int_T^inf Kt_R(t)^2 dt / t for an array of T > 0.

    Gauss--Legendre panels (16 nodes) in u = ln t of width <= min(0.25, 8/(2R+1)) between the
    sorted T values and an end point beyond which Kt^2 < 1e-40 (DLMF 10.40.2 decay).
    """
    T = np.asarray(T, dtype=float)
    if T.size == 0:
        return np.zeros(0)
    t_end = max(R, 1.0) + 1.0
    ex = 1.0
    while ktilde(R, [t_end])[0] ** 2 > 1e-40:
        ex *= 1.5
        t_end = max(R, 1.0) + ex
    order = np.argsort(T)
    Ts = T[order]
    u_pts = np.log(np.clip(Ts, None, t_end))
    breaks = np.unique(np.concatenate([u_pts, [math.log(t_end)]]))
    du_max = min(0.25, 8.0 / (2.0 * R + 1.0))
    seg = np.zeros(breaks.size)  # seg[i] = integral from breaks[i] to breaks[i+1]
    xg, wg = _gl(_GL_PANEL)
    us, ws, owner = [], [], []
    for i in range(breaks.size - 1):
        a, b = breaks[i], breaks[i + 1]
        m = max(1, int(math.ceil((b - a) / du_max)))
        edges = np.linspace(a, b, m + 1)
        for p in range(m):
            c, h = 0.5 * (edges[p] + edges[p + 1]), 0.5 * (edges[p + 1] - edges[p])
            us.append(c + h * xg)
            ws.append(h * wg)
            owner.append(np.full(_GL_PANEL, i))
    if us:
        u = np.concatenate(us)
        w = np.concatenate(ws)
        own = np.concatenate(owner)
        vals = ktilde(R, np.exp(u)) ** 2 * w
        np.add.at(seg, own, vals)
    cum = np.cumsum(seg[::-1])[::-1]  # cum[i] = integral from breaks[i] to the end
    idx = np.searchsorted(breaks, u_pts)
    out = np.empty(T.size)
    out[order] = np.where(Ts >= t_end, 0.0, cum[idx])
    return out


def strip_mass(ev: FormEvaluator, cusp: int, Y: float) -> tuple[float, float]:
    """(integral of F^2 over the strip Im w >= Y of a cusp, bound for unknown coefficients).

    Parseval in x (int_0^1 cos^2 = int_0^1 sin^2 = 1/2, cross terms vanish) and
    G(T) = int_T^inf Kt(t)^2 dt / t (:func:`kt2_tail`): sum_n |c_j(n)|^2 / 2 * G(2 pi n Y).
    """
    nt = ev.terms_needed(Y, tol=1e-16)
    tab = ev.ensure_terms(nt)
    n = np.arange(1, nt + 1)
    G = kt2_tail(ev.R, TWO_PI * n * Y)
    c = np.zeros(nt, dtype=complex)
    c[: min(nt, tab.M)] = tab.rows[cusp, : min(nt, tab.M)]
    miss = tab.missing_mask(cusp, nt)
    val = float(np.sum(0.5 * np.abs(c) ** 2 * G))
    bound = float(np.sum(0.5 * tab.envelope(nt)[miss] ** 2 * G[miss])) if miss.any() else 0.0
    return val, bound


# ------------------------------------------------------------------------------------------
# bottoms of the coset translates


def _coset_maps(group) -> list[tuple]:
    """For each coset rep R_k: (cusp j, a, b, d, R_k) with sigma_j^{-1} R_k z = (a z + b) / d."""
    reps = group.coset_reps()
    owner = group.coset_cusp()
    out = []
    for R_k, j in zip(reps, owner):
        M = np.array(group.cusps[int(j)].scaling, dtype=np.int64)
        adj = np.array([[M[1, 1], -M[0, 1]], [-M[1, 0], M[0, 0]]], dtype=np.int64)
        E = adj @ R_k
        if E[1, 0] != 0:
            raise AssertionError("coset representative does not map into its cusp's coordinate")
        if E[1, 1] < 0:
            E = -E
        out.append((int(j), float(E[0, 0]), float(E[0, 1]), float(E[1, 1]), R_k.astype(float)))
    return out


def _node_counts(R: float, factor: float) -> tuple[int, int]:
    """(s-nodes, x-nodes per side) from the oscillation rate 2 (R + 3 R^{1/3} + 10) / y of |F|^2."""
    w = 2.0 * (R + 3.0 * R ** (1 / 3) + 10.0) / (math.sqrt(3.0) / 2.0)
    ns = int(math.ceil(factor * (0.35 * 1.2 * w + 16)))
    nx = int(math.ceil(factor * (0.35 * w + 16)))
    return ns, nx


def coset_charts(group) -> list[tuple[int, float, float]]:
    """Per coset representative R_k: (cusp j, r, X_k) such that R_k F_1 is, in the coordinate
    of cusp j, {|X - X_k| <= r/2, (X - X_k)^2 + Y^2 >= r^2} (r = a/d, X_k = b/d from
    sigma_j^{-1} R_k z = (a z + b) / d; the translates of cusp j tile one period)."""
    return [(j, a / d, b / d) for j, a, b, d, _ in _coset_maps(group)]


def _bottom_own(ev: FormEvaluator, j: int, r: float, c0: float, width: int, y: np.ndarray, wy: np.ndarray,
                s: np.ndarray, nt: int) -> float:
    """sum over the translates of cusp j of int_{bottom} F^2 dmu, from F^2's Fourier coefficients.

    On the horocycle Y = r y of cusp j, F^2 = sum_k g_k e(k X) (|k| <= 2 nt) is found exactly by
    two FFTs of length L > 4 nt. The translates of cusp j have centres X_p = c0 + p r (p < width,
    r width = 1) and contribute X in [X_p + r s, X_p + r/2] and [X_p - r/2, X_p - r s]; summed
    over p only k = m width survive, sin(pi m) = 0, and

        sum_p int e(k X) dX = (1 - 2 s) [k = 0],  - width e(m c0 width) sin(2 pi m s) / (pi m width),

    so int = (1 - 2 s) g_0 - (2 / pi) sum_{m >= 1} Re(g_{m width} e(m width c0)) sin(2 pi m s) / m.
    The measure is dX dY / Y^2 with dX = r dx: the y-weights ``wy`` (of dx dy / y^3 s, see
    :func:`_bottom_integrals`) are divided by r.
    """
    tab = ev.ensure_terms(nt)
    dn = tab.exp_coeffs(j, nt) * np.where(np.arange(1, nt + 1) % 2 == 1, -1.0, 1.0)
    L = int(scipy.fft.next_fast_len(4 * nt + 2))
    mmax = (2 * nt) // width
    m = np.arange(1, mmax + 1)
    phase = np.exp(2j * math.pi * m * width * c0) * np.where((m * width) % 2 == 1, -1.0, 1.0)
    total = 0.0
    chunk = max(1, (1 << 21) // L)
    for a in range(0, y.size, chunk):
        yy = y[a:a + chunk]
        A = ev.amplitudes(r * yy, nt)
        buf = np.zeros((yy.size, L), dtype=complex)
        buf[:, 1:nt + 1] = A * dn[None, :]
        F = scipy.fft.ifft(buf, axis=1, workers=1).real * L  # F at X_l = -1/2 + l / L
        g = scipy.fft.fft(F * F, axis=1, workers=1) / L  # g_k e(-k/2) (the samples start at -1/2)
        g0 = g[:, 0].real
        gm = g[:, m * width] * phase[None, :]  # g_{m width} e(m width c0)
        sin = np.sin(2.0 * math.pi * np.outer(s[a:a + chunk], m)) / m[None, :]
        inner = (1.0 - 2.0 * s[a:a + chunk]) * g0 - (2.0 / math.pi) * np.sum(gm.real * sin, axis=1)
        total += float(np.dot(wy[a:a + chunk], inner)) / r
    return total


def _bottom_integrals(ev: FormEvaluator, maps, factor: float) -> tuple[float, int]:
    ns, nx = _node_counts(ev.R, factor)
    s, ws = _gl_on(0.0, 0.5, ns)
    y = np.sqrt(1.0 - s * s)
    wy = ws * s / y**3
    total = 0.0
    nodes = 0
    G = ev.group
    by_cusp: dict[int, list] = {}
    for mp in maps:
        by_cusp.setdefault(mp[0], []).append(mp)
    for j, pieces in by_cusp.items():
        r = pieces[0][1] / pieces[0][3]  # height scale: Im(sigma_j^{-1} R_k z) = r y
        Ymin = r * math.sqrt(3.0) / 2.0
        nt = ev.terms_needed(Ymin)
        tab = ev.ensure_terms(nt)
        if not tab.missing_mask(j, nt).any():
            c0 = min((b / d) % 1.0 for _, a, b, d, _ in pieces)
            total += _bottom_own(ev, j, r, c0, len(pieces), y, wy, s, nt)
            nodes += ns * nt
            continue
        xg, wg = _gl(nx)
        # x on [s, 1/2] and [-1/2, -s] for every s node: (ns, nx) arrays
        half = 0.5 * (0.5 - s)[:, None]
        xr = s[:, None] + half * (xg[None, :] + 1.0)
        wx = half * wg[None, :]
        X = np.concatenate([xr, -xr], axis=1)
        W = np.concatenate([wx, wx], axis=1)
        Yg = np.broadcast_to(y[:, None], X.shape)
        z = X + 1j * Yg
        for _, a, b, d, Rk in pieces:
            zk = (Rk[0][0] * z + Rk[0][1]) / (Rk[1][0] * z + Rk[1][1])
            vals = ev(zk.real, zk.imag, conditioning=False).values
            total += float(np.sum(wy[:, None] * W * vals**2))
            nodes += X.size
    del G
    return total, nodes


def compact_quadrature(ev: FormEvaluator, Y_omega: float = 2.0, factor: float = 1.0
                       ) -> tuple[np.ndarray, np.ndarray]:
    """Values of F and weights of a quadrature rule for dmu on the compact set Omega.

    Omega is the fundamental domain minus the cusp regions {Im sigma_j^{-1} z > Y_omega}
    (Y_omega >= 1): the bottoms R_k B of the coset translates (nodes as in :func:`l2_norm`) and,
    for every cusp of width w_j, the strip 1/w_j <= Im w < Y_omega (Gauss--Legendre in ln Im w,
    equally spaced points in Re w: the trapezoidal rule, exact for trigonometric polynomials of
    degree below the number of points). sum(weights) is the area of Omega,
    pi mu / 3 - n_cusps / Y_omega, up to the quadrature error. The scanner's Omega mass comes
    from Parseval instead (``maasscomp.supnorm.scan.strip_mass``); this rule is an independent
    check of it.

    Returns
    -------
    (values, weights) : ndarrays of equal length
    """
    Y_c = float(Y_omega)
    G = ev.group
    maps = _coset_maps(G)
    ns, nx = _node_counts(ev.R, factor)
    s, ws = _gl_on(0.0, 0.5, ns)
    y = np.sqrt(1.0 - s * s)
    wy = ws * s / y**3
    xg, wg = _gl(nx)
    half = 0.5 * (0.5 - s)[:, None]
    xr = s[:, None] + half * (xg[None, :] + 1.0)
    wx = half * wg[None, :]
    X = np.concatenate([xr, -xr], axis=1)
    W = np.concatenate([wx, wx], axis=1) * wy[:, None]
    vals, wts = [], []
    for j, a, b, d, Rk in maps:
        r = a / d
        nt = ev.terms_needed(r * math.sqrt(3.0) / 2.0)
        tab = ev.ensure_terms(nt)
        if not tab.missing_mask(j, nt).any():
            dn = tab.exp_coeffs(j, nt)  # F = Re sum_n d_n A_n e(n X)
            A = ev.amplitudes(r * y, nt)
            V = np.empty(X.shape)
            for i in range(ns):
                # e(n X) for n = 1..nt by repeated multiplication (rounding grows like n eps)
                e1 = np.exp(2j * math.pi * (a * X[i] + b) / d)
                E = np.cumprod(np.broadcast_to(e1[:, None], (e1.size, nt)), axis=1)
                V[i] = (E @ (dn * A[i])).real
        else:
            z = X + 1j * y[:, None]
            zk = (Rk[0][0] * z + Rk[0][1]) / (Rk[1][0] * z + Rk[1][1])
            V = ev(zk.real, zk.imag, conditioning=False).values
        vals.append(V.ravel())
        wts.append(W.ravel())
    heights: dict[int, float] = {}
    for j, a, b, d, _ in maps:
        heights[j] = a / d
    rate = 2.0 * (ev.R + 3.0 * ev.R ** (1 / 3) + 10.0)
    for j, Ylo in heights.items():
        if Y_c <= Ylo * (1 + 1e-12):
            continue
        nu = int(math.ceil(factor * (0.35 * rate * math.log(Y_c / Ylo) + 16)))
        u, wu = _gl_on(math.log(Ylo), math.log(Y_c), nu)
        for uu, ww in zip(u, wu):
            yy = math.exp(uu)
            nt = ev.terms_needed(yy)
            L = int(scipy.fft.next_fast_len(4 * nt + 8))
            _, v = ev.horocycle(j, yy, L, nt)
            vals.append(v)
            wts.append(np.full(L, ww / (L * yy)))  # dX dY / Y^2 with dY = Y du
    return np.concatenate(vals), np.concatenate(wts)


# ------------------------------------------------------------------------------------------


def rankin_selberg_norm2(L1: float, R: float, level: int) -> float:
    """||F||^2 = level * L(1, sym^2 f) / (4 (1 + e^{-2 pi R})) (docs/theory.md §5.1, §5.2)."""
    return level * L1 / (4.0 * (1.0 + math.exp(-2.0 * math.pi * R)))


def l2_norm(form, *, evaluator: FormEvaluator | None = None, rankin_selberg: bool = True) -> NormResult:
    """L2 norm of the scaled form F over Gamma0(N)\\H by quadrature, with Rankin--Selberg check.

    Parameters
    ----------
    form : Form
    evaluator : FormEvaluator, optional
        Reuse an evaluator (and its extended coefficient table).
    rankin_selberg : bool
        Also compute L(1, sym^2 f) and the Rankin--Selberg prediction where it applies (level 1;
        newforms of squarefree level, formula unverified) and enough coefficients are stored.

    Returns
    -------
    NormResult
    """
    ev = evaluator if evaluator is not None else FormEvaluator(form)
    G = ev.group
    maps = _coset_maps(G)
    # Parseval over each cusp's strip above the tops of the standard-domain translates
    heights: dict[int, list[float]] = {}
    for j, a, b, d, _ in maps:
        heights.setdefault(j, []).append(a / d)
    cusp_parts = []
    miss_bound = 0.0
    for j in range(G.n_cusps):
        hs = heights.get(j, [])
        if not hs or abs(sum(hs) - 1.0) > 1e-12 or max(hs) - min(hs) > 1e-15:
            raise AssertionError(f"coset translates of cusp {j} do not fill one period ({hs})")
        val, bnd = strip_mass(ev, j, hs[0])
        cusp_parts.append(val)
        miss_bound += bnd
    I1, _ = _bottom_integrals(ev, maps, 1.0)
    I2, nodes = _bottom_integrals(ev, maps, 1.5)
    cusp_total = float(sum(cusp_parts))
    norm2 = cusp_total + I2
    if not (norm2 > 0 and math.isfinite(norm2)):
        raise InputError(f"form at level {form.level}, R={form.R}: quadrature norm {norm2!r} is not positive")
    rel_err = (abs(I2 - I1) + miss_bound) / norm2
    notes = []
    if ev.extended:
        notes.append(f"coefficients beyond the stored {ev.table.n_stored} filled in by Hecke multiplicativity")
    if miss_bound > 0:
        notes.append(f"unknown coefficients bound the Parseval parts to {miss_bound / norm2:.1e} relative")
    res = dict(
        level=int(form.level), R=float(form.R), norm2=float(norm2), scale=1.0 / math.sqrt(norm2),
        log_norm_physical=0.5 * math.log(norm2) - 0.5 * math.pi * float(form.R),
        rel_error=float(rel_err), cusp_parts=tuple(cusp_parts), compact_part=float(I2), nodes=int(nodes),
        extended=bool(ev.extended),
    )
    if rankin_selberg:
        res.update(_rankin_selberg(form, ev, norm2, notes))
    res["notes"] = tuple(notes)
    return NormResult(**res)


def _rankin_selberg(form, ev: FormEvaluator, norm2: float, notes: list) -> dict:
    level = int(form.level)
    if level == 1:
        formula = "level 1: ||F||^2 = L(1, sym^2 f) / (4 (1 + e^{-2 pi R}))"
    elif ev.group.is_squarefree and form.is_new:
        formula = ("squarefree newform (unverified): ||F||^2 = N L(1, sym^2 f) / (4 (1 + e^{-2 pi R}))")
    else:
        return {}
    if form.multiplicity != 1 or not (form.hecke_residual <= 1e-6):
        notes.append("Rankin-Selberg check skipped: the form is not a simple Hecke eigenform")
        return {}
    lam = np.real(np.asarray(ev.table.rows[0, : ev.table.n_stored]))
    try:
        L1, err = sym2_L1(float(form.R), lam, level)
    except InputError as exc:
        notes.append(f"Rankin-Selberg check skipped: {exc}")
        return {}
    rs = rankin_selberg_norm2(L1, float(form.R), level)
    return dict(rs_norm2=float(rs), sym2_L1=float(L1), sym2_error=float(err),
                rs_rel_diff=float((norm2 - rs) / rs), rs_formula=formula)
