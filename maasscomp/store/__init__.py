"""Stage: store -- the HDF5 file of Maass forms with provenance, and its exports.

Public API
----------
Store
    ``Store.open(path, mode, create=...)``: crash-safe append-only writer and snapshot
    reader.  Damaged forms are skipped and counted by ``iter_forms``, ``select``,
    ``summary_rows`` and ``iter_attachments`` and listed by ``damaged()``.
StoredForm, CuspInfo
    A form read back with its character, cusp data and provenance.
salvage, SalvageReport
    Verify a store and copy every intact form into a new file.
export_json
    One JSON document with every stored field (damaged forms skipped and reported); tables
    (CSV, text, LaTeX) are written by :mod:`maasscomp.report.export`.
SCHEMA_VERSION
    Version of the on-disk layout defined in :mod:`maasscomp.store.schema`.
"""

from maasscomp.store.export import export_json
from maasscomp.store.schema import FORMAT_NAME, SCHEMA_VERSION
from maasscomp.store.store import (DEFAULT_DUPLICATE_TOL, CuspInfo, SalvageReport, Store,
                                   StoredForm, salvage)

__all__ = ["Store", "StoredForm", "CuspInfo", "salvage", "SalvageReport", "export_json",
           "SCHEMA_VERSION", "FORMAT_NAME", "DEFAULT_DUPLICATE_TOL"]
