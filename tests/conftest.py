"""Test-session set-up: one BLAS thread.

The suite's linear algebra is small (GP fits of n ~ 10-1000, 4x4 to 300x300 products);
on a loaded 2-core machine OpenBLAS's default pool made the surrogate tests ~25x slower
than one thread (measured: tests/test_surrogate_highpeak.py 183 s vs 7.7 s).  Results
differ only by rounding (every tolerance in the suite is far above it).  Set here, before
numpy is imported by any test module; an explicit setting in the environment wins.
"""
import os

for _variable in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_variable, "1")
