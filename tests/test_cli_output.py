"""What the command line prints: complete help, --quiet / -v, and strict JSON on every verb.

Every ``--json`` document is parsed with a strict parser (RFC 8259: no NaN or Infinity
literals). The verbs run for real on small inputs: a coarse Starobinsky solve, a
SYNTHETIC log-normal spectrum table, the shipped curve files, a 60-step chain of the
Gaussian test target, the stand-in surrogate of tests/test_sampler_posterior.py (a TEST
DOUBLE of the exact solver) for train --report and grid; verify and demo, which need many
exact solves, run with their library call replaced by a canned outcome holding NaN, so the
verb's own printing is what is checked.
"""
from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

import numpy as np
from test_config_paths import synthetic_result
from test_grid import GRID, SETS, surrogate, write_config  # noqa: F401  (fixture)
from test_sample_cli import CONFIG as GAUSSIAN
from test_sampler_posterior import trained  # noqa: F401  (fixture: the stand-in surrogate)

from scan import cli
from scan.cli import build_parser, main
from scan.cli.output import ProgressLine, jsonable, strict_json

ROOT = Path(__file__).resolve().parents[1]
CURVES = sorted(str(p) for p in (ROOT / "constraints" / "demo").glob("*.csv"))


def strict(text: str):
    """json.loads that refuses NaN and Infinity (Python's default accepts them)."""
    def refuse(name: str):
        raise ValueError(f"non-standard JSON constant {name}")
    return json.loads(text, parse_constant=refuse)


def run_json(capsys, argv: list[str], code: int = 0) -> dict:
    assert main([*argv, "--json"]) == code
    return strict(capsys.readouterr().out)


# --------------------------------------------------------------------------- help
def verb_parsers() -> dict[str, argparse.ArgumentParser]:
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    out = {}
    for name, verb in sub.choices.items():
        nested = [a for a in verb._actions if isinstance(a, argparse._SubParsersAction)]
        if nested:
            out.update({f"{name} {n}": p for n, p in nested[0].choices.items()})
        else:
            out[name] = verb
    return out


def test_every_verb_documents_every_option_and_prints_strictly():
    parsers = verb_parsers()
    assert set(cli.VERBS) <= {name.split()[0] for name in parsers}
    for name, parser in parsers.items():
        text = parser.format_help()
        assert "%%" not in text and "%(" not in text, name
        options = {s for a in parser._actions for s in a.option_strings}
        assert {"--json", "--quiet", "-v"} <= options, name
        for action in parser._actions:
            if action.option_strings and action.dest != "help":
                assert action.help and action.help.strip(), (name, action.option_strings)


# --------------------------------------------------------------------------- JSON
def test_jsonable_turns_nan_and_numpy_into_strict_json():
    doc = strict(strict_json({"a": math.nan, "b": np.float32(2.5), "c": [np.inf, -np.inf],
                              "d": np.arange(2), "e": Path("x"), "f": np.bool_(True)}))
    assert doc == {"a": None, "b": 2.5, "c": [None, None], "d": [0, 1], "e": "x", "f": True}
    assert jsonable((1, np.int64(2))) == [1, 2]


def test_solve_observe_and_curves_json(tmp_path, capsys):
    doc = run_json(capsys, ["solve", str(ROOT / "configs" / "starobinsky.toml"), "--out",
                            str(tmp_path / "s.h5"), "--set", "modes.n_k=24", "--no-figures"])
    assert doc["valid"] and doc["result"] == str(tmp_path / "s.h5")
    assert doc["spectrum"]["n_s"] > 0.9 and doc["pbh"]["conventions"]["window"] == "gaussian"
    table = tmp_path / "spectrum.csv"
    k = np.geomspace(1e3, 1e9, 40)
    rows = [f"{x:.8e},{1e-2 * math.exp(-math.log(x / 1e6) ** 2 / 2):.8e}" for x in k]
    table.write_text("k,P_zeta\n" + "\n".join(rows) + "\n")  # SYNTHETIC log-normal peak
    doc = run_json(capsys, ["observe", str(table), "--n-f", "24", "--n-m", "24"])
    assert doc["f_pbh_total"] is not None and doc["error"] is None
    doc = run_json(capsys, ["curves", "check", *CURVES])
    assert [c["file"] for c in doc["curves"]] == CURVES and all(c["synthetic"]
                                                                for c in doc["curves"])


