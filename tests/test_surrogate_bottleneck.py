"""The bottleneck input of the emulator: boundary plane, coordinate, and its gain on a
saddle-node observable.

The toy observable is the passage time through a saddle-node bottleneck,
N(r) = int_{-X}^{X} dx / (r + x^2) = (2/sqrt r) arctan(X/sqrt r) -> pi/sqrt(r) as r -> 0
(Strogatz 2015, *Nonlinear Dynamics and Chaos*, 2nd ed., section 4.3), with r a linear
function of two parameters and r <= 0 invalid (the flow is stuck) -- the structure the
e-folds spent at a kinetic pole have near the models that never end inflation.
"""
from __future__ import annotations

import numpy as np
import pytest
import scipy.integrate
from scipy.stats import qmc

import scan.surrogate.emulator as emulator_module
from scan.config import load_config_text
from scan.surrogate.bottleneck import Bottleneck, augment, boundary_plane, candidates
from scan.surrogate.emulator import TrainingSet, fit_emulator, predict_unit
from scan.surrogate.identity import identity
from scan.surrogate.space import ParameterSpace
from scan.surrogate.surrogate_file import read_surrogate, write_surrogate
from scan.surrogate.validate import validate

X_SHAPE = np.linspace(-3.0, 3.0, 41)
EDGE = 2.0  # the bottleneck is crossed from x = -EDGE to x = +EDGE


def distance_parameter(u: np.ndarray) -> np.ndarray:
    """r(u): the toy's control parameter (r > 0: the flow gets through)."""
    return 0.8 * u[:, 0] - 0.4 * u[:, 1] - 0.1


def passage_efolds(r: np.ndarray) -> np.ndarray:
    """Exact passage time of dx/dN = r + x^2 from -EDGE to EDGE (r > 0)."""
    root = np.sqrt(r)
    return 2.0 / root * np.arctan(EDGE / root)


def toy_set(u: np.ndarray) -> TrainingSet:
    """Targets of the toy at unit-cube points (valid where r > 0)."""
    r = distance_parameter(u)
    valid = r > 0
    efolds = np.where(valid, passage_efolds(np.where(valid, r, 1.0)), np.nan)
    width = 0.8 + 0.3 * u[:, 1]
    scalars = np.column_stack([20.0 + efolds + 2.0 * u[:, 1], -4.0 + 0.1 * efolds,
                               0.96 + 0.01 * u[:, 0], -3.0 + 0.1 * u[:, 1],
                               -9.0 + 0.2 * u[:, 0], 55.0 - 0.1 * efolds])
    scalars[~valid] = np.nan
    shapes = -0.5 * (X_SHAPE[None, :] / width[:, None]) ** 2 * np.log10(np.e)
    return TrainingSet(u, valid, scalars, shapes, X_SHAPE)


def test_passage_time_matches_the_saddle_node_law():
    """The closed form used by the toy against direct quadrature, and its r -> 0 limit
    pi/sqrt(r) (Strogatz 2015, section 4.3)."""
    for r in (1e-4, 1e-2, 0.3):
        # the reference asks QUADPACK for 1e-13 relative (its default 1.5e-8 estimated
        # only 3e-9 at r = 1e-4, which could not back a 1e-10 check; measured: 2 ulp)
        direct = scipy.integrate.quad(lambda x: 1.0 / (r + x * x), -EDGE, EDGE, points=[0.0],
                                      limit=200, epsabs=0.0, epsrel=1e-13)[0]
        assert passage_efolds(np.array([r]))[0] == pytest.approx(direct, rel=1e-10)
    r = 1e-8
    assert passage_efolds(np.array([r]))[0] * np.sqrt(r) == pytest.approx(np.pi, rel=1e-4)


