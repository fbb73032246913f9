"""Compiled pieces of the DOP853 Runge–Kutta method shared by the exact solvers.

Why compiled (numba, ``@njit(cache=True)``): an exact solve spends its time in the Python
loop of ``scipy.integrate.solve_ivp`` — about 12 right-hand-side calls per step, each a
few numpy calls on small arrays — for the background, the 256-mode Mukhanov–Sasaki system
and its refinement passes, and in the Python loops that place the induced-GW quadrature
nodes.  The arithmetic itself is ~2–6 k right-hand-side evaluations per mode; compiled,
the loops run at that cost (ratios measured side by side in ``tests/bench/bench_exact.py``).
numba ships wheels (no compiler at install) and compiles these scalar loops (events, table
walks, early exits) as written; JAX was not tried (its tracing suits array programs, not
step loops with events and data-dependent exits).  ``cache=True`` keeps the machine code
on disk, so only the first run on a machine pays the compilation (measured on 2 cores
shared with ~7 other jobs: the drivers take ~0.5–2 min each to compile cold; a warm
process loads them from the cache in seconds).

The method is scipy's DOP853 (Hairer, Nørsett & Wanner 1993, *Solving ODEs I*, Sec. II.10;
scipy 1.17 ``DOP853``): the same Butcher tableau (read from scipy), the same error norm
(the 5th/3rd-order blend), step-size control and first-step choice, so a compiled solve
follows the steps scipy would take and its results agree to rounding.
"""
from scan.ode.dop853 import (TABLEAU, dense_coefficients, dense_value, error_norm, first_step,
                             first_trial, min_step, next_step_size, sizes, stage_state,
                             stage_time, step_update)

__all__ = ["TABLEAU", "dense_coefficients", "dense_value", "error_norm", "first_step",
           "first_trial", "min_step", "next_step_size", "sizes", "stage_state", "stage_time",
           "step_update"]
