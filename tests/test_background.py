"""Tests of scan.background: exact solutions, Friedmann residuals, pole crossings, reasons."""
from __future__ import annotations

import math
import pickle

import numpy as np
import pytest

from scan.background import EPS1_FLOOR, Background, BackgroundPoint, solve_background
from scan.models import Model, Pole

T_P05 = Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.1, 0.5),))
T_P15 = Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.004, 1.5),))


def plugin_V_nan(phi):
    """A potential that is NaN below φ = 4 (to provoke non-finite values)."""
    return math.tanh(phi / math.sqrt(6.0)) ** 2 if phi > 4.0 else math.nan


@pytest.fixture(scope="module")
def bg_p05():
    return solve_background(T_P05)


@pytest.fixture(scope="module")
def bg_p15():
    return solve_background(T_P15, rtol=1e-12)


def lnH_slope(bg: Background, N: np.ndarray, h: float = 1e-3) -> np.ndarray:
    """d ln H/dN by a 5-point central difference of the dense output."""
    f = lambda x: np.log(bg.evaluate(x).H)  # noqa: E731
    return (f(N - 2 * h) - 8 * f(N - h) + 8 * f(N + h) - f(N + 2 * h)) / (12 * h)


def test_power_law_attractor_is_exact():
    """V ∝ e^{−λφ}: ε1 = λ²/2, ε2 = 0, H ∝ e^{−ε1 N} (Lucchin & Matarrese 1985, PRD 32, 1316).

    Tolerances follow the integrator, not the machine: DOP853 keeps each step's local
    error below rtol, and on a stable attractor the errors add at most linearly, so the
    nodes are within n_steps·rtol. Between nodes the 7th-order continuous extension is
    not error-controlled (Hairer, Nørsett & Wanner 1993, §II.6); a bound of 100·rtol per
    step for it is common practice (measured here: ε1 116·rtol, ε2 343·rtol in total).
    """
    lam, rtol = 0.3, 1e-10
    bg = solve_background(Model("exponential", slope=lam), phi_start=0.0, n_max=60.0,
                          allow_no_end=True, rtol=rtol)
    assert bg.valid and math.isnan(bg.N_end)
    nodes, dense = len(bg.N) * rtol, 100 * len(bg.N) * rtol
    np.testing.assert_allclose(bg.eps1, lam**2 / 2, rtol=nodes)
    assert np.max(abs(bg.eps2)) < nodes
    N = np.linspace(0.0, 60.0, 301)
    p = bg.evaluate(N)
    np.testing.assert_allclose(p.eps1, lam**2 / 2, rtol=dense)
    assert np.max(abs(p.eps2)) < dense
    np.testing.assert_allclose(p.H, p.H[0] * np.exp(-lam**2 / 2 * N), rtol=dense)
    np.testing.assert_allclose(p.phi, lam * N, rtol=0, atol=dense)  # φ′ = λ


def test_power_law_without_allow_no_end_is_invalid():
    bg = solve_background(Model("exponential", slope=0.3), phi_start=0.0, n_max=20.0)
    assert not bg.valid and "did not end within n_max = 20" in bg.reason


@pytest.mark.parametrize("model", [Model("starobinsky"), T_P15])
def test_friedmann_residuals(model):
    """H²(3 − ε1) = V at nodes and dense points, and the independent d ln H/dN = −ε1
    from differentiating the dense output.

    The first is exact by construction (H = √(V/(3 − ε1)) in background/types.py), so
    only rounding is left: 1e-12 is ~4500 ulp.  The second carries the integration
    error: dense output of DOP853 is not error-controlled, 100·rtol per step is common
    practice (see test_power_law_attractor_is_exact), so the worst point is bounded by
    100·n_steps·rtol and the median by one step's 100·rtol; the 5-point difference adds
    h⁴ truncation and eps/h rounding, ~1e-12 (measured 7e-10 and 6e-14 for the pole model).
    """
    rtol = 1e-12
    bg = solve_background(model, rtol=rtol)
    assert bg.valid
    V = model.V(bg.phi)
    assert np.max(abs(bg.H**2 * (3 - bg.eps1) / V - 1)) < 1e-12  # identity: rounding only
    N = np.linspace(bg.N_start + 0.01, bg.N_end - 0.01, 4001)
    p = bg.evaluate(N)
    assert np.max(abs(p.H**2 * (3 - p.eps1) / model.V(p.phi) - 1)) < 1e-12  # identity
    slope_error = abs(lnH_slope(bg, N) + p.eps1)
    assert np.max(slope_error) < 100 * len(bg.N) * rtol
    assert np.median(slope_error) < 100 * rtol


