"""The posterior target: parameters → observables → ln L per term + derived blobs.

Served by the surrogate (:mod:`~scan.posterior.target`, one vectorised call for all
walkers) or by exact solves (:mod:`~scan.posterior.exact`); its config side (curve files,
terms, nuisance names) is :mod:`~scan.posterior.setup`.  ``sample``, ``grid``, ``verify``
and ``evidence`` all evaluate this one target.
"""
