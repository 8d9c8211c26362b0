"""The store file keeps its identity: mode, group, symlinks, hard links, read-only files;
and a write that does not fit (full disk, file size limit) leaves the store unchanged.

These tests run as any user.  Where a check depends on root (changing a file's group to
any group) or on not being root (permission bits), it says so and adapts.
"""

from __future__ import annotations

import os
import stat
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

import maasscomp
from maasscomp.errors import StoreError, StoreWriteError
from maasscomp.store import Store, export_json
from maasscomp.store import _atomic
from tests.store.store_form_factory import assert_forms_equal, indexed_form

ROOT = Path(maasscomp.__file__).resolve().parents[1]


def _mode(p: Path) -> int:
    return stat.S_IMODE(os.stat(p).st_mode)


def _state(p: Path) -> tuple:
    st = os.stat(p)
    return (p.read_bytes(), st.st_mtime_ns, stat.S_IMODE(st.st_mode))


def test_mode_and_group_survive_commits_and_compaction(tmp_path):
    p = tmp_path / "s.h5"
    Store.open(p, "a", create=True).close()
    os.chmod(p, 0o600)
    gid = os.stat(p).st_gid
    if os.geteuid() == 0:
        gid = 4321  # root may give the file any group; a compaction must keep it
        os.chown(p, -1, gid)
    ino = os.stat(p).st_ino
    with Store.open(p, "a") as st:
        st.add_forms([indexed_form(i) for i in range(3)])
        assert os.stat(p).st_ino == ino  # commits append to the same file
        assert st.compact()  # compaction writes a new file ...
    assert _mode(p) == 0o600 and os.stat(p).st_gid == gid  # ... with the old identity
    with Store.open(p) as st:
        assert len(st) == 3


def test_symlinked_store_writes_through_the_link_and_locks_the_real_path(tmp_path):
    real_dir = tmp_path / "data"
    real_dir.mkdir()
    real = real_dir / "forms.h5"
    link = tmp_path / "link.h5"
    Store.open(real, "a", create=True).close()
    link.symlink_to(real)
    with Store.open(link, "a") as st:
        st.add_forms([indexed_form(0)])
        # both names are one store: the second writer is locked out through either name
        with pytest.raises(StoreError, match="open for writing by another process"):
            Store.open(real, "a")
        assert not (tmp_path / "link.h5.lock").exists() and (real_dir / "forms.h5.lock").exists()
        st.add_forms([indexed_form(1)])
        assert st.compact()
    assert link.is_symlink() and os.readlink(link) == str(real)
    # closing the writer removes its lock file: nothing is left beside the store
    assert sorted(p.name for p in real_dir.iterdir()) == ["forms.h5"]
    with Store.open(real) as st:
        assert len(st) == 2
    dangling = tmp_path / "dangling.h5"
    dangling.symlink_to(tmp_path / "nowhere.h5")
    with pytest.raises(StoreError, match="symlink to .*nowhere.h5, which does not exist"):
        Store.open(dangling, "r")


def test_read_only_store_is_refused_for_writing_and_read_normally(tmp_path):
    p = tmp_path / "s.h5"
    with Store.open(p, "a", create=True) as st:
        st.add_forms([indexed_form(0), indexed_form(1)])
    os.chmod(p, 0o444)
    before = _state(p)
    for mode in ("a", "w"):
        with pytest.raises(StoreError, match="not writable by this user"):
            Store.open(p, mode)
    assert _state(p) == before
    with Store.open(p) as st:  # reading, listing and exporting need no write permission
        assert len(st) == 2 and st.summary_rows()[0]["level"] == indexed_form(0).level
    assert export_json(p, tmp_path / "o.json") == 2
    assert _state(p) == before


@pytest.mark.skipif(os.geteuid() != 0, reason="needs root to run a check as another user")
def test_store_of_another_user_is_refused(tmp_path):
    """As user 'nobody', a root-owned 0644 store may be read but not written."""
    d = Path(os.environ.get("TMPDIR", "/tmp")) / f"maasscomp-perm-{os.getpid()}"
    d.mkdir()
    try:
        os.chmod(d, 0o777)
        p = d / "s.h5"
        with Store.open(p, "a", create=True) as st:
            st.add_forms([indexed_form(0)])
        os.chmod(p, 0o644)
        code = textwrap.dedent(f"""
            import sys
            sys.path.insert(0, {str(ROOT)!r})
            from maasscomp.store import Store
            from maasscomp.errors import StoreError
            with Store.open({str(p)!r}) as st:
                assert len(st) == 1
            try:
                Store.open({str(p)!r}, "a")
            except StoreError as exc:
                print("refused:", exc)
        """)
        try:
            res = subprocess.run([sys.executable, "-c", code], user=65534, capture_output=True,
                                 text=True, timeout=120, cwd="/")
        except PermissionError:
            pytest.skip("cannot switch to user 65534 here")
        if "Permission denied" in res.stderr and "python" in res.stderr.lower():
            pytest.skip("the Python installation is not readable by user 65534")
        assert "refused:" in res.stdout and "not writable" in res.stdout, res.stderr
    finally:
        for q in d.iterdir():
            q.unlink()
        d.rmdir()