def test_a_non_finite_f_pbh_is_bad_input_exit_2(tmp_path, capsys, monkeypatch):
    """Exit 2 (bad input), stdout one strict JSON document with the error, stderr one
    line."""
    from scan.pipeline import observe

    real = observe.settings_of

    class Inflated:  # the conventions' compute, with a non-finite total
        def __init__(self, section):
            self.settings = real(section)

        def compute(self, k, P):
            return self.settings.compute(k, P).replace(f_pbh_total=math.inf)

    monkeypatch.setattr(observe, "settings_of", Inflated)
    table = tmp_path / "t.csv"
    table.write_text("\n".join(f"{x:.6e},1e-2" for x in np.geomspace(1e3, 1e9, 12)) + "\n")
    doc = run_json(capsys, ["observe", str(table), "--n-f", "16", "--n-m", "16"], code=2)
    assert doc["exit_code"] == 2 and "f_PBH is not finite" in doc["error"]
    assert main(["observe", str(table), "--n-f", "16", "--n-m", "16"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "zetascan observe: error:" in err[0]


def test_sample_summary_and_a_bad_input_json(tmp_path, capsys):
    cfg = tmp_path / "g.toml"
    cfg.write_text(GAUSSIAN.format(steps=60).replace("seed = 3",
                                                     f'seed = 3\noutput_dir = "{tmp_path}"'))
    doc = run_json(capsys, ["sample", str(cfg)])
    assert doc["steps"] == 60 and doc["status"] in ("max_steps", "converged")
    doc = run_json(capsys, ["summary", str(tmp_path / "g")])
    assert doc["tau"] is None or all(v is None or v > 0 for v in doc["tau"].values())
    assert set(doc["parameters"]) == {"model.alpha", "a"}
    doc = run_json(capsys, ["summary", str(tmp_path / "nowhere")], code=2)
    assert doc["exit_code"] == 2 and "no such chain file" in doc["error"]


def test_quiet_drops_chatter_but_keeps_the_result(tmp_path, capsys):
    cfg = tmp_path / "g.toml"
    cfg.write_text(GAUSSIAN.format(steps=20).replace("seed = 3",
                                                     f'seed = 3\noutput_dir = "{tmp_path}"'))
    assert main(["sample", str(cfg), "--quiet"]) == 0
    out = capsys.readouterr()
    assert "sampling" not in out.out and out.err == ""
    assert "chain:" in out.out  # the result
    assert main(["sample", str(cfg), "--restart"]) == 0
    out = capsys.readouterr()
    assert out.out.startswith("sampling 2 parameters")
    assert "sample: " in out.err  # progress lines go to stderr (progress_every_s 0.05)


def test_train_report_grid_and_plot_json(surrogate, tmp_path, capsys):  # noqa: F811
    doc = run_json(capsys, ["train", "--report", str(surrogate)])
    assert doc["report"]["n_train"] > 0
    small = GRID.replace("x_points = 6", "x_points = 3").replace("y_points = 5", "y_points = 2")
    cfg = str(write_config(tmp_path, surrogate, small))
    doc = run_json(capsys, ["grid", cfg, "--set", SETS[0]])
    assert doc["status"] == "complete" and doc["done"] == doc["total"] == 6
    result = synthetic_result(tmp_path / "r.h5", tmp_path / "grid.toml")
    doc = run_json(capsys, ["plot", str(result), "--kind", "gw", "--out", str(tmp_path)])
    assert len(doc["figures"]) == 2 and doc["kinds"] == ["gw"]


def test_verify_and_demo_print_strict_json(tmp_path, capsys, monkeypatch):
    from scan.cli import demo, verify

    class Canned:
        report = {"ess": math.nan, "biased": False, "errors": {"k_peak": {"p95": math.inf}}}

    monkeypatch.setattr(verify, "verify_command", lambda *a, **kw: Canned())
    doc = run_json(capsys, ["verify", str(tmp_path)])
    assert doc == {"ess": None, "biased": False, "errors": {"k_peak": {"p95": None}}}

    def fake_demo(plan, step, say):
        say("== demo step 1/1: curves check")
        return step(["curves", "check", CURVES[0]])

    monkeypatch.setattr(demo, "run_demo", fake_demo)
    doc = run_json(capsys, ["demo", "--quick", "--out", str(tmp_path / "d")])
    assert doc["exit_code"] == 0 and doc["log"] == ["== demo step 1/1: curves check"]


def test_one_progress_line_on_stderr(capsys):
    line = ProgressLine("grid", "point", every_s=1e9)
    for done in (0, 1, 2, 3):
        line.update(done, 3, extra="x")
    err = capsys.readouterr()
    assert err.out == ""
    lines = err.err.strip().splitlines()
    assert len(lines) == 2 and lines[0].startswith("grid: 0/3 points") \
        and lines[1].startswith("grid: 3/3 points") and lines[1].endswith(", x")
    ProgressLine("grid", "point", enabled=False).update(1, 1)
    assert capsys.readouterr().err == ""
