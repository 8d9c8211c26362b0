"""Certified lower bound for the height of pulled-back points (Y0 of Gamma0(N)).

After reduction into the standard domain F1 = {|x| <= 1/2, |z| >= 1} and a coset k,
the pullback returns the height

    H_k(z) = max_s  y / (w[k, s] |c_s z + d_s|^2)

(``Gamma0.pullback``). Y0 = min_k min_{z in F1} H_k(z). On a rectangle
[x0, x1] x [y0, y1] the function |c z + d|^2 = (c x + d)^2 + c^2 y^2 is convex, so its
maximum is at a corner, and y0 / (w max_corners |c z + d|^2) bounds each term from
below. A best-first refinement of rectangles (branch and bound) closes the gap between
this bound and values of H_k at points of F1.
"""

from __future__ import annotations

import math

import numpy as np

from maasscomp.errors import ConvergenceError

_SQRT3_2 = math.sqrt(3.0) / 2.0


def _heights(cc, dd, wk, x, y):
    q = (cc[None, :] * x[:, None] + dd[None, :]) ** 2 + (cc[None, :] * y[:, None]) ** 2
    return (y[:, None] / (wk * q)).max(axis=1)


def certified_min_height(
    cand_cd: np.ndarray, width: np.ndarray, rtol: float = 1e-6, max_iter: int = 200
) -> float:
    """Lower bound L <= min_k min_{z in F1} H_k(z) with L >= (1 - rtol) * (the minimum).

    Parameters
    ----------
    cand_cd : (S, 2) array
        Bottom rows (c_s, d_s) of the candidates.
    width : (mu, S) array
        w[k, s], the width of the cusp that candidate s reaches from coset k.
    rtol : float
        Relative gap at which the refinement stops.
    """
    cc = np.asarray(cand_cd[:, 0], dtype=float)
    dd = np.asarray(cand_cd[:, 1], dtype=float)
    width = np.asarray(width, dtype=float)
    mu = width.shape[0]
    ks = np.arange(mu)
    # an initial upper bound of the minimum: values at the corner rho and at i
    U = np.inf
    for px, py in ((0.5, _SQRT3_2), (-0.5, _SQRT3_2), (0.0, 1.0)):
        U = min(U, float(_heights(cc, dd, width, np.full(mu, px), np.full(mu, py)).min()))
    # H_k >= y / w[k, 0], so only y <= U w[k, 0] matters
    ytop = U * width[:, 0]
    live = ytop > _SQRT3_2
    n0 = 4
    gx = np.linspace(-0.5, 0.5, n0 + 1)
    k_l, x0_l, x1_l, y0_l, y1_l = [], [], [], [], []
    for k in ks[live]:
        gy = np.linspace(_SQRT3_2, ytop[k], n0 + 1)
        X0, Y0 = np.meshgrid(gx[:-1], gy[:-1], indexing="ij")
        X1, Y1 = np.meshgrid(gx[1:], gy[1:], indexing="ij")
        k_l.append(np.full(X0.size, k))
        x0_l.append(X0.ravel())
        x1_l.append(X1.ravel())
        y0_l.append(Y0.ravel())
        y1_l.append(Y1.ravel())
    if not k_l:
        return U * (1.0 - rtol)
    k = np.concatenate(k_l)
    x0 = np.concatenate(x0_l)
    x1 = np.concatenate(x1_l)
    y0 = np.concatenate(y0_l)
    y1 = np.concatenate(y1_l)
    for _ in range(max_iter):
        # drop rectangles inside the unit disk (disk convex: all corners inside)
        far_x = np.maximum(np.abs(x0), np.abs(x1))
        outside = far_x * far_x + y1 * y1 >= 1.0
        k, x0, x1, y0, y1 = k[outside], x0[outside], x1[outside], y0[outside], y1[outside]
        wk = width[k]
        qmax = None
        for cx, cy in ((x0, y0), (x0, y1), (x1, y0), (x1, y1)):
            q = (cc[None, :] * cx[:, None] + dd[None, :]) ** 2 + (cc[None, :] * cy[:, None]) ** 2
            qmax = q if qmax is None else np.maximum(qmax, q)
        LB = (y0[:, None] / (wk * qmax)).max(axis=1)
        # a point of F1 in each rectangle: centre, lifted onto the unit circle if needed
        xc = 0.5 * (x0 + x1)
        yc = np.maximum(0.5 * (y0 + y1), np.sqrt(np.maximum(1.0 - xc * xc, 0.0)))
        ok = yc <= y1
        if ok.any():
            U = min(U, float(_heights(cc, dd, wk[ok], xc[ok], yc[ok]).min()))
        keep = LB < U * (1.0 - rtol)
        if not keep.any():
            return U * (1.0 - rtol)
        k, x0, x1, y0, y1 = k[keep], x0[keep], x1[keep], y0[keep], y1[keep]
        xm = 0.5 * (x0 + x1)
        ym = 0.5 * (y0 + y1)
        k = np.concatenate([k, k, k, k])
        x0, x1 = np.concatenate([x0, x0, xm, xm]), np.concatenate([xm, xm, x1, x1])
        y0, y1 = np.concatenate([y0, ym, y0, ym]), np.concatenate([ym, y1, ym, y1])
    raise ConvergenceError(
        f"height bound refinement did not reach rtol={rtol} in {max_iter} steps", best=None
    )
