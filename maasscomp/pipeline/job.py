"""Run a job config: search every level and symmetry class, store what is confirmed."""

from __future__ import annotations

import itertools
import time
from dataclasses import dataclass, field
from typing import Callable

from maasscomp.config import Config
from maasscomp.groups import gamma0
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum.search import SearchSettings, search_window
from maasscomp.store import Store


def symmetry_classes(group, parities: tuple[str, ...]) -> list[SymmetryClass]:
    """All symmetry classes searched at a level: parities times Atkin--Lehner signs.

    For squarefree levels each prime p | N gets a sign eps_p = +-1 (2^omega(N) sign
    patterns per parity); other levels are split by parity only.
    """
    if not group.is_squarefree:
        return [SymmetryClass(p) for p in parities]
    primes = sorted(group.primes)
    out = []
    for par in parities:
        for signs in itertools.product((1, -1), repeat=len(primes)):
            out.append(SymmetryClass(par, tuple(zip(primes, signs))))
    return out


@dataclass
class JobSummary:
    forms_per_class: dict[tuple[int, str], int] = field(default_factory=dict)
    rejected: int = 0
    seconds: float = 0.0
    output: str = ""


def run_job(cfg: Config, *, say: Callable[[str], None] = print, show_progress: bool = True) -> JobSummary:
    """Search every (level, symmetry class) of the config and store confirmed forms."""
    from tqdm import tqdm

    t0 = time.perf_counter()
    s = cfg.search
    settings = SearchSettings(eps=s.eps, n_coeffs=s.n_coeffs)
    summary = JobSummary(output=str(cfg.job.output))
    with Store.open(cfg.job.output, "a") as st:
        run_id = st.begin_run(config_text=cfg.source_text)
        for N in s.levels:
            group = gamma0(N)
            for sym in symmetry_classes(group, s.parities):
                bar = tqdm(total=1, desc=f"N={N} {sym.label}", unit="R", disable=not show_progress, leave=False)

                def prog(done: int, total: int) -> None:
                    bar.total = total
                    bar.n = done
                    bar.refresh()

                res = search_window(group, sym, s.R_min, s.R_max, settings, step=s.step, progress=prog)
                bar.close()
                st.add_forms(res.forms, on_duplicate="skip", config_text=cfg.source_text, run_id=run_id)
                summary.forms_per_class[(N, sym.label)] = len(res.forms)
                summary.rejected += sum(not c.accepted for c in res.candidates)
                say(f"level {N} {sym.label:>10}: {len(res.forms)} forms "
                    + ", ".join(f"R={f.R:.10f}" for f in res.forms))
    summary.seconds = time.perf_counter() - t0
    return summary
