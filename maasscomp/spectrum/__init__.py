"""Stage: spectrum -- locate, confirm and classify eigenvalues; Weyl's law; L-functions;
high-precision refinement.

Public API
----------
search_forms, SearchSettings, SearchResult, symmetry_classes
    The eigenvalue search for any level: every eigenvalue of every symmetry class in a
    window, with multiplicities (Atkin--Lehner classes at squarefree levels, parity
    classes of the multi-cusp system elsewhere).
forms_in_window, nearest_forms, NearResult
    Forms near a target R, with the Weyl expectation (any level).
locate_large, forms_in_window_large, LargeSettings, LargeSearchResult
    The same at large R (to 1e5): node-interpolated matrices, linearised roots, bounded memory.
complete_search, CompleteSearch
    Window search with Weyl's-law completeness check and automatic re-search.
weyl_count, weyl_density, expected_in_window, weyl_constant, weyl_terms, completeness, count_identity
    Weyl's law with lower-order terms for every level (scattering data in
    ``spectrum.scattering``), the completeness report (window counts, Turing-style integral
    test, small-gap test; ``spectrum.spectral_checks``) and the old/new count identity.
search_exceptional
    Exceptional eigenvalues (below 1/4) of a squarefree level.
functional_equation_check, predicted_root_number, sym2_L1, rankin_selberg_norm2
    L-function checks and L(1, sym^2 f).
refine_high_precision, extend_coefficients
    Multiprecision refinement (python-flint) and coefficient extension; level 1 and every
    squarefree level in its Atkin--Lehner class.
atkin_lehner_eigenvalue, atkin_lehner_matrix, hecke_eigenvalue, hecke_matrix, cusp_label
    Atkin--Lehner and Hecke operators on stored forms at every level (spectrum.operators;
    also apply_atkin_lehner, atkin_lehner_eigenvalues, label_atkin_lehner).
ParentForm, describe_old, label_old
    Oldform recognition: parent newform and coordinates in the basis g(dz) (spectrum.oldforms).
find_twist, label_twist, kronecker
    Quadratic twists of lower-level newforms (spectrum.twists).
label_form, LevelLabels
    All of the above for one confirmed form, written into Form.extra (spectrum.levels).
Form
    The record of one confirmed form.
"""

from maasscomp.spectrum.form import Form
from maasscomp.spectrum.lfunction import (
    FunctionalEquationCheck,
    functional_equation_check,
    predicted_root_number,
    rankin_selberg_norm2,
    sym2_coefficients,
    sym2_functional_equation_residual,
    sym2_L1,
)
from maasscomp.spectrum.large import LargeSearchResult, LargeSettings, forms_in_window_large, locate_large
from maasscomp.spectrum.levels import LevelLabels, label_form
from maasscomp.spectrum.oldforms import ParentForm, describe_old, label_old
from maasscomp.spectrum.operators import (
    apply_atkin_lehner,
    atkin_lehner_eigenvalue,
    atkin_lehner_eigenvalues,
    atkin_lehner_matrix,
    cusp_label,
    hecke_eigenvalue,
    hecke_matrix,
    label_atkin_lehner,
)
from maasscomp.spectrum.near import NearResult, forms_in_window, nearest_forms
from maasscomp.spectrum.search import SearchResult, SearchSettings, search_forms, symmetry_classes
from maasscomp.spectrum.twists import find_twist, kronecker, label_twist
from maasscomp.spectrum.weyl import (
    CompletenessReport,
    CompletenessWindow,
    WeylTerms,
    completeness,
    count_identity,
    expected_in_window,
    weyl_constant,
    weyl_count,
    weyl_density,
    weyl_terms,
)


def __getattr__(name: str):
    # the multiprecision module loads python-flint; import it only when asked for
    if name in ("refine_high_precision", "HighPrecisionForm", "extend_coefficients"):
        from maasscomp.spectrum import highprec

        return getattr(highprec, name)
    if name == "search_exceptional":
        from maasscomp.spectrum.exceptional import search_exceptional

        return search_exceptional
    if name in ("complete_search", "CompleteSearch"):
        from maasscomp.spectrum import complete

        return getattr(complete, name)
    raise AttributeError(name)
