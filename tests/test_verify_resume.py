"""``zetascan verify --resume``: finished exact solves survive a kill; resuming completes.

The run is the stand-in posterior chain of tests/test_verify.py (fixtures ``chain`` and
``trained``); the exact side is injected: the surrogate's own observables with n_s moved
by one Planck sigma (non-trivial weights), some samples turned invalid with a long
non-ASCII reason and some given notes, so every stored field must round-trip exactly.
Each test works on its own copy of the chain file.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import shutil
import textwrap
import time
from pathlib import Path
from typing import Any

import h5py
import numpy as np
import pytest
from kill_support import sigkill_after_progress
from test_sampler_posterior import trained  # noqa: F401  (fixture)
from test_verify import NS_SIGMA, StandinExact, SurrogateAsExact, chain  # noqa: F401

from scan import store
from scan.cli import main
from scan.errors import InputFileError, OutputError
from scan.observables import Observables
from scan.pool import ProcessPool, SerialPool
from scan.posterior.exact import ExactOutcome
from scan.verify.compare import draw_indices
from scan.verify.partial import ARRAYS, GROUP, NOT_STORED, SCALARS, PartialWriter, partial_path
from scan.verify.run import Run, open_run, verify_run

TESTS = Path(__file__).resolve().parent
SAMPLES = 16


# ------------------------------------------------------------------ injected exact sides
class Marked:
    """An exact side whose outcome kinds depend on the sample only (same in every
    process): a quarter invalid with a long non-ASCII reason, a quarter with notes."""

    def __init__(self, base: Any, delay: float = 0.0) -> None:
        self.base, self.delay = base, delay

    def __call__(self, theta: np.ndarray) -> ExactOutcome:
        if self.delay:
            time.sleep(self.delay)
        kind = hashlib.sha256(np.asarray(theta, float).tobytes()).digest()[0] % 4
        if kind == 0:
            return ExactOutcome(None, f"test: invalid at θ₀ = {theta[0]!r} " + "—ψ" * 120)
        outcome = self.base(theta)
        if kind == 1:
            return dataclasses.replace(outcome, notes=("test: table truncated ✓", "second"))
        return outcome

    def describe(self) -> str:
        return f"marked {self.base.describe()}"


class Counting:
    """Counts the exact solves (and which samples), optionally failing after ``fail_after``."""

    def __init__(self, base: Any, fail_after: int | None = None) -> None:
        self.base, self.fail_after, self.thetas = base, fail_after, []

    def __call__(self, theta: np.ndarray) -> ExactOutcome:
        if self.fail_after is not None and len(self.thetas) >= self.fail_after:
            raise RuntimeError("test: the exact solver failed")
        self.thetas.append(np.array(theta, copy=True))
        return self.base(theta)

    def describe(self) -> str:
        return self.base.describe()


class CountingStandin(StandinExact):
    """The stand-in truth in place of ``ExactSolve`` for the command line (counts calls)."""

    calls = 0

    def __call__(self, theta: np.ndarray) -> ExactOutcome:
        type(self).calls += 1
        return super().__call__(theta)


def marked(run: Run) -> Marked:
    return Marked(SurrogateAsExact(run.target, NS_SIGMA))


# ------------------------------------------------------------------ helpers
@pytest.fixture
def copy(chain, tmp_path):  # noqa: F811
    """A private copy of the chain file (its config names the surrogate by full path)."""
    path = tmp_path / "run" / "chain.h5"
    path.parent.mkdir()
    shutil.copyfile(chain, path)
    with h5py.File(path, "a") as f:
        if "verify" in f:
            del f["verify"]
    return path


def verify_contents(path: Path) -> dict[str, Any]:
    """Every dataset and attribute of the ``verify`` group, but ``created_utc``."""
    out: dict[str, Any] = {}
    with h5py.File(path, "r") as f:
        g = f["verify"]
        out.update({f"@{k}": v for k, v in g.attrs.items() if k != "created_utc"})

        def visit(name: str, obj: Any) -> None:
            if isinstance(obj, h5py.Dataset):
                out[name] = obj[()]
            out.update({f"{name}@{k}": v for k, v in obj.attrs.items()})

        g.visititems(visit)
    return out


def assert_same(a: dict[str, Any], b: dict[str, Any]) -> None:
    """Equal keys, and values equal bit for bit (NaN included)."""
    assert sorted(a) == sorted(b)
    for key in a:
        x, y = np.asarray(a[key]), np.asarray(b[key])
        assert x.dtype == y.dtype and x.shape == y.shape, key
        if x.dtype.kind == "O":
            assert x.tolist() == y.tolist(), key
        else:
            assert x.tobytes() == y.tobytes(), key


def partial_rows(path: Path) -> np.ndarray:
    """The sample indices of the complete rows of a partial-results file (SWMR reader)."""
    with h5py.File(path, "r", libver="latest", swmr=True, locking=False) as f:
        index = f[GROUP]["index"][()]
    return index[index >= 0]


def interrupted(path: Path, samples: int, after: int, exact: Any | None = None) -> Run:
    """A verification of ``path`` whose exact side raises after ``after`` solves."""
    run = open_run(path)
    failing = Counting(exact if exact is not None else marked(run), fail_after=after)
    with SerialPool() as pool, pytest.raises(RuntimeError, match="exact solver failed"):
        verify_run(run, samples, pool, exact=failing)
    return run


# ------------------------------------------------------------------ (a) kill and resume
SCRIPT = textwrap.dedent("""
    import sys
    sys.path.insert(0, {tests!r})
    from scan.pool import SerialPool
    from scan.verify.run import open_run, verify_run
    from test_verify_resume import marked
    run = open_run({path!r})
    exact = marked(run)
    exact.delay = 0.25
    with SerialPool() as pool:
        verify_run(run, {samples}, pool, exact=exact)
