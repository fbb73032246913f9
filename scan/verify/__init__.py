"""``zetascan verify``: exact solves of posterior samples against the surrogate posterior.

Importance weights and their ESS (:mod:`~scan.verify.importance`), the comparison and the
bias flag (:mod:`~scan.verify.compare`), the chain file's ``verify`` group and the run
(:mod:`~scan.verify.run`), the resumable side file of finished solves
(:mod:`~scan.verify.partial`).
"""
