"""One validity rule for every exact solve (issue 14 item 5): no traceback for any width
or power, a stall names its pole (config numbering), a feature on CMB scales is invalid
with that reason, and every command maps these reasons to one code table."""
from __future__ import annotations

from types import SimpleNamespace

import pytest

from scan.background import Background, solve_background
from scan.config import load_config, load_config_text
from scan.errors import ConfigError
from scan.models import Model, Pole
from scan.models.types import width_from_sharpness
from scan.pipeline.solve import model_of, wall_sharpness
from scan.pipeline.validity import FEATURE_REASON, TILT_LIMIT, feature_at_pivot
from scan.pipeline.wall import WALL_RTOL, NoWall, locate_wall
from scan.posterior.reasons import REASONS, Reason, of_exact_solve
from scan.surrogate.adapter import solve_point
from scan.surrogate.identity import differences, identity
from scan.surrogate.record import shape_grid
from scan.surrogate.space import from_config


def t_model(*poles: Pole) -> Model:
    return Model("t_model", kinetic="poles", poles=poles)


@pytest.mark.parametrize("width", [1e-4, 1e-5, 1e-6])
def test_a_narrow_pole_of_power_near_2_gives_a_value_not_a_traceback(width):
    """p = 1.9, w <= 1e-4 raised OverflowError in the chart map u = |s|^(1/q), q = 0.05
    (issue 14).  The model is a value now, valid or not, with finite nodes."""
    bg = solve_background(t_model(Pole(5.2, width, 1.9)), efolds_auto=75.0)
    assert isinstance(bg, Background)
    assert bg.valid or bg.reason


@pytest.mark.parametrize("poles, number", [
    ((Pole(5.2, 1e-3, 1.9), Pole(3.0, 1e-4, 1.0)), 0),
    ((Pole(3.0, 1e-4, 1.0), Pole(5.2, 1e-3, 1.9)), 1),
])
def test_a_stall_names_the_pole_by_its_config_number(poles, number):
    """A wide p = 1.9 pole: both canonical derivatives vanish at it, the field creeps to
    it and inflation does not end (issue 14: λ_c = 5.0 at p = 1.9; this width has
    λ = (1 − p/2)|V'/V|/w ≈ 8e-3 ≪ λ_c).  The reason names the pole as the config
    numbers it, whatever the order of positions."""
    bg = solve_background(t_model(*poles), efolds_auto=75.0, n_max=150.0)
    assert not bg.valid
    assert f"stalls before the pole at phi = 5.2 (pole {number} of the config)" in bg.reason
    assert of_exact_solve("background: " + bg.reason) is Reason.STALLED_AT_POLE


def test_ill_conditioned_creep_names_its_pole_and_counts_as_a_stall():
    """p = 1, sharpness 0.5 < 3/4: the linearised motion at the pole,
    χ'' + 3χ' + 3λχ = 0, is overdamped (roots real for λ < 3/4), so the field creeps up
    to the pole (derivation in scan.models.types.width_from_sharpness)."""
    base = Model("t_model")
    w = width_from_sharpness(base, 5.2, 1.0, 0.5)
    bg = solve_background(t_model(Pole(3.0, 1e-4, 1.0), Pole(5.2, w, 1.0)), efolds_auto=75.0)
    assert not bg.valid and "near the pole at phi = 5.2 (pole 1 of the config)" in bg.reason
    assert of_exact_solve("background: " + bg.reason) is Reason.STALLED_AT_POLE


def _spectrum(n_s):
    return SimpleNamespace(n_s=n_s, N_star=56.0, k_star=0.05)


def _background(N_cross_before_end):
    cross = SimpleNamespace(index=0, position=5.2, N_cross=100.0 - N_cross_before_end,
                            N_usr_start=100.0 - N_cross_before_end - 0.5,
                            N_usr_end=100.0 - N_cross_before_end + 1.5,
                            N_near_start=100.0 - N_cross_before_end - 1.0,
                            N_near_end=100.0 - N_cross_before_end + 2.0)
    return SimpleNamespace(N_end=100.0, crossings=(cross,))


@pytest.mark.parametrize("n_s, before_end, bad", [
    (0.965, 38.0, False),     # the reference model: pole 38 e-folds before the end
    (0.62, 38.0, True),       # tilt of the example: 0.38 > TILT_LIMIT
    (-0.46, 38.0, True),
    (0.965, 57.0, True),      # crossed one e-fold before the pivot (N* = 56) exits
    (0.965, 55.0, True),      # while k in [1.4e-4, 0.18] Mpc^-1 exits: N* - 1.3 .. N* + 5.9
    (0.965, 52.0, False),     # its near window starts 1.7 e-folds after k = 0.18 exits
    (0.965, 70.0, False),     # long before the CMB window: no feature on observed scales
])
def test_the_feature_on_cmb_scales_rule(n_s, before_end, bad):
    reason = feature_at_pivot(_spectrum(n_s), _background(before_end))
    assert bool(reason) is bad
    if bad:
        assert reason.startswith(FEATURE_REASON)
        assert of_exact_solve("spectrum: " + reason) is Reason.FEATURE_AT_PIVOT
    assert TILT_LIMIT < 1.0 - 0.62       # the n_s = 0.62 is caught


