"""Tables, figures and captions of the tube and rectangular-duct family (read from the gathered sweep).

Every builder is registered by name in :data:`TABLES` or :data:`FIGURES` (with its caption).  A study with a
linearized Boltzmann model and a model equation also gets the model-error view (``tube_duct_model_error``, table;
``tube_duct_model_error_vs_delta``, figure): each model equation's G_P and G_T over the Boltzmann value per delta,
one block per Boltzmann operator (VHS: per gas), as the plane channel's.  Physical
conversions use ``knudsweep.solver.conductance`` and ``knudsweep.solver.gas``; the reference curves come from
``knudsweep.solver.duct`` (continuum series, first-order slip, free-molecular quadrature).

Sources of the constants (tables and captions cite the publication):
* ``SIGMA_P_DIFFUSE`` = 1.0162 and ``SIGMA_T_DIFFUSE_BGK`` = 0.7663, viscous and
  thermal slip of the BGK model with diffuse walls in units of ell = mu v0/p:
  numerically exact BGK solutions of the viscous-slip and thermal-creep
  half-space problems, Loyalka, Petrellis & Storvick, Phys. Fluids 18 (1975)
  1094 (bibliographic data confirmed; the two numbers and the table that
  holds them are from memory, unconfirmed; the same sigma_P follows from
  Cercignani's 1.1466 lambda_eq x sqrt(pi)/2 = 1.01615).  They set reference
  curves and ratio columns only, never a pass bar.
* (2 - alpha)/alpha on the free-molecular tube flow rate (Smoluchowski):
  exact at delta = 0 for the long tube (from memory, unconfirmed), approximate
  elsewhere; no source was at hand for Cercignani-Lampis walls.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from knudsweep.families import (
    MODEL_ERROR_NOTES,
    Products,
    Table,
    base_model,
    coefficient_values,
    model_error_rows,
    model_error_sentences,
    plot_model_error,
)
from knudsweep.families.tube_duct.grid import (
    BOLTZMANN_MODELS,
    BOLTZMANN_SHAPES,
    MAIN_COEFFICIENT,
    MODEL_EQUATIONS,
    PROBLEMS,
    SQRT_PI,
    geometry_settings,
    is_diffuse,
    model_entries,
    model_labels,
    tangential_alpha,
    wall_settings,
)

TABLES = Products("table")
FIGURES = Products("figure")

# Plain words of the linearized Boltzmann models in legends, titles and tables (VHS with its gas: "(Ar)")
BOLTZMANN_TEXT = {"boltzmann_hard_sphere": "Boltzmann, hard spheres", "boltzmann_vhs": "Boltzmann, VHS"}


def model_text(label: str) -> str:
    """Plain words of a label of the ``model`` dimension: knudsweep.plot_style.model_text for the model
    equations, BOLTZMANN_TEXT for the Boltzmann models (``boltzmann_vhs-Ar`` -> "Boltzmann, VHS (Ar)")."""
    from knudsweep.plot_style import model_text as style_text

    model, gas = base_model(label)
    if model in BOLTZMANN_TEXT:
        return BOLTZMANN_TEXT[model] + ("" if gas is None else f" ({gas})")
    return style_text(label)


def gases_of(section: dict[str, Any], model_gas: str | None) -> list[str]:
    """Gases a model's reduced results are converted for: every gas of the section, or a gas-dependent
    operator's (VHS) own gas only."""
    return list(section["gases"]) if model_gas is None else [model_gas]


G_FM_TUBE = 8.0 / (3.0 * SQRT_PI)  # Knudsen, Ann. Phys. 28 (1909) 75, long-tube conductance [derived]
from knudsweep.solver.limits import SIGMA_P_BGK as SIGMA_P_DIFFUSE  # noqa: E402  (one home: knudsweep.solver.limits)
from knudsweep.solver.limits import SIGMA_T_BGK as SIGMA_T_DIFFUSE_BGK  # noqa: E402


# ---------------------------------------------------------------- reference values (reduced)
def free_molecular_gp(shape: str, aspect: float) -> float:
    """Diffuse-wall free-molecular G_P: Knudsen's 8/(3 sqrt(pi)) (tube) or the duct quadrature."""
    if shape == "tube":
        return G_FM_TUBE
    from knudsweep.solver.limits import free_molecular_flow_rate

    return free_molecular_flow_rate(aspect)


def continuum_gp(shape: str, aspect: float, delta) -> np.ndarray:
    """No-slip G_P: delta/4 (Hagen-Poiseuille) or the rectangular-duct series (White 2006 eq. 3-48)."""
    from knudsweep.solver.limits import continuum_flow_rate

    d = np.asarray(delta, float)
    if shape == "tube":
        return d / 4.0
    return d * continuum_flow_rate(1.0, aspect)


def slip_gp(shape: str, aspect: float, delta, sigma_p: float) -> np.ndarray:
    """First-order slip G_P: delta/4 + sigma_P (tube, check-values 0.3); duct: knudsweep.solver.duct.slip_flow_rate."""
    d = np.asarray(delta, float)
    if shape == "tube":
        return d / 4.0 + sigma_p
    from knudsweep.solver.limits import slip_flow_rate

    return continuum_gp(shape, aspect, d) + (slip_flow_rate(0.0, aspect, sigma_p))


