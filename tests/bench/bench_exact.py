"""Benchmark (issue 16): full exact solves of the working tree vs the reference commit.

Run:  python tests/bench/bench_exact.py [repeats] [powers ...]   (default 5 repeats, all p)

For each pole power p = 0.5, 1.0, 1.5, 1.9 it prints one line
``p = X: new … s, reference … s, ratio R`` — the median wall time of one full exact solve
(``scan.pipeline.solve_config``: background, pivot, modes with N* from instant reheating,
Ω_GW h²(f) and f_PBH(M); no figures, no files) in this working tree and in the reference
commit ``1e89497`` (before the compiled kernels).  The reference is exported by
``git archive`` into a temporary folder (no old code is copied into the tree) and served by
a second Python process with PYTHONPATH set to that folder; this tree is served the same
way.  Both servers solve each model once untimed (imports, numba's on-disk cache), then the
timed solves alternate new, reference, new, … in one run.  It also prints the relative
difference of P_peak, k_peak and n_s between the two trees.

The models (one kinetic pole in the α = 1 T-model, K = 1 + (w/|φ − 5|)^p, the width set by
the pole's sharpness λ, CMB pivot k* = 0.05 Mpc⁻¹, ln(10¹⁰A_s) = 3.044, instant
reheating, 128 base modes, every other setting at its default; ``tests/exact_models.py``):

    p = 0.5, λ = 0.3   P_peak ≈ 2.5e-8 at k ≈ 8.6e7 Mpc⁻¹  (cusp modes: early start)
    p = 1.0, λ = 1.0   P_peak ≈ 1.6e-4 at k ≈ 4.7e9 Mpc⁻¹
    p = 1.5, λ = 3.0   P_peak ≈ 1.4e-4 at k ≈ 5.9e8 Mpc⁻¹
    p = 1.9, λ = 6.0   P_peak ≈ 5.4e-7 at k ≈ 1.6e13 Mpc⁻¹

Profile of the reference (cProfile, one solve each after a warm-up, on 2 cores shared
with other jobs; cumulative seconds with the profiler's overhead, so the shares matter
more than the totals):

    stage                                   p = 0.5   p = 1.0   p = 1.5   p = 1.9
    background (solve_ivp with events)        1.92      1.05      1.40      0.92
    modes (compute_spectrum, all passes)     57.16      6.55      9.52      9.19
      of which the background table           0.65      0.60      0.73      0.45
      of which peak/dip refinement            5.90      3.31      4.68      3.76
      right-hand-side closures (all)         43.13      4.79      6.81      6.79
    induced GWs (plan_sigw: node loops)      13.31      7.71      8.33      6.40
    f_PBH (plan_pbh)                          0.08      0.09      0.03      0.03
    total                                    72.57     15.48     19.38     16.63

Measured (3 alternating repeats each, medians of the times; the last line is the final
code of the branch; 2 cores shared with ~7 other jobs, load
average 12-17, so every time is inflated several-fold and the ratios carry the result):

    commit    p = 0.5   p = 1.0   p = 1.5   p = 1.9
    3e316c7     35.6      15.8      14.0      16.8
    b6b1925     26.1      11.9      15.9      16.1
    a880cbe     32.1      16.0      12.7      16.0
    c466ace     31.7      18.4      17.3      12.9

P_peak, k_peak and n_s agreed with the reference to ≤ 5.3e-7, 3.6e-7 and 2.2e-11.

Everything in the reference's hot path is scipy's Python step loop (~12 right-hand-side
calls a step, each a few numpy calls) and Python loops over quadrature panels; the
working tree runs the same algorithms as compiled loops (``scan.ode``,
``scan.modes.kernel``, ``scan.background.integrate``, ``scan.observables.sigw_nodes``).
"""
from __future__ import annotations

import statistics
import subprocess
import sys
import tarfile
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))
from exact_models import MODELS, config_text  # noqa: E402  (the models of issue 16)

REFERENCE = "1e89497"


def serve() -> None:
    """Server loop: read a pole power per line, solve, answer "seconds P_peak k_peak n_s"."""
    from scan.config import load_config_text   # the tree on PYTHONPATH (new or reference)
    from scan.pipeline import solve_config
    for line in sys.stdin:
        power = float(line)
        config = load_config_text(config_text(power, MODELS[power]))
        t0 = time.perf_counter()
        result = solve_config(config)
        seconds = time.perf_counter() - t0
        s = result.spectrum
        print(f"{seconds!r} {s.P_peak!r} {s.k_peak!r} {s.n_s!r} {result.valid}", flush=True)


class Server:
    """A solve server running one source tree."""

    def __init__(self, tree: Path):
        env = {"PYTHONPATH": str(tree), "MPLBACKEND": "Agg", "PATH": "/usr/bin:/bin",
               "HOME": str(Path.home()), "OMP_NUM_THREADS": "1"}
        self.proc = subprocess.Popen([sys.executable, __file__, "--serve"], cwd=tree, env=env,
                                     stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)

    def solve(self, power: float) -> tuple[float, float, float, float]:
        self.proc.stdin.write(f"{power!r}\n")
        self.proc.stdin.flush()
        words = self.proc.stdout.readline().split()
        if len(words) != 5 or words[4] != "True":
            raise RuntimeError(f"solve of p = {power} failed: {words}")
        return tuple(float(w) for w in words[:4])

    def close(self) -> None:
        self.proc.stdin.close()
        self.proc.wait(timeout=60)


def export_reference(folder: Path) -> Path:
    """``git archive`` of the reference commit, unpacked into ``folder``."""
    archive = folder / "reference.tar"
    subprocess.run(["git", "-C", str(ROOT), "archive", "-o", str(archive), REFERENCE],
                   check=True)
    with tarfile.open(archive) as tar:
        tar.extractall(folder / "tree", filter="data")
    return folder / "tree"


def main(repeats: int = 5, powers: tuple[float, ...] = tuple(MODELS)) -> None:
    with tempfile.TemporaryDirectory(prefix="bench_exact_") as tmp:
        servers = {"new": Server(ROOT), "reference": Server(export_reference(Path(tmp)))}
        try:
            for power in powers:
                first = {name: srv.solve(power) for name, srv in servers.items()}  # warm-up
                times = {name: [] for name in servers}
                for _ in range(repeats):
                    for name, srv in servers.items():
                        times[name].append(srv.solve(power)[0])
                new, ref = (statistics.median(times[n]) for n in ("new", "reference"))
                print(f"p = {power}: new {new:.3f} s, reference {ref:.3f} s, "
                      f"ratio {ref / new:.1f}", flush=True)
                diffs = [abs(a / b - 1) for a, b in zip(first["new"][1:], first["reference"][1:])]
                print(f"    relative difference new vs reference: P_peak {diffs[0]:.1e}, "
                      f"k_peak {diffs[1]:.1e}, n_s {diffs[2]:.1e}", flush=True)
        finally:
            for srv in servers.values():
                srv.close()


if __name__ == "__main__":
    if sys.argv[1:] == ["--serve"]:
        serve()
    else:
        main(int(sys.argv[1]) if len(sys.argv) > 1 else 5,
             tuple(float(p) for p in sys.argv[2:]) or tuple(MODELS))
