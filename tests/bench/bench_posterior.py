"""Benchmark: surrogate-driven posterior throughput (64 walkers, demo constraints, one core).

Trains the stand-in surrogate of the tests (a test double of the exact solver: the cost
of a posterior call depends on the emulator's size and the plans, not on what was
solved) with 256 training points, builds the posterior target exactly as
``zetascan sample`` does over every demo curve plus LISA, and times, side by side:

* the vectorised call (``log_and_blobs``: one emulator call, batched Omega_GW / f_PBH,
  each likelihood term once for all walkers), and
* the same observables scored one walker at a time (``score``: the per-walker path
  ``zetascan verify`` uses for exact solves);

the vectorised call with the critical-collapse coefficient K sampled as well (per
walker), the vectorised call with both QCD-era conventions (per-epoch thresholds and
exponents: the threshold plan instead of the tabulated Gaussian stack), and two parts of the vectorised call against what they replaced, on the same
batch:

* the likelihood terms and SNRs planned once on the shared grids
  (:mod:`scan.likelihood.grid`) vs the terms called directly on the batch;
* Omega_GW of the quadratic form by output blocks vs the dense product.

Prints evaluations per second and the ratios.  Goal: >= 10,000 evaluations/s.
Measured (qcdsample branch, 2 runs, 2-core machine shared, nice 15): the call with the
QCD-era conventions 1.17-1.25x the plain call (13.3-13.8 ms for 64 walkers).
Run:  python tests/bench/bench_posterior.py
"""
from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from test_sampler_posterior import make_config  # noqa: E402
from test_surrogate_standin import SPACE, StandinSolve  # noqa: E402

from scan.config import load_config_text  # noqa: E402
from scan.sampler import plan_run  # noqa: E402
from scan.surrogate.identity import identity  # noqa: E402
from scan.surrogate.record import shape_grid  # noqa: E402
from scan.surrogate.surrogate_file import write_surrogate  # noqa: E402
from scan.surrogate.threads import single_blas_thread  # noqa: E402
from scan.surrogate.train import TrainingPlan, run_training, serial_map  # noqa: E402
from scan.surrogate.validate import validate  # noqa: E402

WALKERS = 64
#: The critical-collapse coefficient as a second nuisance parameter (the same call with a
#: per-walker K: f_PBH scaled and shifted in mass, the bounds from their shift table).
K_NUISANCE = """
[[nuisance]]
name = "pbh.collapse_K"
prior = "uniform"
low = 1.0
high = 10.0
"""
#: Both QCD-era conventions (threshold and critical exponent per formation epoch).
QCD = """
[observables]
qcd_threshold = "harada-scaled"
qcd_collapse = "gamma-of-w"
"""


def median_s(func, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def main() -> None:
    with tempfile.TemporaryDirectory() as name:
        tmp = Path(name)
        cfg = make_config(tmp)
        cfg = load_config_text(cfg.text, cfg.source, overrides=("surrogate.points=256",))
        (tmp / "standin").mkdir()
        em, train, hold = run_training(tmp / "standin" / "training.h5", cfg, SPACE,
                                       StandinSolve(shape_grid(3.0, 41)), serial_map,
                                       TrainingPlan.from_config(cfg))
        write_surrogate(tmp / "standin" / "surrogate.h5", cfg, SPACE, em,
                        validate(em, train, hold), identity(cfg, SPACE))
        target = plan_run(cfg, tmp / "chain.h5").target
        rng = np.random.default_rng(1)
        # walkers near a plausible region, as in a running chain (mostly valid points)
        centre = np.array([0.012, 1.55, 1.0, 1e-15])
        thetas = centre * (1.0 + 0.03 * rng.standard_normal((WALKERS, 4)))
        log_p, _ = target.log_and_blobs(thetas)
        valid = int(np.isfinite(log_p).sum())
        reason, obs = target.observables(thetas)

        _, rows, batch = target.predict(thetas)
        n = target.priors.n_model
        nuisance = {name: thetas[rows, n + j] for j, name in enumerate(target.names[n:])}
        snr_terms = target.loaded["snr"]

        def direct_terms():
            [term(batch, nuisance) for term in target.terms]
            [term.snr(batch.f_hz, batch.omega_gw_h2) for term in snr_terms]

        sigw = target.loaded["plan"].sigw
        pred = target.loaded["surrogate"].predict(thetas[rows, :n][:, target.loaded["order"]])
        spectra = 10.0 ** (pred.log10_P_peak[:, None] + pred.shape)

        def dense_sigw():
            fine = np.exp(np.log(np.maximum(spectra, 1e-300)) @ sigw._lift.T)
            a, b = sigw._pairs
            return (fine[:, a] * fine[:, b]) @ sigw._W

        k_target = plan_run(load_config_text(cfg.text + K_NUISANCE, cfg.source),
                            tmp / "chain_k.h5").target
        k_thetas = np.column_stack([thetas, rng.uniform(2.0, 5.0, WALKERS)])
        k_target.log_and_blobs(k_thetas)          # builds the bounds' shift table once
        qcd_target = plan_run(load_config_text(cfg.text + QCD, cfg.source),
                              tmp / "chain_qcd.h5").target
        qcd_target.log_and_blobs(thetas)

        with single_blas_thread():
            t_batch = median_s(lambda: target.log_and_blobs(thetas), 50)
            t_k = median_s(lambda: k_target.log_and_blobs(k_thetas), 50)
            t_qcd = median_s(lambda: qcd_target.log_and_blobs(thetas), 50)
            t_loop = median_s(lambda: target.score(thetas, reason, obs), 10)
            t_planned = median_s(lambda: target._scores(batch, nuisance, len(rows)), 100)
            t_direct = median_s(direct_terms, 100)
            t_blocks = median_s(lambda: sigw.omega_gw(spectra), 100)
            t_dense = median_s(dense_sigw, 100)
        print(f"{WALKERS} walkers ({valid} valid), {len(target.terms)} likelihood terms, "
              f"{len(train.u)} training points")
        print(f"vectorised call : {1e3 * t_batch:7.2f} ms  -> {WALKERS / t_batch:9.0f} "
              "evaluations/s (goal >= 10,000)")
        print(f"with pbh.collapse_K sampled too: {1e3 * t_k:7.2f} ms ({t_k / t_batch:.2f}x "
              "the call without it)")
        print(f"with the QCD-era threshold and exponent: {1e3 * t_qcd:7.2f} ms "
              f"({t_qcd / t_batch:.2f}x the call without them)")
        print(f"per-walker score: {1e3 * t_loop:7.2f} ms  -> {WALKERS / t_loop:9.0f} "
              "evaluations/s (likelihood only, observables precomputed)")
        print(f"ratio per-walker / vectorised: {t_loop / t_batch:.1f}x")
        print(f"terms + SNR, planned on the grids: {1e3 * t_planned:6.2f} ms, called directly: "
              f"{1e3 * t_direct:6.2f} ms ({t_direct / t_planned:.1f}x)")
        print(f"Omega_GW quadratic form by blocks: {1e3 * t_blocks:6.2f} ms, dense product:  "
              f"{1e3 * t_dense:6.2f} ms ({t_dense / t_blocks:.1f}x)")


if __name__ == "__main__":
    main()
