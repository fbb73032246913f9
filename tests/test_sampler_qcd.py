"""The QCD-era conventions in sample, grid and verify (issue 15 step 4).

The vectorised f_PBH takes qcd_threshold = 'harada-scaled' and qcd_collapse = 'gamma-of-w'
through the threshold plan (scan/observables/pbh/threshold_plan.py): per formation epoch a
fixed threshold factor delta_c(w)/delta_c(1/3) and exponent gamma_c(w).  The reference is
the per-spectrum path of ``zetascan solve``/``observe`` (NonGaussianPlan.evaluate with
Gaussian zeta and per-epoch thresholds and exponents; its physics, the threshold's dip at
solar-mass horizons and the exponent's published anchors, is tested in
tests/test_pbh_qcd.py and tests/test_pbh_qcd_collapse.py).

Tolerance of stack == per spectrum: rtol 1e-12.  Both integrate the same Gaussian density
with the same rule in y for the total (abundance.beta_rule; the per-spectrum path adds
tail panels beyond 14 sigma, < e^{-98} relative, and its conditional zeta_G rule reproduces the
Gaussian density to its normalisation, 1 - 1.8e-15: scan/observables/pbh/nongaussian.py);
what remains is rounding amplified by exp() of arguments up to nu^2/2 ~ 760, the reason
for the same 1e-12 in tests/test_pbh_thresholds.py (common practice).  atol 1e-250:
below it both codes form terms from subnormal exponentials (as there).
"""
from __future__ import annotations

import sys
from pathlib import Path

import h5py
import numpy as np
import pytest
from test_grid import GRID, SETS, write_config
from test_sampler_posterior import exact_side_of_first, make_config, trained  # noqa: F401
from test_verify import OBSERVABLES, StandinExact

from scan.cli import main
from scan.cli.summary import format_summary
from scan.cli.verify import format_report
from scan.config import load_config_text
from scan.observables import cosmo, gstar
from scan.observables.pbh import PBHConventions, plan_pbh, plan_pbh_thresholds
from scan.observables.pbh.ng_stack import plan_pbh_mapped
from scan.observables.pbh.nongaussian import plan_nongaussian
from scan.observables.pbh.qcd import epoch_exponents, epoch_thresholds
from scan.observables.pbh.zeta_map import ZetaMap, zeta_map_of
from scan.observables.quadratic_qcd import RowQuadraticPlan
from scan.observables.settings import settings_of
from scan.observables.window import spectra_on_table
from scan.pool import SerialPool, choose_pool
from scan.sampler import plan_run, run_chain, runfile
from scan.sampler.summary import summarize
from scan.verify.run import open_run, verify_run

sys.path.insert(0, str(Path(__file__).parent / "bench"))
from bench_pbh_nongaussian import spectra

RTOL, ATOL = 1e-12, 1e-250
COMBOS = [("harada-scaled", "off"), ("off", "gamma-of-w"), ("harada-scaled", "gamma-of-w")]
DOF = gstar.TABLES["saikawa-shirai-2018"]()
#: A table through the QCD crossover: horizon masses 1e-3 ... 1e4 M_sun.
K_QCD = np.geomspace(cosmo.k_of_horizon_mass(1e4, DOF), cosmo.k_of_horizon_mass(1e-3, DOF),
                     200)
M_OUT = np.geomspace(1e-2, 1e2, 41)
THETAS = np.array([[0.012, 1.55, 1.0, 1e-15], [0.015, 1.62, 1.4, 3e-15]])


def _qcd_spectra() -> np.ndarray:
    """Three log-normal peaks (horizon masses 0.1, 1 and 10 M_sun at the peak; widths and
    amplitudes below 0.1 chosen so f_PBH,total spans ~1e-10 ... 1e-3 with C_th = 0.5)."""
    lnk = np.log(K_QCD)
    rows = []
    for m_h, width, amp in [(1.0, 0.5, 0.095), (10.0, 1.0, 0.084), (0.1, 1.0, 0.08)]:
        centre = np.log(cosmo.k_of_horizon_mass(m_h, DOF))
        rows.append(amp * np.exp(-(lnk - centre)**2 / (2 * width**2)))
    return np.array(rows)


