"""The exact path: config → model → background → pivot → modes → observables.

:func:`solve_config` runs one configured model through every stage (no I/O); the solve
result file (``zetascan solve``) is written and read by :mod:`~scan.pipeline.result_file`.
"""
from scan.pipeline.solve import (PIVOT_MARGIN_EFOLDS, SolveResult, mode_settings_of, model_of,
                                 observables_of, reheating_of, solve_background_of, solve_config)

__all__ = ["PIVOT_MARGIN_EFOLDS", "SolveResult", "mode_settings_of",
           "model_of", "observables_of", "reheating_of", "solve_background_of", "solve_config"]