def slip_sigma(w: dict[str, Any]) -> float:
    """sigma_P of the diffuse wall times Maxwell's (2 - alpha)/alpha (approximate; alpha_t for CL walls,
    common practice, no source)."""
    a = min(tangential_alpha(w), 1.0)
    return SIGMA_P_DIFFUSE * (2.0 - a) / a


def flow_table(ds, geometry: str, shape: str, aspect: float, model: str, wall: str):
    """A :class:`knudsweep.solver.conductance.FlowRateTable` from the gathered G_P, G_T (None if too few points).

    Uses the delta values where both problems converged.  At delta = 0, G_P is
    taken equal to its value at the smallest delta (the free-molecular plateau
    of the tube and of ducts of moderate aspect ratio; common practice, no
    source) and G_T = G_P / 2 (free-molecular flux proportional to p/sqrt(T)
    for any wall law at the wall temperature; check-values 0.3); below the
    smallest delta knudsweep.solver.conductance blends linearly.
    """
    from knudsweep.solver.conductance import FlowRateTable
    from knudsweep.solver.limits import continuum_flow_rate

    if "G_P" not in ds or "G_T" not in ds:
        return None
    sel = dict(geometry=geometry, model=model, wall=wall)
    d = ds["delta"].values.astype(float)
    gp = ds["G_P"].sel(problem="poiseuille", **sel).values.astype(float)
    gt = ds["G_T"].sel(problem="thermal_creep", **sel).values.astype(float)
    ok = np.isfinite(gp) & np.isfinite(gt) & (d > 0) & (gp > 0) & (gt > 0)
    if ok.sum() < 2:
        return None
    slope = 0.25 if shape == "tube" else continuum_flow_rate(1.0, aspect)
    return FlowRateTable(shape, d[ok], gp[ok], gt[ok], float(gp[ok][0]), 0.5 * float(gp[ok][0]), slope, aspect)


# ---------------------------------------------------------------- physical units
def size_of(section, shape: str, aspect: float) -> tuple[float, float, dict]:
    """(cross-section area S [m^2], length scale a [m], keyword for knudsweep.solver.conductance)."""
    c = section["conditions"]
    if shape == "tube":
        a = c["radius"]
        return math.pi * a * a, a, {"radius": a}
    h = c["height"]
    return aspect * h * h, h, {"height": h, "width": aspect * h}


NOTES_COMMON = [
    "delta = p a / (mu v0), a = tube radius or duct height (smaller side), v0 = sqrt(2 k T / m); Kn = sqrt(pi) / (2 delta).",
    "Normalisation of G_P, G_T: Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27 (1998) 657; the duct per unit width "
    "(M / W = (H p / v0) G X), see knudsweep.solver.duct.",
    "Pressure for each gas: p = delta mu(T) v0 / a at the study temperature (knudsweep.solver.gas.pressure_from_delta; mu(T) from config/gases.yaml).",
    "status 'failed', 'missing' or 'corrupt': the coefficient columns are empty for that row.",
]


def model_error_pairs(section: dict[str, Any]) -> tuple[list[str], list[str], list[str]]:
    """(Boltzmann references, model equations, coefficients) of the model-error view: the references are the
    labels of the ``model`` dimension of each Boltzmann operator (hard spheres; VHS once per gas); ([], [], [])
    if the study does not hold both kinds of model."""
    refs = [label for label, model, _ in model_entries(section) if model in BOLTZMANN_MODELS]
    eqs = [m for m in section["models"] if m in MODEL_EQUATIONS]
    keys = [MAIN_COEFFICIENT[p] for p in section["problems"]]
    if not refs or not eqs or not keys:
        return [], [], []
    return refs, eqs, keys


def boltzmann_geometries(section: dict[str, Any]) -> list[str]:
    """Labels of the cross-sections the Boltzmann models are solved for (the tube; the study check refuses ducts)."""
    return [label for label, shape, _ in geometry_settings(section) if shape in BOLTZMANN_SHAPES]


_values = coefficient_values


def conductance_table_names(section: dict[str, Any]) -> list[str]:
    return ["tube_duct_conductance"] if "poiseuille" in section["problems"] else []


def thermal_creep_table_names(section: dict[str, Any]) -> list[str]:
    return ["tube_duct_thermal_creep"] if "thermal_creep" in section["problems"] else []


