"""Every citation ``docs/theory.md §N`` or ``§N.M`` in the repository names a section that exists.

Code, tests, benchmarks, docs, configs and the headers of the files in data/reference/ cite the
project's account of its mathematics as ``docs/theory.md §N.M`` (also across a line break,
and in lists such as ``§5.1-5.2``, ``§8.4-§8.5``, ``§7.4 and §10.2`` or ``§3.1/§3.3``). The
sections are the ``## N.`` and ``### N.M`` headings of docs/theory.md. This test fails when a
section is renamed, removed or renumbered while something still cites it, and when a file
cites a draft in docs/theory-additions/ instead of the section the draft was folded into.

What it cannot detect: a citation of an existing section that is the wrong one for the
statement beside it, and references inside docs/theory.md itself (``§N.M`` without the file
name), which are mixed there with section numbers of cited books and papers. Runs in well
under a second.
"""

from __future__ import annotations

import re
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
THEORY = REPO / "docs" / "theory.md"

# files that can hold citations; binary and generated files are skipped
_SUFFIXES = {".py", ".md", ".rst", ".txt", ".toml", ".cfg", ".ini", ".csv", ".json", ".yaml", ".yml", ""}
_SKIP_DIRS = {".git", "_build", "__pycache__", ".pytest_cache", ".hypothesis", "build", "dist", "api"}

_SEC = r"\d+(?:\.\d+)?"
# "docs/theory.md", optional line break / comment marker, then "§N(.M)" and any continuation
# of the list ("-5.2", "-§8.5", " and §10.2", "/§3.3", ", §5.2")
_CITE = re.compile(
    r"docs/theory\.md[\s#*>]*§(" + _SEC + r")((?:\s*(?:-|–|/|,|and)\s*§?" + _SEC + r")*)"
)
_ADDITIONS = re.compile(r"docs/theory-additions/(?!README\.md)[\w.-]+\.md")


def _sections() -> set[str]:
    out: set[str] = set()
    for line in THEORY.read_text(encoding="utf-8").splitlines():
        m = re.match(r"^(##|###) (\d+(?:\.\d+)?)\.?\s", line)
        if m:
            out.add(m.group(2))
    return out


def _files():
    for path in REPO.rglob("*"):
        if not path.is_file() or path.suffix not in _SUFFIXES:
            continue
        rel = path.relative_to(REPO)
        if path == Path(__file__).resolve():
            continue  # its own power check cites sections that do not exist on purpose
        if any(part in _SKIP_DIRS or part.endswith(".egg-info") for part in rel.parts[:-1]):
            continue
        try:
            text = path.read_text(encoding="utf-8")
        except (UnicodeDecodeError, OSError):
            continue
        yield rel, text


def _citations():
    for rel, text in _files():
        for m in _CITE.finditer(text):
            line = text.count("\n", 0, m.start()) + 1
            secs = [m.group(1)] + re.findall(_SEC, m.group(2) or "")
            for s in secs:
                yield rel, line, s


def test_theory_has_the_numbered_sections():
    secs = _sections()
    # the top-level sections 1-11 and a few subsections that much code cites
    assert {str(k) for k in range(1, 12)} <= secs, sorted(secs)
    assert {"1.1", "1.2", "1.4", "2.2", "3.3", "5.1", "7.5", "8.3", "9.2", "10.1", "11.1"} <= secs


def test_every_citation_names_an_existing_section():
    secs = _sections()
    cites = list(_citations())
    # the scan finds the citations at all (guards against a regex that matches nothing)
    assert len(cites) > 100, len(cites)
    bad = [f"{rel}:{line}: §{s}" for rel, line, s in cites if s not in secs]
    assert not bad, "citations of sections missing from docs/theory.md:\n" + "\n".join(bad)


def test_the_scan_sees_a_missing_section():
    """Power check: a citation of a section that does not exist is reported."""
    secs = _sections()
    text = "see docs/theory.md §1.2 and docs/theory.md\n#   §99.1, and docs/theory.md §5.1-5.9"
    found = [re.findall(_SEC, m.group(2) or "") + [m.group(1)] for m in _CITE.finditer(text)]
    flat = {s for group in found for s in group}
    assert flat == {"1.2", "99.1", "5.1", "5.9"}
    assert {"99.1", "5.9"} == flat - secs


def test_nothing_cites_a_draft_in_theory_additions():
    bad = []
    for rel, text in _files():
        if rel.parts[:2] == ("docs", "theory-additions"):
            continue
        for m in _ADDITIONS.finditer(text):
            bad.append(f"{rel}:{text.count(chr(10), 0, m.start()) + 1}: {m.group(0)}")
    assert not bad, "fold these drafts into docs/theory.md and cite its sections:\n" + "\n".join(bad)
