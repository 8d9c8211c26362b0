"""The store schema: every group, dataset, attribute and field name lives here.

Nothing else in the package spells a name that appears inside a store file; readers, writers
and exporters import these constants (the byte layouts of rows, blobs and commit records are
in :mod:`maasscomp.store._layout`).  ``docs/store-schema.md`` documents the same layout for
people (types, units, versioning policy).  A change to anything below that an older reader
could misread requires a new :data:`SCHEMA_VERSION`.

Layout of schema version 2 (the HDF5 part, after a 512-byte file header)::

    /                         attrs: format, schema_version, created_utc, package_version,
                                     next_seq, store_id, compacted_utc
    /forms/rows               one index row per form (compound, _layout.ROW_DTYPE)
    /forms/values             float64 pool: coefficient and error arrays
    /forms/meta               uint8 pool: per-form metadata blobs (JSON + arrays)
    /forms/labels             uint8 pool: per-form "key TAB symmetry TAB character NEWLINE"
    /forms/block_sums         uint8 (n_blocks, 16): checksum of each block of rows
    /attachments/rows         one row per attachment (compound, ATTACHMENT_DTYPE)
    /attachments/names        uint8 pool of attachment names
    /attachments/blobs        uint8 pool of attachment blobs
    /runs/<run_id>            attrs created_utc, package_version; datasets config, tasks
    /texts/<id>               config texts referenced by forms (id: checksum of the text)

followed by the commit records of the transactions made since the last compaction.

Layout of schema version 1 (read, and migrated on the first write)::

    /                                 attrs: format, schema_version, created_utc,
                                             package_version, next_seq
    /forms/<key>/                     one group per Maass form, attrs listed below
    /forms/<key>/coeffs               float dataset (n_cusps, M)
    /forms/<key>/coeff_errors         float dataset (n_cusps, M)
    /forms/<key>/al_signs             int64 dataset (k, 2): rows (p, eps_p)
    /forms/<key>/extra                UTF-8 JSON text (scalar string dataset)
    /forms/<key>/extra_arrays/<name>  numpy arrays referenced from the extra JSON
    /forms/<key>/config               UTF-8 config text (scalar string dataset)
    /forms/<key>/attachments/<name>/  data stored beside the form (e.g. a peak scan)
    /runs/<run_id>/                   attrs: created_utc, package_version; dataset config
    /runs/<run_id>/tasks/<escaped id> attrs: task_id, done_utc, form_keys
"""

from __future__ import annotations

import re

import numpy as np

#: Integer version of the layout written by this package; readers refuse larger values.
SCHEMA_VERSION = 2
#: Versions this package reads.
READABLE_VERSIONS = (1, 2)

#: Value of the root attribute :data:`ROOT_FORMAT` that marks a file as a maasscomp store.
FORMAT_NAME = "maasscomp-store"

# ---------------------------------------------------------------- root
ROOT_FORMAT = "format"
ROOT_SCHEMA_VERSION = "schema_version"
ROOT_CREATED_UTC = "created_utc"
ROOT_PACKAGE_VERSION = "package_version"
#: Counter giving every form a write sequence number (and the store its insertion order).
ROOT_NEXT_SEQ = "next_seq"
#: Random id of the store (hex), kept by compaction; also in the file header.
ROOT_STORE_ID = "store_id"
#: When the base was last rewritten (compaction or migration).
ROOT_COMPACTED_UTC = "compacted_utc"

FORMS_GROUP = "forms"
RUNS_GROUP = "runs"

# ---------------------------------------------------------------- version 2
D_ROWS = "forms/rows"
D_VALUES = "forms/values"
D_META = "forms/meta"
D_LABELS = "forms/labels"
D_BLOCK_SUMS = "forms/block_sums"
#: Rows per block of ``/forms/block_sums``.
BLOCK_ROWS = 1024
ATT_GROUP = "attachments"
D_ATT_ROWS = "attachments/rows"
D_ATT_NAMES = "attachments/names"
D_ATT_BLOBS = "attachments/blobs"
TEXTS_GROUP = "texts"
RUN_D_TASKS = "tasks"

ATTACHMENT_DTYPE = np.dtype([
    ("form_seq", "<i8"), ("name_at", "<i8"), ("name_len", "<i8"),
    ("blob_at", "<i8"), ("blob_len", "<i8"), ("sum", "u1", (16,)),
])

# keys of a form's metadata blob document
M_SYMMETRY = "symmetry"
M_CHARACTER = "character"
M_CUSPS = "cusps"
M_EXTRA = "extra"
M_FIELDS = "fields"
M_PROVENANCE = "provenance"

