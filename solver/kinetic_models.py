"""Registry of the linearized kinetic model equations.

Linearized about the absolute Maxwellian, f = f_M (1 + h), with velocities c in
units of v0 = sqrt(2kT/m), every model reads

    (streaming) h = nu_e [ -h + h_gain[h] ],      nu_e = collision_factor * p / mu

with the common gain  rho + 2 c.u + tau (c^2 - 3/2)  plus a model term:

* "bgk"   : none.  Pr = 1.  Bhatnagar, Gross & Krook, Phys. Rev. 94 (1954) 511.
* "s_model": (4/15) (c.q)(c^2 - 5/2) with q = pi^(-3/2) int c (c^2-5/2) h e^{-c^2}.
            Pr = 2/3, nu_e = p/mu.  Shakhov, Fluid Dyn. 3 (1968) 95.
* "es_bgk" : (1 - 1/Pr) c_i c_j sigma_ij with sigma_ij the traceless part of
            P_ij/p = 2 pi^(-3/2) int c_i c_j h e^{-c^2}.  Pr = 2/3,
            nu_e = Pr p/mu.  Holway, Phys. Fluids 9 (1966) 1658; Andries, Le
            Tallec, Perlat & Perthame, Eur. J. Mech. B 19 (2000) 813.

Each entry carries two numbers the solvers need: the Prandtl number and the
collision-frequency factor (nu_e / (p/mu)), plus flags telling which model
term to add.  Add a model: append a :class:`KineticModel` to ``_MODELS`` and
teach each solver's moment tables the new gain term.

This module is the one list of kinetic-model names: the channel solvers, the
relaxation solver (its model equations and methods), the study schema (its
model enums are filled from here on load) and the command line all read it.
Besides the model equations it names the linearized Boltzmann equations the
plane-channel solver offers (:data:`BOLTZMANN_MODELS`, name -> molecular model
of knudsweep.solver.relaxation.cross_sections), and the deterministic
Boltzmann solution of the relaxation solver (:data:`RELAXATION_BOLTZMANN`).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["BOLTZMANN_MODELS", "KineticModel", "MODEL_NAMES", "RELAXATION_BOLTZMANN", "get_model"]


@dataclass(frozen=True)
class KineticModel:
    """One linearized kinetic model.

    name : registry key.
    prandtl : Prandtl number the model reproduces.
    collision_factor : nu_e / (p/mu); the effective rarefaction parameter of
        the transport equation is collision_factor * delta.
    heat_flux_term : 1 if the Shakhov (4/15)(c.q)(c^2-5/2) gain term is present.
    stress_term : 1 if the ES (1 - 1/Pr) c_i c_j sigma_ij gain term is present.
    reference : where the model is defined.
    """

    name: str
    prandtl: float
    collision_factor: float
    heat_flux_term: int
    stress_term: int
    reference: str

    @property
    def stress_coefficient(self) -> float:
        """(1 - 1/Pr) if the ES term is present, else 0."""
        return (1.0 - 1.0 / self.prandtl) if self.stress_term else 0.0

    def describe(self) -> dict[str, object]:
        return {"kinetic_model": self.name, "prandtl": self.prandtl, "collision_factor": self.collision_factor}


_MODELS: dict[str, KineticModel] = {
    "bgk": KineticModel("bgk", 1.0, 1.0, 0, 0, "Bhatnagar, Gross & Krook, Phys. Rev. 94 (1954) 511"),
    "s_model": KineticModel("s_model", 2.0 / 3.0, 1.0, 1, 0, "Shakhov, Fluid Dynamics 3 (1968) 95"),
    "es_bgk": KineticModel(
        "es_bgk",
        2.0 / 3.0,
        2.0 / 3.0,
        0,
        1,
        "Holway, Phys. Fluids 9 (1966) 1658; Andries et al., Eur. J. Mech. B 19 (2000) 813",
    ),
}

MODEL_NAMES: tuple[str, ...] = tuple(_MODELS)

# Linearized Boltzmann equations of the plane channel (knudsweep.solver.plane_channel.boltzmann_driver):
# model name -> molecule.  Poiseuille and thermal creep with Maxwell walls only.  "vhs" takes the viscosity
# index omega of the gas (config/gases.yaml), so studies solve it per gas.
BOLTZMANN_MODELS: dict[str, str] = {"boltzmann_hard_sphere": "hard_sphere", "boltzmann_vhs": "vhs"}

# Method name of the relaxation solver's deterministic Boltzmann solution (fast spectral method,
# knudsweep.solver.relaxation.fast_spectral); it runs beside the model equations and DSMC.
RELAXATION_BOLTZMANN = "fast_spectral"


def get_model(name: str) -> KineticModel:
    """Return the registered model ``name`` or raise ValueError naming the allowed set."""
    if not isinstance(name, str) or name not in _MODELS:
        raise ValueError(f"model: must be one of {', '.join(MODEL_NAMES)}, got {name!r}")
    return _MODELS[name]
