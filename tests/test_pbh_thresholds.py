"""f_PBH with a collapse threshold per spectrum (scan.observables.pbh.threshold_plan).

Reference: the single-threshold plan :func:`scan.observables.pbh.plan_pbh`, whose physics is tested
in tests/test_pbh.py against shared/physics/observables.md sect. 5-6 (Carr et al. 2010,
arXiv:0912.5297; Young, Musco & Byrnes 2019, arXiv:1904.00984).  The per-row plan
evaluates the same formulas with the same quadrature, so it must agree to rounding.

Tolerances (common practice): rtol = 1e-12 -- the two codes group the same operations
differently and exp() of arguments up to nu^2/2 ~ 760 turns a few ulp into ~1e-13; this
is far inside the |Delta ln f| <= 1e-3 a sampler needs (d ln f / d ln A ~ 30,
observables.md sect. 6, so 1e-3 in ln f is 3e-5 in the amplitude).  atol = 1e-250 --
below that both codes form terms from subnormal exponentials (IEEE 754 binary64 normal
numbers end at 2.2e-308) and lose digits; such f are physically zero.
"""
import dataclasses
import math

import numpy as np
import pytest
from scipy import optimize

from scan.observables import cosmo
from scan.observables.pbh import PBHConventions, plan_pbh, plan_pbh_thresholds
from scan.observables.pbh.thresholds import compaction_linear_threshold

K_IN = np.geomspace(1e9, 1e15, 300)
M_OUT = np.geomspace(float(cosmo.horizon_mass_msun(K_IN[-1])) * 1e-3,
                     float(cosmo.horizon_mass_msun(K_IN[0])), 32)
RTOL, ATOL = 1e-12, 1e-250
#: Threshold ranges: C_th in [0.4, 0.6] and delta_c in [0.41, 0.6] span the values of
#: observables.md sect. 5.3 (Harada, Yoo & Kohri 2013: 0.41; Musco 2019: up to 2/3).
RANGES = {"compaction": (0.4, 0.6), "press-schechter": (0.41, 0.6), "peaks": (0.41, 0.6)}
CASES = [(c, mf) for c in ("compaction", "press-schechter", "peaks")
         for mf in ("critical", "monochromatic")]
#: log-normal peaks (ln k_star, width) and the f_PBH,total each is tuned to at the
#: middle of the threshold range: 1e-10 ... 1.
PEAKS = [(math.log(10**e), d) for e, d in [(10.5, 0.3), (11.0, 1.0), (11.5, 0.1),
                                             (12.0, 0.5), (12.5, 0.7), (13.0, 0.2),
                                             (13.5, 0.4), (12.2, 0.3)]]
TARGETS = np.logspace(-10, 0, len(PEAKS))


def _lognormal(ln_k_star: float, width: float) -> np.ndarray:
    """Unit-amplitude log-normal peak of P_zeta on K_IN."""
    return np.exp(-(np.log(K_IN) - ln_k_star)**2 / (2 * width**2))


def _conv(criterion: str, mass_function: str, threshold: float) -> PBHConventions:
    return PBHConventions(criterion=criterion, mass_function=mass_function,
                          threshold=threshold)


def _tuned_spectra(conv: PBHConventions) -> np.ndarray:
    """PEAKS with amplitudes giving f_PBH,total = TARGETS at ``conv.threshold``."""
    plan = plan_pbh(K_IN, M_OUT, conv)
    rows = []
    for (lk, d), target in zip(PEAKS, TARGETS):
        shape = _lognormal(lk, d)
        ln_a = optimize.brentq(
            lambda la: math.log(plan.evaluate(math.exp(la) * shape).f_pbh_total
                                + 1e-300) - math.log(target), math.log(1e-4),
            math.log(1.0), xtol=1e-6)
        rows.append(math.exp(ln_a) * shape)
    return np.array(rows)


