"""Sphinx configuration of the maasscomp documentation.

Build (from the repository root, after ``pip install -e '.[docs]'``)::

    python -m sphinx -W -b html docs docs/_build/html

The API pages are generated at build time into ``docs/api/`` (git-ignored): one page per
public module (no leading underscore) of every stage, so a new module appears without
editing anything here.
"""

from __future__ import annotations

import importlib
import os
import pkgutil
import re
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
# the working tree's package first, whatever is installed
sys.path.insert(0, ROOT)

import maasscomp  # noqa: E402

project = "maasscomp"
author = "the maasscomp developers"
copyright = "the maasscomp developers"
release = maasscomp.__version__
version = release

extensions = [
    "myst_parser",
    "numpydoc",
    "sphinx.ext.autodoc",
    "sphinx.ext.doctest",
    "sphinx.ext.mathjax",
]

source_suffix = {".rst": "restructuredtext", ".md": "markdown"}
root_doc = "index"
exclude_patterns = ["_build", "theory-additions"]
templates_path: list[str] = []

# --- MyST: $...$ and $$...$$ math, anchors for the numbered sections of the theory page
myst_enable_extensions = ["dollarmath", "amsmath"]
myst_heading_anchors = 3

# --- autodoc + numpydoc
autodoc_default_options = {"members": True, "show-inheritance": False}
autodoc_member_order = "bysource"
autodoc_typehints = "signature"
# show numpy.typing.ArrayLike by name, not as its expanded union
autodoc_type_aliases = {"ArrayLike": "ArrayLike", "npt.ArrayLike": "ArrayLike"}
autodoc_inherit_docstrings = False
numpydoc_show_class_members = False
numpydoc_class_members_toctree = False
numpydoc_xref_param_type = False
numpydoc_validation_checks: set[str] = set()
# the package docstrings carry a "Public API" list; numpydoc keeps it as a rubric
numpydoc_attributes_as_param_list = False

# docstring formulas become literal blocks: show them as plain text, not as Python
highlight_language = "none"

html_theme = "alabaster"
html_title = f"maasscomp {release}"
html_static_path: list[str] = []

# the tutorial runs under the doctest builder; keep it quiet and single-threaded
doctest_global_setup = """
import os
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
"""


def _public_modules() -> list[str]:
    """maasscomp and every module or package below it whose name has no leading underscore."""
    names = ["maasscomp"]
    for info in pkgutil.walk_packages(maasscomp.__path__, prefix="maasscomp."):
        parts = info.name.split(".")
        if any(p.startswith("_") for p in parts[1:]):
            continue
        names.append(info.name)
    return sorted(names)


def _write_api_pages(app) -> None:
    """One page per public module under docs/api/, written only when its text changes."""
    out = os.path.join(app.srcdir, "api")
    os.makedirs(out, exist_ok=True)
    wanted = set()
    for name in _public_modules():
        mod = importlib.import_module(name)
        is_package = hasattr(mod, "__path__")
        title = f"``{name}``"
        lines = [title, "=" * len(title), "", f".. automodule:: {name}"]
        # a package page shows its docstring (the stage's public API list); the objects
        # themselves are documented once, on the page of the module that defines them
        lines += ["   :no-members:" if is_package else "   :members:", ""]
        text = "\n".join(lines)
        path = os.path.join(out, f"{name}.rst")
        wanted.add(os.path.basename(path))
        old = open(path).read() if os.path.exists(path) else None
        if old != text:
            with open(path, "w") as fh:
                fh.write(text)
    for stale in set(os.listdir(out)) - wanted:
        if stale.endswith(".rst"):
            os.remove(os.path.join(out, stale))


# --- docstrings are written as plain text with formulas (|f|, y*, indented formula blocks);
# read as reStructuredText, |x| would be a substitution and a lone * an emphasis. This hook
# runs before numpydoc and makes the text mean what it says: indented blocks that follow a
# paragraph become literal blocks, and | and lone * in prose are escaped. Inline literals,
# roles, directives, literal blocks and doctest lines are left alone.

_FIELD_SECTIONS = {
    "Parameters", "Returns", "Yields", "Receives", "Raises", "Warns", "Other Parameters",
    "Attributes", "Methods", "See Also", "Warnings",
}
_UNDERLINE_CHARS = set("=-~^\"'`#*+<>")
_INLINE = re.compile(r"``.+?``|:[\w:+-]+:`[^`]+`|`[^`]+`_?")
_STRONG_OR_EM = re.compile(r"(?<![\w*\\])\*\*[^\s*](?:[^*]*[^\s*])?\*\*(?![\w*])|(?<![\w*\\])\*[^\s*](?:[^*]*[^\s*])?\*(?![\w*])")