@TABLES.register(conductance_table_names)
def conductance_tables(ds, section: dict[str, Any]) -> dict[str, Table]:
    """Conductance per cross-section, model, wall and gas, with its ratios to the references."""
    import pandas as pd

    from knudsweep.solver.gas import most_probable_speed, pressure_from_delta

    c = section["conditions"]
    t = c["temperature"]
    length = c["length"]
    delta = ds["delta"].values.astype(float)
    tables = {}
    geos = geometry_settings(section)
    walls = wall_settings(section)
    rows = []
    for glabel, shape, aspect in geos:
        s_area, a, _ = size_of(section, shape, aspect)
        g_fm = free_molecular_gp(shape, aspect)
        g_cont = continuum_gp(shape, aspect, delta)
        for mlabel, model, model_gas in model_entries(section):
            for wlabel, w in walls:
                sel = dict(geometry=glabel, problem="poiseuille", model=mlabel, wall=wlabel)
                status = ds["status"].sel(**sel).values
                gp = ds["G_P"].sel(**sel).values.astype(float) if "G_P" in ds else np.full(delta.shape, np.nan)
                gp_err = (
                    ds["G_P_error_estimate"].sel(**sel).values.astype(float)
                    if "G_P_error_estimate" in ds
                    else np.full(delta.shape, np.nan)
                )
                gslip = slip_gp(shape, aspect, delta, slip_sigma(w))
                for gas in gases_of(section, model_gas):
                    v0 = most_probable_speed(gas, t)
                    factor = s_area * a * v0 / (2.0 * length)  # C = S a v0 G_P / (2 L)  [m^3/s]
                    for j, d in enumerate(delta):
                        cond = factor * gp[j]
                        rows.append(
                            {
                                "geometry": glabel,
                                "model": model,
                                "wall": wlabel,
                                "gas": gas,
                                "delta [1]": d,
                                "Kn [1]": SQRT_PI / (2.0 * d),
                                "status": status[j],
                                "pressure [Pa]": pressure_from_delta(gas, d, t, a),
                                "G_P [1]": gp[j],
                                "G_P error estimate [1]": gp_err[j],
                                "conductance [m^3 s^-1]": cond,
                                "conductance [L s^-1]": 1e3 * cond,
                                "free-molecular conductance, diffuse [m^3 s^-1]": factor * g_fm,
                                "continuum conductance, no slip [m^3 s^-1]": factor * g_cont[j],
                                "C / C_free-molecular [1]": gp[j] / g_fm,
                                "C / C_continuum [1]": gp[j] / g_cont[j],
                                "C / C_slip [1]": gp[j] / gslip[j],
                            }
                        )
    notes = NOTES_COMMON + [
        f"temperature {t:g} K, tube radius {c['radius']:g} m, duct height {c['height']:g} m, length {length:g} m.",
        "Conductance in the linear regime at the row's pressure: C = S a v0 G_P / (2 L), S = cross-section area "
        "(knudsweep.solver.conductance).",
        "G_P error estimate: estimated discretisation error of G_P (absolute) from a Richardson extrapolation over "
        "a coarser solve (knudsweep.solver.resolution); it does not include the model error.",
        "Free-molecular reference, diffuse walls: Knudsen's long-tube value G_P = 8/(3 sqrt(pi)) (Knudsen, Ann. Phys. 28 "
        "(1909) 75; C = (2 pi a^3 / (3 L)) v_mean); duct: closed-form quadrature knudsweep.solver.duct.free_molecular_flow_rate. "
        "For non-diffuse walls the factor includes the accommodation effect.",
        "Continuum reference, no slip: Hagen-Poiseuille C = pi a^4 p / (8 mu L) (G_P = delta/4); duct: series of White, "
        "Viscous Fluid Flow (2006) eq. 3-48 (knudsweep.solver.duct.continuum_flow_rate).",
        f"Slip reference: first order, sigma_P = {SIGMA_P_DIFFUSE} (BGK, diffuse walls; Loyalka, Petrellis & "
        "Storvick, Phys. Fluids 18 (1975) 1094) times (2 - alpha)/alpha (Maxwell, Phil. Trans. R. Soc. 170 (1879) "
        "231, approximate; alpha_t for Cercignani-Lampis walls, common practice, no source); tube delta/4 + "
        "sigma_P, duct knudsweep.solver.duct.slip_flow_rate.",
    ]
    tables["tube_duct_conductance"] = Table(
        pd.DataFrame(rows), "Tube and duct: conductance and correction factors", notes
    )
    return tables


@TABLES.register(thermal_creep_table_names)
def thermal_creep_tables(ds, section: dict[str, Any]) -> dict[str, Table]:
    """G_T per cross-section, model, wall and gas, with G_T / G_P and the thermal-slip ratio."""
    import pandas as pd

    from knudsweep.solver.gas import most_probable_speed, pressure_from_delta

    c = section["conditions"]
    t = c["temperature"]
    delta = ds["delta"].values.astype(float)
    tables = {}
    geos = geometry_settings(section)
    walls = wall_settings(section)
    rows = []
    for glabel, shape, aspect in geos:
        s_area, a, _ = size_of(section, shape, aspect)
        for mlabel, model, model_gas in model_entries(section):
            for wlabel, w in walls:
                sel = dict(geometry=glabel, problem="thermal_creep", model=mlabel, wall=wlabel)
                status = ds["status"].sel(**sel).values
                gt = ds["G_T"].sel(**sel).values.astype(float) if "G_T" in ds else np.full(delta.shape, np.nan)
                gt_err = (
                    ds["G_T_error_estimate"].sel(**sel).values.astype(float)
                    if "G_T_error_estimate" in ds
                    else np.full(delta.shape, np.nan)
                )
                gp = (
                    ds["G_P"].sel(geometry=glabel, problem="poiseuille", model=mlabel, wall=wlabel).values.astype(float)
                    if ("G_P" in ds and "poiseuille" in section["problems"])
                    else np.full(delta.shape, np.nan)
                )
                ref_t = (
                    (SIGMA_T_DIFFUSE_BGK / delta)
                    if (model == "bgk" and is_diffuse(w))
                    else np.full(delta.shape, np.nan)
                )
                for gas in gases_of(section, model_gas):
                    v0 = most_probable_speed(gas, t)
                    for j, d in enumerate(delta):
                        p = pressure_from_delta(gas, d, t, a)
                        rows.append(
                            {
                                "geometry": glabel,
                                "model": model,
                                "wall": wlabel,
                                "gas": gas,
                                "delta [1]": d,
                                "Kn [1]": SQRT_PI / (2.0 * d),
                                "status": status[j],
                                "pressure [Pa]": p,
                                "G_T [1]": gt[j],
                                "G_T error estimate [1]": gt_err[j],
                                # M / ((1/T) dT/dx) = S a p G_T / v0  [kg s^-1 per m^-1 ... = kg m s^-1]
                                "mass flow per log-temperature gradient [kg m s^-1]": s_area * a * p * gt[j] / v0,
                                "G_T / G_P (d ln p / d ln T at zero flow) [1]": gt[j] / gp[j],
                                "G_T / (sigma_T/delta) [1]": gt[j] / ref_t[j],
                            }
                        )
    notes = NOTES_COMMON + [
        f"temperature {t:g} K, tube radius {c['radius']:g} m, duct height {c['height']:g} m.",
        "G_T / G_P = d ln p / d ln T at zero net flow (Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27 (1998) "
        "657); 1/2 in the free-molecular limit (p ~ sqrt(T): Maxwell, Phil. Trans. R. Soc. 170 (1879) 231; Knudsen 1909), "
        "-> 0 in the continuum.",
        f"G_T / (sigma_T/delta): ratio to first-order thermal slip, sigma_T = {SIGMA_T_DIFFUSE_BGK} (BGK, diffuse "
        "walls; Loyalka, Petrellis & Storvick, Phys. Fluids 18 (1975) 1094); BGK with diffuse walls only.",
    ]
    tables["tube_duct_thermal_creep"] = Table(pd.DataFrame(rows), "Tube and duct: thermal creep", notes)
    return tables


