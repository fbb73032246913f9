"""``zetascan train``: input errors, ``--report``, and a small training run of the real pole
model (skipped when the exact solver is absent or ZETASCAN_SKIP_SOLVER is set)."""
from __future__ import annotations

import os

import pytest

from scan.cli import main
from scan.surrogate.surrogate_file import read_report

POLE = """
[run]
name = "pole_train"
output_dir = "{out}"
seed = 2
[model]
potential = "t_model"
alpha = 1.0
kinetic = "poles"
[[model.poles]]
position = 5.2
width = 0.026
power = 1.0
[pivot]
k_star = 0.05
[surrogate]
points = 10
holdout = 4
refine_rounds = 0
shape_points = 21
fit_iterations = 20
[[parameters]]
key = "model.poles[0].width"
prior = "log_uniform"
low = 0.024
high = 0.028
"""


def test_config_without_parameters_is_one_line_exit_2(tmp_path, capsys):
    cfg = tmp_path / "np.toml"
    cfg.write_text('[model]\npotential = "t_model"\n')
    assert main(["train", str(cfg)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "[[parameters]]" in err[0]


def test_report_of_a_non_surrogate_file_is_refused(tmp_path, capsys):
    bad = tmp_path / "x.h5"
    bad.write_bytes(b"not hdf5")
    assert main(["train", "--report", str(bad)]) == 2
    assert "x.h5" in capsys.readouterr().err


solver = pytest.mark.skipif(bool(os.environ.get("ZETASCAN_SKIP_SOLVER")),
                            reason="ZETASCAN_SKIP_SOLVER set")


@solver
def test_small_training_run_of_the_pole_model(tmp_path, capsys):
    """14 exact solves (~1.5 s each, serial; ~25 s in all) through the CLI, then --report and --resume."""
    pytest.importorskip("scan.pipeline")
    cfg = tmp_path / "pole.toml"
    cfg.write_text(POLE.format(out=tmp_path / "results"))
    assert main(["train", str(cfg), "--processes", "1"]) == 0
    out = capsys.readouterr().out
    assert "log10_P_peak" in out and "surrogate:" in out
    surrogate = tmp_path / "results" / "pole_train" / "surrogate.h5"
    report = read_report(surrogate)
    assert report["n_train"] == 10 and report["n_holdout"] == 4
    assert report["n_holdout_valid"] >= 1  # the prior box is chosen inside the valid region
    # a pole-width range of +-15% moves the peak height smoothly: ten points must emulate
    # log10 P_peak to better than 0.05 dex (see the report printed by the run)
    assert report["errors"]["log10_P_peak [dex]"]["max"] < 0.05
    assert main(["train", "--report", str(surrogate)]) == 0
    assert "validity classifier" in capsys.readouterr().out
    # resuming a finished store solves nothing new and refuses another model
    assert main(["train", str(cfg), "--processes", "1", "--resume"]) == 0
    capsys.readouterr()
    assert main(["train", str(cfg), "--resume", "--set", "model.poles[0].power=1.2"]) == 2
    assert "model.poles[0].power" in capsys.readouterr().err