@pytest.mark.parametrize("qcd_threshold, qcd_collapse", COMBOS)
def test_stack_equals_the_per_spectrum_path(qcd_threshold, qcd_collapse):
    """Every row of the stacked plan (the config's threshold, and sampled thresholds as
    radiation-era values) equals the per-spectrum path with per-epoch thresholds C_th
    delta_c(w)/delta_c(1/3) and exponents gamma_c(w)."""
    conv = PBHConventions(threshold=0.5)
    stack = plan_pbh_thresholds(K_QCD, M_OUT, conv, (0.4, 0.6), n_formation=128, dof=DOF,
                                qcd_threshold=qcd_threshold, qcd_collapse=qcd_collapse)
    single = plan_nongaussian(plan_pbh(K_QCD, M_OUT, conv, n_formation=128, dof=DOF), 128)
    M_H = single.base.M_H
    np.testing.assert_array_equal(stack.M_H, M_H)
    exponents = epoch_exponents(M_H, conv.gamma_c, DOF) if qcd_collapse != "off" else None
    P = _qcd_spectra()
    for rows in (None, np.array([0.45, 0.5, 0.55])):
        got = stack.evaluate(P, rows)
        for i, row in enumerate(P):
            t = conv.threshold if rows is None else rows[i]
            thr = epoch_thresholds(M_H, t, DOF) if qcd_threshold != "off" \
                else np.full(M_H.size, t)
            ref = single.evaluate(row, ZetaMap(), thr, exponents)
            assert 1e-14 < ref.f_pbh_total < 1.0
            assert got.f_pbh_total[i] == pytest.approx(ref.f_pbh_total, rel=RTOL)
            np.testing.assert_allclose(got.f_pbh[i], ref.f_pbh, rtol=RTOL, atol=ATOL)
    # the conventions matter at these masses: the lower threshold raises f_PBH, most for
    # the peak at M_H = 1 M_sun where it dips deepest (measured x 64 there, x 2.5-3 for
    # the others; orders of magnitude in tests/test_pbh_qcd.py); a smaller exponent
    # raises it less (measured x 1.12-1.45; both: x 2.8-94)
    off = plan_pbh_thresholds(K_QCD, M_OUT, conv, n_formation=128, dof=DOF).evaluate(P)
    ratio = stack.evaluate(P).f_pbh_total / off.f_pbh_total
    assert np.all(ratio > 1.001) and (ratio[0] > 10.0) == (qcd_threshold != "off")


@pytest.fixture(scope="module")
def ng_plans():
    """The non-Gaussian stack's benchmark plan (tests/test_pbh_ng_stack.py: top-hat,
    C_th = 0.55, horizon masses 1e-2 ... 1e3 M_sun, through the crossover) with both
    QCD-era conventions, the per-spectrum plan and four of the benchmark's spectra."""
    k = np.geomspace(1e5, 1e8, 300)
    conv = PBHConventions(window="top-hat", threshold=0.55)
    masses = np.geomspace(1e-2, 1e3, 32)
    stack = plan_pbh_mapped(k, masses, conv, ZetaMap(), n_formation=128,
                            qcd_threshold="harada-scaled", qcd_collapse="gamma-of-w")
    single = plan_nongaussian(plan_pbh(k, masses, conv, n_formation=128), 128)
    M_H = single.base.M_H
    epochs = (epoch_thresholds(M_H, conv.threshold), epoch_exponents(M_H, conv.gamma_c))
    return stack, single, epochs, spectra(k)[::16]


@pytest.mark.parametrize("zmap, rtol, per_mass", [
    (zeta_map_of("gaussian"), 1e-10, True),
    (zeta_map_of("local", f_nl=1.0), 1e-4, True),
    (zeta_map_of("logarithmic", log_lambda=3.0), 2e-5, False)])
def test_non_gaussian_stack_takes_the_qcd_conventions(ng_plans, zmap, rtol, per_mass):
    """The stacked non-Gaussian f_PBH with per-epoch thresholds and exponents equals the
    per-spectrum path with the same ones.  rtol for local and logarithmic: those of the
    stack without them (tests/test_pbh_ng_stack.py: Gauss-Hermite error in ln g, the
    per-spectrum density's edge error; only totals for the logarithmic map, for the
    reason given there); measured here 1.6e-8 and 1.1e-6 (totals), as without QCD.
    Gaussian map: 1e-10 (issue 15 acceptance); an epoch's other gamma_c keeps the
    configured one's Gauss-Jacobi edge nodes with interpolatory weights for its own
    (scan/observables/pbh/ng_beta_nodes.py): measured 1.3e-12 in the totals (the former
    graded inner panel: 2e-10, then asserted 1e-9).  The Gaussian total beside it
    comes from the threshold plan (rtol 1e-12, module doc)."""
    stack, single, (thr, gam), P = ng_plans
    got = stack.stacked.evaluate(P, zmap)
    refs = [single.evaluate(p, zmap, thr, gam) for p in P]
    ref_f = np.array([r.f_pbh for r in refs])
    big = ref_f >= 1e-30 * ref_f.max(axis=-1, keepdims=True)
    if per_mass:
        np.testing.assert_allclose(got.f_pbh[big], ref_f[big], rtol=rtol)
    np.testing.assert_allclose(got.f_pbh_total, [r.f_pbh_total for r in refs], rtol=rtol)
    gaussian = [single.evaluate(p, ZetaMap(), thr, gam).f_pbh_total for p in P]
    np.testing.assert_allclose(stack.evaluate(P).f_pbh_total_gaussian, gaussian, rtol=RTOL)