@pytest.mark.parametrize("name", ["bg_p05", "bg_p15"])
def test_pole_crossing(name, request):
    """T-model α = 1 with a pole at φ = 5 (p = 0.5, w = 0.1; p = 1.5, w = 0.004, below the
    p = 1.5 creeping threshold ≈ 0.0053 found by scanning w): one crossing with
    φ = φ0 there, ε2 = −2(3 − ε1) exactly at the pole, a USR window around it, χ from
    the ODE equal to ∫√K dφ through the pole, and the end of inflation."""
    bg = request.getfixturevalue(name)
    assert bg.valid, bg.reason
    (c,) = bg.crossings
    at = bg.evaluate(c.N_cross)
    # exact by construction: the crossing is the root of the chart coordinate u = φ − φ0
    # (scipy's event root to 4 eps in N), where 1/√K = 0 makes ε2 = −2(3 − ε1) identically
    assert abs(at.phi[0] - 5.0) < 1e-12
    assert abs(at.eps2[0] + 2 * (3 - at.eps1[0])) < 1e-9
    assert c.N_usr_start < c.N_cross < c.N_usr_end and c.usr_efolds > 0.05
    inside = bg.evaluate(np.linspace(c.N_usr_start + 1e-6, c.N_usr_end - 1e-6, 50))
    assert np.all(inside.eps2 < -3)
    assert c.N_near_start < c.N_usr_start and c.efolds_near > 1.0
    assert bg.N_start < c.N_cross < bg.N_end
    # nodes closer than 1e-6 to the pole are skipped: there the reference would rebuild
    # u = φ − φ0 from the rounded φ (the state knows u exactly; inflation.md §5.4)
    nodes = abs(bg.phi - 5.0) > 1e-6
    chi_quad = bg.model.canonical_field(bg.phi[nodes]) - bg.model.canonical_field(bg.phi[0])
    np.testing.assert_allclose(bg.chi[nodes] - bg.chi[0], chi_quad, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("model", [T_P05, T_P15])
def test_pole_crossing_is_well_conditioned(model):
    """N_end − N_cross agrees to 1e-6 between rtol 1e-10 and 1e-12 (measured ≤ 1e-8)."""
    a, b = (solve_background(model, rtol=r) for r in (1e-10, 1e-12))
    da, db = (x.N_end - x.crossings[0].N_cross for x in (a, b))
    assert abs(da - db) < 1e-6


@pytest.mark.parametrize("width, eps1_min, tol", [(0.03, 1.3e-9, 0.05), (0.035, 3e-17, 0.1)])
def test_usr_depth_of_reference_pole_model(width, eps1_min, tol):
    """Starobinsky V, K = 1 + c/|φ − 4.2|, start φ = 6: min ε1 = 1.3e-9 (c = 0.03) and
    3e-17 (c = 0.035) (shared/physics/inflation.md §5.5, computed; tolerance = the
    quoted digits).  Needs relative-only control of π (atol 1e-30)."""
    m = Model("starobinsky", kinetic="poles", poles=(Pole(4.2, width, 1.0),))
    bg = solve_background(m, phi_start=6.0)
    assert bg.valid and len(bg.crossings) == 1
    c = bg.crossings[0]
    eps1 = bg.evaluate(np.linspace(c.N_cross - 3, c.N_cross + 3, 6001)).eps1
    assert abs(eps1.min() / eps1_min - 1) < tol


def _reference_pole(c: float) -> Model:
    """Starobinsky V, K = 1 + c/|φ − 4.2| (inflation.md §5; start φ = 6)."""
    return Model("starobinsky", kinetic="poles", poles=(Pole(4.2, c, 1.0),))


def test_well_conditioned_reference_model_is_valid():
    """c = 0.035: valid, and N_end − N_cross agrees to 1e-6 between rtol 1e-10 and 1e-11
    (measured 3.5e-9; inflation.md §5.5: well conditioned up to c = 0.035, computed)."""
    a, b = (solve_background(_reference_pole(0.035), phi_start=6.0, rtol=r)
            for r in (1e-10, 1e-11))
    assert a.valid and b.valid, (a.reason, b.reason)
    da, db = (x.N_end - x.crossings[0].N_cross for x in (a, b))
    assert abs(da - db) < 1e-6, da - db
    assert a.eps1.min() > EPS1_FLOOR


@pytest.mark.parametrize("c", [0.045, 0.05])
@pytest.mark.parametrize("rtol", [1e-10, 5e-11, 1e-11])
def test_ill_conditioned_reference_model_is_invalid(c, rtol):
    """c ≥ 0.04: ε1 falls to 1e-32…1e-64 and the e-folds depend on the tolerance
    (inflation.md §5.5, computed; here measured min ε1 ≤ 2e-63 and N_end − N_cross of ~2,
    ~6 or ~113 e-folds depending on rtol): flagged invalid at every tolerance, by the floor."""
    bg = solve_background(_reference_pole(c), phi_start=6.0, rtol=rtol)
    assert not bg.valid
    assert bg.reason.startswith("ill-conditioned: eps1 falls to"), bg.reason
    assert bg.eps1.min() < EPS1_FLOOR


def test_start_at_rest_is_not_ill_conditioned():
    """π = 0 at the start only (velocity_start = 0) is well posed, not below the floor."""
    bg = solve_background(Model("starobinsky"), phi_start=5.5, velocity_start=0.0)
    assert bg.valid, bg.reason


def test_two_poles_switch_charts_at_the_midpoint():
    m = Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.004, 1.5), Pole(3.5, 0.05, 0.5)))
    bg = solve_background(m)
    assert bg.valid
    assert [c.position for c in bg.crossings] == [5.0, 3.5]
    assert [s.chart.pole for s in bg.segments] == [1, 1, 0, 0]  # sorted: 3.5 is pole 0
    mid = bg.evaluate(bg.segments[1].N1)
    assert abs(mid.phi[0] - 4.25) < 1e-12  # the switch is an event root: exact to 4 eps in N
    N = np.linspace(bg.N_start + 0.01, bg.N_end - 0.01, 2001)
    # default rtol 1e-10; dense output 100·rtol per step, accumulated over the steps
    # (common practice, see test_friedmann_residuals); measured 2.3e-8
    assert np.max(abs(lnH_slope(bg, N) + bg.evaluate(N).eps1)) < 100 * len(bg.N) * 1e-10


