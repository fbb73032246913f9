"""Tests of scan.models: potentials, kinetic poles, plug-ins and the canonical field."""
from __future__ import annotations

import math
import pickle
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import hyp2f1

from scan.errors import ConfigError
from scan.models import Model, Pole, estimate_power, model_from_section

PHI = np.linspace(0.3, 8.0, 17)
ALG = dict(weight="alg", epsabs=0.0, epsrel=1e-13)  # scipy QAWS, tight


# plug-ins used below (importable as "test_models:..." because pytest puts tests/ on sys.path)
def plugin_V(phi):
    """T-model α = 1 written independently."""
    return np.tanh(phi / math.sqrt(6.0)) ** 2


def plugin_K(phi):
    """One pole: K = 1 + (0.1/|φ − 1|)^0.7."""
    return 1.0 + (0.1 / abs(phi - 1.0)) ** 0.7


def chi_closed_form(u: float, p: float, c: float) -> float:
    """χ − χ0 = sign(u)(√c|u|^q/q) ₂F₁(−½, q/p; 1 + q/p; −|u|^p/c), K = 1 + c|u|^{-p}
    (shared/physics/inflation.md §1.1, derived there; verified vs quad)."""
    q = 1.0 - p / 2.0
    return math.copysign(math.sqrt(c) * abs(u) ** q / q, u) * hyp2f1(
        -0.5, q / p, 1.0 + q / p, -abs(u) ** p / c)


def complex_step(f, x, h=1e-30):
    """f′(x) = Im f(x + ih)/h: exact to rounding for analytic f (common practice)."""
    return np.imag(f(x + 1j * h)) / h


@pytest.mark.parametrize("model, V", [
    (Model("t_model", alpha=1.0), lambda x: np.tanh(x / np.sqrt(6.0)) ** 2),
    (Model("t_model", alpha=10.0), lambda x: np.tanh(x / np.sqrt(60.0)) ** 2),
    (Model("e_model", alpha=3.0), lambda x: (1 - np.exp(-np.sqrt(2 / 9.0) * x)) ** 2),
    (Model("starobinsky"), lambda x: (1 - np.exp(-np.sqrt(2 / 3.0) * x)) ** 2),
    (Model("monomial", exponent=2.0), lambda x: x ** 2),
    (Model("monomial", exponent=4.0 / 3.0), lambda x: x ** (4.0 / 3.0)),
    (Model("exponential", slope=0.3), lambda x: np.exp(-0.3 * x)),
])
def test_potentials_and_derivatives(model, V):
    """V against the textbook formula; dV against a complex-step derivative (1e-13)."""
    np.testing.assert_allclose(model.V(PHI), V(PHI), rtol=1e-14)
    np.testing.assert_allclose(model.dV(PHI), complex_step(V, PHI), rtol=1e-13)
    assert np.ndim(model.V(2.0)) == 0 and np.ndim(model.dV(np.ones(3))) == 1


def test_starobinsky_is_e_model_alpha_one():
    np.testing.assert_allclose(Model("starobinsky").V(PHI), Model("e_model", alpha=1.0).V(PHI),
                               rtol=1e-15)


def test_plugin_potential_numerical_derivative():
    """The 6th-order central difference (h = 6e-3): error ≲ 1e-12·max|V| (measured 1.5e-13)."""
    m = Model("plugin", potential_function="test_models:plugin_V")
    ref = Model("t_model", alpha=1.0)
    np.testing.assert_allclose(m.V(PHI), ref.V(PHI), rtol=1e-15)
    assert np.max(abs(m.dV(PHI) - ref.dV(PHI))) < 1e-12 * np.max(ref.V(PHI))
    with_derivative = Model("plugin", potential_function="numpy:cosh",
                            potential_derivative="numpy:sinh")
    np.testing.assert_allclose(with_derivative.dV(PHI), np.sinh(PHI), rtol=1e-15)


def test_model_is_frozen_hashable_picklable_and_lazy():
    m = Model("t_model", kinetic="poles", poles=(Pole(5.0, 0.01, 1.0),))
    assert hash(m) == hash(pickle.loads(pickle.dumps(m)))
    assert pickle.loads(pickle.dumps(m)) == m
    with pytest.raises(Exception):
        m.alpha = 2.0  # type: ignore[misc]
    lazy = Model("plugin", potential_function="no_such_module_xyz:V")  # not imported yet
    with pytest.raises(ConfigError, match="cannot load plug-in"):
        lazy.V(1.0)


