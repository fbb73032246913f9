"""Fuzzing every input kind through the command line (in-process ``scan.cli.main``): a run
config, ``--set`` overrides, a spectrum CSV, a bound-curve CSV and every HDF5 file kind
(chain, training store, surrogate, observables result), mutated, truncated, garbled or
given to the wrong command.  Each ends with exit 0 or 2 and never a traceback; exit 2 is
one error line.  Examples are few and derandomized (the suite must stay fast and the
same on every machine); the byte-level parser fuzz is tests/test_curves_fuzz.py.
"""
from __future__ import annotations

import shutil
from pathlib import Path

import h5py
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_surrogate import X, config
from test_surrogate_standin import SPACE, StandinSolve

from scan.cli import main
from scan.cli.failure import LOG_DIR_VARIABLE
from scan.surrogate.identity import identity
from scan.surrogate.surrogate_file import write_surrogate
from scan.surrogate.train import TrainingPlan, run_training, serial_map
from scan.surrogate.validate import validate

ROOT = Path(__file__).resolve().parents[1]
def fuzz(examples: int) -> settings:
    """Few, derandomized examples (150 random ones per test passed once, 2026-12-03)."""
    return settings(max_examples=examples, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.function_scoped_fixture,
                                           HealthCheck.too_slow])

#: TOML values that are wrong in many ways (types, ranges, sizes, syntax).
VALUES = ["0", "-1", "1", "2.5", "1e308", "-1e308", "nan", "inf", "1e20",
          "18446744073709551616", "4294967296", '"x"', '""', "[]", "[1, 2]", "{a = 1}",
          "true", "'../x'", '"\\u0000"', "[", "=", '"""', "1979-05-27"]
KEYS = ["run", "run.seed", "run.output_dir", "model", "model.potential", "model.alpha",
        "model.poles", "model.poles.width", "model.poles[0].width", "parameters",
        "sampler", "sampler.walkers", "sampler.max_steps", "sampler.target",
        "sampler.check_every", "sampler.write_every", "modes.n_k", "modes.x_in",
        "observables.n_f", "observables.n_m", "nuisance", "no.such.key", "", "a..b",
        "[x]"]


@pytest.fixture(autouse=True)
def crash_logs(tmp_path, monkeypatch):
    """Crash logs (exit 1) go to the test's folder, where a failure message can read them;
    the working directory is the test's folder too, so that a fuzzed relative
    ``run.output_dir`` (e.g. ``<D``) writes there, not into the checkout."""
    folder = tmp_path / "crash_logs"
    monkeypatch.setenv(LOG_DIR_VARIABLE, str(folder))
    monkeypatch.chdir(tmp_path)
    return folder


def outcome(argv: list[str], capsys, crash_logs: Path) -> int:
    """Run the command line; assert exit 0 or 2, no traceback, one error line on exit 2."""
    try:
        code = main(argv)
    except SystemExit as stop:  # argparse refuses the arguments: usage and one error line
        code = stop.code
    out = capsys.readouterr()
    logs = sorted(crash_logs.glob("*.log")) if crash_logs.exists() else []
    detail = logs[-1].read_text()[-1500:] if logs else out.err[-1500:]
    assert code in (0, 2), f"{argv}: exit {code}\n{detail}"
    assert "Traceback" not in out.err + out.out, detail
    if code == 2:
        errors = [line for line in out.err.splitlines() if "error" in line]
        assert len(errors) == 1, out.err
    return code


# ------------------------------------------------------------------ config and --set
def gaussian_text(out: Path) -> str:
    """The shipped Gaussian test config, 5 steps, writing under ``out``."""
    text = (ROOT / "configs" / "gaussian_test.toml").read_text()
    return (text.replace("seed = 7", f'seed = 7\noutput_dir = "{out}"')
            .replace("max_steps = 4000", "max_steps = 5"))


