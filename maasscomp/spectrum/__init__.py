"""Stage: spectrum -- locate, confirm and classify eigenvalues; Weyl's law; L-functions;
high-precision refinement.

Public API
----------
search_classes, search_window, search_exceptional, symmetry_classes, SearchSettings, SearchResult
    Window search for squarefree levels (Atkin--Lehner classes).
search_window_general
    Window search for any level (parity classes, multiplicities).
forms_in_window, nearest_forms, NearResult
    Forms near a target R, with the Weyl expectation.
locate_large, forms_in_window_large, LargeSettings, LargeSearchResult
    The same at large R (to 1e5): node-interpolated matrices, linearised roots, bounded memory.
complete_search, CompleteSearch
    Window search with Weyl's-law completeness check and automatic re-search.
weyl_count, weyl_density, expected_in_window, weyl_constant, completeness
    Weyl's law with lower-order terms and the completeness report.
functional_equation_check, predicted_root_number, sym2_L1, rankin_selberg_norm2
    L-function checks and L(1, sym^2 f).
refine_high_precision, extend_coefficients
    Multiprecision refinement (python-flint) and coefficient extension.
Form
    The record of one confirmed form.
"""

from maasscomp.spectrum.form import Form
from maasscomp.spectrum.general import search_window_general
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
from maasscomp.spectrum.near import NearResult, forms_in_window, nearest_forms
from maasscomp.spectrum.search import (
    SearchResult,
    SearchSettings,
    search_classes,
    search_exceptional,
    search_window,
    symmetry_classes,
)
from maasscomp.spectrum.weyl import (
    CompletenessReport,
    CompletenessWindow,
    completeness,
    expected_in_window,
    weyl_constant,
    weyl_count,
    weyl_density,
)


def __getattr__(name: str):
    # the multiprecision module loads python-flint; import it only when asked for
    if name in ("refine_high_precision", "HighPrecisionForm", "extend_coefficients"):
        from maasscomp.spectrum import highprec

        return getattr(highprec, name)
    if name in ("complete_search", "CompleteSearch"):
        from maasscomp.spectrum import complete

        return getattr(complete, name)
    raise AttributeError(name)
