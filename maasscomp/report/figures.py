"""Figures of the sup-norm study (matplotlib, Agg backend; files only, no windows).

* :func:`plot_form`: |f|/||f|| over the fundamental domain, one panel per cusp in that cusp's
  coordinate (points whose orbit has a higher representative are blank), peaks marked.
* :func:`plot_peaks_vs_lambda`: log peak against log lambda for the cusp and compact peaks,
  with a line of slope 1/12 (the cusp lower bound lambda^{1/12}, docs/theory.md §6) and the
  random-wave heuristic sqrt(2 ln(lambda) / area) for the compact part (ibid.).
* :func:`plot_cusp_share`: share of forms whose global maximum lies in a cusp, by level and by
  R range.
* :func:`plot_value_distributions`: histogram of f/||f|| on the compact part against the
  Gaussian N(0, 1/area) of the random wave model (Hejhal & Rackner, Experimental Math. 1
  (1992) 275-305).
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Sequence

import numpy as np
import scipy.fft

from maasscomp.supnorm.evaluate import FormEvaluator
from maasscomp.supnorm.scan import ScanResult
from maasscomp.report.peaks import cusp_share


def _plt():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def _save(fig, path: str | os.PathLike) -> Path:
    p = Path(path)
    tmp = p.with_name(p.stem + ".tmp" + p.suffix)
    fig.savefig(tmp, dpi=120)
    os.replace(tmp, p)
    return p


def plot_form(form, result: ScanResult, path: str | os.PathLike, *, evaluator: FormEvaluator | None = None,
              rows: int = 220) -> Path:
    """|f|/||f|| over the fundamental domain with the peaks marked (one panel per cusp)."""
    plt = _plt()
    ev = evaluator if evaluator is not None else FormEvaluator(form)
    G = ev.group
    h = G.n_cusps
    y_lo = G.fundamental_domain_height
    y_hi = max(2.0 * result.Y_c, 1.4 * max(max(result.transition_y), max(p.y for p in result.cusp_peaks)))
    ys = np.geomspace(y_lo, y_hi, rows)
    L = int(scipy.fft.next_fast_len(max(400, 2 * ev.terms_needed(y_lo) + 2)))
    fig, axes = plt.subplots(1, h, figsize=(4.2 * h + 1.2, 5.0), squeeze=False)
    vmax = result.global_value
    im = None
    for j in range(h):
        ax = axes[0, j]
        V = np.empty((rows, L))
        x = None
        for i, y in enumerate(ys):
            x, v = ev.horocycle(j, float(y), L)
            zx, zy = G.cusps[j].apply_scaling(x, np.full_like(x, y))
            ystar = np.asarray(G.pullback(zx, zy).y)
            V[i] = np.where(ystar <= y * (1 + 1e-9), np.abs(v) * result.scale, np.nan)
        im = ax.pcolormesh(x, ys, V, shading="auto", cmap="magma", vmin=0.0, vmax=vmax)
        ax.set_yscale("log")
        ax.axhline(result.Y_c, color="c", lw=0.8, ls="--")
        p = result.cusp_peaks[j]
        ax.plot([p.x], [p.y], marker="^", ms=9, mfc="none", mec="lime", mew=1.8, ls="none",
                label=f"cusp peak {p.value:.4g}")
        ax.plot([0.0 if form.parity == "even" else 0.25], [result.transition_y[j]], marker="x", ms=7,
                color="deepskyblue", ls="none", label=f"transition peak {result.transition_peak[j]:.4g}")
        if result.compact_peak.cusp == j:
            c = result.compact_peak
            ax.plot([c.x], [c.y], marker="o", ms=9, mfc="none", mec="w", mew=1.8, ls="none",
                    label=f"compact peak {c.value:.4g}")
        ax.set_xlim(-0.5, 0.5)
        ax.set_xlabel("x (cusp coordinate)")
        ax.set_ylabel("y")
        ax.set_title(f"cusp {j} (width {G.cusps[j].width})", fontsize=10)
        ax.legend(fontsize=7, loc="upper right")
    fig.colorbar(im, ax=axes[0, :].tolist(), label="|f| / ||f||")
    fig.suptitle(f"level {form.level}, {form.symmetry.label}, R = {form.R:.8g}: global max in "
                 f"{result.global_region}", fontsize=11)
    out = _save(fig, path)
    plt.close(fig)
    return out


def plot_peaks_vs_lambda(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """log peak against log lambda, with the lambda^{1/12} slope and the random-wave curve."""
    plt = _plt()
    fig, ax = plt.subplots(figsize=(7, 5))
    lam = np.array([r.eigenvalue for r in results])
    cusp = np.array([r.cusp_peak.value for r in results])
    trans = np.array([max(r.transition_peak) for r in results])
    comp = np.array([r.compact_peak.value for r in results])
    ll = np.log(lam)
    ax.plot(ll, np.log(cusp), "^", mfc="none", color="C0", label="cusp peak")
    ax.plot(ll, np.log(trans), ".", color="C0", alpha=0.6, label="transition-zone peak")
    ax.plot(ll, np.log(comp), "o", mfc="none", color="C3", label="compact peak")
    if ll.size:
        grid = np.linspace(ll.min() - 0.2, ll.max() + 0.2, 50)
        b = float(np.median(np.log(trans) - ll / 12.0))
        ax.plot(grid, grid / 12.0 + b, "k--", lw=1, label="slope 1/12 (cusp bound lambda^{1/12})")
        for N in sorted({r.level for r in results}):
            from maasscomp.groups import gamma0

            area = gamma0(N).area
            ax.plot(grid, 0.5 * np.log(2 * grid / area), ":", lw=1,
                    label=f"random waves sqrt(2 ln lambda / area), N = {N}")
    ax.set_xlabel("ln lambda")
    ax.set_ylabel("ln peak of |f| / ||f||")
    ax.legend(fontsize=7)
    ax.set_title("Peaks against the eigenvalue")
    out = _save(fig, path)
    plt.close(fig)
    return out


def plot_cusp_share(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """Share of forms whose global maximum lies in a cusp, by level and by R range."""
    plt = _plt()
    share = cusp_share(results)
    fig, axes = plt.subplots(1, 2, figsize=(10, 4))
    bl = share["by_level"]
    axes[0].bar([str(d["level"]) for d in bl], [d["share"] for d in bl], color="C0")
    for i, d in enumerate(bl):
        axes[0].text(i, d["share"] + 0.02, f"{d['in_cusp']}/{d['forms']}", ha="center", fontsize=8)
    axes[0].set_xlabel("level N")
    axes[0].set_ylabel("share with global max in a cusp")
    axes[0].set_ylim(0, 1.1)
    br = share["by_R"]
    axes[1].bar([d["R_range"] for d in br], [d["share"] for d in br], color="C1")
    for i, d in enumerate(br):
        axes[1].text(i, d["share"] + 0.02, f"{d['in_cusp']}/{d['forms']}", ha="center", fontsize=8)
    axes[1].set_xlabel("R range")
    axes[1].set_ylim(0, 1.1)
    fig.suptitle("Where the global maximum lies (boundary maxima count as compact)", fontsize=11)
    out = _save(fig, path)
    plt.close(fig)
    return out


def plot_value_distributions(results: Sequence[ScanResult], path: str | os.PathLike, *, max_panels: int = 12
                             ) -> Path:
    """Histograms of f/||f|| on the compact part against N(0, 1/area) (random wave model)."""
    plt = _plt()
    from maasscomp.groups import gamma0

    rs = list(results)[:max_panels]
    n = max(1, len(rs))
    cols = min(4, n)
    nrow = math.ceil(n / cols)
    fig, axes = plt.subplots(nrow, cols, figsize=(3.4 * cols, 2.8 * nrow), squeeze=False)
    for ax in axes.ravel()[len(rs):]:
        ax.axis("off")
    for ax, r in zip(axes.ravel(), rs):
        e = np.asarray(r.hist_edges)
        d = np.asarray(r.hist_density)
        ax.stairs(d, e, fill=True, alpha=0.5, color="C0")
        area = gamma0(r.level).area
        t = np.linspace(e[0], e[-1], 200)
        ax.plot(t, np.sqrt(area / (2 * math.pi)) * np.exp(-0.5 * area * t * t), "k-", lw=1)
        ax.set_title(f"N={r.level} R={r.R:.5g}\nvar*area={r.compact_var * area:.3f} "
                     f"skew={r.compact_skew:.2f} exk={r.compact_exkurt:.2f}", fontsize=8)
        ax.tick_params(labelsize=7)
    fig.suptitle("Values on the compact part vs the Gaussian N(0, 1/area) of the random wave model",
                 fontsize=10)
    fig.tight_layout()
    out = _save(fig, path)
    plt.close(fig)
    return out


def _safe(key: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "._-" else "_" for ch in key)
