"""Gas data and the conversions between pressure, Knudsen number and delta.

Symbols (SI units throughout):

    m      molecular mass [kg]
    v0     most probable speed, v0 = sqrt(2 k T / m)                 [m/s]
    mu(T)  viscosity, VHS power law mu = mu_ref (T / T_ref)**omega   [Pa s]
    ell    equivalent free path, ell = mu v0 / p                     [m]
    delta  rarefaction parameter, delta = p a / (mu v0) = a / ell    [1]
    Kn     Knudsen number on the equivalent mean free path
           lambda_eq = (sqrt(pi)/2) ell, so Kn = lambda_eq / a and
           delta = sqrt(pi) / (2 Kn)                                  [1]

The power law and the VHS/VSS diameters follow Bird, *Molecular Gas Dynamics
and the Direct Simulation of Gas Flows* (Oxford 1994), Ch. 3-4; the delta and
free-path definitions follow Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27
(1998) 657.  Data rows live in ``config/gases.yaml`` with their source.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from functools import lru_cache
from importlib.resources import files
from pathlib import Path

import yaml

BOLTZMANN = 1.380649e-23  # J/K, exact (SI 2019)
AVOGADRO = 6.02214076e23  # 1/mol, exact (SI 2019)

# config/gases.yaml, installed as package data knudsweep.data (pyproject.toml)
DEFAULT_GAS_FILE = Path(str(files("knudsweep.data").joinpath("gases.yaml")))


class UnknownGasError(ValueError):
    """Raised for a gas name that is not in the gas table."""


@dataclass(frozen=True)
class GasData:
    """Molecular-model data of one gas (VHS and VSS), SI units."""

    name: str
    mass: float  # kg
    mu_ref: float  # Pa s at t_ref
    omega: float  # viscosity exponent
    d_vhs: float  # m, VHS reference diameter at t_ref
    d_vss: float  # m, VSS reference diameter at t_ref
    alpha_vss: float  # VSS scattering exponent
    t_ref: float  # K
    source: str

    @property
    def molar_mass(self) -> float:
        """Molar mass in kg/mol."""
        return self.mass * AVOGADRO


def _gas_file() -> Path:
    return Path(os.environ.get("KNUDSWEEP_GAS_FILE", DEFAULT_GAS_FILE))


@lru_cache(maxsize=4)
def _load_table(path: str) -> dict[str, GasData]:
    with open(path, encoding="utf-8") as fh:
        raw = yaml.safe_load(fh)
    table = {}
    for name, row in raw["gases"].items():
        table[name] = GasData(
            name=name,
            mass=float(row["mass_1e27_kg"]) * 1e-27,
            mu_ref=float(row["mu_ref_uPa_s"]) * 1e-6,
            omega=float(row["omega"]),
            d_vhs=float(row["d_vhs_1e10_m"]) * 1e-10,
            d_vss=float(row["d_vss_1e10_m"]) * 1e-10,
            alpha_vss=float(row["alpha_vss"]),
            t_ref=float(row["t_ref_K"]),
            source=str(row["source"]),
        )
    return table


def known_gases() -> list[str]:
    """Names of all gases in the gas table, in file order."""
    return list(_load_table(str(_gas_file())))


def get_gas(name: str) -> GasData:
    """Return the data of gas ``name``; an unknown name lists the known ones."""
    table = _load_table(str(_gas_file()))
    if name not in table:
        raise UnknownGasError(f"gas: unknown gas {name!r}; known gases are {', '.join(table)}")
    return table[name]


def gas_record(name: str) -> dict[str, float]:
    """The numbers of gas ``name`` that results depend on (SI), for identities and provenance."""
    g = get_gas(name)
    return {
        "mass": g.mass,
        "mu_ref": g.mu_ref,
        "omega": g.omega,
        "d_vhs": g.d_vhs,
        "d_vss": g.d_vss,
        "alpha_vss": g.alpha_vss,
        "t_ref": g.t_ref,
    }


def _as_gas(gas: GasData | str) -> GasData:
    return gas if isinstance(gas, GasData) else get_gas(gas)


def _check_positive(name: str, value: float) -> float:
    value = float(value)
    if not (value > 0.0 and math.isfinite(value)):
        raise ValueError(f"{name}: must be a finite number > 0, got {value!r}")
    return value


def viscosity(gas: GasData | str, temperature: float) -> float:
    """Viscosity mu(T) = mu_ref (T/T_ref)**omega in Pa s (Bird 1994, eq. 4.62)."""
    g = _as_gas(gas)
    t = _check_positive("temperature", temperature)
    return g.mu_ref * (t / g.t_ref) ** g.omega


def vhs_reference_viscosity(gas: GasData | str, model: str = "vhs") -> float:
    """Viscosity at T_ref computed from the VHS or VSS diameter (Bird 1994, eqs. 4.62, 4.64).

    mu_ref = (15/2) sqrt(pi m k T_ref) / [pi d^2 (5 - 2 omega)(7 - 2 omega)]   (VHS)
    with 15/2 replaced by 5 (alpha+1)(alpha+2) / (4 alpha) for VSS.
    """
    g = _as_gas(gas)
    if model == "vhs":
        factor, d = 7.5, g.d_vhs
    elif model == "vss":
        a = g.alpha_vss
        factor, d = 5.0 * (a + 1.0) * (a + 2.0) / (4.0 * a), g.d_vss
    else:
        raise ValueError(f"model: must be 'vhs' or 'vss', got {model!r}")
    return (
        factor
        * math.sqrt(math.pi * g.mass * BOLTZMANN * g.t_ref)
        / (math.pi * d**2 * (5.0 - 2.0 * g.omega) * (7.0 - 2.0 * g.omega))
    )


def most_probable_speed(gas: GasData | str, temperature: float) -> float:
    """v0 = sqrt(2 k T / m) in m/s."""
    g = _as_gas(gas)
    t = _check_positive("temperature", temperature)
    return math.sqrt(2.0 * BOLTZMANN * t / g.mass)


def mean_speed(gas: GasData | str, temperature: float) -> float:
    """Mean thermal speed sqrt(8 k T / (pi m)) = (2/sqrt(pi)) v0 in m/s."""
    return 2.0 / math.sqrt(math.pi) * most_probable_speed(gas, temperature)


def equivalent_free_path(gas: GasData | str, pressure: float, temperature: float) -> float:
    """Equivalent free path ell = mu v0 / p in m (Sharipov & Seleznev 1998)."""
    p = _check_positive("pressure", pressure)
    return viscosity(gas, temperature) * most_probable_speed(gas, temperature) / p


def delta_from_pressure(gas: GasData | str, pressure: float, temperature: float, length: float) -> float:
    """Rarefaction parameter delta = p a / (mu v0) for length scale a [m]."""
    a = _check_positive("length", length)
    return a / equivalent_free_path(gas, pressure, temperature)


def pressure_from_delta(gas: GasData | str, delta: float, temperature: float, length: float) -> float:
    """Pressure [Pa] at which the length a [m] has rarefaction parameter delta."""
    d = _check_positive("delta", delta)
    a = _check_positive("length", length)
    return d * viscosity(gas, temperature) * most_probable_speed(gas, temperature) / a


def delta_from_kn(kn: float) -> float:
    """delta = sqrt(pi) / (2 Kn), Kn on the equivalent mean free path (sqrt(pi)/2) ell."""
    return math.sqrt(math.pi) / (2.0 * _check_positive("kn", kn))


def kn_from_delta(delta: float) -> float:
    """Kn = sqrt(pi) / (2 delta), the inverse of :func:`delta_from_kn`."""
    return math.sqrt(math.pi) / (2.0 * _check_positive("delta", delta))


def number_density(pressure: float, temperature: float) -> float:
    """Ideal-gas number density n = p / (k T) in 1/m^3."""
    return _check_positive("pressure", pressure) / (BOLTZMANN * _check_positive("temperature", temperature))


def mean_collision_time(gas: GasData | str, pressure: float, temperature: float) -> float:
    """Mean collision time of the VHS gas [s] from its viscosity-based free path.

    lambda = [2 (7 - 2 omega)(5 - 2 omega) / 15] sqrt(m / (2 pi k T)) mu / rho
    (Bird 1994, eq. 4.76), divided by the mean speed sqrt(8 k T / (pi m)).
    """
    g = _as_gas(gas)
    t = _check_positive("temperature", temperature)
    rho = g.mass * number_density(pressure, t)
    lam = (
        2.0
        * (7.0 - 2.0 * g.omega)
        * (5.0 - 2.0 * g.omega)
        / 15.0
        * math.sqrt(g.mass / (2.0 * math.pi * BOLTZMANN * t))
        * viscosity(g, t)
        / rho
    )
    return lam / mean_speed(g, t)
