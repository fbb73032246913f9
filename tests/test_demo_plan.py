"""``zetascan demo`` planning: a second demo into the same folder continues its store."""
from __future__ import annotations

from scan.cli.demo_plan import plan_demo, steps


def _train_argv(plan):
    return next(argv for _, argv in steps(plan) if argv[0] == "train")


def test_a_second_demo_into_the_same_folder_resumes_training(tmp_path):
    plan = plan_demo(tmp_path / "demo", quick=True, processes=1)
    assert "--resume" not in _train_argv(plan)          # a fresh folder starts a store
    (plan.out / "training.h5").write_bytes(b"")          # what a first demo leaves behind
    assert "--resume" in _train_argv(plan)
    # the steps that would otherwise refuse an existing file say --restart themselves
    assert all("--restart" in argv for _, argv in steps(plan) if argv[0] in ("sample", "grid"))
