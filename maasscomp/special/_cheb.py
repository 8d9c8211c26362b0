"""Piecewise Chebyshev interpolants: adaptive construction and vectorised evaluation.

Interpolation in the Chebyshev extreme points and Clenshaw summation (L. N. Trefethen,
*Approximation Theory and Approximation Practice*, SIAM 2013, chapters 2-3; the tail test
below is the usual "chopping" rule of that book, in a simplified form).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
import scipy.fft


def cheb_nodes(a: float, b: float, n: int) -> np.ndarray:
    """The n + 1 Chebyshev extreme points of [a, b], in increasing order."""
    u = -np.cos(np.pi * np.arange(n + 1) / n)
    return 0.5 * (a + b) + 0.5 * (b - a) * u


def values_to_coeffs(vals: np.ndarray) -> np.ndarray:
    """Chebyshev coefficients from values at the increasing extreme points (last axis)."""
    n = vals.shape[-1] - 1
    # the increasing order u_j = -cos(pi j / n) is the standard order reversed
    c = scipy.fft.dct(vals[..., ::-1], type=1, axis=-1) / n
    c[..., 0] *= 0.5
    c[..., n] *= 0.5
    return c


def deriv_coeffs(c: np.ndarray, a: float, b: float) -> np.ndarray:
    """Coefficients of d/dx of the Chebyshev series c on [a, b] (same length, last = 0)."""
    n = c.shape[-1] - 1
    d = np.zeros_like(c)
    if n >= 1:
        d[..., n - 1] = 2 * n * c[..., n]
        for k in range(n - 2, -1, -1):
            nxt = d[..., k + 2] if k + 2 <= n else 0.0
            d[..., k] = nxt + 2 * (k + 1) * c[..., k + 1]
        d[..., 0] *= 0.5
    return d * (2.0 / (b - a))


@dataclass
class PiecewiseCheb:
    """A piecewise Chebyshev interpolant: ``edges`` (m + 1,), coefficients ``coef`` (n + 1, m)."""

    edges: np.ndarray
    coef: np.ndarray  # shape (n+1, m): row k holds the k-th coefficient of every piece

    @property
    def a(self) -> float:
        return float(self.edges[0])

    @property
    def b(self) -> float:
        return float(self.edges[-1])

    def evaluate(self, x: np.ndarray) -> np.ndarray:
        """Clenshaw evaluation at points ``x`` inside [a, b] (clamped to the end pieces)."""
        m = self.edges.size - 1
        idx = np.searchsorted(self.edges, x, side="right") - 1
        np.clip(idx, 0, m - 1, out=idx)
        lo = self.edges[:-1].take(idx)
        hi = self.edges[1:].take(idx)
        u = (2.0 * x - (lo + hi)) / (hi - lo)
        u2 = 2.0 * u
        n = self.coef.shape[0] - 1
        b1 = self.coef[n].take(idx)
        b2 = np.zeros_like(b1)
        for k in range(n - 1, 0, -1):
            b1, b2 = u2 * b1 - b2 + self.coef[k].take(idx), b1
        return u * b1 - b2 + self.coef[0].take(idx)

    def derivative(self) -> "PiecewiseCheb":
        """The piecewise derivative as a new interpolant."""
        cols = []
        for j in range(self.edges.size - 1):
            cols.append(deriv_coeffs(self.coef[:, j], self.edges[j], self.edges[j + 1]))
        return PiecewiseCheb(self.edges.copy(), np.stack(cols, axis=1))


def build_adaptive(
    f: Callable[[np.ndarray], np.ndarray],
    breaks: list[float],
    n: int = 24,
    tail_tol: float = 3e-15,
    min_width: float = 0.0,
    max_pieces: int = 4000,
    scale_floor: float = 0.0,
    noise_floor: float = 0.0,
) -> tuple[list[float], list[np.ndarray]]:
    """Fit f on the intervals given by ``breaks`` and bisect until every piece resolves f.

    A piece is accepted when its last three coefficients are below ``tail_tol`` times the
    largest value of ``|f|`` on the piece, or times ``scale_floor`` if that is larger (for
    oscillating functions, whose rounding noise near a zero is set by the envelope, not by
    the local values).  A tail below the absolute ``noise_floor`` is accepted too (the
    rounding of the interpolation nodes themselves, ``eps |x| |f'|``, sets such a floor).  ``f`` is called once per level with all
    nodes of all pending pieces (vectorised), and may return complex values.

    Returns the final edges and the per-piece coefficient arrays (in order).
    """
    pending = [(float(breaks[i]), float(breaks[i + 1])) for i in range(len(breaks) - 1)]
    done: dict[tuple[float, float], np.ndarray] = {}
    while pending:
        xs = np.concatenate([cheb_nodes(a, b, n) for a, b in pending])
        vals = np.asarray(f(xs)).reshape(len(pending), n + 1)
        coefs = values_to_coeffs(vals)
        nxt = []
        for (a, b), v, c in zip(pending, vals, coefs):
            scale = max(float(np.max(np.abs(v))), scale_floor)
            tail = np.max(np.abs(c[-3:]))
            if tail <= max(tail_tol * scale, noise_floor) or (b - a) <= min_width or len(done) + len(nxt) > max_pieces:
                done[(a, b)] = c
            else:
                mid = 0.5 * (a + b)
                nxt += [(a, mid), (mid, b)]
        pending = nxt
    keys = sorted(done)
    edges = [keys[0][0]] + [k[1] for k in keys]
    return edges, [done[k] for k in keys]


def make_piecewise(edges: list[float], coefs: list[np.ndarray]) -> PiecewiseCheb:
    return PiecewiseCheb(np.asarray(edges, dtype=np.float64), np.stack(coefs, axis=1))