@pytest.mark.parametrize("criterion, mass_function", CASES)
def test_rows_equal_single_threshold_plans(criterion, mass_function):
    # every row at its own threshold equals plan_pbh at that threshold (random thresholds
    # and both ends of the range; spectra with f_PBH,total from 1e-10 to 1 at the middle
    # of the range, and a row without power)
    lo, hi = RANGES[criterion]
    mid = _conv(criterion, mass_function, 0.5 * (lo + hi))
    P = _tuned_spectra(mid)
    rng = np.random.default_rng(7)
    P = np.vstack([np.repeat(P, 3, axis=0), np.zeros(K_IN.size)])
    t = rng.uniform(lo, hi, P.shape[0])
    t[:2] = lo, hi
    res = plan_pbh_thresholds(K_IN, M_OUT, mid, (lo, hi)).evaluate(P, t)
    exact = [plan_pbh(K_IN, M_OUT, dataclasses.replace(mid, threshold=tj)).evaluate(row)
             for row, tj in zip(P, t)]
    tot = np.array([e.f_pbh_total for e in exact])
    f = np.array([e.f_pbh for e in exact])
    assert res.f_pbh.shape == (P.shape[0], M_OUT.size) and res.f_pbh_total.shape == t.shape
    np.testing.assert_array_equal(res.threshold, t)
    np.testing.assert_allclose(res.f_pbh_total, tot, rtol=RTOL, atol=ATOL)
    np.testing.assert_allclose(res.f_pbh, f, rtol=RTOL, atol=ATOL)
    np.testing.assert_allclose(res.sigma2, [e.sigma2 for e in exact], rtol=RTOL, atol=0)
    # the check covered what it claims: totals from <= 1e-10 to ~1 (and beyond, at
    # thresholds below the middle) among rows with f_total > 1e-30
    relevant = tot[tot > 1e-30]
    assert relevant.min() < 1e-10 and relevant.max() > 0.3
    assert np.all(np.isfinite(res.f_pbh)) and res.f_pbh_total[-1] == 0


@pytest.mark.parametrize("criterion, mass_function", CASES)
def test_common_threshold_equals_fixed_plan(criterion, mass_function):
    # one number for all rows, and a single spectrum, reproduce PBHPlan.evaluate
    lo, hi = RANGES[criterion]
    conv = _conv(criterion, mass_function, 0.47)
    P = np.array([a * _lognormal(math.log(10**e), d) for a, e, d in
                  [(3e-2, 11, 0.3), (6e-2, 12, 1.0), (1e-1, 13, 0.2), (0.0, 12, 1.0)]])
    fixed = plan_pbh(K_IN, M_OUT, conv).evaluate(P)
    plan = plan_pbh_thresholds(K_IN, M_OUT, conv, (lo, hi))
    res = plan.evaluate(P, 0.47)
    np.testing.assert_allclose(res.f_pbh_total, fixed.f_pbh_total, rtol=RTOL, atol=ATOL)
    np.testing.assert_allclose(res.f_pbh, fixed.f_pbh, rtol=RTOL, atol=ATOL)
    default = plan.evaluate(P)                      # no threshold: conventions.threshold
    np.testing.assert_array_equal(default.f_pbh_total, res.f_pbh_total)
    one = plan.evaluate(P[1], 0.47)
    assert isinstance(one.f_pbh_total, float) and one.f_pbh.shape == (M_OUT.size,)
    assert one.f_pbh_total == pytest.approx(fixed.f_pbh_total[1], rel=RTOL)
    assert one.threshold == 0.47


@pytest.mark.parametrize("criterion, mass_function", CASES)
def test_no_power_gives_exact_zero(criterion, mass_function):
    # P_zeta = 0 forms no black holes at any threshold: f = 0 exactly, no NaN
    lo, hi = RANGES[criterion]
    plan = plan_pbh_thresholds(K_IN, M_OUT, _conv(criterion, mass_function, lo), (lo, hi))
    res = plan.evaluate(np.zeros((3, K_IN.size)), [lo, 0.5 * (lo + hi), hi])
    assert np.all(res.f_pbh == 0) and np.all(res.f_pbh_total == 0)


