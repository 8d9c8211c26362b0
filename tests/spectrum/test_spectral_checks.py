"""Building blocks of the completeness tests (maasscomp.spectrum.spectral_checks).

Outside facts used:
* Poisson spacings: the gaps of a Poisson sequence of rate 1 are independent Exp(1), so the
  number below f among n gaps is Binomial(n, 1 - e^{-f}) (common practice); the synthetic
  sequences below are drawn with numpy's seeded generator.
* Oldforms (Atkin & Lehner, Math. Ann. 185 (1970) 134-160): a newform of level M gives
  sigma_0(N/M) oldforms at level N.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.spectrum import spectral_checks as sc
from maasscomp.spectrum.weyl import completeness, count_identity


@dataclass
class _Sym:
    label: str

    @property
    def parity(self) -> str:
        return self.label.split(",")[0]


@dataclass
class _F:
    R: float
    label: str = "odd"
    is_new: bool | None = True
    multiplicity: int = 1
    level: int = 1
    basis_index: int = 0
    extra: dict = field(default_factory=dict)

    @property
    def symmetry(self):
        return _Sym(self.label)


def test_entries_from_numbers_and_forms():
    e = sc.as_entries([12.0, 9.5, 9.5])
    assert e.R.tolist() == [9.5, 9.5, 12.0] and not e.has_classes
    # one object per eigenspace with multiplicity 2, or one per basis member: both count 2
    a = sc.as_entries([_F(10.0, multiplicity=2), _F(11.0)])
    b = sc.as_entries([_F(10.0, multiplicity=2, basis_index=0), _F(10.0, multiplicity=2, basis_index=1), _F(11.0)])
    assert a.R.tolist() == b.R.tolist() == [10.0, 10.0, 11.0]
    # the same R in two classes is two forms
    c = sc.as_entries([_F(10.0, "even"), _F(10.0, "odd")])
    assert c.R.tolist() == [10.0, 10.0] and sorted(c.label.tolist()) == ["even", "odd"]
    with pytest.raises(InputError):
        sc.as_entries([_F(-1.0)])
    with pytest.raises(InputError):
        sc.as_entries([_F(10.0), 3.0])


def _poisson(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return 100.0 + np.cumsum(rng.exponential(1.0, n))


def test_spacing_test_on_poisson_and_without_close_pairs():
    x = _poisson(400, 1)
    ent = sc.as_entries([_F(r) for r in x])
    span = (x[0] - 1e-9, x[-1])
    full = sc.spacing_test(1, ent, span[0], span[1], 0.1, span)
    # a Poisson sequence is not flagged (p-value of its small-gap count is not tiny)
    assert full.applicable and full.n_gaps == 399 and full.p_value > 0.01
    assert abs(full.small - full.expected) < 4 * np.sqrt(full.expected)
    # drop one member of every gap below 0.1 (as a coarse grid would): too few small gaps
    keep = np.concatenate([[True], np.diff(x) >= 0.1])
    thin = sc.spacing_test(1, sc.as_entries([_F(r) for r in x[keep]]), span[0], span[1], 0.1, span)
    assert thin.small < 0.25 * thin.expected and thin.p_value < 1e-6


def test_spacing_test_uses_newforms_of_one_class_at_higher_level():
    x = _poisson(200, 2)
    forms = [_F(r, "even,2+", True, level=2) for r in x]
    # oldforms (eigenvalues of level 1, here between the newforms) do not count
    forms += [_F(r, "even,2+", False, level=2) for r in 0.5 * (x[1::10] + x[:-1:10])]
    res = sc.spacing_test(2, sc.as_entries(forms), 0.0, 1e9, 0.1, (x[0] - 1e-9, x[-1]))
    assert res.applicable and res.n_gaps == 199
    # plain numbers at level > 1: not applicable
    assert not sc.spacing_test(2, sc.as_entries(list(x)), 0.0, 1e9, 0.1, (0.0, 1e9)).applicable


def test_count_identity_level_4():
    # newforms: a (level 1), b (level 2), c (level 4); oldforms at level 4: 3 x a, 2 x b
    a, b, c = 9.53, 11.2, 12.7
    forms = [_F(a, level=1), _F(b, level=2), _F(c, level=4)]
    forms += [_F(a, is_new=False, level=4, extra={"old_from_level": 1}) for _ in range(3)]
    forms += [_F(b, is_new=False, level=4, extra={"old_from_level": 2}) for _ in range(2)]
    rows, summ = count_identity(4, forms, 13.0)
    by = {r.M: r for r in rows}
    assert by[1].weight == 3 and by[1].predicted_old == 3 and by[1].ok
    assert by[2].weight == 2 and by[2].predicted_old == 2 and by[2].ok
    assert summ["total_N"] == 6 and summ["predicted_total"] == 6 and summ["ok"]
    # one oldform from level 1 missing: the identity fails where it should
    rows, summ = count_identity(4, forms[:-3] + forms[-2:], 13.0)
    by = {r.M: r for r in rows}
    assert by[1].ok is False and summ["ok"] is False
    # without the divisor levels' newforms the prediction is unknown
    rows, summ = count_identity(4, [f for f in forms if f.level == 4], 13.0)
    assert summ["predicted_total"] is None and summ["ok"] is None


def test_report_accepts_form_like_objects_and_gives_rows():
    x = np.array([9.533695261353557, 12.173008324679678, 13.779751351890739, 14.358509518259813,
                  16.138073171521031, 16.644259201899820, 17.738563381057378, 18.180917834530703,
                  19.423481470828255, 19.484713854741013])
    par = ["odd", "odd", "even", "odd", "odd", "odd", "even", "odd", "even", "odd"]
    rep_f = completeness(1, [_F(r, p) for r, p in zip(x, par)], 0.0, 20.0)
    rep_n = completeness(1, x, 0.0, 20.0)
    assert rep_f.total_found == rep_n.total_found == 10
    rows = rep_f.rows()
    assert len(rows) == len(rep_f.windows) and {"turing_integral", "spacing_p", "research"} <= set(rows[0])
    assert rep_f.summary_row()["is_complete"] == rep_f.is_complete
    assert rep_f.research_intervals() == ()
