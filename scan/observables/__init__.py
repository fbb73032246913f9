"""From P_ζ(k) to what detectors and black-hole bounds see.

Ω_GW h²(f) today (:mod:`~scan.observables.sigw`, and its quadratic form for many spectra
:mod:`~scan.observables.quadratic`), f_PBH(M) (:mod:`~scan.observables.pbh`), the
conversions k ↔ f ↔ T ↔ M (:mod:`~scan.observables.cosmo`, :mod:`~scan.observables.gstar`),
one spectrum at a time (:mod:`~scan.observables.single`) or many on shared grids
(:mod:`~scan.observables.batch`, :mod:`~scan.observables.window`).
"""
from scan.observables.single import Observables, compute_observables, frequency_grid, mass_grid

__all__ = ["Observables", "compute_observables", "frequency_grid", "mass_grid"]