def _target(trained, extra):  # noqa: F811
    tmp, _, _ = trained
    cfg = make_config(tmp, surrogate=tmp / "standin" / "surrogate.h5", extra=extra)
    return cfg, plan_run(cfg, tmp / f"chain_{abs(hash(extra))}.h5")


QCD = '[observables]\nqcd_threshold = "harada-scaled"\nqcd_collapse = "gamma-of-w"\n'


@pytest.mark.parametrize("sampled", [False, True])
def test_walkers_use_the_qcd_conventions(trained, sampled):  # noqa: F811
    """The posterior's f_PBH equals the per-spectrum QCD path on the same table spectra
    (rtol 1e-12, the module doc), for the config's threshold and for a sampled one."""
    extra = QCD.replace("[observables]", "[[nuisance]]\nname = \"pbh.threshold\"\nprior = "
                        "\"uniform\"\nlow = 0.4\nhigh = 0.6\n[observables]") if sampled else QCD
    cfg, plan = _target(trained, extra)
    target, dof = plan.target, settings_of(cfg.observables).dof
    thetas = np.column_stack([THETAS, [0.45, 0.58]]) if sampled else THETAS
    _, blobs = target.log_and_blobs(thetas)
    batch, pbh = target.loaded["plan"], target.loaded["plan"].pbh
    pred = target.loaded["surrogate"].predict(thetas[:, :3])
    table = spectra_on_table(batch.lnk_table, pred.ln_k_peak, batch.x,
                             pred.log10_P_peak[:, None] + pred.shape)
    single = plan_nongaussian(pbh.base, pbh.M_H.size)
    conv = pbh.conventions
    for i, row in enumerate(table):
        t = thetas[i, 4] if sampled else conv.threshold
        ref = single.evaluate(row, ZetaMap(), epoch_thresholds(pbh.M_H, t, dof),
                              epoch_exponents(pbh.M_H, conv.gamma_c, dof))
        assert blobs["f_pbh_total"][i] == pytest.approx(ref.f_pbh_total, rel=RTOL)
    _, off = _target(trained, "")
    _, off_blobs = off.target.log_and_blobs(THETAS)
    if not sampled:   # the stand-in's peaks form at M_H << M_sun: w below 1/3 only slightly
        assert np.all(blobs["f_pbh_total"] != off_blobs["f_pbh_total"])


def test_non_gaussian_walkers_use_the_qcd_conventions(trained):  # noqa: F811
    """local f_NL = 1 with both QCD-era conventions: the walkers' f_PBH equals the
    per-spectrum path with the same per-epoch thresholds and exponents (rtol 1e-4, the
    stack's Gauss-Hermite error as in tests/test_sampler_nongaussian.py), and the Gaussian
    total beside it the per-spectrum Gaussian one (rtol 1e-12, module doc)."""
    cfg, plan = _target(trained, QCD + 'non_gaussianity = "local"\nf_nl = 1.0\n')
    target, dof = plan.target, settings_of(cfg.observables).dof
    _, blobs = target.log_and_blobs(THETAS)
    batch, pbh = target.loaded["plan"], target.loaded["plan"].pbh
    pred = target.loaded["surrogate"].predict(THETAS[:, :3])
    table = spectra_on_table(batch.lnk_table, pred.ln_k_peak, batch.x,
                             pred.log10_P_peak[:, None] + pred.shape)
    single = pbh.stacked.ng
    conv, M_H = single.base.conventions, single.base.M_H
    epochs = (epoch_thresholds(M_H, conv.threshold, dof),
              epoch_exponents(M_H, conv.gamma_c, dof))
    for i, row in enumerate(table):
        ref = single.evaluate(row, pbh.zmap, *epochs).f_pbh_total
        assert blobs["f_pbh_total"][i] == pytest.approx(ref, rel=1e-4)
        ref = single.evaluate(row, ZetaMap(), *epochs).f_pbh_total
        assert blobs["f_pbh_total_gaussian"][i] == pytest.approx(ref, rel=RTOL)
        assert blobs["f_pbh_total"][i] > 10 * blobs["f_pbh_total_gaussian"][i]