def model_error_names(section: dict[str, Any]) -> list[str]:
    """``tube_duct_model_error`` if the study holds a Boltzmann model and a model equation."""
    return ["tube_duct_model_error"] if model_error_pairs(section)[0] else []


@TABLES.register(model_error_names)
def model_error_tables(ds, section: dict[str, Any]) -> dict[str, Table]:
    """G_P, G_T of each model equation over each linearized Boltzmann value (one row block per Boltzmann
    operator, and per gas for VHS), per tube, wall and delta."""
    import pandas as pd

    refs, eqs, keys = model_error_pairs(section)
    rows = []
    for lbe in refs:
        for glabel in boltzmann_geometries(section):
            for wlabel, _w in wall_settings(section):
                rows += model_error_rows(ds, lbe, eqs, keys, {"geometry": glabel, "wall": wlabel}, model_text)
    notes = [
        NOTES_COMMON[0],
        NOTES_COMMON[1],
        "Model error of the kinetic model equations: each one's reduced flow rate divided by the solution of the "
        f"linearized Boltzmann equation named in the row ({', '.join(model_text(r) for r in refs)}; "
        "knudsweep.solver.tube.boltzmann_driver) in the same tube at the same delta and walls. The VHS operator "
        "takes the viscosity index omega of the row's gas (config/gases.yaml); hard spheres and the model equations "
        "do not depend on the gas (gas column empty). delta is defined with the gas's viscosity in every model, so "
        "the difference is the error of the model's collision term: the ratios tend to 1 as delta -> 0 (the "
        "free-molecular flow does not depend on collisions), G_P's also as delta -> infinity (Poiseuille flow with "
        "the same viscosity), while G_T's tend to the ratio of the models' thermal slip coefficients.",
        *MODEL_ERROR_NOTES,
    ]
    return {
        "tube_duct_model_error": Table(
            pd.DataFrame(rows), "Tube, model error against the linearized Boltzmann equation", notes
        )
    }


# ---------------------------------------------------------------- figures
# Ranges where the reference curves are drawn (slip flow Kn < 0.1, free-molecular
# flow Kn > 10; common practice, no source).
SLIP_MIN_DELTA = 10.0
FREE_MOLECULAR_FIG_MAX_DELTA = 0.1


def free_molecular_factor(w: dict[str, Any]) -> float:
    """Smoluchowski's (2 - alpha)/alpha on the diffuse free-molecular flow rate (long tube, check-values
    section 0.3, from memory, unconfirmed); alpha_t for Cercignani-Lampis walls and the same factor for
    ducts (approximate, common practice, no source)."""
    a = min(tangential_alpha(w), 1.0)
    return (2.0 - a) / a


def wall_marker(k: int) -> dict[str, Any]:
    """Marker fill of the k-th wall setting: filled, open, half filled."""
    return [{"ms": 5.5}, {"ms": 6.5, "mfc": "white", "mew": 1.2}, {"ms": 6.0, "fillstyle": "left", "mfcalt": "white"}][
        k % 3
    ]


def geometry_text(section, shape, aspect) -> str:
    c = section.get("conditions", {})
    if shape == "tube":
        return f"tube, radius {1e3 * c['radius']:g} mm" if "radius" in c else "tube"
    if "height" in c:
        h = 1e3 * c["height"]
        return f"duct {aspect * h:g} mm $\\times$ {h:g} mm ($A = {aspect:g}$)"
    return f"duct, $A = {aspect:g}$"


