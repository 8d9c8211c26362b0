"""Statistics across scanned forms: the per-form peak table and cusp-versus-compact shares.

All peak values are those of the L2-normalised form f/||f|| (norm over Gamma0(N)\\H with
dmu = dx dy / y^2, not divided by the area). Reference curves used by the report:

* the cusp lower bound lambda^{1/12}: the first Fourier term of an L2-normalised Hecke--Maass
  form peaks at ~ 2c R^{1/6} / sqrt(L(1, sym^2 f)) in the transition zone (docs/theory.md §6,
  from the Airy asymptotics §3.3 and Rankin--Selberg §5.1);
* the random wave model: values at a random point are approximately N(0, 1/area)
  (Hejhal & Rackner, Experimental Math. 1 (1992) 275-305; Berry 1977).
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np

from maasscomp.report.tables import Column, markdown_table
from maasscomp.supnorm.scan import ScanResult

#: Columns of the per-form table, with their meaning (used for the Markdown legend).
COLUMNS: list[Column] = [
    Column("key", "store key of the form"),
    Column("level", "N"),
    Column("symmetry", "parity and Atkin-Lehner signs"),
    Column("R", "spectral parameter (lambda = 1/4 + R^2)"),
    Column("cusp_peak", "largest max of |f|/||f|| over the cusp regions Im w >= Y_c"),
    Column("cusp", "cusp holding it"),
    Column("cusp_x", "its location x (cusp coordinate)"),
    Column("cusp_y", "its location y (cusp coordinate)"),
    Column("transition_peak", "largest local max in the transition zone of the first term"),
    Column("leading_term_peak", "peak of the n = 1 term alone (normalised)"),
    Column("n2_at_peak", "n >= 2 terms at the cusp peak (normalised)"),
    Column("compact_peak", "max of |f|/||f|| on the compact part"),
    Column("compact_x", "its location x (cusp coordinate, highest representative)"),
    Column("compact_y", "its location y"),
    Column("global_region", "region holding the global maximum"),
    Column("ratio", "cusp peak / compact peak"),
    Column("exp_cusp", "log(cusp peak) / log(lambda)"),
    Column("exp_compact", "log(compact peak) / log(lambda)"),
    Column("grid_bound_rel", "largest relative grid bound (sup <= value (1 + bound))"),
    Column("compact_var_area", "variance of f/||f|| on the compact part times the area (random wave model: 1)"),
    Column("compact_skew", "skewness on the compact part (Gaussian: 0)"),
    Column("compact_exkurt", "excess kurtosis on the compact part (Gaussian: 0)"),
    Column("extended", "coefficients extended by Hecke multiplicativity"),
    Column("seconds", "scan time"),
]


def _area(level: int) -> float:
    from maasscomp.groups import gamma0

    return gamma0(level).area


def table_rows(results: Iterable[ScanResult]) -> list[dict[str, Any]]:
    """One dict per scan with the keys of :data:`COLUMNS`."""
    rows = []
    for r in results:
        cp = r.cusp_peak
        j = cp.cusp
        rows.append({
            "key": r.form_key, "level": r.level, "symmetry": r.symmetry, "R": r.R,
            "cusp_peak": cp.value, "cusp": j, "cusp_x": cp.x, "cusp_y": cp.y,
            "transition_peak": r.transition_peak[j], "leading_term_peak": r.leading_term_peak[j],
            "n2_at_peak": r.n2_at_peak[j],
            "compact_peak": r.compact_peak.value, "compact_x": r.compact_peak.x, "compact_y": r.compact_peak.y,
            "global_region": r.global_region, "ratio": r.ratio_cusp_compact,
            "exp_cusp": r.exponent_cusp, "exp_compact": r.exponent_compact,
            "grid_bound_rel": r.grid_bound_rel,
            "compact_var_area": r.compact_var * _area(r.level),
            "compact_skew": r.compact_skew, "compact_exkurt": r.compact_exkurt,
            "extended": r.extended, "seconds": r.elapsed,
        })
    return rows


def _r_bins(Rs: np.ndarray) -> list[tuple[float, float]]:
    """R ranges for the share table: decades split in halves (1-3, 3-10, 10-30, ...)."""
    if Rs.size == 0:
        return []
    edges = []
    k = math.floor(math.log10(max(Rs.min(), 1e-3)))
    while True:
        for m in (1.0, 3.0):
            edges.append(m * 10.0**k)
        k += 1
        if edges[-1] > Rs.max():
            break
    edges = [e for e in edges]
    out = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        if np.any((Rs >= lo) & (Rs < hi)):
            out.append((lo, hi))
    return out


def cusp_share(results: Sequence[ScanResult]) -> dict[str, list[dict[str, Any]]]:
    """Share of forms whose global maximum lies in a cusp region, by level and by R range.

    A maximum on the horocycle Im w = Y_c (the common boundary) counts as compact.
    """
    by_level = []
    for N in sorted({r.level for r in results}):
        rs = [r for r in results if r.level == N]
        k = sum(r.global_region != "compact" for r in rs)
        by_level.append({"level": N, "forms": len(rs), "in_cusp": k, "share": k / len(rs)})
    Rs = np.array([r.R for r in results])
    by_R = []
    for lo, hi in _r_bins(Rs):
        rs = [r for r in results if lo <= r.R < hi]
        k = sum(r.global_region != "compact" for r in rs)
        by_R.append({"R_range": f"[{lo:g}, {hi:g})", "R_lo": lo, "R_hi": hi, "forms": len(rs), "in_cusp": k,
                     "share": k / len(rs)})
    return {"by_level": by_level, "by_R": by_R}


def peaks_markdown(results: Sequence[ScanResult], figures: Sequence[str] = (),
                   title: str = "Sup-norm scan") -> str:
    """Markdown text: per-form table, cusp shares, value-distribution moments, figures."""
    results = list(results)
    rows = table_rows(results)
    by_name = {c.name: c for c in COLUMNS}
    main_cols = [by_name[c] for c in ("key", "level", "symmetry", "R", "cusp_peak", "transition_peak",
                                      "compact_peak", "global_region", "ratio", "exp_cusp", "exp_compact",
                                      "grid_bound_rel")]
    dist_cols = [by_name[c] for c in ("key", "compact_var_area", "compact_skew", "compact_exkurt")]
    share = cusp_share(results)
    lines = [f"# {title}\n\n", f"{len(results)} forms. Values are max |f| / ||f|| with ||f||^2 = "
             "integral of |f|^2 dx dy / y^2 over Gamma0(N)\\H. Cusp regions: Im w >= Y_c in each cusp's "
             f"coordinate (Y_c = {results[0].Y_c if results else 1.0:g}); a maximum on their boundary "
             "counts as compact.\n"]
    lines.append("\n## Peaks per form\n\n")
    lines.append(markdown_table(main_cols, rows))
    lines.append("\n## Global maximum in a cusp\n\n")
    lines.append(markdown_table(["level", "forms", "in_cusp", Column("share", fixed=3)], share["by_level"]))
    lines.append("\n")
    lines.append(markdown_table(["R_range", "forms", "in_cusp", Column("share", fixed=3)], share["by_R"]))
    lines.append("\n## Value distribution on the compact part\n\n")
    lines.append("Random wave model (Hejhal & Rackner 1992): Gaussian with mean 0 and variance 1/area, i.e. "
                 "variance x area = 1, skewness 0, excess kurtosis 0.\n\n")
    lines.append(markdown_table(dist_cols, rows))
    if figures:
        lines.append("\n## Figures\n\n")
        for fpath in figures:
            lines.append(f"![{Path(fpath).stem}]({Path(fpath).name})\n")
    lines.append("\n## Columns\n\n")
    lines.extend(f"* `{c.name}`: {c.meaning}\n" for c in COLUMNS)
    return "".join(lines)
