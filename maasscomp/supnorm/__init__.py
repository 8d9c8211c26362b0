"""Stage: supnorm -- evaluation, L2 norms and sup-norm scans of stored Maass forms.

All values are those of the scaled form F = e^{pi R/2} f (the physical form times e^{pi R/2});
norms, normalised values and peak ratios do not depend on that factor.

Public API
----------
evaluate, FormEvaluator, Evaluation
    F(z) anywhere in the upper half plane, via pullback to the fastest-converging cusp.
l2_norm, NormResult, compact_quadrature, kt2_tail, strip_mass, rankin_selberg_norm2
    ||F||^2 by quadrature over a fundamental domain, with the Rankin--Selberg cross-check.
scan_form, ScanSettings, ScanResult, RegionPeak, leading_profile_peak, random_wave_max, transition_height, first_nonzero
    Peaks of |f|/||f|| on the fixed compact set Omega, each cusp's transition zone and the
    region between them, with a grid bound and the predictions.
scan_store, load_scans, load_norm
    Normalise and scan the forms of a store file; results are kept as attachments.

Tables and figures of the scans are made by the report stage (:mod:`maasscomp.report`).
"""

from maasscomp.supnorm.evaluate import Evaluation, FormEvaluator, evaluate
from maasscomp.supnorm.norm import (NormResult, compact_quadrature, kt2_tail, l2_norm, rankin_selberg_norm2,
                                    strip_mass)
from maasscomp.supnorm.scan import (RegionPeak, ScanResult, ScanSettings, check_coefficients, first_nonzero,
                                    leading_profile_peak, random_wave_max, scan_form, transition_height)
from maasscomp.supnorm.batch import load_norm, load_scans, scan_store

__all__ = [
    "evaluate", "FormEvaluator", "Evaluation",
    "l2_norm", "NormResult", "compact_quadrature", "kt2_tail", "strip_mass", "rankin_selberg_norm2",
    "scan_form", "ScanSettings", "ScanResult", "RegionPeak", "leading_profile_peak", "check_coefficients",
    "random_wave_max", "transition_height", "first_nonzero",
    "scan_store", "load_scans", "load_norm",
]