def _legend(fig, ax, section, geos, walls, refs):
    from knudsweep import plot_style as ps

    handles, labels = [], []
    for i, (_glabel, shape, aspect) in enumerate(geos):
        handles.append(ax.plot([], [], **ps.series_style(i), ms=5.5)[0])
        labels.append(geometry_text(section, shape, aspect))
    if len(walls) > 1:
        for k, (_wlabel, w) in enumerate(walls):
            handles.append(ax.plot([], [], ls="none", marker="o", color="0.35", **wall_marker(k))[0])
            labels.append(ps.wall_text(w))
    for kind, text in refs:
        handles.append(ax.plot([], [], **ps.reference(kind))[0])
        labels.append(text)
    ps.bottom_legend(fig, handles, labels, ncol=2)


def _coefficient_figure(ds, section, settings, problem, model, geos, walls):
    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure

    key = MAIN_COEFFICIENT[problem]
    delta = ds["delta"].values.astype(float)
    fig, ax = new_figure(settings, scale=(1.0, 1.3))
    drawn, n_failed = False, 0
    small = np.geomspace(delta.min(), min(FREE_MOLECULAR_FIG_MAX_DELTA, delta.max()), 20)
    big = np.geomspace(max(SLIP_MIN_DELTA, delta.min()), delta.max(), 50)
    has_fm = delta.min() <= FREE_MOLECULAR_FIG_MAX_DELTA
    has_slip = delta.max() >= SLIP_MIN_DELTA
    for i, (glabel, shape, aspect) in enumerate(geos):
        style = ps.series_style(i)
        for k, (wlabel, w) in enumerate(walls):
            sel = dict(geometry=glabel, problem=problem, model=model, wall=wlabel)
            g = ds[key].sel(**sel).values.astype(float) if key in ds else np.full(delta.shape, np.nan)
            n_failed += ps.mark_failed(ax, delta, ds["status"].sel(**sel).values, style)
            if ps.plot_series(ax, delta, g, {**style, **wall_marker(k), "lw": 1.3 if k == 0 else 1.0}):
                drawn = True
            # free-molecular reference only where its wall factor has a source (Maxwell walls)
            fm_ok = has_fm and w["model"] == "maxwell"
            g_fm = free_molecular_gp(shape, aspect) * free_molecular_factor(w)
            if key == "G_P":
                if fm_ok:
                    ax.plot(small, np.full(small.size, g_fm), **ps.reference("free_molecular"))
                if has_slip:
                    ax.plot(big, slip_gp(shape, aspect, big, slip_sigma(w)), **ps.reference("slip"))
            else:
                if fm_ok:
                    ax.plot(small, np.full(small.size, 0.5 * g_fm), **ps.reference("free_molecular"))
                j = np.flatnonzero(np.isfinite(g))
                if has_slip and j.size and delta[j[-1]] >= SLIP_MIN_DELTA:
                    ax.plot(big, g[j[-1]] * delta[j[-1]] / big, **ps.reference("slip"))
        if key == "G_P" and has_slip:
            ax.plot(big, continuum_gp(shape, aspect, big), **ps.reference("continuum"))
    refs = []
    if key == "G_P":
        if has_slip:
            refs += [
                ("continuum", r"no-slip continuum ($\delta \geq 10$)"),
                ("slip", r"first-order slip, $\sigma_P = 1.016\,(2-\alpha)/\alpha$ ($\delta \geq 10$)"),
            ]
        if has_fm:
            refs.append(
                ("free_molecular", r"free molecular $\times\,(2-\alpha)/\alpha$, Maxwell walls ($\delta \leq 0.1$)")
            )
    else:
        if has_slip:
            refs.append(("slip", r"thermal slip $\propto 1/\delta$, matched at largest $\delta$"))
        if has_fm:
            refs.append(("free_molecular", r"free molecular $G_P/2$, Maxwell walls ($\delta \leq 0.1$)"))
    ax.set_xscale("log")
    if drawn:
        ax.set_yscale("log")
        ps.data_ylim(ax, ds[key].sel(problem=problem, model=model).values if key in ds else [], pad=1.3)
        ps.plain_log_ticks(ax.yaxis)
    else:
        ps.no_data(ax)
    ax.set_xlabel(ps.DELTA_LABEL + r" ($a$ = tube radius or duct height)")
    ax.set_ylabel(f"reduced flow rate ${key}$")
    title = f"Tube and ducts, {ps.problem_text(problem)}, {model_text(model)}"
    if n_failed:
        title += f" ({n_failed} failed: $\\times$)"
    ax.set_title(title, fontsize="medium")
    _legend(fig, ax, section, geos, walls, refs)
    return fig


def common_outlet_pressure(section, geos, gas: str, deltas: np.ndarray, max_ratio: float) -> float:
    """One outlet pressure for every cross-section: the geometric mean of the range in which the
    whole channel of each cross-section stays inside the computed delta range (p_in = max_ratio p_out);
    the geometric mean of the widest such range if none is common."""
    from knudsweep.solver import gas as gasmod

    t = section["conditions"]["temperature"]
    lo, hi = [], []
    for _, shape, aspect in geos:
        _, a, _ = size_of(section, shape, aspect)
        lo.append(gasmod.pressure_from_delta(gas, float(deltas.min()), t, a))
        hi.append(gasmod.pressure_from_delta(gas, float(deltas.max()) / max_ratio, t, a))
    p_lo, p_hi = max(lo), min(hi)
    if p_lo > p_hi:
        p_lo, p_hi = min(lo), max(hi)
    return float(math.sqrt(p_lo * p_hi))


