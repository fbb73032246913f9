"""Run configuration: validation, error messages, overrides, documentation coverage."""
from __future__ import annotations

import re
from pathlib import Path

import pytest

from scan.cli import main
from scan.config import describe, load_config, load_config_text
from scan.config.schema import RunConfig
from scan.errors import ConfigError

ROOT = Path(__file__).resolve().parents[1]

GOOD = """
[model]
potential = "t_model"
alpha = 1.0
kinetic = "poles"
[[model.poles]]
position = 5.0
width = 0.02
power = 1.0
[pivot]
n_star = 55.0
"""


def test_good_config_builds_frozen_values():
    cfg = load_config_text(GOOD, "good.toml")
    assert cfg.model.potential == "t_model"
    assert cfg.model.poles[0].width == 0.02
    assert cfg.pivot.n_star == 55.0
    assert cfg.pivot.k_star == 0.05  # default pivot, Planck 2018 convention (arXiv:1807.06209)
    with pytest.raises(AttributeError):
        cfg.model.alpha = 2.0  # frozen


def test_overrides_are_applied_and_recorded():
    cfg = load_config_text(GOOD, "good.toml",
                           overrides=("model.poles[0].width=0.03", "run.seed=7",
                                      "model.potential=e_model"))
    assert cfg.model.poles[0].width == 0.03
    assert cfg.run.seed == 7
    assert cfg.model.potential == "e_model"
    assert "# --set run.seed=7" in cfg.effective_text


BAD_CASES = [
    # (config text or override, expected key path in message, expected hint fragment)
    ('[model]\npotential = "tmodel"\n', "model.potential", "did you mean 't_model'"),
    ('[model]\npotential = "t_model"\nalfa = 1.0\n', "model.alfa", "did you mean 'alpha'"),
    ('[modle]\npotential = "t_model"\n', "modle", "did you mean 'model'"),
    ('[model]\npotential = "t_model"\nalpha = "one"\n', "model.alpha", "without quotes"),
    ('[model]\npotential = "t_model"\nalpha = -1.0\n', "model.alpha", "> 0.0"),
    ('[run]\nseed = 1\n', "model", "required key is missing"),
    ('[model]\npotential = "t_model"\nkinetic = "poles"\n', "model.poles", "[[model.poles]]"),
    ('[model]\npotential = "t_model"\n[[model.poles]]\nposition = 1.0\nwidth = 0.1\npower = 1.0\n',
     "model.kinetic", 'kinetic = "poles"'),
    ('[model]\npotential = "t_model"\nkinetic = "poles"\n[[model.poles]]\nposition = 1.0\n'
     'width = 0.0\npower = 1.0\n', "model.poles[0].width", "> 0.0"),
    ('[model]\npotential = "t_model"\nkinetic = "poles"\n[[model.poles]]\nposition = 1.0\n'
     'width = 0.1\n', "model.poles[0].power", "required key is missing"),
    ('[model]\npotential = "plugin"\n', "model.potential_function", "package.module:function"),
    ('[model]\npotential = "plugin"\npotential_function = "nocolon"\n',
     "model.potential_function", "package.module:function"),
    ('[model]\npotential = "t_model"\n[pivot]\nreheating = "temperature"\n',
     "pivot.reheat_temperature_GeV", "needs"),
    ('[model]\npotential = "t_model"\n[modes]\nn_k = 12.5\n', "modes.n_k", "integer"),
    ('[model]\npotential = "t_model"\n[background]\nrtol = 1.0\n', "background.rtol", "<= 0.0001"),
    ('[model]\npotential = "t_model"\nkinetic_singular_points = 2.0\n',
     "model.kinetic_singular_points", "list"),
    ('[model\npotential = "t_model"\n', "", "not valid TOML"),
    ('[model]\npotential = "t_model"\n[pivot]\nn_star = inf\n', "pivot.n_star", "finite"),
]


@pytest.mark.parametrize("text, key, hint", BAD_CASES)
def test_every_config_error_names_file_key_and_fix(text, key, hint):
    with pytest.raises(ConfigError) as info:
        load_config_text(text, "bad.toml")
    message = str(info.value)
    assert message.startswith("bad.toml")
    assert key in message
    assert hint in message


@pytest.mark.parametrize("override, hint", [
    ("model.alpha", "section.key=value"),
    ("model..alpha=1", "malformed key path"),
    ("model.poles[3].width=0.1", "does not exist"),
    ("model.alpha=\"big\"", "number"),
])
def test_bad_overrides_are_config_errors(override, hint):
    with pytest.raises(ConfigError) as info:
        load_config_text(GOOD, "good.toml", overrides=(override,))
    assert hint in str(info.value)


def test_missing_file_is_a_config_error(tmp_path):
    with pytest.raises(ConfigError, match="file not found"):
        load_config(tmp_path / "nope.toml")


def test_cli_reports_config_errors_in_one_line_with_exit_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text('[model]\npotential = "t_model"\nalfa = 1.0\n')
    code = main(["solve", str(bad)])
    err = capsys.readouterr().err
    assert code == 2
    assert "alfa" in err and "did you mean 'alpha'" in err
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1


def test_shipped_example_configs_load():
    paths = sorted((ROOT / "configs").glob("*.toml"))
    assert len(paths) >= 2
    for path in paths:
        cfg = load_config(path)
        assert cfg.model.potential


def test_every_key_is_documented_in_configs_readme():
    readme = (ROOT / "configs" / "README.md").read_text(encoding="utf-8")
    documented = set(re.findall(r"`([a-z_]+(?:\[\])?(?:\.[a-z_A-Z0-9]+(?:\[\])?)+)`", readme))
    for path, *_ in describe(RunConfig):
        assert path in documented, f"configs/README.md does not document `{path}`"


@pytest.mark.parametrize("name", ["/abs/x", "../../x", "a/b", "a\\b", "..", "."])
def test_run_names_with_separators_or_dots_are_refused(name, tmp_path, capsys, monkeypatch):
    # issue 19 item 7: run.name is one file name, so no write escapes run.output_dir
    monkeypatch.chdir(tmp_path)
    config = tmp_path / "c.toml"
    config.write_text(f"[run]\noutput_dir = \"{tmp_path / 'out'}\"\n" + GOOD)
    code = main(["solve", str(config), "--set", f"run.name='{name}'", "--no-figures"])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1
    assert "run.name" in err and "give a plain name" in err and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.toml"]  # nothing written


def test_help_says_that_running_a_plugin_config_executes_code(capsys):
    # issue 19 item 7: --help of the package and of each verb that runs a config
    for argv in ([], ["solve"], ["train"], ["grid"], ["verify"], ["demo"]):
        with pytest.raises(SystemExit):
            main([*argv, "--help"])
        text = " ".join(capsys.readouterr().out.split())
        assert "names a plug-in" in text and "imports and executes that Python code" in text
