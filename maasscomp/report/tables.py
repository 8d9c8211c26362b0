"""The one CSV writer and the one Markdown table writer of the package.

(:func:`write_csv` for tables held in memory, :func:`write_csv_rows` for tables streamed
row by row, such as every coefficient of a store.)

Every table of the report stage is a list of columns (:class:`Column`: name, meaning, display
format) and a list of rows (dicts keyed by column name). Values may be Python or numpy
scalars; both writers turn numpy scalars into plain Python numbers first, so a CSV cell
never reads ``np.float64(...)``.

* CSV keeps full precision (the shortest text that reads back to the same float) so that
  scripts can reuse the numbers; NaN is written as ``nan``, None as an empty cell, booleans
  as ``true``/``false``.
* Markdown shows each column with its own number of significant digits (default 6), in
  scientific notation below 1e-3 and from 1e6 on.

Files are written to a temporary name and renamed (a crash never leaves half a table).
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np


@dataclass(frozen=True)
class Column:
    """One column of a table.

    Attributes
    ----------
    name : str
        Key in the row dicts and header text.
    meaning : str
        One line for the legend under a Markdown table.
    digits : int
        Significant digits shown in Markdown (CSV always keeps full precision).
    fixed : int or None
        When given, Markdown shows this many decimals instead (e.g. shares, R values).
    """

    name: str
    meaning: str = ""
    digits: int = 6
    fixed: int | None = None


def as_columns(columns: Iterable[Column | str]) -> list[Column]:
    """Columns from Column objects or bare names."""
    return [c if isinstance(c, Column) else Column(str(c)) for c in columns]


def plain(v: Any) -> Any:
    """A numpy scalar as the Python scalar of the same value; other values unchanged."""
    if isinstance(v, np.generic):
        return v.item()
    return v


def csv_cell(v: Any) -> str:
    """Full-precision text of one CSV cell."""
    t = type(v)  # the common exact types first: a 10^5-form export formats millions of cells
    if t is str:
        return v
    if t is float and v - v == 0.0:
        return repr(v)
    if t is int:
        return str(v)
    v = plain(v)
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v) if math.isfinite(v) else ("nan" if math.isnan(v) else ("inf" if v > 0 else "-inf"))
    return str(v)


def md_cell(v: Any, col: Column) -> str:
    """Display text of one Markdown cell."""
    v = plain(v)
    if v is None:
        return ""
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "–"
        if not math.isfinite(v):
            return "∞" if v > 0 else "−∞"
        if col.fixed is not None:
            return f"{v:.{col.fixed}f}"
        if v != 0 and (abs(v) < 1e-3 or abs(v) >= 1e6):
            return f"{v:.{max(col.digits - 1, 1)}e}"
        return f"{v:.{col.digits}g}"
    return str(v).replace("|", "\\|")


def _atomic_write(path: Path, text: str) -> Path:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)
    return path


def write_text(path: str | os.PathLike, text: str) -> Path:
    """Write a text file atomically (temporary name, then rename)."""
    return _atomic_write(Path(path), text)


def csv_text(columns: Iterable[Column | str], rows: Sequence[dict[str, Any]]) -> str:
    """The CSV text of a table (header line, then one line per row)."""
    cols = as_columns(columns)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([c.name for c in cols])
    for r in rows:
        w.writerow([csv_cell(r.get(c.name)) for c in cols])
    return buf.getvalue()


def write_csv(path: str | os.PathLike, columns: Iterable[Column | str], rows: Sequence[dict[str, Any]]) -> Path:
    """Write a table as CSV (full precision; atomic replace). Returns the path."""
    return _atomic_write(Path(path), csv_text(columns, rows))


def write_csv_rows(path: str | os.PathLike, columns: Iterable[Column | str],
                   rows: Iterable[dict[str, Any] | Sequence[Any]]) -> tuple[Path, int]:
    """Write a table as CSV row by row (for tables too large to hold as text; atomic replace).

    ``rows`` yields dicts keyed by column name or sequences in column order. Returns the path
    and the number of rows written.
    """
    cols = as_columns(columns)
    names = [c.name for c in cols]
    path = Path(path)
    tmp = path.with_name(path.name + ".tmp")
    n = 0
    try:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(names)
            for r in rows:
                vals = [r.get(k) for k in names] if isinstance(r, dict) else r
                w.writerow([csv_cell(v) for v in vals])
                n += 1
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path, n


def markdown_table(columns: Iterable[Column | str], rows: Sequence[dict[str, Any]], *,
                   legend: bool = False) -> str:
    """A Markdown table; with ``legend`` a bullet list of the column meanings follows."""
    cols = as_columns(columns)
    lines = ["| " + " | ".join(c.name for c in cols) + " |",
             "|" + "|".join("---:" if _numeric(rows, c) else "---" for c in cols) + "|"]
    for r in rows:
        lines.append("| " + " | ".join(md_cell(r.get(c.name), c) for c in cols) + " |")
    text = "\n".join(lines) + "\n"
    if legend:
        text += "\n" + "".join(f"* `{c.name}`: {c.meaning}\n" for c in cols if c.meaning)
    return text


def _numeric(rows: Sequence[dict[str, Any]], col: Column) -> bool:
    for r in rows:
        v = plain(r.get(col.name))
        if v is None:
            continue
        return isinstance(v, (int, float)) and not isinstance(v, bool)
    return False


def write_markdown(path: str | os.PathLike, text: str) -> Path:
    """Write Markdown text atomically. Returns the path."""
    return _atomic_write(Path(path), text)
