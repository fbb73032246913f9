"""TEST DOUBLE: a cheap analytic stand-in for the exact solver, used by the surrogate tests.

Never shipped: the product trains on ``scan.surrogate.adapter.solve_point`` (the exact
pipeline).  The stand-in is a log-normal-like peak whose position, height and width depend
smoothly on three parameters (a pole width w, position phi0 and alpha), with an
invalid region where the peak would exceed P = 0.1 (mimicking the stochastic limit), and
a slowly varying CMB part.  Its formulas are made up for testing (common practice: a
smooth analytic test function with a known boundary).
"""
from __future__ import annotations

import time

import numpy as np

from scan.surrogate.record import TrainingRecord, invalid_record, shape_on_grid
from scan.surrogate.space import ParameterSpace

SPACE = ParameterSpace(keys=("model.poles[0].width", "model.poles[0].position", "model.alpha"),
                       kinds=("log_uniform", "uniform", "uniform"),
                       low=(0.01, 1.5, 0.5), high=(0.03, 1.7, 2.0))
#: P_peak above this is invalid in the stand-in.
LIMIT = 0.1


def standin_log10_peak(theta: np.ndarray) -> np.ndarray:
    """log10 P_peak of the stand-in at parameter vectors (n, 3)."""
    theta = np.atleast_2d(theta)
    w, pos, alpha = theta.T
    return (-1.3 + 3.0 * np.log10(w / 0.02) + 0.5 * (alpha - 1.0) ** 2
            + 0.3 * np.tanh(20.0 * (pos - 1.6)))


def standin_truth(theta: np.ndarray) -> dict[str, np.ndarray]:
    """All stand-in targets at parameter vectors (n, 3) (valid or not)."""
    theta = np.atleast_2d(theta)
    w, pos, alpha = theta.T
    return {"ln_k_peak": 30.0 + 60.0 * (pos - 1.6) + 0.5 * np.log(alpha),
            "log10_P_peak": standin_log10_peak(theta),
            "width": 0.6 + 0.25 * alpha + 10.0 * (w - 0.02),
            "skew": 0.15 * np.sin(3.0 * alpha),
            "n_s": 0.965 - 0.004 * (alpha - 1.0) ** 2 + 0.002 * np.sin(30.0 * (pos - 1.6)),
            "r": 0.003 * alpha, "V0": 1e-10 * alpha ** 1.5, "N_star": 55.0 + 3.0 * (pos - 1.6),
            "valid": standin_log10_peak(theta) < np.log10(LIMIT)}


def standin_spectrum(theta: np.ndarray, k: np.ndarray) -> np.ndarray:
    """P_zeta(k) of the stand-in at one parameter vector, on wavenumbers k [Mpc^-1]."""
    t = {key: float(val[0]) for key, val in standin_truth(theta).items()}
    x = np.log(k) - t["ln_k_peak"]
    log10_p = (t["log10_P_peak"] - 2.0 * np.log10(1.0 + (x / t["width"]) ** 2)
               + t["skew"] * x ** 3 / (1.0 + x ** 4))
    return 10.0 ** log10_p


def standin_solve(theta: np.ndarray, x_grid: np.ndarray | None = None,
                  delay: float = 0.0) -> TrainingRecord:
    """A TrainingRecord like the real adapter's, from the stand-in (optional sleep [s])."""
    if delay:
        time.sleep(delay)
    theta = np.asarray(theta, float)
    x_grid = np.linspace(-3.0, 3.0, 41) if x_grid is None else x_grid
    t = {key: float(val[0]) for key, val in standin_truth(theta).items()}
    if not t["valid"]:
        return invalid_record(theta, "P_zeta above the stochastic limit (stand-in)", len(x_grid))
    # The x^3 skew term leaves the maximum exactly at x = 0 (ln k = ln_k_peak).
    k = np.exp(t["ln_k_peak"] + np.linspace(-6.0, 6.0, 1201))
    p = standin_spectrum(theta, k)
    k_peak, p_peak = np.exp(t["ln_k_peak"]), 10.0 ** t["log10_P_peak"]
    return TrainingRecord(theta, True, "", t["ln_k_peak"], t["log10_P_peak"],
                          shape_on_grid(k, p, k_peak, p_peak, x_grid), t["n_s"], t["r"],
                          float(np.log10(t["V0"])), t["N_star"])


class StandinSolve:
    """Picklable ``solve(theta) -> TrainingRecord`` (for process pools)."""

    def __init__(self, x_grid: np.ndarray, delay: float = 0.0) -> None:
        self.x_grid, self.delay = np.asarray(x_grid, float), float(delay)

    def __call__(self, theta: np.ndarray) -> TrainingRecord:
        return standin_solve(theta, self.x_grid, self.delay)


# ---------------------------------------------------------------- checks of the double itself
def test_standin_has_both_classes_and_a_peak_at_x0():
    u = np.random.default_rng(0).random((400, 3))
    theta = SPACE.from_unit(u)
    valid = standin_truth(theta)["valid"]
    assert 0.1 < valid.mean() < 0.9  # the boundary crosses the prior box
    rec = standin_solve(theta[np.argmax(valid)])
    assert rec.valid and abs(rec.shape[20]) < 1e-12  # shape is 0 at x = 0 by construction
    assert np.all(rec.shape <= 1e-12)                # and the peak is the maximum