def _pressure_figures(ds, section, settings, geos, walls):
    """Flow against pressure ratio, and thermal transpiration (first model, first wall, first gas)."""
    from matplotlib.ticker import FixedLocator, FuncFormatter, NullFormatter, NullLocator

    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure
    from knudsweep.solver import gas as gasmod
    from knudsweep.solver.conductance import flow_at_pressure_ratio, thermomolecular_pressure_ratio

    c = section["conditions"]
    gas = section["gases"][0]
    model = model_labels(section)[0]
    wlabel, w0 = walls[0]
    t = c["temperature"]
    delta = ds["delta"].values.astype(float)
    out = {}

    fig, ax = new_figure(settings, scale=(1.0, 1.2))
    drawn = False
    ratios = np.asarray(sorted(c["pressure_ratios"]), float)
    p_out = common_outlet_pressure(section, geos, gas, delta, float(ratios.max()))
    handles, labels = [], []
    for i, (glabel, shape, aspect) in enumerate(geos):
        table = flow_table(ds, glabel, shape, aspect, model, wlabel)
        if table is None:
            continue
        _, a, kw = size_of(section, shape, aspect)

        def mdot(r):
            try:
                return flow_at_pressure_ratio(table, gas, r * p_out, p_out, c["length"], t_in=t, **kw)["mass_flow"]
            except (RuntimeError, ValueError):
                return np.nan

        at_ratios = np.array([mdot(r) for r in ratios])
        # markers at the study's ratios, a monotone (PCHIP, log-log) curve between them
        h = ps.plot_series(ax, ratios, at_ratios, {**ps.series_style(i), "ms": 5.5})
        if h is not None:
            drawn = True
            handles.append(h)
            labels.append(geometry_text(section, shape, aspect))
    if drawn:
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.xaxis.set_major_locator(FixedLocator(ratios))
        ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        ax.xaxis.set_minor_locator(NullLocator())
        ax.xaxis.set_minor_formatter(NullFormatter())
    else:
        ps.no_data(ax, "needs converged $G_P$ and $G_T$ at two or more $\\delta$")
    ax.set_xlabel(r"pressure ratio $p_\mathrm{in}/p_\mathrm{out}$ (markers: the study's ratios)")
    ax.set_ylabel(r"mass flow [kg s$^{-1}$]")
    ax.set_title(
        f"Flow through {c['length']:g} m long tube and ducts, {gas}, {t:g} K,\n"
        f"$p_\\mathrm{{out}}$ = {ps.number(p_out)} Pa for all, {model_text(model)}, "
        f"{ps.wall_text(w0)}",
        fontsize="small",
    )
    ps.bottom_legend(fig, handles, labels, ncol=1)
    out["tube_duct_flow_vs_pressure_ratio"] = fig

    fig, ax = new_figure(settings, scale=(1.0, 1.2))
    th = c["thermal"]
    t_cold, t_hot = th["t_cold"], th["t_hot"]
    drawn = False
    handles, labels = [], []
    for i, (glabel, shape, aspect) in enumerate(geos):
        table = flow_table(ds, glabel, shape, aspect, model, wlabel)
        if table is None:
            continue
        _, a, kw = size_of(section, shape, aspect)
        # the cold end inside the computed delta range; markers where the cold end sits on a computed delta
        nodes = table.deltas
        p_nodes = np.array([gasmod.pressure_from_delta(gas, float(d), t_cold, a) for d in nodes])
        pc = np.geomspace(p_nodes.min(), p_nodes.max(), 40)
        ratio = [thermomolecular_pressure_ratio(table, gas, t_cold, t_hot, p, **kw) for p in pc]
        at_nodes = [thermomolecular_pressure_ratio(table, gas, t_cold, t_hot, p, **kw) for p in p_nodes]
        drawn = True
        style = ps.series_style(i)
        ax.plot(pc, ratio, **{k: v for k, v in style.items() if k != "marker"})
        ax.plot(p_nodes, at_nodes, ls="none", **{k: v for k, v in style.items() if k not in ("ls", "lw")}, ms=5.0)
        handles.append(ax.plot([], [], **style, ms=5.0)[0])
        labels.append(geometry_text(section, shape, aspect))
    ax.axhline(math.sqrt(t_hot / t_cold), **ps.reference("free_molecular"))
    ax.axhline(1.0, **ps.reference("continuum"))
    handles += [ax.plot([], [], **ps.reference("free_molecular"))[0], ax.plot([], [], **ps.reference("continuum"))[0]]
    labels += [r"free molecular $\sqrt{T_\mathrm{hot}/T_\mathrm{cold}}$ (Knudsen 1909)", "continuum: 1"]
    if not drawn:
        ps.no_data(ax, "needs converged $G_P$ and $G_T$ at two or more $\\delta$")
    ax.set_xscale("log")
    ax.set_xlabel(r"cold-side pressure $p_\mathrm{cold}$ [Pa] (markers: computed $\delta$ at the cold end)")
    ax.set_ylabel(r"$p_\mathrm{hot}/p_\mathrm{cold}$")
    ax.set_title(
        f"Thermal transpiration, {gas}, {t_cold:g} K / {t_hot:g} K, {model_text(model)}, {ps.wall_text(w0)}",
        fontsize="small",
    )
    ps.bottom_legend(fig, handles, labels, ncol=2)
    out["tube_duct_thermal_transpiration"] = fig
    return out


