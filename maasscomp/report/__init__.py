"""Stage: report -- tables, figures and the report folder of a store.

Everything the package writes for people to read comes from this stage: one CSV writer and
one Markdown writer (:mod:`maasscomp.report.tables`), the peak statistics across scanned forms
(:mod:`maasscomp.report.peaks`), the figures (:mod:`maasscomp.report.figures`) and the report
folder (:mod:`maasscomp.report.folder`).

Public API
----------
make_report(store_path, out_dir) -> Report
    The report folder of a store (``maasscomp report``).
write_peak_files(store_path, out_dir, keys=None, per_form=False) -> list of Path
    Peak tables and figures of the scanned forms (``maasscomp figures``).
peak_study(results) -> dict
    Every statistic of the peak study across scanned forms.
Column, write_csv, markdown_table, write_markdown
    The table writers.
"""

from maasscomp.report.folder import Report, make_report, peak_study, write_peak_files
from maasscomp.report.tables import Column, markdown_table, write_csv, write_markdown

__all__ = ["make_report", "Report", "write_peak_files", "peak_study", "Column", "write_csv", "markdown_table", "write_markdown"]
