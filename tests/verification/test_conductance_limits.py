"""Conductance, non-linear flow and thermal transpiration against their limits."""

import math

import numpy as np
import pytest
from precision import DISCRETISATION, ROUND_OFF

from knudsweep.solver import gas as gasmod
from knudsweep.solver.conductance import (
    compute_table,
    conductance,
    flow_at_pressure_ratio,
    hagen_poiseuille_conductance,
    knudsen_tube_conductance,
    thermomolecular_pressure_ratio,
)

# The handbook's 12.1 (printed_half_unit("12.1") = 4.1e-3 of it) against our air mass: 0.2 % apart (see the test).
HANDBOOK_RTOL = 3e-3
# Near free molecular (delta ~ 1e-4 .. 3e-4): G_P(delta) - G_P(0) = O(delta ln delta) plus the coarse table's grid
# error; 2e-3 of G_P(0).
NEAR_FREE_MOLECULAR = 2e-3
# A pressure ratio 1.001 against the linear conductance: second-order terms (1e-3)^2 plus the table interpolation.
LINEARISATION = 1e-4
# The outlet pressure of the integrated flow: solve_ivp at rtol 1e-9 in ln p, shooting by brentq (solver/conductance.py).
OUTLET_PRESSURE = 1e-8
# Hagen-Poiseuille at large delta: the slip term 4 sigma_P/delta < 4e-4 is not in the formula.
SLIP_CORRECTION = 5e-4
# Thermal transpiration at 1 bar: G_T/G_P ~ 1e-8, so the ratio is 1 to well below this.
CONTINUUM_TRANSPIRATION = 1e-5


@pytest.fixture(scope="module")
def tube_table():
    # coarse grids keep the default run short; the limits tested below depend
    # on the free-molecular value (exact to 4e-4 at this size) and on the
    # interpolation between table points.
    return compute_table("tube", np.geomspace(1e-2, 1e3, 11), n_space=21, n_velocity=8)


def test_knudsen_long_tube_air_rule_of_vacuum_practice():
    # C = 12.1 D^3 / L  [L/s, D and L in cm], air at 20 C (vacuum-engineering
    # practice; check-values 7, re-derived there: pi v_mean / 12 = 12.12).
    # Our air mass 48.1e-27 kg gives v_mean = 463 m/s: 0.2 % from 12.1's rounding.
    d_cm, l_cm = 2.0, 150.0
    c = knudsen_tube_conductance("air", 293.15, d_cm / 200.0, l_cm / 100.0)
    assert 1e3 * c == pytest.approx(12.1 * d_cm**3 / l_cm, rel=HANDBOOK_RTOL)


def test_conductance_free_molecular_and_continuum_limits(tube_table):
    a, length = 5e-3, 1.0
    low = conductance(tube_table, "N2", 300.0, 1e-4, length, radius=a)  # delta ~ 1e-4
    assert low["factor_free_molecular"] == pytest.approx(1.0, abs=NEAR_FREE_MOLECULAR)  # G_P(1e-4) against G_P(0)
    assert low["conductance_m3_s"] == pytest.approx(
        knudsen_tube_conductance("N2", 300.0, a, length), rel=NEAR_FREE_MOLECULAR
    )
    p_high = gasmod.pressure_from_delta("N2", 5000.0, 300.0, a)  # beyond the table: slip asymptote
    high = conductance(tube_table, "N2", 300.0, p_high, length, radius=a)
    # C / C_HP = 1 + 4 sigma_P / delta (first-order slip; sigma_P from the table's last point)
    assert high["factor_continuum"] == pytest.approx(1.0 + 4.0 * 1.0162 / 5000.0, rel=DISCRETISATION)
    assert high["continuum_m3_s"] == pytest.approx(
        hagen_poiseuille_conductance("N2", 300.0, p_high, a, length), rel=ROUND_OFF
    )


def test_small_pressure_ratio_flow_equals_linear_conductance(tube_table):
    # p_in/p_out -> 1: the non-linear flow reduces to conductance x delta p
    # (linearisation error ~ (dp/p)^2 with dp/p = 1e-3).
    a, length, p = 1e-3, 0.5, 20.0
    res = flow_at_pressure_ratio(tube_table, "Ar", p * 1.0005, p * 0.9995, length, t_in=300.0, radius=a)
    lin = conductance(tube_table, "Ar", 300.0, p, length, radius=a)
    assert res["mass_flow"] == pytest.approx(lin["mass_flow_per_pa"] * p * 1e-3, rel=LINEARISATION)
    assert res["p"][0] == pytest.approx(p * 1.0005) and res["p"][-1] == pytest.approx(p * 0.9995, rel=OUTLET_PRESSURE)


def test_free_molecular_flow_is_linear_at_any_pressure_ratio(tube_table):
    # With G_P constant (delta << 1 everywhere) M = C_fm (m/kT) (p_in - p_out)
    # exactly, whatever the ratio (Knudsen).  delta <= 3e-4 here: G_P within ASYMPTOTIC of G_P(0).
    a, length = 1e-4, 1.0
    res = flow_at_pressure_ratio(tube_table, "He", 1e-1, 1e-3, length, t_in=300.0, radius=a)
    m = gasmod.get_gas("He").mass
    expect = knudsen_tube_conductance("He", 300.0, a, length) * m / (gasmod.BOLTZMANN * 300.0) * (1e-1 - 1e-3)
    assert res["mass_flow"] == pytest.approx(expect, rel=NEAR_FREE_MOLECULAR)


def test_hagen_poiseuille_at_large_pressure_ratio(tube_table):
    # Continuum: M = pi a^4 (p_in^2 - p_out^2) / (16 mu L kT/m) plus slip ~ 4 sigma/delta.
    a, length, t = 1e-3, 1.0, 300.0
    p_in, p_out = 2e5, 1e5  # delta ~ 1e4..2e4
    res = flow_at_pressure_ratio(tube_table, "N2", p_in, p_out, length, t_in=t, radius=a)
    mu = gasmod.viscosity("N2", t)
    m = gasmod.get_gas("N2").mass
    hp = math.pi * a**4 * (p_in**2 - p_out**2) / (16.0 * mu * length) * m / (gasmod.BOLTZMANN * t)
    assert res["mass_flow"] == pytest.approx(hp, rel=SLIP_CORRECTION)


def test_thermal_transpiration_limits(tube_table):
    # Knudsen 1909: p_hot/p_cold = sqrt(T_hot/T_cold) as delta -> 0; -> 1 in the
    # continuum (check-values 6).  At p = 1e-4 Pa in a 1 mm tube delta ~ 1e-6:
    # deviation O(delta ln delta) < 1e-4.  At 1 bar G_T/G_P ~ 1e-8.
    r_fm = thermomolecular_pressure_ratio(tube_table, "N2", 300.0, 600.0, 1e-4, radius=1e-3)
    assert r_fm == pytest.approx(math.sqrt(2.0), rel=DISCRETISATION)
    r_c = thermomolecular_pressure_ratio(tube_table, "N2", 300.0, 600.0, 1e5, radius=1e-3)
    assert r_c == pytest.approx(1.0, abs=CONTINUUM_TRANSPIRATION)
    mid = thermomolecular_pressure_ratio(tube_table, "N2", 300.0, 600.0, 10.0, radius=1e-3)
    assert 1.0 < mid < math.sqrt(2.0)


def test_bad_input_conductance(tube_table):
    with pytest.raises(ValueError, match="radius"):
        conductance(tube_table, "N2", 300.0, 1.0, 1.0, radius=-1.0)
    with pytest.raises(ValueError, match="geometry"):
        compute_table("cone", [1.0, 2.0])
