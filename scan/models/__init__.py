"""Inflation model families for L = ½K(φ)(∂φ)² − V(φ) in reduced Planck units (M_p = 1).

Every potential is the *shape* V/V0 with V0 = 1: V0 is fixed later by the CMB
normalisation and never enters the background in e-folds.

Potentials (``Model.potential``)
    ``t_model``      tanh²(φ/√(6α))                      (Kallosh & Linde 2013, 1306.5220)
    ``e_model``      (1 − exp(−√(2/(3α)) φ))²
    ``starobinsky``  the E-model with α = 1                (Starobinsky 1980)
    ``monomial``     |φ|ⁿ
    ``exponential``  exp(−λφ): power-law inflation, ε1 = λ²/2 (Lucchin & Matarrese 1985)
    ``plugin``       a user function "package.module:function"; its derivative is a plug-in
                     too or a 6th-order central difference (see :func:`central_derivative`).

Kinetic functions (``Model.kinetic``)
    ``canonical``    K = 1
    ``poles``        K = 1 + Σᵢ (wᵢ/|φ − φᵢ|)^{pᵢ}, integrable for 0 < pᵢ < 2
    ``plugin``       a user K(φ) with a list of singular points; each point's power is
                     estimated numerically (:func:`estimate_power`).

Plug-in functions must accept a float and return a float; arrays are tried first and a
Python loop is the fallback.  Names are resolved lazily, so a :class:`Model` stays small,
hashable and picklable.
"""
from scan.models.canonical import canonical_field
from scan.models.functions import (FD_STEP, Kernel, Singular, central_derivative, estimate_power,
                                   kernel, kinetic_functions, resolve)
from scan.models.types import (KINETICS, POTENTIALS, Model, Pole, model_from_section,
                               pole_number)

__all__ = ["FD_STEP", "KINETICS", "POTENTIALS", "Kernel", "Model", "Pole", "Singular",
           "canonical_field", "central_derivative", "estimate_power", "kernel",
           "kinetic_functions", "model_from_section", "pole_number", "resolve"]