@st.composite
def mutated_lines(draw, text: str) -> str:
    """``text`` with a few lines deleted, duplicated or given another value."""
    lines = text.splitlines()
    for _ in range(draw(st.integers(1, 3))):
        i = draw(st.integers(0, len(lines) - 1))
        action = draw(st.sampled_from(["delete", "duplicate", "value", "garble"]))
        if action == "delete":
            del lines[i]
        elif action == "duplicate":
            lines.insert(i, lines[i])
        elif action == "value" and "=" in lines[i]:
            lines[i] = lines[i].split("=", 1)[0] + "= " + draw(st.sampled_from(VALUES))
        else:
            lines[i] = lines[i][:draw(st.integers(0, len(lines[i])))] + draw(
                st.text(max_size=8))
        if not lines:
            break
    prefix = draw(st.sampled_from(["", "\ufeff"]))
    return prefix + "\n".join(lines) + "\n"


def test_config_fuzz(tmp_path, capsys, crash_logs):
    base = gaussian_text(tmp_path / "out")

    @fuzz(12)
    @given(mutated_lines(base))
    def check(text):
        cfg = tmp_path / "fuzz.toml"
        cfg.write_text(text, encoding="utf-8", errors="surrogatepass")
        outcome(["sample", str(cfg), "--restart"], capsys, crash_logs)

    check()


def test_set_fuzz(tmp_path, capsys, crash_logs):
    cfg = tmp_path / "g.toml"
    cfg.write_text(gaussian_text(tmp_path / "out"))

    @fuzz(25)
    @given(st.sampled_from(KEYS), st.one_of(st.sampled_from(VALUES), st.text(max_size=12)))
    def check(key, value):
        outcome(["sample", str(cfg), "--restart", "--set", f"{key}={value}"], capsys,
                crash_logs)

    check()


@pytest.mark.parametrize("override", ["run=1", "model.poles.width=1", "run.seed=4294967296",
                                      "run.seed=1e20", "modes.n_k=100000000",
                                      "sampler.walkers=0", "run.output_dir=3"])
def test_reported_overrides(tmp_path, capsys, crash_logs, override):
    """The issue's --set cases (and neighbours) end in exit 0 or 2 with one line."""
    cfg = tmp_path / "g.toml"
    cfg.write_text(gaussian_text(tmp_path / "out"))
    outcome(["sample", str(cfg), "--restart", "--set", override], capsys, crash_logs)


# ------------------------------------------------------------------ tables
def spectrum_text() -> str:
    """An invented log-normal peak (synthetic) as a 40-row CSV."""
    k = np.geomspace(1e0, 1e6, 40)
    P = 1e-2 * np.exp(-0.5 * (np.log(k / 1e3) / 0.5) ** 2) + 2.1e-9
    return "k,P_zeta\n" + "\n".join(f"{a:.6g},{b:.6g}" for a, b in zip(k, P)) + "\n"


@st.composite
def garbled_bytes(draw, text: str) -> bytes:
    """``text`` as bytes, cut short, with a few bytes overwritten, or random bytes."""
    data = bytearray(text.encode())
    kind = draw(st.sampled_from(["truncate", "overwrite", "random", "bom_crlf"]))
    if kind == "truncate":
        return bytes(data[:draw(st.integers(0, len(data)))])
    if kind == "overwrite":
        for _ in range(draw(st.integers(1, 6))):
            data[draw(st.integers(0, len(data) - 1))] = draw(st.integers(0, 255))
        return bytes(data)
    if kind == "bom_crlf":
        return b"\xef\xbb\xbf" + bytes(data).replace(b"\n", b"\r\n")
    return draw(st.binary(max_size=300))


def test_spectrum_csv_fuzz(tmp_path, capsys, crash_logs):
    base = spectrum_text()
    table, out = tmp_path / "spectrum.csv", tmp_path / "obs.h5"

    @fuzz(25)
    @given(st.one_of(mutated_lines(base).map(str.encode), garbled_bytes(base)))
    def check(data):
        table.write_bytes(data)
        outcome(["observe", str(table), "--out", str(out), "--n-f", "8", "--n-m", "8"],
                capsys, crash_logs)

    check()


def test_curve_csv_fuzz(tmp_path, capsys, crash_logs):
    seeds = sorted((ROOT / "constraints" / "demo").glob("*.csv"))
    curve = tmp_path / "curve.csv"

    @fuzz(30)
    @given(st.sampled_from(seeds).flatmap(lambda p: st.one_of(
        mutated_lines(p.read_text()).map(str.encode), garbled_bytes(p.read_text()))))
    def check(data):
        curve.write_bytes(data)
        outcome(["curves", "check", str(curve)], capsys, crash_logs)

    check()


