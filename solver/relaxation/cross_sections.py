"""Molecular models for the space-homogeneous relaxation solvers.

In reduced units (number density 1, velocity unit sqrt(k T / m) at the
equilibrium temperature T, time unit the mean collision time tau_c) every
model is fixed by two numbers:

    omega  viscosity-temperature exponent, mu ~ T**omega
    alpha  VSS scattering exponent (alpha = 1: isotropic scattering)

The variable-hard-sphere (VHS) total cross-section falls off as
sigma ~ c_r**(1 - 2 omega) (Bird, *Molecular Gas Dynamics and the Direct
Simulation of Gas Flows*, Oxford 1994, Sec. 2.6, eq. 4.63), so the product
sigma * c_r = A * c_r**(2 - 2 omega).  The constant A is chosen so that the
equilibrium collision frequency per molecule, nu = n <sigma c_r>, is 1 in
reduced units.  The relative speed of two molecules of a Maxwellian gas is
itself Maxwellian with variance 2 kT/m per component, hence

    <c_r**k> = 2**k Gamma((3 + k)/2) / Gamma(3/2).

Hard spheres are omega = 1/2, alpha = 1; Maxwell molecules are omega = 1 (then
sigma * c_r is constant and every candidate pair collides).

Physical time scale.  Every molecular model is calibrated to reproduce the
viscosity mu(T) of the gas at the point temperature, using the first
Chapman-Enskog approximation for VHS/VSS molecules (Bird 1994, eqs. 4.62 and
4.64; check-values.md Sec. 4.1).  The mean collision time lambda / c_mean with
Bird's viscosity-based free path (eq. 4.76) is then

    tau_c = [(7 - 2 omega)(5 - 2 omega) / 30] * [6 alpha / ((alpha + 1)(alpha + 2))] * mu / p.

The first factor is 0.8 for hard spheres and 1/2 for Maxwell molecules; the
second factor is 1 for VHS and accounts for the smaller VSS viscosity cross
section (VSS viscosity factor 5 (alpha+1)(alpha+2)/(4 alpha) instead of 15/2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from knudsweep.solver.gas import GasData

MOLECULAR_MODELS = ("vhs", "vss", "hard_sphere", "maxwell")


@dataclass(frozen=True)
class MolecularModel:
    """Reduced description of a molecular model (see module docstring)."""

    name: str
    omega: float
    alpha: float

    @property
    def collision_exponent(self) -> float:
        """Exponent k in sigma * c_r = A * c_r**k, k = 2 - 2 omega."""
        return 2.0 - 2.0 * self.omega

    @property
    def sigma_cr_coefficient(self) -> float:
        """A such that the equilibrium collision frequency n <sigma c_r> is 1 (reduced units)."""
        k = self.collision_exponent
        mean_cr_k = 2.0**k * math.gamma(0.5 * (3.0 + k)) / math.gamma(1.5)
        return 1.0 / mean_cr_k

    @property
    def collision_time_factor(self) -> float:
        """tau_c / (mu / p): the mean collision time in units of mu/p."""
        w, a = self.omega, self.alpha
        return (7.0 - 2.0 * w) * (5.0 - 2.0 * w) / 30.0 * 6.0 * a / ((a + 1.0) * (a + 2.0))

    @property
    def pressure_over_viscosity(self) -> float:
        """p / mu in reduced units (per mean collision time); equals collision_time_factor."""
        return self.collision_time_factor


def molecular_model(name: str, gas: GasData) -> MolecularModel:
    """Build the reduced model ``name`` for ``gas`` (omega, alpha from the gas table)."""
    if name == "vhs":
        return MolecularModel("vhs", gas.omega, 1.0)
    if name == "vss":
        return MolecularModel("vss", gas.omega, gas.alpha_vss)
    if name == "hard_sphere":
        return MolecularModel("hard_sphere", 0.5, 1.0)
    if name == "maxwell":
        return MolecularModel("maxwell", 1.0, 1.0)
    raise ValueError(f"molecular_model: must be one of {', '.join(MOLECULAR_MODELS)}, got {name!r}")


def check_model(model: MolecularModel) -> MolecularModel:
    """Validate omega in [1/2, 1] and alpha in [1, 2] (Bird 1994 tables lie inside)."""
    if not (0.5 <= model.omega <= 1.0):
        raise ValueError(f"omega: must lie in [0.5, 1.0], got {model.omega!r}")
    if not (1.0 <= model.alpha <= 2.0):
        raise ValueError(f"alpha_vss: must lie in [1.0, 2.0], got {model.alpha!r}")
    return model
