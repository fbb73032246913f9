"""The end-to-end demo: the whole job on the invented scenario of ``configs/demo.toml``.

The demo is a script of the ordinary verbs, run on the shipped config (synthetic
bound curves of ``constraints/demo`` plus the LISA noise curve):

0. ``solve``   — the config's own model exactly (spectrum, potential/K, Omega_GW, f_PBH;
   full demo only);
1. ``train``   — a small surrogate trained on exact background + mode solves;
2. ``sample``  — the posterior over pole position, sharpness, the SMBH-binary foreground
   amplitude and the PBH collapse threshold, until converged (vectorised surrogate);
3. ``evidence`` — nested sampling of the same posterior: ln Z of the pole model and of the
   SMBH-binary foreground alone, and their Bayes factor;
4. ``verify``  — a few posterior samples re-solved exactly: importance weights and ESS;
5. ``grid``    — an exclusion grid over position and sharpness (surrogate);
6. ``plot``    — every figure (spectrum and model of the config's pole, Omega_GW and
   f_PBH with bounds and posterior bands, the triangle, the exclusion map);
7. ``summary`` — medians, intervals, convergence, the binding constraint and the nested
   posterior's agreement with the chain.

Every step writes its own file under the output folder, so the demo's results are
exactly what a user gets by running the verbs by hand.  ``quick`` shrinks every step
(no single solve, fewer training points and modes, no PBH-threshold nuisance, a smaller
grid, fewer verified samples, 200 instead of 400 live points for the evidence, and a τ that need only be stable to 5 % instead of 2 %;
the chain must still be longer than 50 τ) so that it runs in about two minutes; the overrides are recorded in
every result file like any ``--set``.
"""
from __future__ import annotations

import dataclasses
import time
from collections.abc import Callable, Sequence
from pathlib import Path

from scan.config import load_config
from scan.errors import InputFileError

#: The repository root (configs/ and constraints/ live beside the package).
ROOT = Path(__file__).resolve().parents[2]
CONFIG = ROOT / "configs" / "demo.toml"

#: Overrides of the quick demo (recorded in every result file).
QUICK: tuple[str, ...] = (
    "surrogate.points=18", "surrogate.holdout=6", "surrogate.refine_rounds=0",
    "surrogate.fit_iterations=40", "modes.n_k=64", "modes.refine_tol=0.01",
    "sampler.walkers=16", "sampler.check_every=200", "sampler.tau_rtol=0.05",
    "sampler.max_steps=8000",
    "grid.x_points=10", "grid.y_points=10")


@dataclasses.dataclass(frozen=True)
class DemoPlan:
    """What the demo runs: the config, its overrides and the output folder."""

    config: Path
    overrides: tuple[str, ...]
    out: Path
    processes: int
    verify_samples: int
    band_samples: int
    quick: bool = False
    live_points: int = 400


def plan_demo(out: str | Path, quick: bool, processes: int | None = None) -> DemoPlan:
    """The demo's steps for an output folder.

    The run's ``output_dir``/``name`` are set so that the files land in ``out`` itself,
    and the curve paths are absolute (the quick demo's config is a copy in ``out``).

    Raises
    ------
    ZetascanError
        If the shipped config or curves are missing (an installation without the
        repository's ``configs/`` and ``constraints/``).
    """
    import os


    if not CONFIG.is_file():
        raise InputFileError(str(CONFIG), "the demo config is missing; run the demo from "
                             "a checkout of zetascan (pip install -e .)")
    out = Path(out).resolve()
    base = load_config(CONFIG)
    curves = list(base.likelihood.curves)  # absolute: resolved against configs/
    for path in curves:
        if not Path(path).is_file():
            raise InputFileError(path, "a demo bound curve is missing; run the demo from a "
                                 "checkout of zetascan")
    overrides = (f"run.output_dir={str(out.parent)!r}", f"run.name={out.name!r}",
                 "likelihood.curves=[" + ", ".join(repr(c) for c in curves) + "]")
    config = CONFIG
    if quick:
        overrides += QUICK
        config = quick_config(out)
    return DemoPlan(config=config, overrides=overrides, out=out,
                    processes=processes or min(2, os.cpu_count() or 1),
                    verify_samples=10 if quick else 40, band_samples=60 if quick else 200,
                    quick=quick, live_points=200 if quick else 400)


#: The line of ``configs/demo.toml`` after which only the full demo reads.
FULL_ONLY = "# ---- full demo only"


def quick_config(out: Path) -> Path:
    """Write the quick demo's config (``demo.toml`` up to :data:`FULL_ONLY`) into ``out``.

    The quick demo leaves out the PBH-threshold nuisance parameter: three sampled
    parameters converge in about half the steps of four.
    """
    text = CONFIG.read_text(encoding="utf-8")
    head = text.split(FULL_ONLY, 1)[0].rstrip("\n") + "\n"
    out.mkdir(parents=True, exist_ok=True)
    path = out / "demo_quick.toml"
    path.write_text(head, encoding="utf-8")
    return path


def steps(plan: DemoPlan) -> list[tuple[str, list[str]]]:
    """The verbs the demo runs, as ``(title, argv)``."""
    sets = [arg for item in plan.overrides for arg in ("--set", item)]
    cfg, run = str(plan.config), str(plan.out)
    procs = ["--processes", str(plan.processes)]
    # a second demo into the same folder continues its training store (finished exact
    # solves are kept; the emulator is refitted) instead of refusing to overwrite it
    resume = ["--resume"] if (plan.out / "training.h5").is_file() else []
    solve = [("solve the config's model exactly (spectrum, model, Omega_GW, f_PBH figures)",
              ["solve", cfg, "--out", str(plan.out / "solve.h5"), *sets])]
    return (solve if not plan.quick else []) + [
        ("train the surrogate on exact solves", ["train", cfg, *resume, *procs, *sets]),
        ("sample the posterior (surrogate, vectorised)", ["sample", cfg, "--restart", *sets]),
        ("evidence: nested sampling, ln B of the model against the foreground alone",
         ["evidence", cfg, "--live-points", str(plan.live_points), *sets]),
        ("verify posterior samples with exact solves",
         ["verify", run, "--samples", str(plan.verify_samples), *procs]),
        ("exclusion grid over position and sharpness", ["grid", cfg, "--restart", *sets]),
        ("figures", ["plot", run, "--kind", "all", "--samples", str(plan.band_samples)]),
        ("summary", ["summary", run]),
    ]


def run_demo(plan: DemoPlan, main: Callable[[Sequence[str]], int],
             say: Callable[[str], None]) -> int:
    """Run every step through ``main`` (the CLI entry); stop at the first failure.

    Returns
    -------
    int
        0, or the exit code of the failing step.
    """
    plan.out.mkdir(parents=True, exist_ok=True)
    t_start = time.monotonic()
    todo = steps(plan)
    for number, (title, argv) in enumerate(todo, 1):
        say(f"\n== demo step {number}/{len(todo)}: {title}: zetascan {argv[0]} ...")
        t0 = time.monotonic()
        code = main(argv)
        if code:
            say(f"== demo step {number} failed (exit {code})")
            return code
        say(f"== step {number} done in {time.monotonic() - t0:.0f} s")
    say(f"\n== demo finished in {time.monotonic() - t_start:.0f} s; everything is in "
        f"{plan.out}:")
    for path in sorted(plan.out.iterdir()):
        if path.suffix in (".h5", ".png", ".pdf"):
            say(f"   {path.name}")
    return 0
