"""2-D exclusion grids: ``zetascan grid CONFIG``.

A grid evaluates every constraint of ``[likelihood]`` on a regular grid over two
``[[parameters]]`` (``[grid]``), the others fixed or profiled, with the surrogate's or the
exact solver's observables, and stores per point and constraint a verdict (allowed,
excluded / disfavoured, detectable with its SNR), the ln L, and the derived quantities
k_peak, P_peak, f_PBH, the GW peak — in ``<output_dir>/<name>/grid.h5``.

Modules: ``plan`` (axes, fixed values, work blocks), ``verdict`` (the per-kind rules),
``evaluate`` (observables and verdicts of a block), ``store`` (the file and its one
writer), ``run`` (start / resume / restart, summary).
"""
from scan.grid.evaluate import DERIVED, BlockResult, GridWorker, install_worker
from scan.grid.plan import Axis, GridPlan, plan_grid
from scan.grid.run import (GridMismatchError, GridOutcome, GridRun, describe_plan, open_grid,
                           plan_grid_run, run_grid, summary_lines)
from scan.grid.store import read_grid
from scan.grid.verdict import (ALLOWED, CHI2_95_1DOF, CHI2_95_2DOF, DETECTABLE, EXCLUDED, KINDS,
                               NOT_DETECTABLE, NOT_EVALUATED, TermInfo, point_verdict,
                               relative_status, term_kind)

__all__ = ["ALLOWED", "CHI2_95_1DOF", "CHI2_95_2DOF", "DERIVED", "DETECTABLE", "EXCLUDED",
           "KINDS", "NOT_DETECTABLE", "NOT_EVALUATED", "Axis", "BlockResult",
           "GridMismatchError", "GridOutcome", "GridPlan", "GridRun",
           "GridWorker", "TermInfo", "describe_plan", "install_worker",
           "open_grid", "plan_grid", "plan_grid_run", "point_verdict", "read_grid",
           "relative_status", "run_grid", "summary_lines", "term_kind"]