def test_plugin_kinetic_matches_analytic_pole():
    """A plug-in K with a listed singular point (power estimated, G frozen inside
    |u| < 1e-7·|φ0|) gives the analytic-pole background to 1e-8 e-folds (measured 7e-10)."""
    ref = solve_background(T_P05)
    plug = solve_background(Model("t_model", kinetic="plugin",
                                  kinetic_function="test_background:plugin_K_p05",
                                  kinetic_singular_points=(5.0,)))
    assert plug.valid and len(plug.crossings) == 1
    assert abs(plug.N_end - ref.N_end) < 1e-8
    assert abs(plug.crossings[0].N_cross - ref.crossings[0].N_cross) < 1e-8


def plugin_K_p05(phi):
    return 1.0 + (0.1 / abs(phi - 5.0)) ** 0.5


@pytest.mark.parametrize("kwargs, match", [
    (dict(model=Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.01, 2.0),))),
     "power 2 >= 2"),
    (dict(model=Model("t_model", kinetic="poles", poles=(Pole(6.0, 0.3, 1.0),)),
          phi_start=5.0, velocity_start=0.5), "turns back before the pole at phi = 6"),
    (dict(model=Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.006, 1.5),)),
          n_max=120.0), "did not end within n_max = 120"),
    (dict(model=Model("starobinsky"), phi_start=4.0, min_efolds=60.0), "too few e-folds"),
    (dict(model=Model("plugin", potential_function="test_background:plugin_V_nan"),
          phi_start=6.0), "non-finite"),
    (dict(model=T_P05, max_rhs_calls=500), "right-hand-side calls"),
    (dict(model=T_P05, max_restarts=0), "restarts"),
])
def test_invalid_models_are_values(kwargs, match):
    bg = solve_background(**kwargs)
    assert isinstance(bg, Background) and not bg.valid
    assert match in bg.reason


def test_contract_and_dense_output(bg_p05):
    bg = bg_p05
    for name in ("N", "phi", "chi", "dchi_dN", "H", "eps1", "eps2"):
        assert getattr(bg, name).shape == bg.N.shape
    assert bg.N[0] == bg.N_start and bg.N[-1] == bg.N_end and np.all(np.diff(bg.N) > 0)
    # the end is the event root of ε1 − 1 on the dense output, found to 4 eps in N by
    # scipy: |dε1/dN|·4 eps·N_end ~ 1e-13 (measured 1.2e-14), not the integration error
    assert abs(bg.eps1[-1] - 1) < 1e-12
    p = bg.evaluate(bg.N)  # at its own nodes the dense output returns the node values
    assert isinstance(p, BackgroundPoint)
    for name in ("phi", "chi", "dchi_dN", "H", "eps1"):
        np.testing.assert_allclose(getattr(p, name), getattr(bg, name), rtol=1e-13)
    with pytest.raises(ValueError):
        bg.evaluate(bg.N_end + 1.0)
    clone = pickle.loads(pickle.dumps(bg))
    np.testing.assert_array_equal(clone.evaluate([10.0, 50.0]).H, bg.evaluate([10.0, 50.0]).H)


def test_auto_start_gives_enough_efolds():
    """The automatic start gives ≥ N* + 15 slow-roll e-folds; poles only add e-folds."""
    plain = solve_background(Model("t_model"), efolds_auto=70.0)
    assert 69.0 < plain.N_end - plain.N_start < 72.0
    with_pole = solve_background(T_P15, efolds_auto=70.0)
    assert with_pole.phi[0] == plain.phi[0] and with_pole.N_end > plain.N_end + 1