@pytest.mark.parametrize("kwargs, match", [
    (dict(potential="quartic"), "unknown potential"),
    (dict(potential="t_model", kinetic="poles"), "no pole"),
    (dict(potential="t_model", kinetic="poles", poles=(Pole(1.0, 0.0, 1.0),)), "width"),
    (dict(potential="t_model", kinetic="poles", poles=(Pole(1.0, 0.1, -1.0),)), "power"),
    (dict(potential="t_model", alpha=-1.0), "alpha"),
    (dict(potential="plugin"), "potential_function"),
])
def test_bad_models_raise_config_error(kwargs, match):
    with pytest.raises(ConfigError, match=match):
        Model(**kwargs)


def test_pole_kinetic_function():
    m = Model("t_model", kinetic="poles", poles=(Pole(1.0, 0.03, 1.0), Pole(3.0, 0.1, 0.5)))
    x = np.array([0.0, 2.0, 4.0])
    expected = 1 + 0.03 / abs(x - 1.0) + (0.1 / abs(x - 3.0)) ** 0.5
    np.testing.assert_allclose(m.K(x), expected, rtol=1e-15)
    assert np.isinf(m.K(1.0))
    assert Model("t_model").K(2.0) == 1.0


@pytest.mark.parametrize("p", [0.5, 1.0, 1.5])
@pytest.mark.parametrize("c", [2e-3, 0.03, 1.0])
def test_canonical_field_against_hypergeometric_closed_form(p, c):
    """Across and up to a pole vs the ₂F₁ closed form: required 1e-8, measured ≲ 1e-13."""
    m = Model("t_model", kinetic="poles", poles=(Pole(2.0, c ** (1.0 / p), p),))
    for u in (-1.3, -0.5, -0.001, 0.25, 0.5, 3.0):  # u exactly representable as 2 + u
        ref = chi_closed_form(u, p, c)
        assert abs(float(m.canonical_field(2.0 + u, phi_ref=2.0)) / ref - 1) < 1e-8
    across = float(m.canonical_field(2.5, phi_ref=1.5))
    ref = chi_closed_form(0.5, p, c) - chi_closed_form(-0.5, p, c)
    assert abs(across / ref - 1) < 1e-8


def test_canonical_field_check_value():
    """p = 1, c = 0.03, u = 0.5: 0.5782172829775 (shared/physics/inflation.md §7 #20,
    computed: ₂F₁ formula vs quad)."""
    m = Model("t_model", kinetic="poles", poles=(Pole(1.0, 0.03, 1.0),))
    # QAWS at epsrel 1e-12 (6e-13 here) plus half a unit of the value's 13th digit (5e-14)
    assert abs(float(m.canonical_field(1.5, phi_ref=1.0)) - 0.5782172829775) < 1e-12


def test_canonical_field_two_poles_vectorised_and_additive():
    m = Model("t_model", kinetic="poles", poles=(Pole(1.0, 0.02, 1.0), Pole(1.5, 0.05, 0.5)))
    x = np.array([0.2, 1.0, 1.25, 1.5, 2.5])
    chi = m.canonical_field(x)
    assert chi.shape == x.shape and np.all(np.diff(chi) > 0)
    # the same integral assembled from pieces with scipy quad's algebraic weight directly
    poles = {1.0: (1.0, 0.02), 1.5: (0.5, 0.05 ** 0.5)}

    def Kreg(f, x0, p):  # √(|u|^p K), written out so that it is finite at the pole
        (xo, (po, co)), = [(k, v) for k, v in poles.items() if k != x0]
        return math.sqrt(abs(f - x0) ** p * (1 + co * abs(f - xo) ** -po) + poles[x0][1])
    pieces = [quad(Kreg, 0.2, 1.0, args=(1.0, 1.0), wvar=(0, -0.5), **ALG)[0],
              quad(Kreg, 1.0, 1.25, args=(1.0, 1.0), wvar=(-0.5, 0), **ALG)[0],
              quad(Kreg, 1.25, 1.5, args=(1.5, 0.5), wvar=(0, -0.25), **ALG)[0],
              quad(Kreg, 1.5, 2.5, args=(1.5, 0.5), wvar=(-0.25, 0), **ALG)[0]]
    np.testing.assert_allclose(np.diff(chi), pieces, rtol=1e-10)
    # χ's own quadrature asks QAWS for epsrel 1e-12 per piece (models/canonical.py), the
    # reference 1e-13: their sum bounds the difference (1e-12 left none for the reference)
    np.testing.assert_allclose(chi[2], chi[1] + pieces[1], rtol=1e-12 + 1e-13)


