"""Stage: special functions.

Public API
----------
ktilde(R, x)
    Scaled K-Bessel function of imaginary order, ``exp(pi R/2) K_{iR}(x)`` (fixed R, many x).
ktilde_many(R, x)
    The same, broadcast over arrays of R and x.
ktilde_nodes(Rs, x)
    The same at several nearby R for one set of points (shares the large phase).
ktilde_dx(R, x)
    Its derivative in x.
airy_peak(R)
    Argmax and maximum of ``sqrt(x/(2 pi)) ktilde(R, x)`` (the cusp peak of one Fourier term).
kbessel_table(R)
    The cached per-R evaluation table (advanced use).
"""

from maasscomp.special.kbessel import (
    R_MAX,
    airy_peak,
    kbessel_table,
    ktilde,
    ktilde_dx,
    ktilde_many,
    ktilde_nodes,
)

__all__ = ["R_MAX", "airy_peak", "kbessel_table", "ktilde", "ktilde_dx", "ktilde_many", "ktilde_nodes"]