def _indent(line: str) -> int:
    return len(line) - len(line.lstrip())


def _is_underline(line: str) -> bool:
    t = line.strip()
    return len(t) >= 3 and len(set(t)) == 1 and t[0] in _UNDERLINE_CHARS


def _escape_prose(text: str) -> str:
    """Escape \\, | and any * that is not a bullet, *emphasis* or **strong**, outside literals."""
    lead = len(text) - len(text.lstrip())
    if text[lead:lead + 2] == "* ":
        return text[:lead + 2] + _escape_prose(text[lead + 2:])
    out, pos = [], 0
    for m in _INLINE.finditer(text):
        out.append(_escape_plain(text[pos:m.start()]))
        out.append(m.group(0))
        pos = m.end()
    out.append(_escape_plain(text[pos:]))
    return "".join(out)


def _escape_plain(text: str) -> str:
    keep = [(m.start(), m.end()) for m in _STRONG_OR_EM.finditer(text)]
    out, pos = [], 0
    for a, b in keep + [(len(text), len(text))]:
        # a backslash in plain text is a backslash (Gamma0(N)\\H), not an escape
        out.append(re.sub(r"([\\|*])", r"\\\1", text[pos:a]))
        out.append(text[a:b])
        pos = b
    return "".join(out)


def plain_docstring_to_rst(lines: list[str]) -> list[str]:
    """The transformation described above, on the lines of one docstring (returns new lines)."""
    n = len(lines)
    out: list[str] = []
    section = ""
    literal_base: int | None = None  # inside a literal block: lines indented more than this
    doctest = False
    last_indent = 0
    for i, line in enumerate(lines):
        blank = not line.strip()
        ind = _indent(line)
        if literal_base is not None:
            if blank or ind > literal_base:
                out.append(line)
                continue
            literal_base = None
        if doctest:
            if blank:
                doctest = False
            out.append(line)
            continue
        if blank:
            out.append(line)
            continue
        stripped = line.strip()
        nxt = lines[i + 1] if i + 1 < n else ""
        if _is_underline(nxt) and _indent(nxt) == ind and not _is_underline(line):
            section = stripped
            out.append(line)
            continue
        if _is_underline(line):
            # a section underline: at least as long as its title
            title = out[-1].strip() if out else ""
            out.append(line[:ind] + stripped[0] * max(len(stripped), len(title)))
            last_indent = ind
            continue
        if stripped.startswith(">>>"):
            doctest = True
            out.append(line)
            continue
        if stripped.startswith(".. "):
            literal_base = ind  # a directive and its body stay as written
            out.append(line)
            continue
        # a less indented line right after an indented one: separate it by a blank line, so
        # that a definition list or block quote ends cleanly
        if ind < last_indent and out and out[-1].strip():
            out.append("")
        last_indent = ind
        # does an indented block follow after a blank line?
        j = i + 1
        while j < n and not lines[j].strip():
            j += 1
        block_follows = j > i + 1 and j < n and _indent(lines[j]) > ind
        text = _escape_prose(line)
        if block_follows and section not in _FIELD_SECTIONS and not lines[j].strip().startswith(">>>"):
            if text.rstrip().endswith("::"):
                pass
            elif text.rstrip().endswith(":"):
                text = text.rstrip() + ":"
            else:
                text = text.rstrip() + " ::"
            literal_base = ind
        elif text.rstrip().endswith("::"):
            literal_base = ind
        out.append(text)
    return out


def _process_docstring(app, what, name, obj, options, lines) -> None:
    lines[:] = plain_docstring_to_rst(lines)


# Two modules define a class DirichletCharacter (maasscomp.groups.characters and
# maasscomp.spectrum.scattering); an annotation that names it without its module outside those
# two modules (maasscomp.store: the one of maasscomp.groups) would be an ambiguous reference.
_UNQUALIFIED_CHAR = re.compile(r"(?<![\w.])DirichletCharacter\b")


def _qualify_signature(app, what, name, obj, options, signature, return_annotation):
    if name.startswith("maasscomp.store."):
        full = "maasscomp.groups.characters.DirichletCharacter"
        if signature:
            signature = _UNQUALIFIED_CHAR.sub(full, signature)
        if return_annotation:
            return_annotation = _UNQUALIFIED_CHAR.sub(full, return_annotation)
    return signature, return_annotation


def setup(app):
    app.connect("builder-inited", _write_api_pages)
    app.connect("autodoc-process-signature", _qualify_signature)
    # before numpydoc (priority 500), which then parses the sections
    app.connect("autodoc-process-docstring", _process_docstring, priority=400)
    return {"parallel_read_safe": True}