def test_plugin_kinetic_singular_point():
    """The plug-in pole's power is estimated to 1e-6; χ agrees with the analytic pole."""
    p, w = estimate_power(plugin_K, 1.0)
    assert abs(p - 0.7) < 1e-6 and abs(w - 0.1) < 1e-4
    plug = Model("t_model", kinetic="plugin", kinetic_function="test_models:plugin_K",
                 kinetic_singular_points=(1.0,))
    ref = Model("t_model", kinetic="poles", poles=(Pole(1.0, 0.1, 0.7),))
    x = np.array([0.5, 1.0, 2.0])
    np.testing.assert_allclose(plug.canonical_field(x), ref.canonical_field(x), rtol=1e-9)


def test_model_from_config_section():
    section = SimpleNamespace(potential="t_model", alpha=2.0, exponent=2.0, slope=0.2,
                              kinetic="poles", poles=(SimpleNamespace(position=1.6, width=0.02,
                                                                      power=1.0),),
                              potential_function="", potential_derivative="",
                              kinetic_function="", kinetic_singular_points=())
    m = model_from_section(section)
    assert m == Model("t_model", alpha=2.0, kinetic="poles", poles=(Pole(1.6, 0.02, 1.0),))


def test_epsilon_V_monomial():
    """ε_V = n²/(2φ²) for V = φⁿ (textbook, Liddle & Lyth 2000)."""
    np.testing.assert_allclose(Model("monomial", exponent=2.0).epsilon_V(PHI), 2 / PHI**2,
                               rtol=1e-14)


def test_sharpness_fixes_the_width_from_the_potential_slope():
    # T-model alpha = 1, V = tanh^2(phi/sqrt 6) (Kallosh & Linde 2013, arXiv:1306.5220):
    # V'/V = 4/(sqrt(6) sinh(2 phi/sqrt(6))) differentiated by hand;
    # w = (1 - p/2)|V'/V|/lambda (definition of model.poles[].sharpness).
    from scan.config import load_config_text

    text = ('[model]\npotential = "t_model"\nkinetic = "poles"\n[[model.poles]]\n'
            'position = 5.2\nsharpness = 0.9\npower = 1.2\n')
    model = model_from_section(load_config_text(text, source="s.toml").model)
    slope = 4.0 / (math.sqrt(6.0) * math.sinh(2.0 * 5.2 / math.sqrt(6.0)))
    assert model.poles[0].width == pytest.approx((1.0 - 0.6) * slope / 0.9, rel=1e-13)


def test_sharpness_is_the_canonical_eta_at_a_p1_pole():
    # For p = 1 the canonical potential near the pole is V(phi_1)(1 + lambda sign(chi) chi^2/2)
    # (derivation in scan.models.types.width_from_sharpness): check d^2 ln V / d chi^2
    # numerically from chi(phi) on both sides.
    from scan.models.types import width_from_sharpness

    base = Model("t_model")
    w = width_from_sharpness(base, 5.0, 1.0, 0.8)
    model = Model("t_model", kinetic="poles", poles=(Pole(5.0, w, 1.0),))
    for sign in (-1.0, 1.0):
        u = sign * np.geomspace(1e-8, 1e-6, 5) * w   # corrections O(|u|/w) from the 1 in K
        chi = model.canonical_field(5.0 + u, 5.0)
        dv = model.dV(5.0 + 0.5 * u) * u / model.V(5.0)  # midpoint rule: no cancellation
        eta = 2.0 * dv / (np.sign(chi) * chi ** 2)
        assert eta == pytest.approx(0.8, rel=1e-5)


def test_sharpness_and_width_together_are_refused():
    from scan.config import load_config_text

    text = ('[model]\npotential = "t_model"\nkinetic = "poles"\n[[model.poles]]\n'
            'position = 5.2\nsharpness = 0.9\nwidth = 0.02\npower = 1.0\n')
    with pytest.raises(ConfigError, match="exactly one of width, sharpness, wall_ratio and"):
        load_config_text(text, source="s.toml")
