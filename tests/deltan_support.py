"""Plug-in potentials for the delta-N tests (V0 = 1, field in M_p).

An exactly flat plateau for phi > PHI_E (ultra-slow roll: V' = 0) joined at PHI_E to a
linear slope V = 1 + SLOPE (phi - PHI_E) below it (slow roll with V'/V = SLOPE); with
SLOPE = 0 the potential is flat everywhere.  The test sets SLOPE before building a Model.
"""
import numpy as np

PHI_E = -5e-4
SLOPE = {"value": 1.5e-3}


def kink(phi):
    """V(phi): flat above PHI_E, linear below."""
    phi = np.asarray(phi, dtype=float)
    return np.where(phi > PHI_E, 1.0, 1.0 + SLOPE["value"] * (phi - PHI_E))


def kink_derivative(phi):
    """V'(phi)."""
    phi = np.asarray(phi, dtype=float)
    return np.where(phi > PHI_E, 0.0, SLOPE["value"])


def flat(phi):
    """V = 1."""
    return np.ones_like(np.asarray(phi, dtype=float))


def flat_derivative(phi):
    """V' = 0."""
    return np.zeros_like(np.asarray(phi, dtype=float))
