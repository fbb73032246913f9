"""The four pole models of issue 16 (one per pole-power regime), shared by the accuracy
test ``tests/test_exact_reference.py`` and the benchmark ``tests/bench/bench_exact.py``.

One kinetic pole in the α = 1 T-model, K = 1 + (w/|φ − 5|)^p with the width set by the
pole's sharpness λ; CMB pivot k* = 0.05 Mpc⁻¹, ln(10¹⁰A_s) = 3.044, instant reheating,
128 base modes, every other setting at its default.
"""
from __future__ import annotations

#: Pole power p -> sharpness λ.
MODELS: dict[float, float] = {0.5: 0.3, 1.0: 1.0, 1.5: 3.0, 1.9: 6.0}

#: Computed by commit 1e89497 (scipy solve_ivp throughout) at default settings for the
#: configs of :func:`config_text`: p -> (P_peak, k_peak [Mpc^-1], n_s, max Omega_GW h^2).
REFERENCE_1E89497: dict[float, tuple[float, float, float, float]] = {
    0.5: (2.45063350282261e-08, 85692666.73041534, 0.9683279455691217, 4.604283432385395e-21),
    1.0: (0.00016178445663366482, 4724844092.927332, 0.9550183442124024,
          2.0361011787795458e-13),
    1.5: (0.0001417535920687344, 590673061.6233627, 0.9551097680324614,
          1.6264688901679175e-13),
    1.9: (5.367710903024482e-07, 16388439557023.082, 0.9634038878149993,
          1.8418649338615542e-18),
}


def config_text(power: float, sharpness: float) -> str:
    """The run config (TOML) of one model; readable by commit 1e89497 and by today's tree."""
    return f"""[run]
name = "exact_p{power}"
[model]
potential = "t_model"
alpha = 1.0
kinetic = "poles"
[[model.poles]]
position = 5.0
sharpness = {sharpness!r}
power = {power!r}
[pivot]
k_star = 0.05
reheating = "instant"
ln_1e10_As = 3.044
[modes]
n_k = 128
"""
