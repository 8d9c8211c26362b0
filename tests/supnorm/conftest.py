"""Fixtures of the supnorm tests: the precomputed stores of forms (see make_supnorm_forms.py)."""

from __future__ import annotations

from pathlib import Path

import pytest

DATA = Path(__file__).resolve().parent / "data"
FORMS = DATA / "supnorm_forms.h5"
FORMS_RS = DATA / "supnorm_forms_rs.h5"
FORMS_GENERAL = DATA / "supnorm_forms_general.h5"
FORMS_LARGE = DATA / "supnorm_forms_large.h5"


def _load(path: Path) -> dict[str, object]:
    from maasscomp.store import Store

    if not path.exists():
        pytest.skip(f"{path} missing; run python tests/supnorm/make_supnorm_forms.py")
    with Store.open(path, "r") as st:
        return {k: st.get(k) for k in st.keys()}


@pytest.fixture(scope="session")
def supnorm_forms() -> dict[str, object]:
    """{store key: Form} for every form of tests/supnorm/data/supnorm_forms.h5."""
    return _load(FORMS)


@pytest.fixture(scope="session")
def forms_by_level(supnorm_forms) -> dict[int, list]:
    out: dict[int, list] = {}
    for f in supnorm_forms.values():
        out.setdefault(int(f.level), []).append(f)
    for v in out.values():
        v.sort(key=lambda f: f.R)
    return out


@pytest.fixture(scope="session")
def rs_forms() -> dict[str, object]:
    """Level 2, 5, 11 newforms with 900 coefficients (tests/supnorm/data/supnorm_forms_rs.h5)."""
    return _load(FORMS_RS)


@pytest.fixture(scope="session")
def general_forms() -> dict[str, object]:
    """Odd forms of the non-squarefree levels 4 and 9 (tests/supnorm/data/supnorm_forms_general.h5)."""
    return _load(FORMS_GENERAL)


@pytest.fixture(scope="session")
def level1_form(forms_by_level):
    """Return the level-1 form nearest to a given R."""

    def get(R: float):
        return min(forms_by_level[1], key=lambda f: abs(f.R - R))

    return get


@pytest.fixture(scope="session")
def large_forms() -> dict[float, object]:
    """{100.0: the level-1 form nearest to R = 100 (1200 coefficients), 1000.0: the one nearest to
    R = 1000} (tests/supnorm/data/supnorm_forms_large.h5)."""
    forms = _load(FORMS_LARGE).values()
    return {R0: min(forms, key=lambda f: abs(f.R - R0)) for R0 in (100.0, 1000.0)}