@pytest.mark.parametrize("criterion, mass_function", CASES)
def test_higher_threshold_fewer_black_holes(criterion, mass_function):
    # a higher threshold can only lower the abundance (the Gaussian tail above it)
    lo, hi = RANGES[criterion]
    plan = plan_pbh_thresholds(K_IN, M_OUT, _conv(criterion, mass_function, lo), (lo, hi))
    t = np.linspace(lo, hi, 41)
    P = np.tile(5e-2 * _lognormal(math.log(1e12), 0.5), (t.size, 1))
    tot = plan.evaluate(P, t).f_pbh_total
    assert np.all(tot > 0) and np.all(np.diff(tot) < 0)


@pytest.mark.parametrize("criterion", ["compaction", "press-schechter"])
@pytest.mark.parametrize("amplitude", [1e-2, 2e-2])
def test_gaussian_tail_slope(criterion, amplitude):
    # Press-Schechter abundance summed over formation epochs: ln f = -y^2/(2 sigma^2_max)
    # - ln y (erfc asymptotics, Abramowitz & Stegun 7.1.23) - ln y (Laplace's method over
    # epochs, width ~ sigma/y) + const, so d ln f / d y_th = -y/sigma^2_max - 2/y; the
    # next terms are O(1/nu^4) and the grid maximum of sigma^2 is off by < 2e-3
    # (common practice: 1% tolerance at nu^2 = y^2/sigma^2 > 200)
    conv = _conv(criterion, "monochromatic", 0.5)
    plan = plan_pbh_thresholds(K_IN, M_OUT, conv, RANGES[criterion])
    t = np.array([0.5 - 1e-4, 0.5 + 1e-4])
    res = plan.evaluate(np.tile(amplitude * _lognormal(math.log(1e12), 0.3), (2, 1)), t)
    y = np.array([compaction_linear_threshold(v) for v in t]) if criterion == "compaction" \
        else t
    slope = np.diff(np.log(res.f_pbh_total))[0] / np.diff(y)[0]
    s2, y0 = res.sigma2.max(), y.mean()
    assert y0**2 / s2 > 200
    assert slope == pytest.approx(-y0 / s2 - 2 / y0, rel=1e-2)


def test_thresholds_outside_the_range_are_refused():
    conv = _conv("compaction", "critical", 0.5)
    plan = plan_pbh_thresholds(K_IN, M_OUT, conv, (0.45, 0.55))
    P = np.zeros((2, K_IN.size))
    with pytest.raises(ValueError, match=r"C_th = 0\.56 \(row 1\).*\[0\.45, 0\.55\]"):
        plan.evaluate(P, [0.5, 0.56])
    with pytest.raises(ValueError, match=r"\[0\.45, 0\.55\]"):
        plan.evaluate(P, [np.nan, 0.5])
    with pytest.raises(ValueError, match="shape"):
        plan.evaluate(P, [0.5, 0.5, 0.5])
    domain = plan_pbh_thresholds(K_IN, M_OUT, conv)           # default: 0 < C_th < 2/3
    with pytest.raises(ValueError, match=r"domain \(0\.0, 0\.666"):
        domain.evaluate(P, [0.5, 2 / 3])
    linear = plan_pbh_thresholds(K_IN, M_OUT, _conv("press-schechter", "critical", 0.5))
    assert linear.evaluate(P, [0.3, 1.2]).f_pbh_total.shape == (2,)
    with pytest.raises(ValueError, match=r"delta_c = 0\.0 \(row 0\)"):
        linear.evaluate(P, [0.0, 0.5])
    for bad in [(0.5, 0.7), (0.0, 0.5), (0.55, 0.45)]:
        with pytest.raises(ValueError, match="threshold_range"):
            plan_pbh_thresholds(K_IN, M_OUT, conv, bad)
