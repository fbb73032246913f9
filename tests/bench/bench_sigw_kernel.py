"""Benchmark: building the SIGW plan with ``kernel = "qcd-fluid"`` (the tabulated QCD-era
kernel, :mod:`scan.observables.sigw_kernel_table`) against the radiation kernel, side by
side in alternating blocks (thread CPU time, min-based ratio; tests/bench/_timing.py).

Setup: a 256-point table over +-4 e-folds of a 10 nHz peak and 200 outputs over +-2
e-folds (every output re-enters inside the table, so every node is re-weighted).

Run: python tests/bench/bench_sigw_kernel.py [--blocks N]
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _timing import alternating_times, blocks_from_argv

from scan.observables import cosmo
from scan.observables.sigw import plan_sigw

K_STAR = float(cosmo.f_to_k(1e-8))
K_IN = K_STAR * np.exp(np.linspace(-4, 4, 256))
K_OUT = K_STAR * np.exp(np.linspace(-2, 2, 200))


def main() -> int:
    funcs = {kernel: (lambda kernel=kernel: plan_sigw(K_IN, K_OUT, kernel=kernel))
             for kernel in ("radiation", "qcd-fluid")}
    times = alternating_times(funcs, blocks_from_argv(5), warm_up=False)
    base = min(times["radiation"])
    for name, t in times.items():
        print(f"plan build, {name:>9}: median {np.median(t):.3f} s, min-based ratio to "
              f"radiation {min(t) / base:.2f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