def test_hard_linked_store_is_refused_for_writing(tmp_path):
    p = tmp_path / "s.h5"
    Store.open(p, "a", create=True).close()
    os.link(p, tmp_path / "other.h5")
    with pytest.raises(StoreError, match="2 hard links"):
        Store.open(p, "a")
    with Store.open(tmp_path / "other.h5") as st:
        assert len(st) == 0


def test_mistyped_path_is_not_created(tmp_path):
    with pytest.raises(StoreError, match="does not exist.*only a run creates a store"):
        Store.open(tmp_path / "typo.h5", "a")
    assert not (tmp_path / "typo.h5").exists()


def test_free_space_is_checked_before_a_commit(tmp_path, monkeypatch):
    """The device reports too little free space: the commit is refused before a byte is
    written; the store and the writer stay usable."""
    p = tmp_path / "s.h5"
    with Store.open(p, "a", create=True) as st:
        st.add_forms([indexed_form(0)])
        before = p.read_bytes()
        monkeypatch.setattr(_atomic, "free_bytes", lambda d: 100_000)
        with pytest.raises(StoreWriteError, match=r"needs .* MB and 0.1 MB are free"):
            st.add_forms([indexed_form(1)])
        assert p.read_bytes() == before and len(st) == 1
        monkeypatch.undo()
        st.add_forms([indexed_form(1)])
    assert not [q for q in tmp_path.iterdir() if ".tmp." in q.name]
    with Store.open(p) as st:
        assert len(st) == 2


_FSIZE_WRITER = """
import resource, sys
sys.path.insert(0, {root!r})
import numpy as np
from maasscomp.store import Store
from maasscomp.errors import StoreWriteError
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form
import os
# lift the free-space check so that the write itself meets the limit
import maasscomp.store._atomic as A
A.file_size_limit = lambda: None
big = Form(level=1, R=7.5, symmetry=SymmetryClass("even"), coeffs=np.ones((1, 50_000)),
           coeff_errors=np.zeros((1, 50_000)), R_error=1e-10, hecke_residual=1e-10,
           params=SolverParams(0.5, 10, 20))
with Store.open({path!r}, "a") as st:
    limit = os.path.getsize({path!r}) + 100_000
    resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    try:
        st.add_forms([big])
    except StoreWriteError as exc:
        print("refused:", exc)
    print("forms:", len(st))
"""


def test_file_size_limit_during_a_commit_leaves_the_store_unchanged(tmp_path):
    """RLIMIT_FSIZE stops a commit half-way (the write itself fails with EFBIG): a clear
    error naming the cause, the partial record is removed, the store is unchanged."""
    p = tmp_path / "s.h5"
    with Store.open(p, "a", create=True) as st:
        st.add_forms([indexed_form(0)])
    before = p.read_bytes()
    res = subprocess.run([sys.executable, "-c", _FSIZE_WRITER.format(root=str(ROOT), path=str(p))],
                         capture_output=True, text=True, timeout=300)
    assert res.returncode == 0, res.stderr
    assert "refused:" in res.stdout and "file size limit" in res.stdout, res.stdout + res.stderr
    assert "forms: 1" in res.stdout
    assert p.read_bytes() == before
    assert not [q for q in tmp_path.iterdir() if ".tmp." in q.name]
    with Store.open(p) as st:
        assert_forms_equal(st.get(st.keys(order="written")[0]), indexed_form(0))


def test_file_size_limit_is_checked_before_a_commit(tmp_path, monkeypatch):
    p = tmp_path / "s.h5"
    with Store.open(p, "a", create=True) as st:
        size = os.path.getsize(p)
        monkeypatch.setattr(_atomic, "file_size_limit", lambda: size + 10)
        with pytest.raises(StoreWriteError, match="file size limit of this process"):
            st.add_forms([indexed_form(0)])
        assert os.path.getsize(p) == size and len(st) == 0
