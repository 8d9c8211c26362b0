"""maasscomp: Maass cusp forms on SL(2,Z) and Gamma0(N).

Pipeline stages (each imports only the stages listed before it; DEVELOPERS.md names the few
notebook conveniences that call a later stage when used):
``errors`` -> ``arith`` -> ``config`` -> ``special`` -> ``groups`` -> ``hejhal`` -> ``spectrum``
-> ``store`` -> ``supnorm`` -> ``pipeline`` -> ``report`` -> ``cli``.
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
