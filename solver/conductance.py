"""Physical conductance, non-linear pressure-driven flow and thermal transpiration.

Reduced flow rates G_P(delta), G_T(delta) of the long tube (``knudsweep.solver.tube``)
or rectangular duct (``knudsweep.solver.duct``) are turned into SI quantities.

Local relation (check-values 0.2; Sharipov & Seleznev, J. Phys. Chem. Ref.
Data 27 (1998) 657), valid for a long channel where p and T change little over
one cross-section size:

    M = (S p / v0) [ -G_P(delta) (a/p) dp/dx + G_T(delta) (a/T) dT/dx ]

with S = pi a^2, a = radius (tube) or S = W H, a = H (duct), delta = p a /(mu v0).

* Conductance (linear regime): throughput Q = (kT/m) M = C dp, so
  C = S a v0 G_P / (2 L).  Free-molecular tube: C = (2 pi a^3 / (3 L)) v_mean
  (Knudsen, Ann. Phys. 28 (1909) 75); continuum tube: C = pi a^4 p / (8 mu L)
  (Hagen-Poiseuille); continuum duct: White, Viscous Fluid Flow (2006) eq. 3-48.
* Flow at any pressure and temperature ratio: dp/dx from the local relation
  integrated along the channel (scipy solve_ivp), the mass flow found by
  shooting (brentq) so that p(L) = p_out.
* Thermomolecular pressure ratio at zero flow: d ln p / d ln T = G_T / G_P
  (check-values 6), integrated from the cold to the hot end.

G_P, G_T come from a :class:`FlowRateTable` computed by the kinetic solver and
interpolated monotonically (PCHIP) in log-log; beyond the table they follow the
asymptotes: below delta_min a linear blend to the delta = 0 value, above
delta_max the slip forms G_P = g_c delta + s and G_T ~ 1/delta.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.integrate import solve_ivp
from scipy.interpolate import PchipInterpolator
from scipy.optimize import brentq

from knudsweep.solver import gas as gasmod
from knudsweep.solver.walls import MaxwellWall

__all__ = [
    "FlowRateTable",
    "compute_table",
    "conductance",
    "flow_at_pressure_ratio",
    "thermomolecular_pressure_ratio",
    "knudsen_tube_conductance",
    "hagen_poiseuille_conductance",
]

GEOMETRIES = ("tube", "duct")


def _positive(name, value):
    v = float(value)
    if not (v > 0.0 and math.isfinite(v)):
        raise ValueError(f"{name}: must be a finite number > 0, got {value!r}")
    return v


@dataclass
class FlowRateTable:
    """G_P(delta), G_T(delta) of one geometry, model and wall, with interpolation.

    deltas : increasing, > 0; g_p, g_t : values there; g_p0, g_t0 : delta = 0 values.
    hydro_slope : continuum slope dG_P/ddelta (1/4 tube, continuum_flow_rate(1, A) duct).
    """

    geometry: str
    deltas: np.ndarray
    g_p: np.ndarray
    g_t: np.ndarray
    g_p0: float
    g_t0: float
    hydro_slope: float
    aspect_ratio: float = 1.0
    description: dict = field(default_factory=dict)

    def __post_init__(self):
        self.deltas = np.asarray(self.deltas, float)
        self.g_p = np.asarray(self.g_p, float)
        self.g_t = np.asarray(self.g_t, float)
        if self.deltas.size < 2 or np.any(np.diff(self.deltas) <= 0) or self.deltas[0] <= 0:
            raise ValueError("deltas: must be at least 2 increasing values > 0")
        if np.any(self.g_p <= 0) or np.any(self.g_t <= 0):
            raise ValueError("g_p, g_t: must be > 0 (did a point fail?)")
        x = np.log(self.deltas)
        self._lp = PchipInterpolator(x, np.log(self.g_p))
        self._lt = PchipInterpolator(x, np.log(self.g_t))
        self._slip = self.g_p[-1] - self.hydro_slope * self.deltas[-1]
        self._gt_inf = self.g_t[-1] * self.deltas[-1]

    def g(self, delta: float) -> tuple[float, float]:
        """(G_P, G_T) at delta >= 0."""
        d = float(delta)
        if d < 0 or not math.isfinite(d):
            raise ValueError(f"delta: must be >= 0, got {delta!r}")
        lo, hi = self.deltas[0], self.deltas[-1]
        if d <= lo:
            f = d / lo
            return (1 - f) * self.g_p0 + f * self.g_p[0], (1 - f) * self.g_t0 + f * self.g_t[0]
        if d >= hi:
            return self.hydro_slope * d + self._slip, self._gt_inf / d
        x = math.log(d)
        return float(math.exp(self._lp(x))), float(math.exp(self._lt(x)))


def compute_table(
    geometry: str = "tube",
    deltas=None,
    *,
    model: str = "bgk",
    wall=MaxwellWall(1.0),  # noqa: B008  (frozen dataclass, safe default)
    aspect_ratio: float = 1.0,
    n_space: int | None = None,
    n_velocity: int | None = None,
) -> FlowRateTable:
    """Run the kinetic solver for both problems at every delta (and delta = 0).

    Raises RuntimeError naming the point when any solve fails to converge.
    """
    if geometry not in GEOMETRIES:
        raise ValueError(f"geometry: must be one of {', '.join(GEOMETRIES)}, got {geometry!r}")
    deltas = np.geomspace(1e-3, 1e3, 13) if deltas is None else np.asarray(deltas, float)
    if geometry == "tube":
        from knudsweep.solver.tube import solve_tube as _solve

        kw = {}
        slope = 0.25
    else:
        from knudsweep.solver.duct import solve_duct as _solve
        from knudsweep.solver.limits import continuum_flow_rate

        kw = {"aspect_ratio": float(aspect_ratio)}
        slope = continuum_flow_rate(1.0, aspect_ratio)
    vals = {}
    for d in [0.0, *deltas]:
        for prob, name in (("poiseuille", "G_P"), ("thermal_creep", "G_T")):
            r = _solve(prob, delta=float(d), model=model, wall=wall, n_space=n_space, n_velocity=n_velocity, **kw)
            if r.status != "converged":
                raise RuntimeError(f"{geometry} {prob} at delta={d:g} failed: {r.convergence.reason}")
            vals[(d, name)] = r.coefficient(name)
    return FlowRateTable(
        geometry,
        deltas,
        [vals[(d, "G_P")] for d in deltas],
        [vals[(d, "G_T")] for d in deltas],
        vals[(0.0, "G_P")],
        vals[(0.0, "G_T")],
        slope,
        float(aspect_ratio),
        {"model": model, **wall.describe()},
    )


def _geometry(table: FlowRateTable, radius, width, height):
    """(cross-section area S [m^2], length scale a [m])."""
    if table.geometry == "tube":
        a = _positive("radius", radius)
        return math.pi * a * a, a
    h = _positive("height", height)
    w = _positive("width", width)
    if abs(w / h - table.aspect_ratio) > 1e-6 * table.aspect_ratio:
        raise ValueError(f"width: width/height must equal the table aspect ratio {table.aspect_ratio:g}, got {w / h:g}")
    return w * h, h


def knudsen_tube_conductance(gas, temperature, radius, length) -> float:
    """Free-molecular long-tube conductance C = (2 pi a^3 / (3 L)) v_mean in m^3/s (Knudsen 1909)."""
    a = _positive("radius", radius)
    return 2.0 * math.pi * a**3 / (3.0 * _positive("length", length)) * gasmod.mean_speed(gas, temperature)


def hagen_poiseuille_conductance(gas, temperature, pressure, radius, length) -> float:
    """Continuum tube conductance pi a^4 p / (8 mu L) in m^3/s (Hagen-Poiseuille, no slip)."""
    a = _positive("radius", radius)
    mu = gasmod.viscosity(gas, temperature)
    return math.pi * a**4 * _positive("pressure", pressure) / (8.0 * mu * _positive("length", length))


def conductance(
    table: FlowRateTable, gas, temperature, pressure, length, *, radius=None, width=None, height=None
) -> dict:
    """Conductance of a long tube/duct in the linear regime at mean pressure p.

    Returns a dict: delta, G_P, mass_flow_per_pa [kg/(s Pa)], conductance_m3_s,
    conductance_l_s, free-molecular and continuum conductances and the
    correction factors C/C_fm and C/C_continuum.
    """
    t = _positive("temperature", temperature)
    p = _positive("pressure", pressure)
    length = _positive("length", length)
    s, a = _geometry(table, radius, width, height)
    v0 = gasmod.most_probable_speed(gas, t)
    delta = gasmod.delta_from_pressure(gas, p, t, a)
    g_p, _ = table.g(delta)
    c = s * a * v0 * g_p / (2.0 * length)
    c_fm = s * a * v0 * table.g_p0 / (2.0 * length)
    c_cont = s * a * v0 * table.hydro_slope * delta / (2.0 * length)
    m = gasmod.get_gas(gas).mass if isinstance(gas, str) else gas.mass
    return {
        "delta": delta,
        "G_P": g_p,
        "mass_flow_per_pa": c * m / (gasmod.BOLTZMANN * t),
        "conductance_m3_s": c,
        "conductance_l_s": 1e3 * c,
        "free_molecular_m3_s": c_fm,
        "continuum_m3_s": c_cont,
        "factor_free_molecular": c / c_fm,
        "factor_continuum": c / c_cont,
    }


def _dp_dx(table, gas, s, a, x, p, m_dot, t_of_x, dtdx):
    t = t_of_x(x)
    v0 = gasmod.most_probable_speed(gas, t)
    delta = p * a / (gasmod.viscosity(gas, t) * v0)
    g_p, g_t = table.g(delta)
    return (p / (a * g_p)) * (g_t * a * dtdx / t - m_dot * v0 / (s * p))


def flow_at_pressure_ratio(
    table: FlowRateTable,
    gas,
    p_in,
    p_out,
    length,
    *,
    t_in=293.15,
    t_out=None,
    radius=None,
    width=None,
    height=None,
    n_profile: int = 101,
) -> dict:
    """Mass flow through a long tube/duct between p_in and p_out (any ratio).

    Temperature linear from t_in to t_out (default isothermal).  Returns a dict
    with mass_flow [kg/s], x [m] and p [Pa] profiles, and the conductance
    throughput / (p_in - p_out) at the inlet temperature [m^3/s].
    """
    p_in = _positive("p_in", p_in)
    p_out = _positive("p_out", p_out)
    length = _positive("length", length)
    t_in = _positive("t_in", t_in)
    t_out = t_in if t_out is None else _positive("t_out", t_out)
    s, a = _geometry(table, radius, width, height)
    dtdx = (t_out - t_in) / length

    def t_of_x(x):
        return t_in + dtdx * x

    def end_pressure(m_dot):
        def rhs(x, y):
            p = math.exp(y[0])
            return [_dp_dx(table, gas, s, a, x, p, m_dot, t_of_x, dtdx) / p]

        def hit_floor(x, y):
            return y[0] - math.log(1e-6 * min(p_in, p_out))

        hit_floor.terminal = True
        sol = solve_ivp(
            rhs, (0.0, length), [math.log(p_in)], rtol=1e-9, atol=1e-12, events=hit_floor, dense_output=True
        )
        if sol.status == 1:
            return -1e3, sol  # pressure collapsed: mass flow far too large
        return float(sol.y[0, -1]) - math.log(p_out), sol

    # bracket: linear estimate at the mean pressure, widened geometrically
    t_mid = 0.5 * (t_in + t_out)
    ref = (
        s
        * a
        * max(p_in, p_out)
        / (gasmod.most_probable_speed(gas, t_mid) * length)
        * (table.g(gasmod.delta_from_pressure(gas, max(p_in, p_out), t_mid, a))[0] + 1.0)
    )
    lo, hi = -ref, ref
    for _ in range(60):
        if end_pressure(lo)[0] > 0 and end_pressure(hi)[0] < 0:
            break
        lo, hi = 2 * lo, 2 * hi
    else:
        raise RuntimeError("mass flow could not be bracketed")
    m_dot = brentq(lambda m: end_pressure(m)[0], lo, hi, xtol=1e-14 * ref, rtol=1e-11)
    _, sol = end_pressure(m_dot)
    x = np.linspace(0.0, length, n_profile)
    p = np.exp(sol.sol(x)[0])
    m = gasmod.get_gas(gas).mass if isinstance(gas, str) else gas.mass
    throughput = m_dot * gasmod.BOLTZMANN * t_in / m
    cond = throughput / (p_in - p_out) if p_in != p_out else float("nan")
    return {"mass_flow": m_dot, "x": x, "p": p, "conductance_m3_s": cond}


def thermomolecular_pressure_ratio(
    table: FlowRateTable, gas, t_cold, t_hot, p_cold, *, radius=None, width=None, height=None
) -> float:
    """p_hot / p_cold at zero net flow: d ln p / d ln T = G_T / G_P (check-values 6).

    Integrated from the cold end (p_cold, t_cold) to t_hot; independent of the
    temperature profile along the channel as long as the channel is long.
    """
    t_cold = _positive("t_cold", t_cold)
    t_hot = _positive("t_hot", t_hot)
    p_cold = _positive("p_cold", p_cold)
    _, a = _geometry(table, radius, width, height)

    def rhs(lnt, y):
        t = math.exp(lnt)
        delta = gasmod.delta_from_pressure(gas, math.exp(y[0]), t, a)
        g_p, g_t = table.g(delta)
        return [g_t / g_p]

    sol = solve_ivp(rhs, (math.log(t_cold), math.log(t_hot)), [math.log(p_cold)], rtol=1e-10, atol=1e-12)
    return float(math.exp(sol.y[0, -1]) / p_cold)