def _sample(trained, tmp_path, capsys, extra: str):  # noqa: F811
    """``zetascan sample`` of the stand-in with ``extra`` config text: (what it printed,
    the chain's path)."""
    cfg = tmp_path / "run.toml"
    cfg.write_text(make_config(tmp_path, surrogate=trained[0] / "standin" / "surrogate.h5",
                               extra=extra).text)
    assert main(["sample", str(cfg)]) == 0
    return capsys.readouterr().out, tmp_path / "standin" / "chain.h5"


def test_chain_records_the_conventions_and_sample_and_summary_print_the_notes(
        trained, tmp_path, capsys):  # noqa: F811
    """``zetascan sample`` with both QCD-era conventions: the notes are printed at the
    start, the chain's attributes name the conventions and carry the notes the single path
    prints, and ``zetascan summary`` shows both."""
    started, chain = _sample(trained, tmp_path, capsys, QCD)
    assert "qcd_threshold = 'harada-scaled'" in started and "C_th falls from 0.5" in started
    conv = runfile.pbh_convention(chain)
    assert (conv["qcd_threshold"], conv["qcd_collapse"]) == ("harada-scaled", "gamma-of-w")
    assert "raises f_PBH there" in conv["qcd_notes"] and \
        "not a published table" in conv["qcd_notes"]
    text = format_summary(summarize(chain))
    assert "qcd_threshold = 'harada-scaled', qcd_collapse = 'gamma-of-w'" in text
    assert "QCD-era threshold (harada-scaled): C_th falls from 0.5 to" in text
    assert "K stays 3.3 (no published K(w) found)" in text


KERNEL = '[observables]\nsigw_kernel = "qcd-fluid"\n'


def test_walkers_take_the_qcd_era_gw_kernel(trained):  # noqa: F811
    """``sigw_kernel = "qcd-fluid"`` on the sampler path: the batch plan carries the
    per-row forms (scan/observables/quadratic_qcd.py, equal to the form at each walker's
    re-entry temperatures: tests/test_sigw_quadratic_qcd.py).  The stand-in's peaks
    re-enter at T ~ 3e4 and 2e6 GeV, above the kernel tables, so its walkers keep the
    radiation values (rtol 1e-12: the same nodes summed in another order, as there)."""
    _, plan = _target(trained, KERNEL)
    assert isinstance(plan.target.loaded["plan"].sigw, RowQuadraticPlan)
    _, blobs = plan.target.log_and_blobs(THETAS)
    assert np.all(cosmo.temperature_of_k(blobs["k_peak"], DOF) > 6.0)
    _, off = _target(trained, "")
    _, rd = off.target.log_and_blobs(THETAS)
    np.testing.assert_allclose(blobs["omega_gw_h2_peak"], rd["omega_gw_h2_peak"],
                               rtol=1e-12)


def test_sample_and_summary_name_the_gw_kernel(trained, tmp_path, capsys):  # noqa: F811
    """``zetascan sample`` with the tabulated kernel (refused before): it runs, prints the
    kernel's note at the start, records ``sigw_kernel`` on the chain, and ``zetascan
    summary`` prints the note."""
    started, chain = _sample(trained, tmp_path, capsys, KERNEL)
    assert "sigw_kernel = 'qcd-fluid'" in started and "perfect adiabatic fluid" in started
    assert runfile.gw_convention(chain) == {"sigw_kernel": "qcd-fluid"}
    assert "sigw_kernel = 'qcd-fluid'" in format_summary(summarize(chain))


def test_grid_records_and_prints_the_gw_kernel(trained, tmp_path, capsys):  # noqa: F811
    """A surrogate grid with the tabulated kernel (refused before): it runs, its file
    records ``sigw_kernel`` and its report prints the kernel's note."""
    small = GRID.replace("x_points = 6", "x_points = 2").replace("y_points = 5",
                                                                 "y_points = 2")
    cfg = str(write_config(tmp_path, trained[0] / "standin" / "surrogate.h5",
                           small + KERNEL))
    assert main(["grid", cfg, "--set", SETS[0]]) == 0
    out = capsys.readouterr().out
    with h5py.File(tmp_path / "results" / "standin" / "grid.h5", "r") as handle:
        assert handle.attrs["sigw_kernel"] == "qcd-fluid"
    assert "sigw_kernel = 'qcd-fluid'" in out and "perfect adiabatic fluid" in out


