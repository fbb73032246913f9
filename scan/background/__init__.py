"""Exact inflationary background in e-folds, through integrable kinetic poles.

CONTRACT (shared with ``scan.modes``; keep it stable):

* ``BackgroundPoint`` — a frozen record of arrays ``phi, chi, dchi_dN, H, eps1, eps2``
  at given e-folds ``N`` (H in reduced Planck units for the potential's V0 = 1: the
  background in N does not depend on V0, H scales as sqrt(V0)).
* ``Background`` — the solution: ``valid``, ``reason``, ``N_start``, ``N_end`` (nan if
  inflation did not end), node arrays ``N, phi, chi, dchi_dN, H, eps1, eps2`` and
  ``evaluate(N) -> BackgroundPoint`` (dense output, vectorised over an array of N).

Equations (no slow roll): π ≡ dχ/dN = √K dφ/dN, ε1 = π²/2, H² = V/(3 − ε1),
π′ = −(3 − ε1)(π + V_φ/(√K V)), ε2 = 2π′/π.  The state is (x, π, χ) where x is the
coordinate of a *chart*: x = φ without poles; near pole i (between the midpoints to its
neighbours) x = s = sign(u)|u|^q, u = φ − φᵢ, q = 1 − pᵢ/2, with
ds/dN = qπ/√G, G = |u|^p K = |u|^p(1 + R) + c finite at the pole.  u is recovered from s,
never from φ.  The integration (DOP853, compiled: :mod:`scan.background.integrate`) stops
and restarts at every pole crossing
(s = 0) and chart boundary; the end of inflation is ε1 = 1 (upward).
"""
from scan.background.solve import EPS1_FLOOR, auto_phi_start, solve_background
from scan.background.types import (Background, BackgroundPoint, Chart, PoleCrossing, Segment,
                                   chart_map, chart_of, charts, point, to_chart)

__all__ = ["EPS1_FLOOR", "Background", "BackgroundPoint", "Chart", "PoleCrossing", "Segment",
           "auto_phi_start", "chart_map", "chart_of", "charts", "point", "solve_background",
           "to_chart"]
