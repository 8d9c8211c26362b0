"""``maasscomp list``: sorted by (level, R), filters with honest messages, reals printed as
reals, no negative zeros, oldforms naming their parent (a synthetic store)."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from maasscomp.cli import main
from maasscomp.store import Store
from tests.store.store_form_factory import random_form


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    rng = np.random.default_rng(5)
    p = tmp_path_factory.mktemp("list") / "s.h5"
    forms = []
    for level, R in ((2, 12.5), (1, 13.7), (2, 9.2), (1, 9.5)):
        f = random_form(rng, level=level, M=8, with_al=False)
        f = dataclasses.replace(f, R=R, multiplicity=1, basis_index=0, is_new=True, extra={})
        forms.append(f)
    c = forms[3].coeffs.copy()
    c[0, 1] = -1e-13  # prints as zero: without a sign
    forms[3] = dataclasses.replace(forms[3], coeffs=c)
    c = forms[1].coeffs.astype(complex)  # complex storage, real values: printed as reals
    forms[1] = dataclasses.replace(forms[1], coeffs=c)
    parent = {"level": 1, "R": 9.5, "parity": forms[3].parity, "label": "", "coordinates": {"1": 1.0}}
    forms[2] = dataclasses.replace(forms[2], R=9.5, is_new=False,
                                   extra={"old_parents": [parent], "old_fit_residual": 1e-12})
    with Store.open(p, "a", create=True) as st:
        st.add_forms(forms)
    return p


def _list(capsys, *args):
    code = main(["list", *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_sorted_by_level_and_R_with_clean_numbers(store, capsys):
    code, out, _ = _list(capsys, store, "--coeffs", "3")
    assert code == 0
    lines = out.splitlines()[1:-1]
    keys = [ln.split()[0] for ln in lines]
    with Store.open(store) as st:
        assert keys == st.keys()
        order = [(st[k].level, st[k].R) for k in keys]
    assert order == sorted(order) and len(keys) == 4
    assert "-0.0000000000" not in out and " 0.0000000000" in out
    assert "e+00i" not in out and "j" not in out  # the complex-stored real form prints reals
    old = [ln for ln in lines if " old " in ln]
    assert len(old) == 1 and old[0].endswith("old from level 1, R 9.5000000000 (" + old[0].split("(")[-1])
    assert out.splitlines()[-1] == "4 forms"


@pytest.mark.parametrize("args,expect", [
    (("--level", "7"), "no forms at level 7; {s} has levels 1, 2"),
    (("--level", "1", "--R-min", "20"), "no forms with 20 <= R among those of level 1; their R lie in [9.5, 13.7]"),
    (("--symmetry", "even_2p"), "no forms of class 'even_2p'; {s} has class"),
])
def test_filters_say_what_is_there(store, capsys, args, expect):
    code, out, _ = _list(capsys, store, *args)
    assert code == 0 and out.startswith(expect.format(s=store)), out


def test_filters_select(store, capsys):
    code, out, _ = _list(capsys, store, "--level", "2", "--R-max", "10", "--coeffs", "0")
    assert code == 0 and out.splitlines()[-1] == "1 forms" and "N2_" in out
    with Store.open(store) as st:
        par = st[st.keys()[0]].parity
    code, out, _ = _list(capsys, store, "--symmetry", par, "--coeffs", "0")
    n = int(out.splitlines()[-1].split()[0])
    with Store.open(store) as st:
        assert n == sum(st[k].parity == par for k in st)
    code, _, err = _list(capsys, store, "--R-min", "10", "--R-max", "9")
    assert code == 2 and "--R-min 10 is larger than --R-max 9" in err and "np.float64" not in err
