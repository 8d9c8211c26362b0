"""Choice of the truncation M0 and sample count Q (docs/theory.md §1.3).

The expansion at a cusp is truncated at M0 where sqrt(Y) Kt_R(2 pi M0 Y) falls below the
target eps (beyond the turning point 2 pi n Y > R the scaled K-Bessel function decays
monotonically, DLMF 10.40.2), with a safety margin for the growth of the coefficients
(|a(n)| <= d(n) n^{7/64}, Kim--Sarnak). Q > M0 makes the discrete inversion on 2Q equally
spaced points alias-free for |n| <= M0 (Hejhal 1999, §2; Strömberg 2005, Ch. 1).
"""

from __future__ import annotations

import math

import numpy as np

from maasscomp.errors import InputError
from maasscomp.hejhal.types import SolverParams
from maasscomp.special import R_MAX, ktilde


def truncation_M0(R: float, Y: float, eps: float = 1e-14) -> int:
    """Smallest M with sqrt(Y) |Kt_R(2 pi n Y)| * n^{1/4} < eps for every n >= M.

    Parameters
    ----------
    R : float
        Spectral parameter (the largest R the system will be used at).
    Y : float
        Height of the sample horocycle.
    eps : float
        Target truncation error.

    Notes
    -----
    The factor n^{1/4} is a generous allowance for the size of the coefficients
    (Kim--Sarnak: |a(n)| <= d(n) n^{7/64}).
    """
    if not (Y > 0 and math.isfinite(Y)):
        raise InputError(f"sample height Y={Y!r} is not allowed; it must be a positive finite number")
    if not (0 < eps < 1):
        raise InputError(f"target accuracy eps={eps!r} is not allowed; it must lie in (0, 1)")
    # Callers add a safety margin to R (R + 1 for a window ending at R); at the top of the
    # K-Bessel range the margin is dropped, where it is immaterial for M0.
    R = min(float(R), R_MAX)
    # Start beyond the turning point 2 pi n Y = R, where Kt decays monotonically.
    n0 = max(1, int(math.ceil(R / (2 * math.pi * Y))))
    L = math.log(1.0 / eps)
    guess = (R + 3.0 * (1.5 * L / math.sqrt(2)) ** (2 / 3) * max(R, 1.0) ** (1 / 3) + L + math.pi * R / 2)
    n1 = max(n0 + 4, int(math.ceil(guess / (2 * math.pi * Y))) + 4)
    n = np.arange(n0, n1 + 1, dtype=float)
    vals = np.sqrt(Y) * np.abs(ktilde(R, 2 * np.pi * n * Y)) * n ** 0.25
    ok = vals < eps
    # the first n from which all later values are below eps
    bad = np.nonzero(~ok)[0]
    if bad.size == 0:
        return int(n0)
    return int(n[bad[-1]] + 1)


def choose_params(
    R: float,
    Y: float,
    eps: float = 1e-14,
    *,
    M0: int | None = None,
    Q: int | None = None,
) -> SolverParams:
    """Solver parameters for a system used at spectral parameters up to R.

    Parameters
    ----------
    R : float
        Largest spectral parameter the parameters must serve.
    Y : float
        Sample height (must lie below the fundamental-domain height Y0 of the group).
    eps : float
        Target truncation error.
    M0, Q : int, optional
        Overrides. Q must exceed M0.
    """
    if M0 is None:
        M0 = truncation_M0(R, Y, eps)
    if M0 < 2:
        raise InputError(f"truncation M0={M0!r} is not allowed; it must be at least 2")
    if Q is None:
        Q = M0 + max(8, M0 // 8)
    if Q <= M0:
        raise InputError(f"sample count Q={Q!r} is not allowed; it must exceed M0={M0}")
    return SolverParams(Y=float(Y), M0=int(M0), Q=int(Q), eps=float(eps))
