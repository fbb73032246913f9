"""Paths in a run config: no default curve folder, inputs relative to the config file.

``zetascan plot`` of a user's result draws exactly the curves its config names, wherever it
is run from — never the invented ``constraints/demo`` curves unless the config asks. The
result file here is SYNTHETIC: a stored config and a ``gw`` group computed from a made-up
log-normal P_zeta (no solve), which is all ``zetascan plot --kind gw`` reads.
"""
from __future__ import annotations

import shutil
from pathlib import Path

import h5py
import numpy as np
import pytest

from scan import store
from scan.cli import main
from scan.config import load_config, load_config_text
from scan.errors import ConfigError
from scan.likelihood.from_config import curve_paths_of
from scan.observables import compute_observables
from scan.pipeline.result_file import write_observables
from scan.plots.inputs import Inputs
from scan.plots.sources import resolve

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "constraints" / "demo"
MODEL = '[model]\npotential = "t_model"\nkinetic = "canonical"\n'


def synthetic_result(path: Path, config_path: Path) -> Path:
    """A solve-like result of the config at ``config_path`` (made-up spectrum)."""
    config = load_config(config_path)
    k = np.geomspace(1e4, 1e9, 64)
    p_zeta = 1e-2 * np.exp(-np.log(k / 1e6) ** 2 / 2)  # synthetic log-normal peak
    obs = compute_observables(k, p_zeta, n_f=24, n_m=24)
    with h5py.File(path, "w") as handle:
        store.write_attrs(handle, store.provenance(config.text, 0))
        store.write_config(handle, config.text, config.overrides, config.base_dir)
        handle.create_group("background").attrs["N_end"] = 60.0
        write_observables(handle, obs)
    return path


@pytest.fixture()
def user(tmp_path) -> Path:
    """A user's folder: one config without curves, one naming its own curve file."""
    folder = tmp_path / "user"
    (folder / "bounds").mkdir(parents=True)
    shutil.copy(DEMO / "ground_upper_limit_heron.csv", folder / "bounds" / "my_limit.csv")
    (folder / "bare.toml").write_text(MODEL)
    (folder / "named.toml").write_text(MODEL + '[likelihood]\ncurves = ["bounds/my_limit.csv"]\n')
    return folder


@pytest.mark.parametrize("cwd", ["repository", "user", "elsewhere"])
def test_plot_never_draws_the_demo_curves_unless_named(user, tmp_path, monkeypatch, capsys,
                                                       cwd):
    """From the repository root (where constraints/demo exists), from the config's folder
    and from elsewhere: a config without curves draws none (and says so); one naming a
    curve draws exactly it, found relative to the config file."""
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    bare = synthetic_result(tmp_path / "bare.h5", user / "bare.toml")
    named = synthetic_result(tmp_path / "named.h5", user / "named.toml")
    monkeypatch.chdir({"repository": ROOT, "user": user, "elsewhere": elsewhere}[cwd])
    assert main(["plot", str(bare), "--kind", "gw", "--out", str(tmp_path / "f")]) == 0
    out = capsys.readouterr().out
    assert "note: no bound curves drawn" in out and "likelihood.curves" in out
    assert Inputs(resolve(bare)).curves == []
    curves = Inputs(resolve(named)).curves
    assert [Path(c.path) for c in curves] == [(user / "bounds" / "my_limit.csv").resolve()]
    assert main(["plot", str(named), "--kind", "gw", "--out", str(tmp_path / "g")]) == 0
    assert "no bound curves" not in capsys.readouterr().out


def test_relative_input_paths_resolve_against_the_config_file(user, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    cfg = load_config(user / "named.toml")
    assert cfg.base_dir == str(user.resolve())
    assert cfg.likelihood.curves == (str((user / "bounds" / "my_limit.csv").resolve()),)
    assert curve_paths_of(cfg) == cfg.likelihood.curves
    # text without a file: relative to the working directory; absolute paths unchanged
    text = MODEL + '[likelihood]\ndirectory = "d"\nsurrogate = "/abs/s.h5"\n'
    cfg = load_config_text(text, "t.toml")
    assert cfg.likelihood.directory == str(tmp_path.resolve() / "d")
    assert cfg.likelihood.surrogate == "/abs/s.h5"
    assert cfg.run.output_dir == "results"  # outputs stay relative to the working directory


def test_no_default_curve_folder(user):
    cfg = load_config(user / "bare.toml")
    assert cfg.likelihood.directory == "" and cfg.likelihood.curves == ()
    with pytest.raises(ConfigError, match="likelihood.curves.*no bound curves"):
        curve_paths_of(cfg)


def test_the_demo_names_its_invented_curves_explicitly(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    cfg = load_config(ROOT / "configs" / "demo.toml")
    assert cfg.likelihood.directory == "" and len(cfg.likelihood.curves) == 8
    assert all(Path(p).is_file() for p in curve_paths_of(cfg))


def test_a_stored_config_keeps_its_folder(user, tmp_path, monkeypatch):
    """The result file records base_dir, so re-reading its config from anywhere finds the
    same curve files."""
    result = synthetic_result(tmp_path / "named.h5", user / "named.toml")
    with h5py.File(result, "r") as handle:
        assert handle["config"].attrs["base_dir"] == str(user.resolve())
    monkeypatch.chdir(ROOT)
    assert Inputs(resolve(result)).config.likelihood.curves == \
        (str((user / "bounds" / "my_limit.csv").resolve()),)