# ------------------------------------------------------------------ HDF5 files
@pytest.fixture(scope="module")
def result_files(tmp_path_factory) -> dict[str, Path]:
    """One real file of each kind: chain, training store, surrogate, observables result."""
    folder = tmp_path_factory.mktemp("kinds")
    cfg = folder / "g.toml"
    cfg.write_text(gaussian_text(folder / "out"))
    assert main(["sample", str(cfg)]) == 0
    table = folder / "spectrum.csv"
    table.write_text(spectrum_text())
    assert main(["observe", str(table), "--out", str(folder / "obs.h5"), "--n-f", "8",
                 "--n-m", "8"]) == 0
    scfg = config("surrogate.points=24", "surrogate.holdout=6", "surrogate.refine_rounds=0",
                  "surrogate.fit_iterations=5")
    em, train, hold = run_training(folder / "training.h5", scfg, SPACE, StandinSolve(X),
                                   serial_map, TrainingPlan.from_config(scfg))
    write_surrogate(folder / "surrogate.h5", scfg, SPACE, em, validate(em, train, hold),
                    identity(scfg, SPACE))
    return {"chain": folder / "out" / "gaussian_test" / "chain.h5",
            "training": folder / "training.h5", "surrogate": folder / "surrogate.h5",
            "observables": folder / "obs.h5"}


def commands(path: Path) -> list[list[str]]:
    """Every read-only command that takes a result file."""
    return [["summary", str(path)], ["train", "--report", str(path)],
            ["observe", str(path), "--out", str(path.with_suffix(".obs.h5")), "--n-f", "8",
             "--n-m", "8"]]


def _members(path: Path) -> list[str]:
    names: list[str] = []
    with h5py.File(path, "r") as handle:
        handle.visit(names.append)
    return names


@st.composite
def damaged(draw, files: dict[str, Path], work: Path) -> Path:
    """A copy of one file kind: truncated, bytes overwritten, a member deleted or made a
    scalar."""
    kind = draw(st.sampled_from(sorted(files)))
    copy = work / f"damaged_{kind}.h5"
    shutil.copyfile(files[kind], copy)
    how = draw(st.sampled_from(["truncate", "overwrite", "delete", "scalar"]))
    size = copy.stat().st_size
    if how == "truncate":
        with open(copy, "r+b") as handle:
            handle.truncate(draw(st.integers(0, size - 1)))
    elif how == "overwrite":
        with open(copy, "r+b") as handle:
            for _ in range(draw(st.integers(1, 8))):
                handle.seek(draw(st.integers(0, size - 1)))
                handle.write(bytes([draw(st.integers(0, 255))]))
    else:
        member = draw(st.sampled_from(_members(copy)))
        with h5py.File(copy, "a") as handle:
            if member in handle:
                del handle[member]
                if how == "scalar":
                    handle[member] = 1.0
    return copy


def test_hdf5_kinds_given_to_every_command(tmp_path, capsys, crash_logs, result_files):
    """Each intact file kind to each command: its own reader accepts it, the others say
    what it is not (exit 2)."""
    for path in result_files.values():
        for argv in commands(path):
            outcome(argv, capsys, crash_logs)


def test_damaged_hdf5_fuzz(tmp_path, capsys, crash_logs, result_files):
    @fuzz(40)
    @given(damaged(result_files, tmp_path), st.integers(0, 2))
    def check(path, which):
        outcome(commands(path)[which], capsys, crash_logs)

    check()


def test_byte_order_marks_are_accepted(tmp_path, capsys, crash_logs):
    """A UTF-8 byte-order mark (as some editors write) in a config or a spectrum table."""
    cfg = tmp_path / "bom.toml"
    cfg.write_text("\ufeff" + gaussian_text(tmp_path / "out"), encoding="utf-8")
    assert outcome(["sample", str(cfg)], capsys, crash_logs) == 0
    table = tmp_path / "bom.csv"
    table.write_text("\ufeff" + spectrum_text(), encoding="utf-8")
    assert outcome(["observe", str(table), "--out", str(tmp_path / "o.h5"), "--n-f", "8",
                    "--n-m", "8"], capsys, crash_logs) == 0