def _model_error_figure(ds, section, settings):
    """G_model / G_Boltzmann against delta, one panel per coefficient and Boltzmann operator (VHS: per gas); bars:
    the ratio's error estimate."""
    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure

    refs, eqs, keys = model_error_pairs(section)
    walls = wall_settings(section)
    geos = boltzmann_geometries(section)
    mosaic = [[f"{key}|{lbe}" for key in keys] for lbe in refs]
    fig, axes = new_figure(
        settings,
        mosaic=mosaic,
        scale=(1.0 if len(keys) == 1 else 1.6, 1.2 * (1.0 + 0.6 * (len(refs) - 1))),
        sharey=True,
    )
    for n, (key, lbe) in enumerate((k, r) for r in refs for k in keys):
        ax = axes[f"{key}|{lbe}"]
        problem = "poiseuille" if key == "G_P" else "thermal_creep"
        drawn = False
        for i, (wlabel, _w) in enumerate(walls):
            for glabel in geos:
                sel = {"geometry": glabel, "wall": wlabel}
                drawn |= plot_model_error(ax, ds, lbe, eqs, key, sel, i, ps.model_marker)
        ax.axhline(1.0, **ps.reference("continuum"))
        ax.set_xscale("log")
        if lbe == refs[-1]:
            ax.set_xlabel(ps.DELTA_LABEL + r" ($a$ = tube radius)")
        if n % len(keys) == 0:
            ax.set_ylabel("model equation / Boltzmann")
        title = f"${key}$, {ps.problem_text(problem)}"
        ax.set_title(title if len(refs) == 1 else f"{title}\nagainst {model_text(lbe)}", fontsize="medium")
        if not drawn:
            ps.no_data(ax)
    against = model_text(refs[0]) if len(refs) == 1 else "linearized Boltzmann equation"
    fig.suptitle(f"Tube: model equations against the {against}", fontsize="medium")
    first = axes[f"{keys[0]}|{refs[0]}"]
    handles, labels = [], []
    for i, (_wlabel, w) in enumerate(walls):
        handles.append(first.plot([], [], **ps.series_style(i), ms=5.5)[0])
        labels.append(ps.wall_text(w))
    for m in eqs:
        handles.append(first.plot([], [], ls="none", marker="o", color="0.35", **ps.model_marker(m))[0])
        labels.append(model_text(m))
    handles.append(first.plot([], [], **ps.reference("continuum"))[0])
    labels.append("equal to the Boltzmann value")
    ps.bottom_legend(fig, handles, labels, ncol=2)
    return fig


# ---------------------------------------------------------------- report captions
def model_error_figure_names(section: dict[str, Any]) -> list[str]:
    return ["tube_duct_model_error_vs_delta"] if model_error_pairs(section)[0] else []


def model_error_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    from knudsweep.plot_style import wall_text

    refs, eqs, keys = model_error_pairs(section)
    delta = ds["delta"].values.astype(float)
    wall_list = "; ".join(_plain(wall_text(w)) for _, w in wall_settings(section))
    text = [
        f"Model error of the kinetic model equations ({', '.join(model_text(m) for m in eqs)}) in the tube: their "
        f"reduced flow rates {' and '.join(keys)} divided by the solution of the linearized Boltzmann equation "
        f"({', '.join(model_text(r) for r in refs)}; VHS with the gas's viscosity index omega) at the same delta and "
        f"walls, against delta = {delta.min():g} to {delta.max():g} ({delta.size} values); one panel per flow rate "
        f"and Boltzmann operator. Colour and marker: wall ({wall_list}); marker fill: model equation. The dotted "
        "line at 1 is agreement; delta uses the gas's viscosity in every model, so the ratios tend to 1 as "
        "delta -> 0. Error bars: the discretisation error estimates of both solutions, added (usually smaller than "
        "the markers).",
    ]
    text += model_error_sentences(ds, refs, keys, model_text)
    return {"tube_duct_model_error_vs_delta": "\n\n".join(text)}


def coefficient_figure_names(section: dict[str, Any]) -> list[str]:
    return [f"tube_duct_{MAIN_COEFFICIENT[p]}_vs_delta_{m}" for p in section["problems"] for m in model_labels(section)]


def pressure_figure_names(section: dict[str, Any]) -> list[str]:
    """Flow against pressure ratio and thermal transpiration: they need both problems."""
    if set(PROBLEMS) <= set(section["problems"]):
        return ["tube_duct_flow_vs_pressure_ratio", "tube_duct_thermal_transpiration"]
    return []


def _plain(text: str) -> str:
    return text.replace("$", "").replace("\\alpha", "alpha").replace("\\times", "x")