""")


def test_sigkill_midway_then_resume_equals_an_uninterrupted_run(copy):
    run = open_run(copy)
    full = Counting(marked(run))
    with SerialPool() as pool:
        reference = verify_run(run, SAMPLES, pool, exact=full)
    assert len(full.thetas) == SAMPLES
    expected = verify_contents(copy)
    reasons = expected["exact_reason"].tolist()
    assert sum(r.decode().endswith("—ψ" * 120) for r in reasons) >= 1  # long reasons kept
    assert 1 <= reference.report["exact_notes"] < SAMPLES
    # the kept outcomes round-trip exactly: equal to a run that writes nothing
    with SerialPool() as pool:
        memory = verify_run(run, SAMPLES, pool, exact=marked(run), write=False)
    assert memory.report == reference.report
    for field in ("log_p_exact", "blobs_exact", "exact_notes"):
        assert getattr(memory.evaluated, field).tobytes() == \
            getattr(reference.evaluated, field).tobytes(), field
    with h5py.File(copy, "a") as f:
        del f["verify"]

    part = partial_path(copy)
    sigkill_after_progress(SCRIPT.format(tests=str(TESTS), path=str(copy), samples=SAMPLES),
                           lambda: len(partial_rows(part)), 5)
    kept = partial_rows(part)
    assert 5 <= len(kept) < SAMPLES  # killed midway; every finished solve is on disk
    with h5py.File(copy, "r") as f:
        assert "verify" not in f  # nothing final was written
    with pytest.raises(OSError, match="h5clear"):  # left flagged by the killed writer:
        h5py.File(part, "r+", libver="latest", locking=False).close()  # resume recovers it

    lines: list[str] = []
    resumed = Counting(marked(run))
    with SerialPool() as pool:
        verify_run(open_run(copy), SAMPLES, pool, exact=resumed, resume=True,
                   log=lines.append)
    index = draw_indices(len(run.samples), SAMPLES, run.config.run.seed)
    missing = [i for i in index if i not in set(kept.tolist())]
    assert len(resumed.thetas) == SAMPLES - len(kept)  # only the missing samples
    assert np.array_equal(np.array(resumed.thetas), run.samples[missing])
    assert lines == [f"resuming {part}: {len(kept)} of {SAMPLES} samples already solved"]
    assert_same(verify_contents(copy), expected)
    assert not part.exists() and not Path(str(part) + ".lock").exists()


def test_an_exception_midway_keeps_the_solved_samples_with_their_draw(copy):
    run = interrupted(copy, 12, after=7)
    part = partial_path(copy)
    index = draw_indices(len(run.samples), 12, run.config.run.seed)
    with h5py.File(part, "r") as f:
        g = f[GROUP]
        attrs = dict(g.attrs)
        assert np.array_equal(g["index"][()], index[:7])  # keyed by the sample index
        assert np.array_equal(g["theta"][()], run.samples[index[:7]])
    assert (attrs["samples"], attrs["seed"]) == (12, run.config.run.seed)
    assert (attrs["burn_in"], attrs["thin"]) == (run.burn_in, run.thin)
    assert np.array_equal(attrs["indices"], index)
    assert attrs["available"] == len(run.samples)
    assert attrs["config_sha256"] == store.config_hash(run.config.effective_text)
    assert attrs["chain_sha256"] == hashlib.sha256(run.samples.tobytes()).hexdigest()
    assert attrs["exact_solver"] == marked(run).describe()
    with h5py.File(copy, "r") as f:
        assert "verify" not in f
    resumed = Counting(marked(run))
    with SerialPool() as pool:
        result = verify_run(run, 12, pool, exact=resumed, resume=True)
    assert np.array_equal(np.array(resumed.thetas), run.samples[index[7:]])
    with SerialPool() as pool:
        memory = verify_run(run, 12, pool, exact=marked(run), write=False)
    assert result.report == memory.report and not part.exists()


class FailingAt:
    """The stand-in truth, raising at one sample (picklable: for worker processes)."""

    def __init__(self, config: Any, bad: np.ndarray) -> None:
        self.base, self.bad = StandinExact(config), np.array(bad, copy=True)

    def __call__(self, theta: np.ndarray) -> ExactOutcome:
        if np.array_equal(theta, self.bad):
            raise RuntimeError("test: the exact solver failed in a worker")
        return self.base(theta)

    def describe(self) -> str:
        return self.base.describe()


def test_process_pool_keeps_solves_as_they_finish_and_a_worker_error_loses_none(copy):
    run = open_run(copy)
    index = draw_indices(len(run.samples), 12, run.config.run.seed)
    bad = index[8]
    with pytest.raises(RuntimeError, match="failed in a worker") as err:
        with ProcessPool(2) as pool:
            verify_run(run, 12, pool, exact=FailingAt(run.config, run.samples[bad]))
    assert any("worker traceback" in note for note in err.value.__notes__)
    kept = partial_rows(partial_path(copy))
    assert 1 <= len(kept) < 12 and bad not in kept and set(kept) <= set(index.tolist())
    resumed = Counting(StandinExact(run.config))
    with SerialPool() as pool:
        result = verify_run(run, 12, pool, exact=resumed, resume=True)
    assert len(resumed.thetas) == 12 - len(kept)
    with SerialPool() as pool:
        memory = verify_run(run, 12, pool, exact=StandinExact(run.config), write=False)
    assert result.report == memory.report
    assert result.weights.tobytes() == memory.weights.tobytes()


def test_a_second_verification_of_the_same_chain_is_kept_out(copy):
    run = interrupted(copy, 12, after=4)
    with PartialWriter(partial_path(copy)), SerialPool() as pool:  # a verification running
        for resume in (True, False):
            with pytest.raises(InputFileError, match="another 'zetascan verify'"):
                verify_run(run, 12, pool, exact=marked(run), resume=resume)
    assert len(partial_rows(partial_path(copy))) == 4  # neither discarded nor touched


def test_the_store_covers_every_observables_field():
    stored = set(SCALARS) | set(ARRAYS) | set(NOT_STORED)
    assert stored == {f.name for f in dataclasses.fields(Observables)}
    assert len(SCALARS) + len(ARRAYS) + len(NOT_STORED) == len(dataclasses.fields(Observables))


# ------------------------------------------------------------------ (b) refused resumes
def test_resume_of_another_draw_is_refused_naming_the_difference(copy):
    run = interrupted(copy, 12, after=4)
    part = partial_path(copy)
    exact = Counting(marked(run))
    with SerialPool() as pool:
        with pytest.raises(InputFileError, match="samples: 12 -> 14") as err:
            verify_run(run, 14, pool, exact=exact, resume=True)
        assert "run without --resume" in str(err.value) and "--samples 12" in str(err.value)
        other_seed = dataclasses.replace(run, config=dataclasses.replace(
            run.config, run=dataclasses.replace(run.config.run, seed=run.config.run.seed + 1)))
        with pytest.raises(InputFileError, match=r"seed \(run.seed\): "
                           f"{run.config.run.seed} -> {run.config.run.seed + 1}") as err:
            verify_run(other_seed, 12, pool, exact=exact, resume=True)
        assert "samples:" not in str(err.value) and "--samples 12" not in str(err.value)
        moved = run.samples.copy()
        moved[-1, 0] += 1e-12  # the chain changed since
        with pytest.raises(InputFileError, match="the chain's samples changed since"):
            verify_run(dataclasses.replace(run, samples=moved), 12, pool, exact=exact,
                       resume=True)
        with pytest.raises(InputFileError, match="exact solver: 'marked .*' -> 'stand-in"):
            verify_run(run, 12, pool, exact=StandinExact(run.config), resume=True)
    assert exact.thetas == []  # refused before solving anything
    assert len(partial_rows(part)) == 4  # and the partial results are left as they were


def test_cli_refuses_a_resume_with_other_samples_in_one_line(copy, capsys, monkeypatch):
    interrupted(copy, 12, after=4, exact=StandinExact(open_run(copy).config))
    monkeypatch.setattr("scan.verify.run.ExactSolve", CountingStandin)  # where verify looks it up
    CountingStandin.calls = 0
    assert main(["verify", str(copy), "--samples", "10", "--resume"]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert "samples: 12 -> 10" in err and "without --resume" in err
    assert CountingStandin.calls == 0 and len(partial_rows(partial_path(copy))) == 4
    assert main(["verify", str(copy), "--samples", "12", "--resume"]) == 0
    assert CountingStandin.calls == 8
    assert "4 of 12 samples already solved" in capsys.readouterr().out
    assert not partial_path(copy).exists()


# ------------------------------------------------------------------ (c) fresh start
def test_without_resume_a_leftover_partial_is_discarded(copy, capsys, monkeypatch):
    interrupted(copy, 12, after=4, exact=StandinExact(open_run(copy).config))
    part = partial_path(copy)
    monkeypatch.setattr("scan.verify.run.ExactSolve", CountingStandin)  # where verify looks it up
    CountingStandin.calls = 0
    assert main(["verify", str(copy), "--samples", "12"]) == 0
    out = capsys.readouterr().out
    assert CountingStandin.calls == 12  # nothing reused
    notes = [line for line in out.splitlines() if "discarded" in line]
    assert notes == [f"discarded {part} (4 of 12 samples solved); pass --resume to "
                     "continue partial results instead"]
    assert not part.exists()
    with h5py.File(copy, "r") as f:
        assert f["verify"].attrs["samples"] == 12
    # --resume with nothing to resume starts afresh, and says so
    assert main(["verify", str(copy), "--samples", "10", "--resume", "--json"]) == 0
    captured = capsys.readouterr()
    assert CountingStandin.calls == 22
    assert "nothing to resume" in captured.err and captured.out.lstrip().startswith("{")
    report = json.loads(captured.out, parse_constant=_refuse)  # strict JSON: no NaN
    assert report["samples"] == 10


def _refuse(name: str):
    raise ValueError(f"non-standard JSON constant {name}")


def test_unreadable_partial_results_are_refused_on_resume_and_discarded_without(copy):
    run = open_run(copy)
    part = partial_path(copy)
    part.write_bytes(b"not an HDF5 file")
    with SerialPool() as pool:
        with pytest.raises(InputFileError, match="cannot read the partial verification.*"
                           "run without --resume"):
            verify_run(run, 10, pool, exact=marked(run), resume=True)
        assert part.read_bytes() == b"not an HDF5 file"  # left for the user to look at
        lines: list[str] = []
        verify_run(run, 10, pool, exact=marked(run), log=lines.append)
    assert len(lines) == 1 and lines[0].startswith(f"discarded {part} (unreadable: ")
    assert not part.exists()


def test_help_lists_resume(capsys):
    with pytest.raises(SystemExit) as code:
        main(["verify", "--help"])
    assert code.value.code == 0
    text = capsys.readouterr().out
    assert "--resume" in text and "chain.verify_partial.h5" in text


def test_a_full_disk_midway_keeps_the_solved_samples_and_resumes(copy, monkeypatch):
    """A disk full after 7 appends (injected: scan.store.free_bytes): the verification
    stops with the 7 solved samples kept, the chain file untouched, and ``resume`` ends
    as a run that never stopped."""
    run = open_run(copy)
    checks = {"n": 0}

    def filling(path) -> int:
        checks["n"] += 1
        return 0 if checks["n"] > 7 else 1 << 40

    real = store.free_bytes
    monkeypatch.setattr(store.hdf5, "free_bytes", filling)
    with SerialPool() as pool, pytest.raises(OutputError, match="keeps the 7 samples solved"):
        verify_run(run, 12, pool, exact=marked(run))
    assert len(partial_rows(partial_path(copy))) == 7
    with h5py.File(copy, "r") as f:
        assert "verify" not in f
    monkeypatch.setattr(store.hdf5, "free_bytes", real)
    resumed = Counting(marked(run))
    with SerialPool() as pool:
        result = verify_run(run, 12, pool, exact=resumed, resume=True)
    assert len(resumed.thetas) == 5
    with SerialPool() as pool:
        memory = verify_run(run, 12, pool, exact=marked(run), write=False)
    assert result.report == memory.report and not partial_path(copy).exists()
