"""Stage: store -- the HDF5 file of Maass forms with provenance, and its exports.

Public API
----------
Store
    ``Store.open(path, mode)``: crash-safe copy-on-write writer and snapshot reader.
export_json, export_csv
    Atomic exports of a store file.
SCHEMA_VERSION
    Version of the on-disk layout defined in :mod:`maasscomp.store.schema`.
"""

from maasscomp.store.export import export_csv, export_json
from maasscomp.store.schema import FORMAT_NAME, SCHEMA_VERSION
from maasscomp.store.store import DEFAULT_DUPLICATE_TOL, Store

__all__ = ["Store", "export_json", "export_csv", "SCHEMA_VERSION", "FORMAT_NAME",
           "DEFAULT_DUPLICATE_TOL"]
