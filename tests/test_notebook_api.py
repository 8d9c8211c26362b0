"""The Python surface for notebooks: forms as functions, short reprs, the store as a mapping,
DataFrames and maps. Forms come from the precomputed test store
tests/supnorm/data/supnorm_forms.h5 (levels 1, 2, 5, 6, 11; see make_supnorm_forms.py)."""

from __future__ import annotations

import math
import pickle
import sys

import mpmath
import numpy as np
import pytest

from maasscomp.errors import InputError, StoreError
from maasscomp.store import Store
from tests.supnorm.conftest import FORMS

R1 = "N1_odd_R9.5336952614"


@pytest.fixture(scope="module")
def store():
    if not FORMS.exists():
        pytest.skip(f"{FORMS} missing; run python tests/supnorm/make_supnorm_forms.py")
    with Store.open(FORMS) as st:
        yield st


def _fourier_sum(f, x: float, y: float, terms: int = 40) -> float:
    """f(x + iy) = sum_n c(n) sqrt(y) K_{iR}(2 pi n y) cs(2 pi n x) at infinity (docs/theory.md,
    conventions), with K_{iR} from mpmath (DLMF 10.32.9 by quadrature inside mpmath)."""
    mpmath.mp.dps = 30
    cs = mpmath.sin if f.parity == "odd" else mpmath.cos
    s = mpmath.mpf(0)
    for n in range(1, terms + 1):
        k = mpmath.besselk(1j * f.R, 2 * mpmath.pi * n * y).real
        s += f.coeffs[0, n - 1] * mpmath.sqrt(y) * k * cs(2 * mpmath.pi * n * x)
    return float(s)


def test_a_form_is_a_function_of_z_with_physical_values(store):
    """f(z) at a point of the fundamental domain against the Fourier sum with mpmath's K-Bessel
    function, and at its image under z -> -1/z (automorphy through the pullback). The
    coefficients are good to about 1e-12 relative, hence the tolerance."""
    f = store[R1]
    x, y = 0.123, 1.31
    want = _fourier_sum(f, x, y)
    got = f(x + 1j * y)
    assert isinstance(got, np.float64) and np.ndim(got) == 0
    assert got == pytest.approx(want, rel=1e-9)
    z = complex(x, y)
    assert f(-1 / z) == pytest.approx(want, rel=1e-9)  # f(Sz) = f(z) on SL(2, Z)
    assert f(-1 / z + 3) == pytest.approx(want, rel=1e-9)
    # arrays keep their shape; f(x, y) is f(x + iy)
    Z = np.array([[0.1 + 1.2j, -0.3 + 0.9j, 0.45 + 2.0j], [0.0 + 1.0j, 0.2 + 0.5j, 0.3 + 3.0j]])
    V = f(Z)
    assert V.shape == (2, 3) and V.dtype == np.float64
    assert np.array_equal(V, f(Z.real, Z.imag))
    assert V[0, 0] == pytest.approx(f(Z[0, 0]), rel=1e-13)


def test_normalized_values_are_the_physical_ones_over_the_norm(store):
    """f/||f|| times ||f|| (from the L2 norm, ln||f|| = ln||F|| - pi R/2) is f."""
    from maasscomp.supnorm.norm import l2_norm

    f = store["N5_odd_5m_R3.0283762931"]  # two cusps
    z = np.array([0.1 + 0.6j, 0.37 + 0.2j])
    nrm = l2_norm(f, rankin_selberg=False)
    np.testing.assert_allclose(f(z, normalized=True) * math.exp(nrm.log_norm_physical), f(z), rtol=1e-12)
    # the physical value carries e^{-pi R/2}: no overflow or rescaling surprises
    assert abs(f(0.1 + 1.1j)) < 10 * math.exp(-math.pi * f.R / 2)


def test_bad_points_get_one_clear_line(store):
    f = store[R1]
    with pytest.raises(InputError, match="complex z = x \\+ iy"):
        f(0.25)
    with pytest.raises(InputError, match="upper half plane; found Im z = -1") as e:
        f(np.array([0.1 + 1j, 0.2 - 1j]))
    assert "np.float64" not in str(e.value)


def test_reprs_are_one_short_line(store):
    from maasscomp.supnorm.scan import ScanSettings, scan_form

    f = store[R1]
    for r in (repr(f), repr(store.read(R1))):
        assert len(r) < 200 and "\n" not in r and "array" not in r and "[" not in r, r
        assert "9.53369526" in r and R1 in r
    res = scan_form(f, settings=ScanSettings(rtol=1e-2))
    r = repr(res)
    assert len(r) < 250 and "\n" not in r and "array" not in r and "np.float64" not in r, r


