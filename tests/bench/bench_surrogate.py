"""Benchmark: one vectorised surrogate call for 64 parameter vectors (median of repeats).

Trains on the analytic stand-in of the tests (a test double; the timing of the emulator
depends only on the number of training points, not on what was solved), then times
(a) the emulator alone and (b) the emulator plus Omega_GW h^2 peak and f_PBH total
recomputed through scan.observables.sigw / scan.observables.pbh.  Run:  python tests/bench/bench_surrogate.py
Give a surrogate file (e.g. the pole scan's, ``results/pole_scan/surrogate.h5``) to time
that emulator too, on 64 random points of its box:
python tests/bench/bench_surrogate.py results/pole_scan/surrogate.h5
"""
from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from test_surrogate import config  # noqa: E402
from test_surrogate_standin import SPACE, StandinSolve  # noqa: E402

from scan.surrogate import Surrogate  # noqa: E402
from scan.surrogate.peak_observables import PeakObservables  # noqa: E402
from scan.surrogate.record import shape_grid  # noqa: E402
from scan.surrogate.threads import single_blas_thread  # noqa: E402
from scan.surrogate.train import TrainingPlan, run_training, serial_map  # noqa: E402


def median_ms(func, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return 1e3 * float(np.median(times))


def time_call(sur: Surrogate, theta: np.ndarray, ln_k_range: tuple[float, float],
              label: str) -> None:
    """Print the emulator's and the full call's median times for ``theta`` (64 rows)."""
    obs = PeakObservables(sur.emulator.basis.x, ln_k_range)

    def full():
        p = sur.predict(theta)
        obs(p.ln_k_peak[p.valid], p.log10_P_peak[p.valid], p.shape[p.valid], p.x)

    with single_blas_thread():
        t_em = median_ms(lambda: sur.predict(theta), 300)
        t_full = median_ms(full, 50)
    print(f"{label}: emulator, 64 vectors: {t_em:.3f} ms (median); "
          f"with Omega_GW + f_PBH: {t_full:.1f} ms (goal <= 5 ms)")


def real_surrogate(path: str) -> None:
    """Time a trained surrogate file on 64 random points of its box."""
    from scan.surrogate import load_surrogate

    sur = load_surrogate(path)
    theta = sur.space.from_unit(np.random.default_rng(1).random((64, len(sur.space.keys))))
    p = sur.predict(theta)
    lnk = p.ln_k_peak[p.valid]
    time_call(sur, theta, (float(lnk.min()), float(lnk.max())),
              f"{path} ({int(p.valid.sum())} of 64 valid)")


def main() -> None:
    if len(sys.argv) > 1:
        real_surrogate(sys.argv[1])
    for points in (128, 384, 560):  # 560: the size of the pole-scan surrogate
        cfg = config(f"surrogate.points={points}", "surrogate.holdout=64",
                     "surrogate.refine_rounds=0")
        with tempfile.TemporaryDirectory() as tmp:
            em, train, hold = run_training(Path(tmp) / "t.h5", cfg, SPACE,
                                           StandinSolve(shape_grid(3.0, 41)), serial_map,
                                           TrainingPlan.from_config(cfg))
        ln_k = train.scalars[train.valid, 0]
        time_call(Surrogate(em, SPACE), SPACE.from_unit(hold.u[:64]),
                  (float(ln_k.min()), float(ln_k.max())), f"n_train = {len(train.u):4d}")


if __name__ == "__main__":
    main()
