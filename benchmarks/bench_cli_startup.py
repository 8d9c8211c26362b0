"""Start-up time of the command line against ``python -c pass``, measured in the same run.

Prints the median wall time of ``python -c pass``, ``python -m maasscomp --help``,
``maasscomp keys`` and ``maasscomp list STORE`` (a store of 200 synthetic forms made here), each
in a fresh interpreter, and the ratio to ``python -c pass``. The machine's load average is
printed too: timings are noisy under contention.

    PYTHONPATH=. python benchmarks/bench_cli_startup.py [--repeat 9]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def _time(argv: list[str], repeat: int, env: dict) -> tuple[float, float]:
    walls, cpus = [], []
    for _ in range(repeat):
        c0 = os.times()
        t = time.perf_counter()
        subprocess.run(argv, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
        walls.append(time.perf_counter() - t)
        c1 = os.times()
        cpus.append((c1.children_user - c0.children_user) + (c1.children_system - c0.children_system))
    return statistics.median(walls), statistics.median(cpus)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=9)
    args = ap.parse_args()
    sys.path.insert(0, str(REPO))
    import numpy as np

    from maasscomp.store import Store
    from tests.store.store_form_factory import random_form

    env = dict(os.environ, PYTHONPATH=str(REPO))
    with tempfile.TemporaryDirectory() as d:
        store = Path(d) / "s.h5"
        rng = np.random.default_rng(0)
        with Store.open(store, "a", create=True) as st:
            st.add_forms([random_form(rng, level=1, M=60) for _ in range(200)])
        py = sys.executable
        cases = [("python -c pass", [py, "-c", "pass"]),
                 ("python -m maasscomp --help", [py, "-m", "maasscomp", "--help"]),
                 ("maasscomp keys", [py, "-m", "maasscomp", "keys"]),
                 ("maasscomp list (200 forms)", [py, "-m", "maasscomp", "list", str(store)]),
                 ("python -c 'import numpy'", [py, "-c", "import numpy"])]
        print(f"load average at start: {os.getloadavg()}; {args.repeat} runs each, medians")
        base = None
        for name, argv in cases:
            wall, cpu = _time(argv, args.repeat, env)
            base = base or wall
            print(f"  {name:<30} {wall * 1000:8.1f} ms wall {cpu * 1000:8.1f} ms CPU  {wall / base:6.2f} x python -c pass")


if __name__ == "__main__":
    main()