def test_solve_and_train_agree_on_a_feature_at_the_pivot():
    """Width 0.03 at p = 1 (λ just above the stall) puts the stall on the pivot: n_s < 0
    (measured -0.28).  solve_config and the training solve give the same reason."""
    config = load_config("configs/tmodel_pole.toml",
                         overrides=("model.poles[0].width=0.03", "modes.n_k=48"))
    record = solve_point(config, [], keys=[], x=shape_grid(3.0, 5))
    assert not record.valid and FEATURE_REASON in record.reason
    assert of_exact_solve(record.reason) is Reason.FEATURE_AT_PIVOT


def test_reason_names_are_stable():
    """Files store names beside codes: old codes keep their names, new ones append."""
    assert REASONS[:9] == ("ok", "outside_prior", "outside_surrogate", "invalid_model",
                           "peak_outside_table", "excluded", "invalid_background",
                           "invalid_pivot", "invalid_spectrum")
    assert REASONS[9:] == ("feature_at_pivot", "stalled_at_pole")


# ----- the wall of a pole (issue 14 item 2): rho = lambda / lambda_w -----


def test_locate_wall_returns_the_valid_end_of_a_bracket_within_its_tolerance():
    calls = []

    def valid_at(lam):
        calls.append(lam)
        return lam >= 0.8531

    lam = locate_wall(valid_at, start=1.0, rtol=1e-4)
    assert 0.8531 <= lam <= 0.8531 * (1 + 1e-4) and len(calls) < 25
    with pytest.raises(NoWall):
        locate_wall(lambda lam: True)


def test_the_p1_wall_lies_above_the_linear_overdamping_bound():
    """p = 1: near the pole χ'' + 3χ' + 3λχ = 0 is overdamped for λ < 3/4, so every
    λ < 3/4 stalls and λ_w >= 3/4; the issue's measurement puts the T-model stall at
    ≈ 0.85 (issue 14, 'measured this week').  A wall_ratio pole gets ρ λ_w."""
    config = load_config("configs/tmodel_pole.toml")
    lam_w = wall_sharpness(config, 0)
    assert 0.75 < lam_w < 0.9
    text = config.text.replace("width = 0.026", "wall_ratio = 1.2")
    walled = load_config_text(text)
    expected = width_from_sharpness(model_of(config).with_canonical_kinetics(), 5.2, 1.0,
                                    1.2 * lam_w)
    assert model_of(walled).poles[0].width == pytest.approx(expected, rel=1e-12)


def test_width_sharpness_and_wall_ratio_are_exclusive():
    text = load_config("configs/tmodel_pole.toml").text.replace(
        "width = 0.026", "width = 0.026\nwall_ratio = 1.2")
    with pytest.raises(ConfigError, match="exactly one of width, sharpness, wall_ratio and"):
        load_config_text(text)


def test_the_wall_is_a_smooth_function_of_the_power():
    """λ_w(p) must be smooth on the scale of a surrogate's design, or the wall coordinate
    d = λ/λ_w - 1 inherits the bisection's jumps (relative WALL_RTOL/d in d; near the wall
    ln k_peak moves by 3.5-7 per unit of ln d, so 1e-4 at d = 2e-3 gave steps of ~0.1 in
    ln k_peak between powers 7e-4 apart, measured on wide_scan_high).  Three powers 7e-4
    apart (wide_scan_high, position 4.639): the second difference of λ_w is the smooth
    curvature (measured 8.5e-7 relative) plus at most 2 WALL_RTOL of bisection noise; with
    the former 1e-4 tolerance it was 8.6e-5.  The bound 1e-5 separates the two."""
    config = load_config("configs/wide_scan_high.toml")
    lams = []
    for power in (1.24784, 1.24854, 1.24924):
        text = config.text.replace("position = 5.0", "position = 4.63944").replace(
            "power = 1.0", f"power = {power}")
        lams.append(wall_sharpness(load_config_text(text), 0))
    second = abs(lams[0] - 2 * lams[1] + lams[2]) / lams[1]
    assert second < 1e-5 and 2 * WALL_RTOL < 1e-6


def test_a_wall_config_records_the_wall_tolerance_in_its_identity():
    """Stores made with another wall tolerance are refused on resume (identity differs)."""
    config = load_config("configs/wide_scan_high.toml")
    ident = identity(config, from_config(config))
    assert ident["wall.rtol"] == WALL_RTOL
    plain = load_config("configs/pole_scan.toml")
    assert "wall.rtol" not in identity(plain, from_config(plain))
    old = dict(ident, **{"wall.rtol": 1e-4})
    assert differences(old, ident) == ["wall.rtol: store has 0.0001, config has 1e-08"]
