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


def _heights(cd, w, x, y):
    """max_s y / (w_s |c_s z + d_s|^2) for points z = x + i y (one coset)."""
    q = (cd[:, 0] * x[:, None] + cd[:, 1]) ** 2 + (cd[:, 0] * y[:, None]) ** 2
    return (y[:, None] / (w * q)).max(axis=1)


def certified_min_height(
    cand_cd: np.ndarray,
    width: np.ndarray,
    relevant: list[np.ndarray] | None = None,
    rtol: float = 1e-6,
    max_iter: int = 200,
) -> float:
    """Lower bound L <= min_k min_{z in F1} H_k(z) with L >= (1 - rtol) * (the minimum).

    Parameters
    ----------
    cand_cd : (S, 2) array
        Bottom rows (c_s, d_s) of the candidates.
    width : (mu, S) array
        w[k, s], the width of the cusp that candidate s reaches from coset k.
    relevant : list of index arrays, optional
        For each coset the candidates that can be maximal on F1 (all by default); the
        others never exceed candidate 0 there, so dropping them leaves H_k unchanged.
    rtol : float
        Relative gap at which the refinement stops.
    """
    cand_cd = np.asarray(cand_cd, dtype=float)
    width = np.asarray(width, dtype=float)
    mu = width.shape[0]
    if relevant is None:
        relevant = [np.arange(cand_cd.shape[0])] * mu
    cds = [cand_cd[r] for r in relevant]
    ws = [width[k, r] for k, r in enumerate(relevant)]
    # an initial upper bound of the minimum: values at the corner rho and at i
    pts_x = np.array([0.5, -0.5, 0.0])
    pts_y = np.array([_SQRT3_2, _SQRT3_2, 1.0])
    U = min(float(_heights(cds[k], ws[k], pts_x, pts_y).min()) for k in range(mu))
    n0 = 4
    gx = np.linspace(-0.5, 0.5, n0 + 1)
    cells: list[np.ndarray | None] = [None] * mu  # per coset: (m, 4) array x0, x1, y0, y1
    for k in range(mu):
        # H_k >= y / w[k, 0], so only y <= U w[k, 0] matters
        ytop = U * width[k, 0]
        if ytop <= _SQRT3_2:
            continue
        gy = np.linspace(_SQRT3_2, ytop, n0 + 1)
        X0, Y0 = np.meshgrid(gx[:-1], gy[:-1], indexing="ij")
        X1, Y1 = np.meshgrid(gx[1:], gy[1:], indexing="ij")
        cells[k] = np.stack([X0.ravel(), X1.ravel(), Y0.ravel(), Y1.ravel()], axis=1)
    for _ in range(max_iter):
        any_left = False
        new_cells: list[np.ndarray | None] = [None] * mu
        lbs = []
        for k in range(mu):
            cl = cells[k]
            if cl is None or cl.shape[0] == 0:
                continue
            x0, x1, y0, y1 = cl.T
            # drop rectangles inside the unit disk (disk convex: all corners inside)
            far_x = np.maximum(np.abs(x0), np.abs(x1))
            out = far_x * far_x + y1 * y1 >= 1.0
            if not out.all():
                cl = cl[out]
                x0, x1, y0, y1 = cl.T
            cd, w = cds[k], ws[k]
            qmax = None
            for cx, cy in ((x0, y0), (x0, y1), (x1, y0), (x1, y1)):
                q = (cd[:, 0] * cx[:, None] + cd[:, 1]) ** 2 + (cd[:, 0] * cy[:, None]) ** 2
                qmax = q if qmax is None else np.maximum(qmax, q)
            LB = (y0[:, None] / (w * qmax)).max(axis=1)
            # a point of F1 in each rectangle: centre, lifted onto the unit circle if needed
            xc = 0.5 * (x0 + x1)
            yc = np.maximum(0.5 * (y0 + y1), np.sqrt(np.maximum(1.0 - xc * xc, 0.0)))
            ok = yc <= y1
            if ok.any():
                U = min(U, float(_heights(cd, w, xc[ok], yc[ok]).min()))
            lbs.append((k, cl, LB))
        for k, cl, LB in lbs:
            keep = LB < U * (1.0 - rtol)
            if not keep.any():
                continue
            any_left = True
            x0, x1, y0, y1 = cl[keep].T
            xm = 0.5 * (x0 + x1)
            ym = 0.5 * (y0 + y1)
            new_cells[k] = np.concatenate(
                [
                    np.stack([x0, xm, y0, ym], axis=1),
                    np.stack([x0, xm, ym, y1], axis=1),
                    np.stack([xm, x1, y0, ym], axis=1),
                    np.stack([xm, x1, ym, y1], axis=1),
                ]
            )
        if not any_left:
            return U * (1.0 - rtol)
        cells = new_cells
    raise ConvergenceError(
        f"height bound refinement did not reach rtol={rtol} in {max_iter} steps", best=None
    )