def test_boundary_plane_recovers_a_known_plane():
    rng = np.random.default_rng(4)
    u = rng.random((400, 3))
    normal = np.array([0.6, -0.48, 0.64])            # a unit vector
    valid = u @ normal - 0.1 > 0
    found, offset = boundary_plane(u, valid)
    angle = np.degrees(np.arccos(np.clip(found @ normal, -1.0, 1.0)))
    assert angle < 3.0                                 # common practice: a few degrees
    assert offset == pytest.approx(-0.1, abs=0.02)
    assert np.all((u @ found + offset > 0) == valid)   # it separates the training labels


def test_no_plane_without_both_labels():
    u = np.random.default_rng(5).random((50, 2))
    assert boundary_plane(u, np.ones(50, bool)) is None
    assert candidates(u, np.ones(50, bool)) == []
    assert boundary_plane(u, np.arange(50) < 2) is None   # 2 < MIN_PER_LABEL invalid


def test_coordinate_is_one_at_the_boundary_and_decays_as_an_inverse_root():
    bn = Bottleneck(np.array([1.0, 0.0]), -0.2, 0.05, 0.01)
    u = np.array([[0.1, 0.5], [0.25, 0.3], [0.26, 0.3], [1.2, 0.0]])
    tau = bn.coordinate(u)
    assert tau[0] == 1.0 and tau[1] == 1.0              # s <= s_min
    assert tau[2] == pytest.approx(np.sqrt(0.01 / (0.01 + 0.01)), rel=1e-12)
    assert tau[3] == pytest.approx(np.sqrt(0.01 / (0.95 + 0.01)), rel=1e-12)
    assert augment(u, bn).shape == (4, 3) and augment(u, None).shape == (4, 2)


def _errors(em, hold: TrainingSet) -> np.ndarray:
    pred = predict_unit(em, hold.u)
    good = hold.valid & pred.valid
    return np.abs(pred.ln_k_peak[good] - hold.scalars[good, 0])


def test_the_bottleneck_input_is_chosen_and_pays_on_a_saddle_node_observable(monkeypatch):
    train = toy_set(qmc.Sobol(2, scramble=True, seed=1).random(128))
    hold = toy_set(np.random.default_rng(2).random((300, 2)))
    em = fit_emulator(train)
    assert "peak" in em.bottleneck_blocks and em.bottleneck is not None
    with_input = _errors(em, hold)
    monkeypatch.setattr(emulator_module, "candidates", lambda u, valid: [])
    plain = fit_emulator(train)
    assert plain.bottleneck is None and plain.bottleneck_blocks == ()
    without = _errors(plain, hold)
    # measured: 95th percentile 0.0014 against 2.3 e-folds (N reaches 42 in training)
    assert np.percentile(with_input, 95) < 0.01 * np.percentile(without, 95)
    assert np.percentile(with_input, 95) < 0.01


def test_a_surrogate_file_keeps_the_bottleneck(tmp_path):
    train = toy_set(qmc.Sobol(2, scramble=True, seed=1).random(64))
    hold = toy_set(np.random.default_rng(2).random((40, 2)))
    em = fit_emulator(train)
    assert em.bottleneck is not None
    space = ParameterSpace(("model.poles[0].position", "model.poles[0].sharpness"),
                           ("uniform", "uniform"), (4.7, 0.6), (5.3, 1.6))
    cfg = load_config_text('[model]\npotential = "t_model"\nkinetic = "poles"\n'
                           '[[model.poles]]\nposition = 5.0\nsharpness = 1.0\npower = 1.0\n', "toy.toml")
    out = tmp_path / "surrogate.h5"
    write_surrogate(out, cfg, space, em, validate(em, train, hold), identity(cfg, space))
    back, _ = read_surrogate(out)
    assert back.bottleneck_blocks == em.bottleneck_blocks
    assert np.array_equal(back.bottleneck.normal, em.bottleneck.normal)
    a, b = predict_unit(em, hold.u), predict_unit(back, hold.u)
    assert np.array_equal(a.ln_k_peak, b.ln_k_peak) and np.array_equal(a.n_s, b.n_s)
