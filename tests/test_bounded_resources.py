"""Bounded resources: long spectrum tables are resampled (with a note) before the
observables, grid sizes and x_in have upper bounds refused with exit 2."""
from __future__ import annotations

import numpy as np
import pytest

import scan.observables.single as single
from scan.cli import main
from scan.observables import compute_observables

SIGMA = 0.5  # width of the synthetic log-normal peak in ln k


def synthetic(rows: int) -> tuple[np.ndarray, np.ndarray]:
    """An invented log-normal peak on a floor (synthetic, not data) over 6 decades."""
    k = np.geomspace(1e0, 1e6, rows)
    return k, 1e-2 * np.exp(-0.5 * (np.log(k / 1e3) / SIGMA) ** 2) + 2.1e-9


def test_long_table_is_resampled_with_a_note_and_bounded_error(monkeypatch):
    """Resampled to ~200 rows (h = ln(1e6)/199 = 0.069): log-linear interpolation errs by
    at most h²/8·|(ln P)''| = h²/(8σ²) = 2.4e-3 in ln P (interpolation error bound,
    common practice), plus the same for the 600-row table itself (h = 0.023); Ω_GW ∝ P²
    moves by at most twice that."""
    k, P = synthetic(600)
    full = compute_observables(k, P, n_f=16, n_m=16)
    monkeypatch.setattr(single, "MAX_TABLE_ROWS", 200)
    small = compute_observables(k, P, n_f=16, n_m=16)
    (note,) = [n for n in small.notes if "resampled" in n]
    assert "600 rows" in note and "onto 20" in note  # 199 log-spaced + the peak node
    assert not any("resampled" in n for n in full.notes)
    bound = (np.log(1e6) / 199) ** 2 / (8 * SIGMA**2)
    own = (np.log(1e6) / 599) ** 2 / (8 * SIGMA**2)
    # the new nodes are read off the 600-row table (its own error too); the note rounds
    # to 0.01 %, and a ln P error x is a relative error e^x − 1 < x(1 + x)
    x = bound + own
    assert float(note.split("up to ")[1].split("%")[0]) / 100 <= x * (1 + x) + 5e-5
    live = full.omega_gw_h2 > 1e-3 * full.omega_gw_h2.max()
    np.testing.assert_allclose(small.omega_gw_h2[live], full.omega_gw_h2[live],
                               rtol=2 * (bound + own))
    np.testing.assert_array_equal(small.f_hz, full.f_hz)  # same range: same grids


def test_resampling_keeps_ends_peak_and_zeros():
    k, P = synthetic(500)
    P[:50] = 0.0
    k2, P2, note = single.resample_table(k, P, 100)
    assert note and k2.size <= 101
    assert k2[0] == k[0] and k2[-1] == k[-1] and np.argmax(P) in np.searchsorted(k, k2)
    assert P2.max() == P.max() and np.all(P2 >= 0) and np.all(np.isfinite(P2))
    assert np.all(P2[k2 < k[49]] == 0.0)
    same = single.resample_table(k, P, 500)
    assert same[0] is k and same[2] == ""


@pytest.mark.parametrize("options", [["--n-f", "0"], ["--n-f", "5000"], ["--n-m", "1001"]])
def test_observe_grid_sizes_are_bounded(tmp_path, capsys, options):
    table = tmp_path / "s.csv"
    k, P = synthetic(40)
    np.savetxt(table, np.c_[k, P], delimiter=",", header="k,P_zeta", comments="")
    assert main(["observe", str(table), *options]) == 2
    (line,) = capsys.readouterr().err.strip().splitlines()
    assert options[0] in line and "between 8 and 1000" in line


@pytest.mark.parametrize("override, key", [("modes.n_k=100000000", "modes.n_k"),
                                           ("modes.x_in=1e12", "modes.x_in"),
                                           ("observables.n_f=0", "observables.n_f"),
                                           ("observables.n_m=1000000000", "observables.n_m")])
def test_config_grid_sizes_and_x_in_are_bounded(tmp_path, capsys, override, key):
    cfg = tmp_path / "c.toml"
    cfg.write_text('[model]\npotential = "t_model"\n')
    assert main(["solve", str(cfg), "--set", override, "--no-figures"]) == 2
    (line,) = capsys.readouterr().err.strip().splitlines()
    assert key in line


def test_non_perturbative_spectra_are_flagged():
    """P_zeta above 0.1 (quantum diffusion, inflation.md sect. 5.5) and f_PBH above 1 are
    said in the notes (the issue's case: P_zeta up to 7.6e7 gave f_PBH = 1.2e20 silently)."""
    k, P = synthetic(60)
    big = compute_observables(k, P * 7.6e7 / P.max(), n_f=16, n_m=16)
    assert big.f_pbh_total > 1
    assert any("beyond perturbation theory" in n for n in big.notes)
    assert any("more black holes than dark matter" in n for n in big.notes)
    fine = compute_observables(k, P * 1e-4, n_f=16, n_m=16)
    assert not any("perturbation" in n or "dark matter" in n for n in fine.notes)
    assert single.physics_notes(0.05, 2.0) == (
        "f_PBH total = 2 > 1: more black holes than dark matter; this spectrum is excluded, "
        "the number itself means nothing",)