# ---------------------------------------------------------------- version 1: one form group
A_LEVEL = "level"
A_R = "R"
A_R_ERROR = "R_error"
A_HECKE_RESIDUAL = "hecke_residual"
A_PARITY = "parity"
#: Derived, human-readable label such as ``even,2+,3-`` (the ``al_signs`` dataset is authoritative).
A_SYMMETRY_LABEL = "symmetry"
A_SOLVER_Y = "solver_Y"
A_SOLVER_M0 = "solver_M0"
A_SOLVER_Q = "solver_Q"
A_SOLVER_EPS = "solver_eps"
#: int8: 1 newform, 0 oldform, -1 not classified (``is_new is None``).
A_IS_NEW = "is_new"
A_MULTIPLICITY = "multiplicity"
A_BASIS_INDEX = "basis_index"
A_PACKAGE_VERSION = "package_version"
A_CREATED_UTC = "created_utc"
A_SEQ = "seq"
#: Run id that produced the form ("" when written outside a run).
A_RUN_ID = "run_id"

D_COEFFS = "coeffs"
D_COEFF_ERRORS = "coeff_errors"
D_AL_SIGNS = "al_signs"
D_EXTRA = "extra"
G_EXTRA_ARRAYS = "extra_arrays"
D_CONFIG = "config"
G_ATTACHMENTS = "attachments"

IS_NEW_CODES = {True: 1, False: 0, None: -1}
IS_NEW_FROM_CODE = {1: True, 0: False, -1: None}

# ---------------------------------------------------------------- runs
RUN_A_CREATED_UTC = "created_utc"
RUN_A_PACKAGE_VERSION = "package_version"
RUN_D_CONFIG = "config"
RUN_TASKS_GROUP = "tasks"
TASK_A_ID = "task_id"
TASK_A_DONE_UTC = "done_utc"
TASK_A_FORM_KEYS = "form_keys"

# ---------------------------------------------------------------- extra-dict JSON tags
#: A JSON object with exactly one of these keys encodes a value JSON cannot hold.
TAG_NDARRAY = "__ndarray__"
TAG_TUPLE = "__tuple__"
TAG_COMPLEX = "__complex__"
EXTRA_TAGS = (TAG_NDARRAY, TAG_TUPLE, TAG_COMPLEX)

# ---------------------------------------------------------------- names
#: Temporary files of unfinished transactions: ``.<target name>.tmp.<pid>.<token>``.
TMP_INFIX = ".tmp."
LOCK_SUFFIX = ".lock"

_NAME_OK = re.compile(r"^[A-Za-z0-9_.+\-]+$")


def symmetry_slug(label: str) -> str:
    """File-name-safe form of a symmetry label: ``even,2+,3-`` -> ``even_2p_3m``."""
    return label.replace(",", "_").replace("+", "p").replace("-", "m")


def form_key_base(level: int, label: str, R: float, basis_index: int, multiplicity: int,
                  character: str) -> str:
    """Readable key of a form before de-duplication, e.g. ``N11_X11.0_even_11p_R3.4536492130``.

    ``character`` is the label of the form's character (``X11.0`` for the trivial
    character mod 11).  R is printed with 10 decimals (well below any estimated R error);
    the basis index is appended (``_b1``) only inside a degenerate eigenspace.  A counter
    ``_v2``, ``_v3``... is appended by the writer when the name is already taken.
    (Schema-version-1 keys lack the character part; keys never change once written.)
    """
    key = f"N{int(level)}_{character}_{symmetry_slug(label)}_R{float(R):.10f}"
    if multiplicity > 1 or basis_index != 0:
        key += f"_b{int(basis_index)}"
    return key


def form_label(level: int, character: str, symmetry: str, R: float) -> str:
    """Human-readable label of a form: ``N11 X11.0 even,11+ R=3.4536492130``."""
    return f"N{int(level)} {character} {symmetry} R={float(R):.10f}"


def escape_name(text: str) -> str:
    """Encode an arbitrary id (task or attachment id) as one HDF5 link name.

    Characters outside ``[A-Za-z0-9_.+-]`` become ``%XX`` (UTF-8 bytes); names ``.``/``..``
    are escaped too, since HDF5 paths treat them specially.
    """
    if text and _NAME_OK.match(text) and text not in (".", ".."):
        return text
    out = []
    for ch in text:
        if _NAME_OK.match(ch) and ch != ".":
            out.append(ch)
        else:
            out.extend(f"%{b:02X}" for b in ch.encode("utf-8"))
    return "".join(out) or "%"


def check_member_name(name: str, what: str) -> None:
    """Raise InputError unless ``name`` is a plain link name (no ``/``, not empty)."""
    from maasscomp.errors import InputError

    if not isinstance(name, str) or not name or not _NAME_OK.match(name) or name in (".", ".."):
        raise InputError(
            f"{what} {name!r} is not allowed; use a non-empty name of letters, digits and _ . + -"
        )