def test_the_store_reads_like_a_sorted_mapping(store):
    keys = list(store)
    forms = [store[k] for k in keys]
    assert len(store) == len(keys) == 157 and keys == store.keys()
    order = [(f.level, f.R, f.basis_index) for f in forms]
    assert order == sorted(order)
    assert all(f.key == k for f, k in zip(forms, keys))
    assert R1 in store and "N7_odd_R1.0" not in store
    assert [k for k, _ in store.items()] == keys
    assert store.levels() == [1, 2, 5, 6, 11]
    q = store.forms(level=5, parity="odd", R_min=5.0, R_max=8.0)
    assert q and [g.R for g in q] == sorted(g.R for g in q)
    assert all(g.level == 5 and g.parity == "odd" and 5.0 <= g.R <= 8.0 for g in q)
    assert len(q) == sum(1 for g in forms if g.level == 5 and g.parity == "odd" and 5.0 <= g.R <= 8.0)
    lab = store["N5_odd_5m_R3.0283762931"].symmetry.label
    sel = store.select(symmetry=lab)
    assert len(sel) > 1 and all(store[k].symmetry.label == lab for k in sel)
    with pytest.raises(StoreError, match="no form with key 'N7_odd_R1.0'"):
        store["N7_odd_R1.0"]
    with pytest.raises(StoreError, match="store keys are strings"):
        store[3]


def test_forms_pickle_without_their_evaluator(store):
    f = store[R1]
    v = f(0.1 + 1.2j)
    g = pickle.loads(pickle.dumps(f))
    assert g.key == f.key and g(0.1 + 1.2j) == v
    assert len(pickle.dumps(f)) < 2 * f.coeffs.nbytes + 4000  # the evaluator is not pickled


def test_coefficients_as_a_dataframe(store):
    pd = pytest.importorskip("pandas")
    f = store["N6_odd_2p_3m_R3.7011008600"] if "N6_odd_2p_3m_R3.7011008600" in store else \
        next(store[k] for k in store if store[k].level == 6)
    df = f.to_dataframe()
    assert isinstance(df, pd.DataFrame)
    assert list(df.columns) == ["cusp", "cusp_name", "n", "re", "im", "error"]
    assert len(df) == f.coeffs.size
    row = df[(df.cusp == 1) & (df.n == 3)].iloc[0]
    assert row.re == f.coeffs[1, 2] and row.error == f.coeff_errors[1, 2]
    assert df.attrs["key"] == f.key and df.attrs["level"] == 6


def test_dataframe_without_pandas_names_the_extra(store, monkeypatch):
    monkeypatch.setitem(sys.modules, "pandas", None)
    with pytest.raises(InputError, match=r"pip install 'maasscomp\[pandas\]'"):
        store[R1].to_dataframe()


def test_plot_draws_the_fundamental_domain_without_a_scan(store, tmp_path):
    """One panel per cusp; pixels whose point has a higher representative (below the unit
    circle at level 1) are blank; the file is written when a path is given."""
    pytest.importorskip("matplotlib")
    f = store[R1]
    fig = f.plot(rows=24, cols=32, path=tmp_path / "map.png")
    assert (tmp_path / "map.png").stat().st_size > 1000
    ax = fig.axes[0]
    mesh = ax.collections[0]
    V = np.ma.masked_invalid(np.asarray(mesh.get_array())).reshape(24, 32)
    edges = ax.get_ylim()
    # bottom row, middle columns: |z| < 1 there, so blank; top row: inside, drawn
    assert V.mask[0, 14:18].all() and not V.mask[-1].any()
    assert 0 < float(V.max()) < 10 and edges[0] < 1.0
    two = store["N5_odd_5m_R3.0283762931"].plot(rows=12, cols=16)
    assert len([a for a in two.axes if a.get_label() != "<colorbar>"]) == 2


def test_error_messages_write_numbers_plainly():
    """numpy 2 writes np.float64(1.5) for repr(); no error of the package shows that."""
    from maasscomp.errors import DamagedFormError, StoreError

    R = np.float64(9.5)
    for exc in (InputError(f"R={R!r} is not allowed; got {np.int64(3)!r} and {[np.float32(2.5)]!r}"),
                StoreError(f"store at {R!r}"), DamagedFormError(f"damaged {np.complex128(1 - 2j)!r}", "k")):
        text = str(exc)
        assert "np." not in text and "float64" not in text, text
    assert str(InputError(f"R={R!r}")) == "R=9.5"
