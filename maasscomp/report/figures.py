"""Figures of the sup-norm study (matplotlib ``Figure`` objects, files only, no windows).

* :func:`plot_form_map`: |f|/||f|| over the fundamental domain of one form, one panel per cusp
  in that cusp's coordinate, the regions shaded and the peaks marked;
* :func:`plot_peaks_vs_lambda`: the peak of each region against lambda, coloured by level,
  with the first-term and the random-wave predictions;
* :func:`plot_value_distribution`: the value distribution on Omega over all forms against the
  Gaussian of the random wave model (Hejhal & Rackner, Experimental Math. 1 (1992) 275-305);
* :func:`plot_region_share`: where the global maximum lies, per band of R and per level;
* :func:`plot_sym2`: the distribution of L(1, sym^2 f) and the transition peak against
  1/sqrt(L(1, sym^2 f));
* :func:`plot_transition_vs_bulk`: the fraction of forms whose transition peak beats the bulk,
  per band, with the model and its extrapolation;
* :func:`plot_equidistribution`: the mean of |f|^2 over Omega against 1/vol;
* :func:`plot_peak_heights`: heights of the global and bulk maxima relative to Y_T.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Sequence

import numpy as np
import scipy.fft

from maasscomp.report.peaks import (BeatsExtrapolation, band_label, band_of, bands, kt_profile_max, region_share,
                                    transition_beats_bulk)
from maasscomp.supnorm.scan import ScanResult, first_nonzero, omega_charts, random_wave_max, transition_height

KIND_COLOURS = {"transition": "#d95f02", "omega": "#1b9e77", "intermediate": "#7570b3"}
KIND_NAMES = {"transition": "transition zone", "omega": "Ω (fixed compact set)", "intermediate": "intermediate"}


def _figure(w: float, h: float):
    from matplotlib.figure import Figure

    return Figure(figsize=(w, h), layout="constrained")


def _save(fig, path: str | os.PathLike) -> Path:
    p = Path(path)
    tmp = p.with_name(p.stem + ".tmp" + p.suffix)
    fig.savefig(tmp, dpi=130)
    os.replace(tmp, p)
    return p


def _level_colours(levels: Sequence[int]) -> dict[int, str]:
    return {N: f"C{i % 10}" for i, N in enumerate(sorted(set(levels)))}


# ------------------------------------------------------------------------------------------
# one form


def plot_form_map(form, result: ScanResult, path: str | os.PathLike, *, evaluator=None, rows: int = 300,
                  cols: int = 420, per_row: int = 6) -> Path:
    """|f|/||f|| over the fundamental domain, one panel per cusp (points whose orbit has a higher
    representative in another chart are left blank), regions shaded, peaks marked.

    Each pixel shows the largest sampled value inside it: ``per_row`` horocycles per pixel row,
    each sampled at ``cols`` x 2 or more points by FFT (the form oscillates on the scale 2 pi y / R,
    far below a pixel at large R, so the map shows the local envelope of |f|).
    """
    fig = form_map_figure(form, result, evaluator=evaluator, rows=rows, cols=cols, per_row=per_row)
    return _save(fig, path)


def plot_form(form, *, normalized: bool = True, path: str | os.PathLike | None = None, rows: int = 120,
              cols: int = 160, per_row: int = 4):
    """|f| (or |f|/||f|| with ``normalized``) over the fundamental domain without a scan.

    One panel per cusp in its own coordinate, the lower edge Y_T of each transition zone dashed
    (docs/theory.md §11.1); no regions or peaks (those come from a scan, see
    :func:`plot_form_map`). The L2 norm is computed once per form
    (:func:`maasscomp.supnorm.norm.l2_norm`). Returns the matplotlib ``Figure``; with ``path``
    it is also written there. This is what ``Form.plot()`` calls.
    """
    fig = form_map_figure(form, None, normalized=normalized, rows=rows, cols=cols, per_row=per_row)
    if path is not None:
        _save(fig, path)
    return fig


def form_map_figure(form, result: ScanResult | None, *, evaluator=None, normalized: bool = True,
                    rows: int = 300, cols: int = 420, per_row: int = 6):
    """The map of :func:`plot_form_map` (``result`` given) or :func:`plot_form` (``result``
    None) as a ``Figure``."""
    from maasscomp.supnorm.evaluate import FormEvaluator, normalising_scale

    ev = evaluator if evaluator is not None else FormEvaluator(form)
    G = ev.group
    h = G.n_cusps
    charts = omega_charts(G)
    if result is not None:
        Yo, Y_T, y_top, scale = result.Y_omega, result.Y_T, result.y_top, result.scale
        vmax = result.global_value
    else:
        Yo = None
        Y_T = [transition_height(ev.R, first_nonzero(np.asarray(form.coeffs)[j])) for j in range(h)]
        y_top = [max(1.3 * t, 2.0) for t in Y_T]
        scale = normalising_scale(form, ev) if normalized else math.exp(-math.pi * ev.R / 2.0)
        vmax = None
    fig = _figure(4.6 * h + 1.4, 6.0 if result is not None else 4.8)
    axes = fig.subplots(1, h, squeeze=False)[0]
    panels = []
    for j, ax in enumerate(axes):
        Yt = Y_T[j]
        # the highest representatives reach down to the group's fundamental-domain height
        y_lo = min(G.fundamental_domain_height, charts[j].r * math.sqrt(3.0) / 2.0) * 0.98
        top = max(Yt, Yo) if Yo is not None else max(Yt, 1.0)
        y_hi = max(1.6 * top, 1.3 * y_top[j] ** 0.5 * top ** 0.5, 2.5 * (Yo if Yo is not None else 1.0))
        edges = np.geomspace(y_lo, y_hi, rows + 1)
        V = np.full((rows, cols), np.nan)
        for i in range(rows):
            ys = np.geomspace(edges[i], edges[i + 1], per_row + 2)[1:-1]
            nt = ev.terms_needed(float(ys[0]))
            L = int(scipy.fft.next_fast_len(max(2 * nt + 2, 2 * cols)))
            best = np.zeros(cols)
            for y in ys:
                x, v = ev.horocycle(j, float(y), L, nt)
                col = np.minimum(((x + 0.5) * cols).astype(int), cols - 1)
                np.maximum.at(best, col, np.abs(v))
            V[i] = best * scale
        # keep the pixels whose centre is the highest representative of its orbit in this chart
        xc = -0.5 + (np.arange(cols) + 0.5) / cols
        yc = np.sqrt(edges[:-1] * edges[1:])
        X, Y = np.meshgrid(xc, yc)
        zx, zy = G.cusps[j].apply_scaling(X.ravel(), Y.ravel())
        pb = G.pullback(zx, zy)
        # (the pullback never lowers a point: a pixel is the highest when the pullback keeps its height)
        own = (np.asarray(pb.cusp) == j) & (np.asarray(pb.y) <= Y.ravel() * (1 + 1e-9))
        V[~own.reshape(V.shape)] = np.nan
        panels.append((ax, edges, V, y_lo, y_hi, Yt))
    if vmax is None:
        vmax = max(float(np.nanmax(V)) if np.isfinite(V).any() else 0.0 for _, _, V, *_ in panels) or 1.0
    im = None
    for j, (ax, edges, V, y_lo, y_hi, Yt) in enumerate(panels):
        im = ax.pcolormesh(np.linspace(-0.5, 0.5, cols + 1), edges, V, shading="flat", cmap="magma",
                           vmin=0.0, vmax=vmax, rasterized=True)
        ax.set_yscale("log")
        ax.set_xlim(-0.5, 0.5)
        ax.set_ylim(y_lo, y_hi)
        ax.set_xlabel(f"x (coordinate of cusp {j}, width {G.cusps[j].width})")
        ax.set_ylabel("y (log scale)")
        if result is None:
            if y_lo < Yt < y_hi:
                ax.axhline(Yt, color=KIND_COLOURS["transition"], lw=1.0, ls="--")
                ax.text(0.49, Yt, f"Y_T = {Yt:.4g}", color="w", fontsize=7, ha="right", va="bottom")
            continue
        # regions: a colour strip at the left edge (Omega below Y_omega, intermediate up to Y_T,
        # transition zone above) and dashed lines across the map
        Tz = max(Yt, Yo)
        spans = [("omega", y_lo, Yo, "Ω"), ("intermediate", Yo, Tz, "intermediate"),
                 ("transition", Tz, y_hi, "transition")]
        for kind, a_, b_, label in spans:
            if b_ <= a_ * (1 + 1e-12):
                continue
            ax.fill_between([-0.5, -0.47], a_, b_, color=KIND_COLOURS[kind], lw=0, zorder=3)
            ax.text(-0.465, math.sqrt(a_ * b_), label, color=KIND_COLOURS[kind], fontsize=7, rotation=90,
                    ha="left", va="center", zorder=4,
                    bbox=dict(facecolor="w", alpha=0.7, lw=0, pad=1.0))
        ax.axhline(Yo, color=KIND_COLOURS["omega"], lw=1.0, ls="--")
        ax.axhline(Tz, color=KIND_COLOURS["transition"], lw=1.0, ls="--")
        if Yt > Yo:
            ax.text(0.49, Yo, f"Y_Ω = {Yo:g}", color="w", fontsize=7, ha="right", va="bottom")
            ax.text(0.49, Tz, f"Y_T = {Yt:.4g}", color="w", fontsize=7, ha="right", va="bottom")
        else:
            ax.text(0.49, Yo, f"Y_Ω = {Yo:g} (Y_T = {Yt:.3g} below it: zone cut)", color="w", fontsize=7,
                    ha="right", va="bottom")
        for p, mk in ((result.region(f"transition {j}"), "^"), (result.region(f"intermediate {j}"), "s")):
            if not p.empty:
                ax.plot([p.x], [p.y], marker=mk, ms=9, mfc="none", mec=KIND_COLOURS[p.kind], mew=2.0, ls="none",
                        label=f"{KIND_NAMES[p.kind]} peak {p.value:.4g}")
        om = result.omega
        if om.cusp == j:
            ax.plot([om.x], [om.y], marker="o", ms=9, mfc="none", mec=KIND_COLOURS["omega"], mew=2.0, ls="none",
                    label=f"Ω peak {om.value:.4g}")
        ax.legend(fontsize=7, loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=2, frameon=False)
    if result is not None:
        fig.colorbar(im, ax=list(axes), label="|f| / ‖f‖ (largest sampled value per pixel)", shrink=0.9)
        fig.suptitle(f"Level {form.level}, {form.symmetry.label}, R = {form.R:.10g}: global maximum "
                     f"{result.global_value:.4g} in {result.global_region}", fontsize=11)
    else:
        what = "|f| / ‖f‖" if normalized else "|f| (c(1) = 1)"
        fig.colorbar(im, ax=list(axes), label=f"{what} (largest sampled value per pixel)", shrink=0.9)
        key = f" ({form.key})" if getattr(form, "key", None) else ""
        fig.suptitle(f"Level {form.level}, {form.symmetry.label}, R = {form.R:.10g}{key}", fontsize=11)
    return fig


# ------------------------------------------------------------------------------------------
# across forms


def _median_L(results: Sequence[ScanResult]) -> float:
    L = [r.sym2_L1_norm for r in results if r.level == 1 and math.isfinite(r.sym2_L1_norm)]
    return float(np.median(L)) if L else math.nan


def plot_peaks_vs_lambda(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """Peak of each region kind against lambda, with both predictions on every panel."""
    fig = _figure(13.0, 4.6)
    axes = fig.subplots(1, 3, sharey=True)
    lam = np.array([r.eigenvalue for r in results])
    colours = _level_colours([r.level for r in results])
    grid = np.geomspace(max(lam.min() / 1.5, 50.0), lam.max() * 1.5, 80)
    Rg = np.sqrt(grid - 0.25)
    prof = np.array([kt_profile_max(R) for R in Rg])
    Lmed = _median_L(results)
    vol1 = math.pi / 3
    Yo = results[0].Y_omega
    for ax, kind in zip(axes, ("transition", "omega", "intermediate")):
        for N, c in colours.items():
            # a transition zone cut at Y_omega holds only the decaying tail of the first term
            sel = [r for r in results if r.level == N and not (kind == "transition" and r.overlap)]
            pts = [(r.eigenvalue, r.best(kind)) for r in sel]
            pts = [(la, p) for la, p in pts if p is not None]
            if not pts:
                continue
            x = np.array([la for la, _ in pts])
            y = np.array([p.value for _, p in pts])
            marked = np.array([r.overlap for r in sel if r.best(kind) is not None])
            ax.scatter(x[~marked], y[~marked], s=22, color=c, label=f"N = {N}", zorder=3)
            if marked.any():
                ax.scatter(x[marked], y[marked], s=22, facecolors="none", edgecolors=c, zorder=3)
            if kind == "transition":
                ax.scatter(x, [p.prediction for _, p in pts], s=14, marker="x", color="k", lw=0.8, zorder=4,
                           label="first-term prediction" if N == min(colours) else None)
        ax.plot(grid, 2 * prof, color="0.35", lw=1.0, ls="-", label="first term, N = 1, L(1, sym² f) = 1")
        if math.isfinite(Lmed):
            ax.plot(grid, 2 * prof / math.sqrt(Lmed), color="0.35", lw=1.0, ls="--",
                    label=f"first term, N = 1, L = {Lmed:.2f} (median)")
        rw_o = [random_wave_max(vol1 - 1 / Yo, la, vol1) for la in grid]
        rw_i = [random_wave_max(1 / Yo, la, vol1) for la in grid]
        ax.plot(grid, rw_o, color=KIND_COLOURS["omega"], lw=1.2, label=f"random waves, N = 1, area of Ω ({vol1 - 1 / Yo:.3f})")
        ax.plot(grid, rw_i, color=KIND_COLOURS["intermediate"], lw=1.2, ls=":",
                label=f"random waves, N = 1, area 1/Y_Ω ({1 / Yo:.3f})")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("eigenvalue λ = 1/4 + R²")
        cut = sum(r.overlap for r in results)
        ax.set_title({"transition": "transition zones (largest over cusps)" + (f"; {cut} cut zones left out" if cut else ""), "omega": "fixed compact set Ω",
                      "intermediate": "intermediate regions (largest over cusps)"}[kind], fontsize=10)
        ax.grid(alpha=0.3)
    axes[0].set_ylabel("max |f| / ‖f‖ (log scale)")
    seen: dict[str, object] = {}
    for ax in axes:
        for hd, lb in zip(*ax.get_legend_handles_labels()):
            seen.setdefault(lb, hd)
    handles, labels = list(seen.values()), list(seen)
    fig.legend(handles, labels, loc="outside lower center", ncol=4, fontsize=8, frameon=False)
    fig.suptitle("Peaks of L²-normalised forms against λ (open symbols: transition zone cut at Y_Ω)", fontsize=11)
    return _save(fig, path)


def plot_value_distribution(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """Density of t = f sqrt(vol) / ||f|| on Omega, pooled over all forms and per band of R,
    against the standard Gaussian (random wave model: variance 1/vol)."""
    fig = _figure(11.0, 4.4)
    ax1, ax2 = fig.subplots(1, 2)
    e = np.asarray(results[0].hist_edges)
    mid = 0.5 * (e[1:] + e[:-1])
    t = np.linspace(e[0], e[-1], 400)
    gauss = np.exp(-0.5 * t * t) / math.sqrt(2 * math.pi)
    allD = np.mean([np.asarray(r.hist_density) for r in results], axis=0)
    bl = bands(results)
    cmap_cols = [f"C{i % 10}" for i in range(len(bl))]
    for ax, log in ((ax1, False), (ax2, True)):
        for b, c in zip(bl, cmap_cols):
            D = np.mean([np.asarray(r.hist_density) for r in results if band_of(r.R) == b], axis=0)
            n = sum(band_of(r.R) == b for r in results)
            ax.stairs(D, e, color=c, lw=0.9, alpha=0.8, label=f"R in {band_label(b)} ({n} forms)")
        ax.stairs(allD, e, color="k", lw=1.6, label=f"all {len(results)} forms")
        ax.plot(t, gauss, color="crimson", lw=1.2, ls="--", label="N(0, 1): random waves")
        ax.set_xlabel("t = f(z) · √vol / ‖f‖   on Ω")
        ax.set_ylabel("probability density" + (" (log scale)" if log else ""))
        if log:
            ax.set_yscale("log")
            pos = allD[allD > 0]
            ax.set_ylim(max(pos.min() / 3, 1e-7) if pos.size else 1e-7, 1.0)
        ax.grid(alpha=0.3)
    ax1.legend(fontsize=7, loc="upper left")
    levels = sorted({r.level for r in results})
    fig.suptitle(f"Values on the fixed compact set Ω (levels {', '.join(map(str, levels))}), weighted by dμ",
                 fontsize=11)
    del mid
    return _save(fig, path)


def plot_region_share(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """Share of global maxima by region, per band of R and per level (stacked bars)."""
    fig = _figure(12.0, 4.4)
    ax1, ax2 = fig.subplots(1, 2, width_ratios=(3, 2))
    for ax, by, xlabel in ((ax1, "band", "band of R"), (ax2, "level", "level N")):
        rows = region_share(results, by=by)
        x = np.arange(len(rows))
        bottom = np.zeros(len(rows))
        for kind in ("transition", "intermediate", "omega"):
            v = np.array([r[f"{kind}_share"] for r in rows])
            ax.bar(x, v, bottom=bottom, color=KIND_COLOURS[kind], label=KIND_NAMES[kind], width=0.7)
            bottom += v
        for i, r in enumerate(rows):
            txt = f"{r['forms']}" + (f"\n({r['marked']} cut)" if r["marked"] else "")
            ax.text(i, 1.02, txt, ha="center", va="bottom", fontsize=7)
        ax.set_xticks(x, [str(r["group"]) for r in rows], rotation=30 if by == "band" else 0, fontsize=8)
        ax.set_ylim(0, 1.18)
        ax.set_xlabel(xlabel)
        ax.set_ylabel("share of forms")
    handles, labels = ax1.get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncol=3, fontsize=8, frameon=False)
    fig.suptitle("Where the global maximum of |f|/‖f‖ lies (numbers: forms; 'cut': transition zone starts at Y_Ω)",
                 fontsize=11)
    return _save(fig, path)


def plot_sym2(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """L(1, sym^2 f) of the newforms and the normalised transition peak against 1/sqrt(L)."""
    rs = [r for r in results if math.isfinite(r.sym2_L1_norm)]
    fig = _figure(11.0, 4.4)
    ax1, ax2 = fig.subplots(1, 2)
    colours = _level_colours([r.level for r in rs])
    L = np.array([r.sym2_L1_norm for r in rs])
    if L.size:
        ax1.hist(L, bins=min(30, max(5, L.size // 3)), color="0.5", edgecolor="k", lw=0.5)
        ax1.axvline(float(np.median(L)), color="crimson", lw=1.2, ls="--", label=f"median {np.median(L):.3f}")
        ax1.legend(fontsize=8)
    ax1.set_xlabel("L(1, sym² f) from ‖f‖ (Rankin–Selberg)")
    ax1.set_ylabel("number of forms")
    for N, c in colours.items():
        sel = [r for r in rs if r.level == N]
        x = np.array([1 / math.sqrt(r.sym2_L1_norm) for r in sel])
        # the first term predicts T = 2 max|A_1| sqrt((1 + e^{-2 pi R}) / (N L)) at n0 = 1
        y = np.array([r.transition.value / (2 * r.profile_max[r.transition.cusp]
                                           * math.sqrt((1 + math.exp(-2 * math.pi * r.R)) / r.level)) for r in sel])
        ax2.scatter(x, y, s=20, color=c, label=f"N = {N}")
    if L.size:
        g = np.linspace(0.9 / math.sqrt(L.max()), 1.1 / math.sqrt(L.min()), 10)
        ax2.plot(g, g, color="k", lw=1.0, ls="--", label="first term: y = x")
    ax2.set_xlabel("1 / √L(1, sym² f)")
    ax2.set_ylabel(r"transition peak $/\ (2\,\max|A_1|\,\sqrt{(1+e^{-2\pi R})/N})$")
    ax2.legend(fontsize=8)
    ax2.grid(alpha=0.3)
    fig.suptitle("The size of the transition peak is set by L(1, sym² f)", fontsize=11)
    return _save(fig, path)


def plot_transition_vs_bulk(results: Sequence[ScanResult], extrap: BeatsExtrapolation | None,
                            path: str | os.PathLike) -> Path:
    """Fraction of forms whose transition peak exceeds the bulk peak, per band (Wilson 95%),
    with the level-1 model and its bootstrap band; beyond the data it is an extrapolation."""
    fig = _figure(7.5, 4.6)
    ax = fig.subplots()
    rows = [r for r in transition_beats_bulk(results) if r["forms"]]
    x = np.array([r["R_median"] for r in rows])
    f = np.array([r["fraction"] for r in rows])
    lo = np.array([r["ci_lo"] for r in rows])
    hi = np.array([r["ci_hi"] for r in rows])
    ax.errorbar(x, f, yerr=[f - lo, hi - f], fmt="o", color="k", capsize=3, label="measured (Wilson 95%)")
    for xi, r in zip(x, rows):
        ax.annotate(f"{r['beats']}/{r['forms']}", (xi, r["fraction"]), textcoords="offset points", xytext=(6, 4),
                    fontsize=7)
    if extrap is not None:
        R = np.array([row[0] for row in extrap.rows])
        m = np.array([row[1] for row in extrap.rows])
        blo = np.array([row[2] for row in extrap.rows])
        bhi = np.array([row[3] for row in extrap.rows])
        ax.plot(R, m, color="C1", lw=1.5, label=f"model, level 1 ({extrap.forms} forms)")
        ax.fill_between(R, blo, bhi, color="C1", alpha=0.2, lw=0, label="bootstrap 95%")
        beyond = [row[0] for row in extrap.rows if row[4]]
        if beyond:
            ax.axvspan(min(beyond), R.max(), color="0.85", alpha=0.5, lw=0, label="extrapolation")
    ax.set_xscale("log")
    ax.set_ylim(-0.03, 1.03)
    ax.set_xlabel("R")
    ax.set_ylabel("fraction with transition peak > bulk peak")
    ax.set_xlim(left=max(1.0, min([*x, *(row[0] for row in (extrap.rows if extrap else ()))], default=1.0) / 1.5))
    ax.legend(fontsize=8, loc="upper left")
    ax.grid(alpha=0.3)
    ax.set_title("Does the cusp win? Transition peak against the bulk maximum", fontsize=10)
    return _save(fig, path)


def plot_equidistribution(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """vol times the mean of |f|^2/||f||^2 over Omega, against R (equidistribution: 1)."""
    fig = _figure(7.0, 4.2)
    ax = fig.subplots()
    colours = _level_colours([r.level for r in results])
    for N, c in colours.items():
        sel = [r for r in results if r.level == N]
        ax.scatter([r.R for r in sel], [r.omega_mean_sq * r.volume for r in sel], s=18, color=c, label=f"N = {N}")
    ax.axhline(1.0, color="k", lw=1.0, ls="--", label="1 / vol (equidistribution)")
    ax.set_xscale("log")
    ax.set_xlabel("R")
    ax.set_ylabel("vol × mean of |f|²/‖f‖² over Ω")
    ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    ax.set_title("Mass of the fixed compact set Ω, per unit area", fontsize=10)
    return _save(fig, path)


def plot_peak_heights(results: Sequence[ScanResult], path: str | os.PathLike) -> Path:
    """Heights of the global maxima and of the bulk maxima divided by Y_T (log scale), with the
    heights 1/n where the n-th Fourier term has its own transition."""
    fig = _figure(7.5, 4.2)
    ax = fig.subplots()
    g = np.array([r.global_y_rel for r in results])
    b = []
    for r in results:
        p = max((q for q in r.regions if not q.empty and q.kind != "transition"), key=lambda q: q.value)
        b.append(p.y_rel)
    b = np.array(b)
    g, b = g[np.isfinite(g) & (g > 0)], b[np.isfinite(b) & (b > 0)]
    both = np.concatenate([g, b])
    edges = np.geomspace(both.min() / 1.3, max(2.0, both.max() * 1.3), 50) if both.size else np.geomspace(0.1, 2, 5)
    ax.hist(b, bins=edges, color=KIND_COLOURS["intermediate"], alpha=0.6, label="bulk maximum")
    ax.hist(g, bins=edges, histtype="step", color="k", lw=1.4, label="global maximum")
    for n in range(1, 7):
        ax.axvline(1.0 / n, color=KIND_COLOURS["transition"], lw=0.8, ls=":")
        if n <= 3:
            ax.text(1.0 / n, 1.0, f"1/{n}" if n > 1 else "1", transform=ax.get_xaxis_transform(), fontsize=8,
                    ha="center", va="bottom", color=KIND_COLOURS["transition"])
    ax.set_xscale("log")
    ax.set_xlabel("height of the maximum / Y_T   (dotted: 1/n, n = 1..6, the transition of the n-th term)")
    ax.set_ylabel("number of forms")
    ax.legend(fontsize=8)
    return _save(fig, path)