def coefficient_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    """Report caption (reStructuredText) of each coefficient figure: what is shown, models, walls, uncertainty."""
    from knudsweep.plot_style import problem_text, wall_text
    from knudsweep.report import relative_error_sentence, status_sentence

    geos = geometry_settings(section)
    walls = wall_settings(section)
    geo_list = "; ".join(_plain(geometry_text(section, s, a)) for _, s, a in geos)
    wall_list = "; ".join(_plain(wall_text(w)) for _, w in walls)
    delta = ds["delta"].values.astype(float)
    span = f"delta = {delta.min():g} to {delta.max():g} ({delta.size} values)"
    out = {}
    for problem in section["problems"]:
        key = MAIN_COEFFICIENT[problem]
        for model in model_labels(section):
            text = [
                f"Reduced flow rate {key} of {problem_text(problem)} through long channels against the rarefaction "
                f"parameter delta = p a / (mu v0), a = tube radius or duct height, {span}. Kinetic model: "
                f"{model_text(model)}. Cross-sections (colour and marker): {geo_list}. Walls (filled, open marker): "
                f"{wall_list}. Markers are computed points, curves monotone (PCHIP) interpolations in log-log.",
            ]
            if key == "G_P":
                text.append(
                    f"References (thin dark grey): no-slip continuum and first-order slip for delta >= "
                    f"{SLIP_MIN_DELTA:g} (sigma_P = {SIGMA_P_DIFFUSE} for diffuse walls, Loyalka et al. 1975, "
                    "times (2 - alpha)/alpha, alpha_t for Cercignani-Lampis walls, approximate); free molecular for "
                    f"delta <= {FREE_MOLECULAR_FIG_MAX_DELTA:g}: Knudsen's 8/(3 sqrt(pi)) for the tube, the quadrature "
                    "of knudsweep.solver.duct for ducts, times Smoluchowski's (2 - alpha)/alpha, for Maxwell walls only (no "
                    "source was at hand for the Cercignani-Lampis factor)."
                )
            else:
                text.append(
                    f"References: thermal slip, a 1/delta law matched to the computed value at the largest delta, "
                    f"for delta >= {SLIP_MIN_DELTA:g}; free molecular G_T = G_P/2 (Knudsen 1909) for delta <= "
                    f"{FREE_MOLECULAR_FIG_MAX_DELTA:g}, Maxwell walls only."
                )
            text.append(relative_error_sentence(ds, key, {"problem": problem, "model": model}, key))
            text.append(status_sentence(ds, {"problem": problem, "model": model}))
            out[f"tube_duct_{key}_vs_delta_{model}"] = "\n\n".join(text)
    return out


def pressure_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    """Report caption of the pressure-ratio and transpiration figures."""
    from knudsweep.plot_style import wall_text

    geos = geometry_settings(section)
    walls = wall_settings(section)
    c = section["conditions"]
    geo_list = "; ".join(_plain(geometry_text(section, s, a)) for _, s, a in geos)
    delta = ds["delta"].values.astype(float)
    out = {}
    gas, model = section["gases"][0], model_labels(section)[0]
    wl, w0 = walls[0]
    ratios = sorted(c["pressure_ratios"])
    p_out = common_outlet_pressure(section, geos, gas, delta, float(max(ratios)))
    note = (
        f"Gas {gas} at {c['temperature']:g} K, kinetic model {model_text(model)}, walls "
        f"{_plain(wall_text(w0))} (the first model and wall of the study); cross-sections: {geo_list}; "
        f"length {c['length']:g} m."
    )
    out["tube_duct_flow_vs_pressure_ratio"] = "\n\n".join(
        [
            "Mass flow through the long channel at finite pressure ratio p_in/p_out, from the computed G_P and G_T "
            "integrated along the channel (knudsweep.solver.conductance.flow_at_pressure_ratio; end effects neglected). "
            f"The outlet pressure is the same for all cross-sections, p_out = {p_out:.3g} Pa, chosen so that "
            "the whole channel stays inside the computed delta range. Markers at the study's ratios "
            f"({', '.join(f'{r:g}' for r in ratios)}), curves monotone interpolations between them. " + note,
            "Uncertainty: the interpolation of G_P between computed delta values and the numerical error of "
            "the points (see the G_P caption); no model error.",
        ]
    )
    th = c["thermal"]
    out["tube_duct_thermal_transpiration"] = "\n\n".join(
        [
            f"Thermal transpiration: pressure ratio p_hot/p_cold at zero net flow between ends at "
            f"{th['t_cold']:g} K and {th['t_hot']:g} K, against the cold-side pressure, from d ln p / d ln T = "
            "G_T/G_P integrated along the channel (knudsweep.solver.conductance.thermomolecular_pressure_ratio). Drawn "
            "only where the cold end lies inside the computed delta range; markers where it sits on a computed "
            "delta. References: the free-molecular limit sqrt(T_hot/T_cold) (Knudsen 1909) and the continuum "
            "limit 1. " + note,
            "Uncertainty: the interpolation of G_T/G_P between computed delta values (monotone, PCHIP in "
            "log-log) and the numerical error of the points; no model error.",
        ]
    )
    return out


# ---------------------------------------------------------------- the registry of figures (in drawing order)
@FIGURES.register(coefficient_figure_names, caption=coefficient_captions)
def coefficient_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    geos = geometry_settings(section)
    walls = wall_settings(section)
    return {
        f"tube_duct_{MAIN_COEFFICIENT[p]}_vs_delta_{m}": _coefficient_figure(ds, section, settings, p, m, geos, walls)
        for p in section["problems"]
        for m in model_labels(section)
    }


@FIGURES.register(pressure_figure_names, caption=pressure_captions)
def pressure_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    return _pressure_figures(ds, section, settings, geometry_settings(section), wall_settings(section))


@FIGURES.register(model_error_figure_names, caption=model_error_captions)
def model_error_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    return {"tube_duct_model_error_vs_delta": _model_error_figure(ds, section, settings)}
