"""pandas DataFrames of forms and scans (optional: needs the extra ``pandas``).

``pip install 'maasscomp[pandas]'`` installs pandas; without it every function here raises
an :class:`~maasscomp.errors.InputError` that names the extra. The tables have the same
columns as the CSV files of :mod:`maasscomp.report.tables` (one home for table columns):

* :func:`form_frame`: one row per (cusp, n) of a form: ``cusp``, ``cusp_name``, ``n``,
  ``re``, ``im``, ``error``;
* :func:`scan_frame`: one row per region of one scan (``REGION_COLUMNS``);
* :func:`scans_frame`: one row per scan (``FORM_COLUMNS`` of :mod:`maasscomp.report.peaks`).
"""

from __future__ import annotations

from typing import Any, Iterable

import numpy as np

from maasscomp.errors import InputError
from maasscomp.report.tables import plain


def require_pandas() -> Any:
    """The pandas module, or an InputError naming the optional extra that installs it."""
    try:
        import pandas
    except ImportError:
        raise InputError("tables as DataFrames need pandas, which is not installed; install "
                         "the optional extra: pip install 'maasscomp[pandas]'") from None
    return pandas


def _cusp_names(form) -> list[str]:
    from maasscomp.groups import gamma0

    n = form.coeffs.shape[0]
    return [c.name for c in gamma0(form.level).cusps[:n]]


def form_rows(form) -> list[dict[str, Any]]:
    """One dict per stored coefficient: cusp, cusp_name, n, re, im, error."""
    C = np.asarray(form.coeffs)
    E = np.asarray(form.coeff_errors)
    names = _cusp_names(form)
    rows = []
    for j in range(C.shape[0]):
        re, im = C[j].real.tolist(), (C[j].imag if np.iscomplexobj(C) else np.zeros(C.shape[1])).tolist()
        err = E[j].real.tolist() if not np.iscomplexobj(E) else np.abs(E[j]).tolist()
        rows += [{"cusp": j, "cusp_name": names[j], "n": n + 1, "re": re[n], "im": im[n],
                  "error": err[n]} for n in range(C.shape[1])]
    return rows


def form_frame(form):
    """The coefficients of a form as a DataFrame (one row per cusp and n); the form's key,
    level, R and symmetry class are in ``DataFrame.attrs``."""
    pd = require_pandas()
    df = pd.DataFrame(form_rows(form), columns=["cusp", "cusp_name", "n", "re", "im", "error"])
    df.attrs.update({"key": form.key, "level": int(form.level), "R": float(form.R),
                     "symmetry": form.symmetry.label})
    return df


def scan_frame(result):
    """The regions of one scan as a DataFrame (columns of ``REGION_COLUMNS``)."""
    from maasscomp.report.peaks import REGION_COLUMNS, region_rows

    pd = require_pandas()
    rows = [{k: plain(v) for k, v in r.items()} for r in region_rows([result])]
    return pd.DataFrame(rows, columns=[c.name for c in REGION_COLUMNS])


def scans_frame(results: Iterable):
    """One row per scan (columns of ``FORM_COLUMNS``: where the global maximum lies, each
    region's peak beside its prediction, ...)."""
    from maasscomp.report.peaks import FORM_COLUMNS, form_rows as scan_rows

    pd = require_pandas()
    rows = [{k: plain(v) for k, v in r.items()} for r in scan_rows(list(results))]
    return pd.DataFrame(rows, columns=[c.name for c in FORM_COLUMNS])
