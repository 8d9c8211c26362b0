"""Stage: supnorm -- evaluation, L2 norms and sup-norm scans of stored Maass forms.

All values are those of the scaled form F = e^{pi R/2} f (the physical form times e^{pi R/2});
norms, normalised values and peak ratios do not depend on that factor.

Public API
----------
evaluate, FormEvaluator, Evaluation
    F(z) anywhere in the upper half plane, via pullback to the fastest-converging cusp.
"""

from maasscomp.supnorm.evaluate import Evaluation, FormEvaluator, evaluate

__all__ = ["evaluate", "FormEvaluator", "Evaluation"]
