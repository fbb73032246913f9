"""Evidences and Bayes factors by nested sampling (``zetascan evidence``)."""
