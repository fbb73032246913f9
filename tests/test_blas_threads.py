"""scan/surrogate/threads.py: the BLAS thread limit the fits and the posterior's call run in.

Behaviour only (no timing: the speed it buys is measured in
tests/bench/bench_gw_batch_kernel.py): inside, every OpenBLAS found reports one thread;
afterwards the previous counts are back, also after an exception; the posterior's
vectorised call runs inside it.
"""
from __future__ import annotations

import pytest

from scan.posterior.target import PosteriorTarget
from scan.surrogate import threads


def _counts() -> list[int]:
    return [int(getter()) for _, getter in threads._setters()]


@pytest.fixture(autouse=True)
def _openblas():
    """The limit acts on the OpenBLAS that numpy/scipy wheels bundle; with another BLAS
    it is a no-op (module doc), and there is nothing to check."""
    if not threads._setters():
        pytest.skip("no OpenBLAS thread setter loaded")


def test_one_thread_inside_and_the_counts_restored():
    before = _counts()
    with threads.single_blas_thread():
        assert all(n == 1 for n in _counts())
    assert _counts() == before
    with pytest.raises(RuntimeError), threads.single_blas_thread():
        raise RuntimeError("inside")
    assert _counts() == before


def test_the_posterior_call_runs_with_one_thread(monkeypatch):
    """log_and_blobs runs inside the limit (checked by a stand-in for its first step, the
    surrogate's prediction, that records the counts it sees and stops the call), and the
    counts are restored after it."""
    seen, before = [], _counts()

    def predict(self, thetas):
        seen.append(_counts())
        raise RuntimeError("stop")

    monkeypatch.setattr(PosteriorTarget, "_predict", predict)
    with pytest.raises(RuntimeError, match="stop"):
        PosteriorTarget.log_and_blobs(object.__new__(PosteriorTarget), [[0.0]])
    assert seen and all(n == 1 for n in seen[0])
    assert _counts() == before