def test_grid_records_and_prints_the_conventions(trained, tmp_path, capsys):  # noqa: F811
    small = GRID.replace("x_points = 6", "x_points = 2").replace("y_points = 5",
                                                                 "y_points = 2")
    cfg = str(write_config(tmp_path, trained[0] / "standin" / "surrogate.h5",
                           small + QCD.replace("qcd_collapse", "# qcd_collapse")))
    assert main(["grid", cfg, "--set", SETS[0]]) == 0
    out = capsys.readouterr().out
    with h5py.File(tmp_path / "results" / "standin" / "grid.h5", "r") as handle:
        assert handle.attrs["qcd_threshold"] == "harada-scaled"
        assert handle.attrs["qcd_collapse"] == "off"
        assert "C_th falls from 0.5" in handle.attrs["qcd_notes"]
    assert "qcd_threshold = 'harada-scaled'" in out and "C_th falls from 0.5" in out


@pytest.mark.parametrize("sets, key", [
    (('observables.qcd_threshold="harada-scaled"', 'observables.criterion="peaks"',
      "observables.threshold=0.45"), "observables.qcd_threshold"),
    (('observables.qcd_collapse="gamma-of-w"', 'observables.mass_function="monochromatic"'),
     "observables.qcd_collapse")])
def test_bad_combinations_exit_2_naming_the_key(trained, tmp_path, capsys, sets,  # noqa: F811
                                                key):
    cfg = tmp_path / "run.toml"
    cfg.write_text(make_config(tmp_path, surrogate=trained[0] / "standin" / "surrogate.h5"
                               ).text)
    assert main(["sample", str(cfg), *[a for s in sets for a in ("--set", s)]]) == 2
    err = capsys.readouterr().err
    assert key in err and "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not (tmp_path / "standin" / "chain.h5").exists()


def test_exact_side_uses_the_same_conventions(trained):  # noqa: F811
    """verify's exact observables (the per-spectrum path with the config's QCD-era
    conventions) carry the notes and agree with the walker's value.  The two
    formation-epoch tables discretise sigma^2 differently: log10 f_PBH agrees to 1e-3
    relative, as in tests/test_sampler_posterior.py and tests/test_sampler_nongaussian.py
    (the tolerance derived there; measured 2.3e-4 and 4.9e-4 for THETAS)."""
    cfg, plan = _target(trained, QCD)
    out, blobs = exact_side_of_first(cfg, plan.target, THETAS)
    assert any("harada-scaled" in n for n in out.notes)
    assert any("gamma-of-w" in n for n in out.notes)
    assert np.log10(out.observables.f_pbh_total) == pytest.approx(
        np.log10(blobs["f_pbh_total"][0]), rel=1e-3)


def test_verify_recomputes_with_the_conventions_and_prints_them(trained):  # noqa: F811
    """``verify`` of a QCD-era chain: the exact side (the stand-in truth through the
    per-spectrum observables, tests/test_verify.py) computes with the stored config's
    conventions, the report names them with the notes, and f_PBH's error is the
    surrogate's own, as without them: the verdict is ok (tests/test_verify.py asserts the
    same for the plain chain)."""
    tmp = trained[0]
    cfg = make_config(tmp, extra=QCD.replace("[observables]", OBSERVABLES))
    cfg = load_config_text(cfg.text, cfg.source, overrides=("sampler.max_steps=40",))
    plan = plan_run(cfg, tmp / "qcd_vrun" / "chain.h5")
    with choose_pool(None, False, vectorized=True) as pool:
        run_chain(plan, pool, restart=True)
    run = open_run(plan.path)
    with SerialPool() as pool:
        result = verify_run(run, 16, pool, exact=StandinExact(run.config), write=False)
    r = result.report
    assert r["pbh_convention"]["qcd_threshold"] == "harada-scaled"
    assert r["exact_notes"] == r["valid_exact"] > 0          # every exact solve says so
    text = format_report(r)
    assert "qcd_threshold = 'harada-scaled', qcd_collapse = 'gamma-of-w'" in text
    assert "C_th falls from 0.5" in text and "not a published table" in text
    assert r["ess_fraction"] >= 0.8 and not r["biased"], r["flags"]
