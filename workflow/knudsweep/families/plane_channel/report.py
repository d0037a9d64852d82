"""Tables, figures and captions of the plane-channel family (read from the gathered sweep).

Every builder is registered by name in :data:`TABLES` or :data:`FIGURES` (with its caption).

Reference curves (all in the normalisation of Sharipov & Seleznev, J. Phys.
Chem. Ref. Data 27 (1998) 657: M' = (a p / v0) [G_P (a/p)(-dp/dx) + G_T (a/T) dT/dx]):

* continuum, no slip: ``G_P = delta / 6`` (plane Poiseuille profile; derived,
  check-values.md section 0.3);
* first-order slip: ``G_P = 2 delta [ (1/2 + s1)(1/2 + s2) / (1 + s1 + s2) - 1/6 ]``
  with ``s_i = sigma_P,i / delta`` (derived here from u'' = const with
  u = s_i a du/dn at each plate; for equal plates it is ``delta/6 + sigma_P``);
  ``sigma_P = 1.0162`` for diffuse walls (BGK value: Sone's k0 = -1.01619 and
  Cercignani's 1.1466 lambda_eq x sqrt(pi)/2 = 1.01615; from memory,
  unconfirmed, check-values.md section 2), used for every kinetic model, and
  scaled by Maxwell's (2 - alpha)/alpha for alpha < 1 (Maxwell, Phil. Trans. R.
  Soc. 170 (1879) 231; approximate).  For Cercignani-Lampis walls alpha_t takes
  the place of alpha (common practice, no source);
* thermal slip: ``G_T = sigma_T / delta`` with sigma_T = 0.7663 (BGK, diffuse;
  Sone's K1 = -0.38316, from memory, unconfirmed); only for the BGK model with
  diffuse walls, otherwise not drawn/tabulated;
* sources: tables and captions cite Loyalka, Petrellis & Storvick, Phys.
  Fluids 18 (1975) 1094 (numerically exact BGK viscous slip and thermal creep;
  bibliographic data confirmed, the two numbers and their table from memory,
  unconfirmed) and Cercignani & Daneri, J. Appl. Phys. 34 (1963) 3509 for the
  log form (bibliographic data from memory, unconfirmed).  These set reference
  curves and ratio columns only, never a pass bar;
* free molecular: the infinite channel has no finite free-molecular G_P (it
  grows like -(1/sqrt(pi)) ln delta as delta -> 0; the form is Cercignani's, from
  memory, unconfirmed).  The reference used is that asymptotic *form* with its
  constant matched to the computed G_P at the smallest delta of the sweep
  (diffuse walls only, and only if that delta <= 0.1 -- common practice, no
  source).  It is a shape reference, not an independent limit: its ratio is 1
  at the smallest delta by construction.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pandas as pd

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
from knudsweep.families.plane_channel.grid import (
    BOLTZMANN_MODELS,
    BOLTZMANN_PROBLEMS,
    MAIN_COEFFICIENT,
    MODEL_EQUATIONS,
    model_entries,
    model_labels,
    wall_settings,
)

TABLES = Products("table")
FIGURES = Products("figure")

from knudsweep.solver.limits import SIGMA_P_BGK as SIGMA_P_DIFFUSE  # noqa: E402  (one home: knudsweep.solver.limits)
from knudsweep.solver.limits import SIGMA_T_BGK as SIGMA_T_DIFFUSE_BGK  # noqa: E402

SQRT_PI = math.sqrt(math.pi)
FM_MATCH_MAX_DELTA = 0.1  # free-molecular form matched only if the smallest delta is this small
FM_SHOW_MAX_DELTA = 1.0  # ... and used only up to this delta (common practice, no source)

NOTES_COMMON = [
    "delta = p a / (mu v0), a = plate gap, v0 = sqrt(2 k T / m); Kn = sqrt(pi) / (2 delta).",
    "Normalisation of G_P, G_T: Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27 (1998) 657.",
    "Pressure for each gas: p = delta mu(T) v0 / a at the study temperature and gap "
    "(knudsweep.solver.gas.pressure_from_delta; mu(T) from config/gases.yaml).",
    "status 'failed', 'missing' or 'corrupt': the coefficient columns are empty for that row.",
]


BOLTZMANN_TEXT = {
    "boltzmann_hard_sphere": "linearized Boltzmann (hard spheres)",
    "boltzmann_vhs": "linearized Boltzmann (VHS",  # closed with the gas: "(VHS, Ar)"
}
# Marker of a linearized-Boltzmann series: a mid-size filled marker with a black edge (VHS: white-filled), apart
# from the open (BGK), small filled (S-model) and half-filled (ES-BGK) markers of knudsweep.plot_style.model_marker
BOLTZMANN_MARKER = {"ms": 6.0, "mec": "black", "mew": 0.9}
VHS_MARKER = {"ms": 6.0, "mec": "black", "mew": 0.9, "mfc": "white"}


def model_text(model: str) -> str:
    """Plain words of a model label (knudsweep.plot_style.model_text; the Boltzmann models named here)."""
    from knudsweep.plot_style import model_text as style_text

    name, gas = base_model(model)
    if gas is not None:
        return f"{BOLTZMANN_TEXT[name]}, {gas})"
    return BOLTZMANN_TEXT.get(model) or style_text(model)


def model_marker(model: str) -> dict[str, Any]:
    """Marker of a model label (knudsweep.plot_style.model_marker; the Boltzmann models: BOLTZMANN_MARKER,
    VHS_MARKER)."""
    from knudsweep.plot_style import model_marker as style_marker

    name, gas = base_model(model)
    if gas is not None:
        return dict(VHS_MARKER)
    return dict(BOLTZMANN_MARKER) if name in BOLTZMANN_MODELS else style_marker(model)


def model_error_pairs(section: dict[str, Any]) -> tuple[list[str], list[str], list[str]]:
    """(Boltzmann references, model equations, coefficients) of the model-error view: the references are the
    labels of the ``model`` dimension of each Boltzmann operator (hard spheres; VHS once per gas); ([], [], [])
    if the study does not hold both kinds of model."""
    refs = [label for label, model, _ in model_entries(section) if model in BOLTZMANN_MODELS]
    eqs = [m for m in section["models"] if m in MODEL_EQUATIONS]
    keys = [MAIN_COEFFICIENT[p] for p in section["problems"] if p in BOLTZMANN_PROBLEMS]
    if not refs or not eqs or not keys:
        return [], [], []
    return refs, eqs, keys


def _slip_sigma(wall_row: dict[str, Any], diffuse_value: float) -> float:
    """Maxwell-scaled slip coefficient of one plate (see module docstring)."""
    a = wall_row["alpha_t"] if wall_row["model"] == "cercignani_lampis" else wall_row["alpha"]
    return diffuse_value * (2.0 - a) / a


def slip_gp(delta: np.ndarray, sigma_lower: float, sigma_upper: float) -> np.ndarray:
    """First-order-slip G_P for plates with slip coefficients sigma_lower, sigma_upper."""
    s1, s2 = sigma_lower / delta, sigma_upper / delta
    return 2.0 * delta * ((0.5 + s1) * (0.5 + s2) / (1.0 + s1 + s2) - 1.0 / 6.0)


def _is_diffuse(lower: dict, upper: dict | None) -> bool:
    def one(w):
        if w["model"] == "maxwell":
            return w["alpha"] == 1.0
        return w["alpha_t"] == 1.0 and w["alpha_n"] == 1.0

    return one(lower) and (upper is None or one(upper))


def walls_by_label(section):
    return {label: (lower, upper) for label, lower, upper in wall_settings(section)}


def free_molecular_constant(delta: np.ndarray, g: np.ndarray) -> float:
    """c of -(1/sqrt(pi)) ln delta + c matched at the smallest delta with a finite g (NaN if none <= 0.1)."""
    ok = np.isfinite(g)
    if not ok.any() or delta[ok].min() > FM_MATCH_MAX_DELTA:
        return math.nan
    i = int(np.argmin(np.where(ok, delta, np.inf)))
    return float(g[i] + math.log(delta[i]) / SQRT_PI)


def free_molecular_form(delta: np.ndarray, g: np.ndarray) -> np.ndarray:
    """-(1/sqrt(pi)) ln delta + c with c from :func:`free_molecular_constant`.

    NaN where not applicable: no match possible, or delta > FM_SHOW_MAX_DELTA
    (the form is an asymptote for delta -> 0 and turns negative at large delta).
    """
    form = -np.log(delta) / SQRT_PI + free_molecular_constant(delta, g)
    return np.where(delta <= FM_SHOW_MAX_DELTA, form, np.nan)


# ---------------------------------------------------------------- tables
def problem_table_names(section: dict[str, Any]) -> list[str]:
    return [f"plane_channel_{p}" for p in section["problems"]]


def model_error_names(section: dict[str, Any]) -> list[str]:
    """``[<prefix>model_error<suffix>]`` if the study holds a Boltzmann model and a model equation."""
    return ["plane_channel_model_error"] if model_error_pairs(section)[0] else []


def model_error_table(ds, section: dict[str, Any]) -> Table:
    """G_P, G_T of each model equation over each linearized Boltzmann value (one row block per Boltzmann
    operator, and per gas for VHS), per wall and delta."""
    refs, eqs, keys = model_error_pairs(section)
    rows = []
    for lbe, label in ((r, w) for r in refs for w in walls_by_label(section)):
        rows += model_error_rows(ds, lbe, eqs, keys, {"wall": label}, model_text)
    notes = [
        NOTES_COMMON[0],
        NOTES_COMMON[1],
        "Model error of the kinetic model equations: each one's reduced flow rate divided by the solution of the "
        f"linearized Boltzmann equation named in the row ({', '.join(model_text(r) for r in refs)}; "
        "knudsweep.solver.plane_channel.boltzmann_driver) at the same delta and walls. The VHS operator takes the "
        "viscosity index omega of the row's gas (config/gases.yaml); hard spheres and the model equations do not "
        "depend on the gas (gas column empty). delta is "
        "defined with the gas's viscosity in both, so the difference is the error of the model's collision term; "
        "the ratio tends to 1 as delta -> 0, slowly (like 1/ln delta) between plates, where the flow rates diverge "
        "with a model-dependent constant.",
        *MODEL_ERROR_NOTES,
    ]
    return Table(pd.DataFrame(rows), "Plane channel, model error against the linearized Boltzmann equation", notes)


def _gas_columns(gas: str, delta: float, section: dict[str, Any], g: float, kind: str) -> dict[str, float]:
    from knudsweep.solver.gas import most_probable_speed, pressure_from_delta

    t = section["conditions"]["temperature"]
    a = section["conditions"]["gap"]
    p = pressure_from_delta(gas, delta, t, a)
    v0 = most_probable_speed(gas, t)
    cols = {"pressure [Pa]": p}
    if kind == "G_P":
        # M' / (-dp/dx) = a^2 G_P / v0   [kg m^-1 s^-1 per Pa m^-1 = m s]
        cols["flow per unit width and pressure gradient [m s]"] = a * a * g / v0
    elif kind == "G_T":
        # M' / ((1/T) dT/dx) = a^2 p G_T / v0   [kg m^-1 s^-1 per m^-1 = kg s^-1]
        cols["flow per unit width and log-temperature gradient [kg s^-1]"] = a * a * p * g / v0
    return cols


@TABLES.register(problem_table_names)
def problem_tables(ds, section: dict[str, Any]) -> dict[str, Table]:
    """One table per problem: the main coefficient, its ratios to the references, SI units per gas."""
    walls = walls_by_label(section)
    delta = ds["delta"].values.astype(float)
    tables = {}
    for problem in section["problems"]:
        key = MAIN_COEFFICIENT[problem]
        rows = []
        for mlabel, model, model_gas in model_entries(section):
            for label, (lower, upper) in walls.items():
                sel = dict(problem=problem, model=mlabel, wall=label)
                status = ds["status"].sel(**sel).values
                g = ds[key].sel(**sel).values.astype(float) if key in ds else np.full(delta.shape, np.nan)
                err_name = f"{key}_error_estimate"
                g_err = ds[err_name].sel(**sel).values.astype(float) if err_name in ds else np.full(delta.shape, np.nan)
                extra_cols = {}
                if key == "G_P":
                    s_lo = _slip_sigma(lower, SIGMA_P_DIFFUSE)
                    s_up = s_lo if upper is None else _slip_sigma(upper, SIGMA_P_DIFFUSE)
                    fm = free_molecular_form(delta, g) if _is_diffuse(lower, upper) else np.full_like(delta, np.nan)
                    extra_cols = {
                        "G_P / (delta/6) [1]": g / (delta / 6.0),
                        "G_P / G_slip [1]": g / slip_gp(delta, s_lo, s_up),
                        "G_P / G_fm,asymptotic [1]": g / fm,
                    }
                    if "thermal_creep" in section["problems"] and "G_T" in ds:
                        gt = ds["G_T"].sel(problem="thermal_creep", model=mlabel, wall=label).values
                        extra_cols["G_T / G_P [1]"] = gt / g
                elif key == "G_T":
                    if model == "bgk" and _is_diffuse(lower, upper):
                        extra_cols["G_T / (sigma_T/delta) [1]"] = g / (SIGMA_T_DIFFUSE_BGK / delta)
                    else:
                        extra_cols["G_T / (sigma_T/delta) [1]"] = np.full_like(delta, np.nan)
                elif key in ("shear_stress", "heat_flux"):
                    extra_cols[f"{key} * sqrt(pi) [1]"] = g * SQRT_PI
                # a gas-dependent operator (VHS) converts with its own gas only
                for gas in section["gases"] if model_gas is None else [model_gas]:
                    for j, d in enumerate(delta):
                        row = {
                            "model": model,
                            "wall": label,
                            "gas": gas,
                            "delta [1]": d,
                            "Kn [1]": SQRT_PI / (2.0 * d),
                            "status": status[j],
                            f"{key} [1]": g[j],
                            f"{key} error estimate [1]": g_err[j],
                        }
                        row.update({k: float(v[j]) for k, v in extra_cols.items()})
                        row.update(_gas_columns(gas, d, section, g[j], key))
                        rows.append(row)
        frame = pd.DataFrame(rows)
        notes = list(NOTES_COMMON)
        notes.append(
            f"{key} error estimate: estimated discretisation error of {key} (absolute), from a Richardson "
            "extrapolation over a coarser solve (knudsweep.solver.resolution); it does not include the model error."
        )
        notes.append(f"temperature {section['conditions']['temperature']:g} K, gap {section['conditions']['gap']:g} m.")
        if key == "G_P":
            notes += [
                "G_P / (delta/6): ratio to the continuum (no-slip Navier-Stokes) value delta/6.",
                "G_P / G_slip: ratio to first-order slip flow, delta/6 + sigma_P for equal plates, "
                f"sigma_P = {SIGMA_P_DIFFUSE} (BGK, diffuse walls; Loyalka, Petrellis & Storvick, Phys. Fluids 18 "
                "(1975) 1094) "
                "times (2 - alpha)/alpha (Maxwell 1879, approximate; alpha_t for Cercignani-Lampis walls).",
                "G_P / G_fm,asymptotic: ratio to the free-molecular asymptotic form "
                "-(1/sqrt(pi)) ln delta + c (Cercignani & Daneri, J. Appl. Phys. 34 (1963) 3509) with c matched "
                "to the computed G_P at the smallest delta of this sweep; diffuse walls only and only "
                f"if that delta <= {FM_MATCH_MAX_DELTA}; given for delta <= {FM_SHOW_MAX_DELTA} only. The infinite channel has no finite "
                "free-molecular flow rate, so this is a shape reference (ratio 1 at the smallest delta).",
            ]
        if key == "G_T":
            notes.append(
                f"G_T / (sigma_T/delta): ratio to first-order thermal slip, sigma_T = {SIGMA_T_DIFFUSE_BGK} "
                "(BGK, diffuse walls; Loyalka, Petrellis & Storvick, Phys. Fluids 18 (1975) 1094); BGK with diffuse "
                "walls only."
            )
        if key in ("shear_stress", "heat_flux"):
            notes.append(
                f"{key} * sqrt(pi): ratio to the free-molecular value 1/sqrt(pi) for diffuse walls "
                "(derived from the free-molecular wall fluxes), if the solver uses that normalisation."
            )
        tables[f"plane_channel_{problem}"] = Table(frame, f"Plane channel, {problem.replace('_', ' ')}", notes)
    return tables


@TABLES.register(model_error_names)
def model_error_tables(ds, section: dict[str, Any]) -> dict[str, Table]:
    return {"plane_channel_model_error": model_error_table(ds, section)}


# ---------------------------------------------------------------- figures
# Ranges where the reference curves are drawn (the usual regime boundaries, Kn < 0.1
# slip flow and Kn > 10 free-molecular flow; common practice, no source).
SLIP_MIN_DELTA = 10.0  # Kn = 0.089
FREE_MOLECULAR_FIG_MAX_DELTA = 0.1  # Kn = 8.9


def coefficient_figure_names(section: dict[str, Any]) -> list[str]:
    return [f"plane_channel_{MAIN_COEFFICIENT[p]}_vs_delta" for p in section["problems"]]


def correction_figure_names(section: dict[str, Any]) -> list[str]:
    return ["plane_channel_correction_vs_kn"] if "poiseuille" in section["problems"] else []


def convergence_figure_names(section: dict[str, Any]) -> list[str]:
    return [f"plane_channel_convergence_{p}" for p in section["problems"]]


def model_error_figure_names(section: dict[str, Any]) -> list[str]:
    return ["plane_channel_model_error_vs_delta"] if model_error_pairs(section)[0] else []


def _accommodation_factor(lower: dict, upper: dict | None) -> float:
    """Mean over the plates of Maxwell's (2 - alpha)/alpha (alpha_t for Cercignani-Lampis walls)."""

    def one(w):
        a = w["alpha_t"] if w["model"] == "cercignani_lampis" else w["alpha"]
        return (2.0 - a) / a

    return one(lower) if upper is None else 0.5 * (one(lower) + one(upper))


def free_molecular_slope(lower: dict, upper: dict | None) -> float:
    """Slope of G_P against -ln delta as delta -> 0: (1/sqrt(pi)) for diffuse plates (Cercignani's
    form, from memory, unconfirmed) times Maxwell's (2 - alpha)/alpha for partly specular plates
    (molecules keep their drift over about (2 - alpha)/alpha wall collisions; by analogy with the
    slip coefficient, approximate, no source)."""
    return _accommodation_factor(lower, upper) / SQRT_PI


values_of = coefficient_values


def _wall_entries(walls) -> list[tuple[int, str, dict, dict | None]]:

    return [(i, label, lower, upper) for i, (label, (lower, upper)) in enumerate(walls.items())] if walls else []


def _legend_handles(ax, walls, models, refs: list[tuple[str, str]]):
    """Proxy artists: one per wall (colour + marker), one per model (marker fill), one per reference."""
    from knudsweep import plot_style as ps

    handles, labels = [], []
    for i, _label, lower, upper in _wall_entries(walls):
        handles.append(ax.plot([], [], **ps.series_style(i), ms=5.5)[0])
        labels.append(ps.wall_text(lower, upper))
    if len(models) > 1:
        for model in models:
            handles.append(ax.plot([], [], ls="none", marker="o", color="0.35", **model_marker(model))[0])
            labels.append(model_text(model))
    for kind, text in refs:
        handles.append(ax.plot([], [], **ps.reference(kind))[0])
        labels.append(text)
    return handles, labels


def _coefficient_figure(ds, section, settings, problem):
    """G_P or G_T against delta: every model and wall in one panel, the models' difference below."""
    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure

    key = MAIN_COEFFICIENT[problem]
    walls = walls_by_label(section)
    models = model_labels(section)
    delta = ds["delta"].values.astype(float)
    two = len(models) > 1 and key in ("G_P", "G_T")
    if two:
        fig, axes = new_figure(
            settings, mosaic=[["main"], ["diff"]], scale=(1.0, 1.45), sharex=True, height_ratios=[3.0, 1.3]
        )
        ax, dax = axes["main"], axes["diff"]
    else:
        fig, ax = new_figure(settings, scale=(1.0, 1.2))
        dax = None
    n_failed, drawn, refs = 0, False, []
    for i, label, lower, upper in _wall_entries(walls):
        style = ps.series_style(i)
        first = None
        for model in models:
            sel = dict(problem=problem, model=model, wall=label)
            g = values_of(ds, key, **sel)
            n_failed += ps.mark_failed(ax, delta, ds["status"].sel(**sel).values, style)
            if ps.plot_series(ax, delta, g, {**style, **model_marker(model)}, logy=(key in ("G_P", "G_T"))):
                drawn = True
                first = g if first is None else first
        if first is None:
            continue
        small = np.geomspace(delta.min(), min(FREE_MOLECULAR_FIG_MAX_DELTA, delta.max()), 50)
        big = np.geomspace(max(SLIP_MIN_DELTA, delta.min()), delta.max(), 50)
        fm_ok = delta.min() <= FREE_MOLECULAR_FIG_MAX_DELTA and np.isfinite(first).any()
        if key == "G_P":
            s_lo = _slip_sigma(lower, SIGMA_P_DIFFUSE)
            s_up = s_lo if upper is None else _slip_sigma(upper, SIGMA_P_DIFFUSE)
            if delta.max() >= SLIP_MIN_DELTA:
                ax.plot(big, slip_gp(big, s_lo, s_up), **ps.reference("slip"))
            fm_slope = free_molecular_slope(lower, upper)
        elif key == "G_T":
            # first-order thermal slip sigma_T/delta, sigma_T matched at the largest delta
            j = np.flatnonzero(np.isfinite(first))
            if delta.max() >= SLIP_MIN_DELTA and j.size:
                sig_t = first[j[-1]] * delta[j[-1]]
                ax.plot(big, sig_t / big, **ps.reference("slip"))
            fm_slope = 0.5 * free_molecular_slope(lower, upper)  # free molecular: G_T = G_P / 2
        else:
            fm_slope = math.nan
        if fm_ok and math.isfinite(fm_slope):
            k = int(np.flatnonzero(np.isfinite(first))[0])
            if delta[k] <= FREE_MOLECULAR_FIG_MAX_DELTA:
                c = first[k] + fm_slope * math.log(delta[k])
                ax.plot(small, -fm_slope * np.log(small) + c, **ps.reference("free_molecular"))
    if key == "G_P":
        if delta.max() >= SLIP_MIN_DELTA:
            big = np.geomspace(max(SLIP_MIN_DELTA, delta.min()), delta.max(), 50)
            ax.plot(big, big / 6.0, **ps.reference("continuum"))
            refs.append(("continuum", r"no-slip continuum $\delta/6$ ($\delta \geq 10$)"))
            refs.append(("slip", r"first-order slip $\delta/6 + \sigma_P$ ($\delta \geq 10$)"))
        refs.append(
            (
                "free_molecular",
                r"free-molecular form $-\frac{2-\alpha}{\alpha}\frac{\ln\delta}{\sqrt{\pi}}$"
                r" + c ($\delta \leq 0.1$)",
            )
        )
    elif key == "G_T":
        if delta.max() >= SLIP_MIN_DELTA:
            refs.append(("slip", r"thermal slip $\sigma_T/\delta$, $\sigma_T$ matched at largest $\delta$"))
        refs.append(
            (
                "free_molecular",
                r"free-molecular form $-\frac{2-\alpha}{2\alpha}\frac{\ln\delta}{\sqrt{\pi}}$"
                r" + c ($\delta \leq 0.1$)",
            )
        )
    ax.set_xscale("log")
    if drawn:
        if key in ("G_P", "G_T"):
            ax.set_yscale("log")
            ps.data_ylim(ax, values_of(ds, key, problem=problem), pad=1.4)
            ps.plain_log_ticks(ax.yaxis)
    else:
        ps.no_data(ax)
    symbol = {"G_P": "G_P", "G_T": "G_T"}.get(key, key.replace("_", r"\_"))
    ax.set_ylabel(f"reduced flow rate ${symbol}$" if key in ("G_P", "G_T") else f"${symbol}$")
    title = f"Plane channel, {ps.problem_text(problem)}"
    if n_failed:
        title += f" ({n_failed} failed: $\\times$)"
    ax.set_title(title, fontsize="medium")
    if dax is not None:
        base = models[0]
        for i, label, _lower, _upper in _wall_entries(walls):
            g0 = values_of(ds, key, problem=problem, model=base, wall=label)
            for model in models[1:]:
                g = values_of(ds, key, problem=problem, model=model, wall=label)
                ps.plot_series(
                    dax, delta, 100.0 * (g - g0) / g0, {**ps.series_style(i), **model_marker(model)}, logy=False
                )
        dax.axhline(0.0, color=ps.REFERENCE_COLOR, lw=0.8, zorder=1)
        dax.set_ylabel(
            f"{model_text(models[1]) if len(models) == 2 else 'model'} $-$ "
            f"{model_text(base)}\n[% of {model_text(base)}]",
            fontsize="small",
        )
        dax.set_xlabel(ps.DELTA_LABEL)
    else:
        ax.set_xlabel(ps.DELTA_LABEL)
    handles, labels = _legend_handles(ax, walls, models, refs)
    ps.bottom_legend(fig, handles, labels, ncol=2)
    return fig


def _correction_figure(ds, section, settings):
    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure

    walls = walls_by_label(section)
    models = model_labels(section)
    delta = ds["delta"].values.astype(float)
    kn = SQRT_PI / (2.0 * delta)
    fig, ax = new_figure(settings, scale=(1.0, 1.2))
    drawn = False
    for i, label, _lower, _upper in _wall_entries(walls):
        for model in models:
            g = values_of(ds, "G_P", problem="poiseuille", model=model, wall=label)
            order = np.argsort(kn)
            if ps.plot_series(ax, kn[order], (g / (delta / 6.0))[order], {**ps.series_style(i), **model_marker(model)}):
                drawn = True
    ax.axhline(1.0, **ps.reference("continuum"))
    ax.set_xscale("log")
    if drawn:
        ax.set_yscale("log")
    else:
        ps.no_data(ax)
    ax.set_xlabel(ps.KN_LABEL)
    ax.set_ylabel(r"correction factor $G_P\,/\,(\delta/6)$")
    ax.set_title("Flow-rate correction against no-slip continuum flow", fontsize="medium")
    # Correction factors are quoted against Kn by convention; delta on the top axis.
    top = ax.secondary_xaxis(
        "top",
        functions=(
            lambda k: SQRT_PI / (2.0 * np.maximum(k, 1e-300)),
            lambda d: SQRT_PI / (2.0 * np.maximum(d, 1e-300)),
        ),
    )
    top.set_xlabel(r"rarefaction parameter $\delta$", fontsize="small")
    handles, labels = _legend_handles(ax, walls, models, [("continuum", "no-slip continuum: ratio 1")])
    ps.bottom_legend(fig, handles, labels, ncol=2)
    return fig


def _convergence_figure(ds, section, settings, problem):
    """Iterations needed against delta (top) and the residual histories, one panel per model (below)."""
    import matplotlib.pyplot as plt
    from matplotlib.ticker import MaxNLocator

    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure

    walls = walls_by_label(section)
    models = model_labels(section)
    delta = ds["delta"].values.astype(float)
    tol = float(section["resolution"]["tol"])
    mosaic = [["iters"] * len(models), list(models)]
    fig, axes = new_figure(settings, mosaic=mosaic, scale=(1.0, 1.6), height_ratios=[1.0, 1.1])
    ax = axes["iters"]
    drawn = False
    for i, label, _lower, _upper in _wall_entries(walls):
        for model in models:
            n = ds["iterations"].sel(problem=problem, model=model, wall=label).values.astype(float)
            ok = ds["status"].sel(problem=problem, model=model, wall=label).values == "converged"
            if ps.plot_series(
                ax,
                delta,
                np.where(ok & (n > 0), n, np.nan),
                {**ps.series_style(i), **model_marker(model)},
                smooth=False,
            ):
                drawn = True
    ax.set_xscale("log")
    ax.set_xlabel(ps.DELTA_LABEL)
    ax.set_ylabel("iterations to converge")
    ax.yaxis.set_major_locator(MaxNLocator(integer=True))
    ax.set_title(f"Convergence, plane channel, {ps.problem_text(problem)}", fontsize="medium")
    if not drawn:
        ps.no_data(ax)
    norm = plt.Normalize(np.log10(delta.min()), np.log10(delta.max()) if len(delta) > 1 else np.log10(delta.min()) + 1)
    cmap = plt.get_cmap("viridis")  # sequential, colour-blind safe and monotone in lightness
    it = ds["iteration"].values
    for m, model in enumerate(models):
        hax = axes[model]
        any_line = False
        for label in walls:
            res = ds["residual"].sel(problem=problem, model=model, wall=label).values
            for j, d in enumerate(delta):
                r = res[j]
                ok = np.isfinite(r) & (r > 0)
                if ok.any():
                    any_line = True
                    hax.plot(it[ok], r[ok], color=cmap(norm(np.log10(d))), lw=0.8, alpha=0.85)
        hax.axhline(tol, **ps.reference("fit"))
        hax.text(
            0.98,
            tol,
            f"tolerance {ps.sci(tol)}",
            transform=hax.get_yaxis_transform(),
            ha="right",
            va="bottom",
            fontsize="x-small",
        )
        if any_line:
            hax.set_yscale("log")
        else:
            ps.no_data(hax, "no histories")
        hax.xaxis.set_major_locator(MaxNLocator(integer=True, nbins=5))
        hax.set_xlabel("iteration")
        hax.set_title(f"{model_text(model)}, all walls", fontsize="small")
        if m == 0:
            hax.set_ylabel("relative change\nof the iterate")
    sm = plt.cm.ScalarMappable(norm=norm, cmap=cmap)
    fig.colorbar(sm, ax=[axes[m] for m in models], label=r"$\log_{10}\delta$", shrink=0.9)
    handles, labels = _legend_handles(ax, walls, models, [])
    ps.bottom_legend(fig, handles, labels, ncol=2)
    return fig


def _model_error_figure(ds, section, settings):
    """G_model / G_Boltzmann against delta, one panel per coefficient; bars: the ratio's error estimate."""
    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure

    refs, eqs, keys = model_error_pairs(section)
    walls = walls_by_label(section)
    mosaic = [[f"{key}|{lbe}" for key in keys] for lbe in refs]  # one row per Boltzmann operator (VHS: per gas)
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
        for i, label, _lower, _upper in _wall_entries(walls):
            drawn |= plot_model_error(ax, ds, lbe, eqs, key, {"wall": label}, i, model_marker)
        ax.axhline(1.0, **ps.reference("continuum"))
        ax.set_xscale("log")
        if lbe == refs[-1]:
            ax.set_xlabel(ps.DELTA_LABEL)
        if n % len(keys) == 0:
            ax.set_ylabel("model equation / linearized Boltzmann")
        title = f"${key}$, {ps.problem_text(problem)}"
        ax.set_title(title if len(refs) == 1 else f"{title}\nagainst {model_text(lbe)}", fontsize="medium")
        if not drawn:
            ps.no_data(ax)
    against = model_text(refs[0]) if len(refs) == 1 else "linearized Boltzmann equation"
    fig.suptitle(f"Plane channel: model equations against the {against}", fontsize="medium")
    first = axes[f"{keys[0]}|{refs[0]}"]
    handles, labels = _legend_handles(first, walls, eqs, [("continuum", "equal to the Boltzmann value")])
    if len(eqs) == 1:  # _legend_handles names the models only when there are several
        handles.append(first.plot([], [], ls="none", marker="o", color="0.35", **model_marker(eqs[0]))[0])
        labels.append(model_text(eqs[0]))
    ps.bottom_legend(fig, handles, labels, ncol=2)
    return fig


# ---------------------------------------------------------------- report captions
def _plain_wall(lower: dict, upper: dict | None) -> str:
    from knudsweep.plot_style import wall_text

    return wall_text(lower, upper).replace("$", "").replace("\\alpha", "alpha")


def _caption_context(ds, section: dict[str, Any]) -> dict[str, Any]:
    """Text pieces every caption uses: models, walls, the delta span."""
    walls = walls_by_label(section)
    models = ", ".join(model_text(m) for m in model_labels(section))
    if any(m in BOLTZMANN_MODELS for m in section["models"]):
        models += (
            " (mid-size markers with a black edge: the linearized Boltzmann equation, filled for hard spheres, "
            "white for VHS)"
        )
    delta = ds["delta"].values.astype(float)
    return {
        "models": models,
        "wall_list": "; ".join(_plain_wall(lo, up) for lo, up in walls.values()),
        "span": f"delta = {delta.min():g} to {delta.max():g} ({delta.size} values)",
    }


def coefficient_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    """Caption of each coefficient figure: what is shown, models, walls, references, uncertainty."""
    from knudsweep.plot_style import problem_text
    from knudsweep.report import relative_error_sentence, status_sentence

    ctx = _caption_context(ds, section)
    models, wall_list, span = ctx["models"], ctx["wall_list"], ctx["span"]
    c = section["conditions"]
    out = {}
    for problem in section["problems"]:
        key = MAIN_COEFFICIENT[problem]
        name = f"plane_channel_{key}_vs_delta"
        text = [
            f"Reduced flow rate {key} of {problem_text(problem)} between parallel plates against the rarefaction "
            f"parameter delta = p a / (mu v0) (a = plate gap), {span}. Kinetic models: {models} (large open "
            f"markers BGK, small filled markers S-model). Walls (both plates): {wall_list}. Gas-independent "
            f"(reduced variables); the tables convert to Pa and SI flow rates for {', '.join(section['gases'])} at "
            f"{c['temperature']:g} K and a {c['gap']:g} m gap.",
        ]
        if len(model_labels(section)) > 1:
            text.append(
                f"Lower panel: difference of the models in percent of the {model_text(model_labels(section)[0])} value."
            )
        if key == "G_P":
            text.append(
                "References (thin dark grey, drawn only where they apply): no-slip continuum delta/6 and first-order "
                f"slip delta/6 + sigma_P for delta >= {SLIP_MIN_DELTA:g} (sigma_P = {SIGMA_P_DIFFUSE} for diffuse "
                "walls, BGK, Loyalka, Petrellis & Storvick 1975, times Maxwell's (2 - alpha)/alpha); the "
                "free-molecular asymptotic form -((2 - alpha)/alpha) ln(delta)/sqrt(pi) + c for delta <= "
                f"{FREE_MOLECULAR_FIG_MAX_DELTA:g}, with c matched to the computed value at the smallest delta (a "
                "shape reference, not an independent limit; the (2 - alpha)/alpha factor is approximate, no source)."
            )
        elif key == "G_T":
            text.append(
                "References: first-order thermal slip sigma_T/delta for delta >= "
                f"{SLIP_MIN_DELTA:g} with sigma_T matched to the computed value at the largest delta (a shape "
                f"reference; for BGK with diffuse walls sigma_T = {SIGMA_T_DIFFUSE_BGK}, Loyalka, Petrellis & Storvick "
                "1975), and the free-molecular form with half the slope of G_P, matched at the smallest delta."
            )
        text.append(relative_error_sentence(ds, key, {"problem": problem}, key))
        text.append(status_sentence(ds, {"problem": problem}))
        out[name] = "\n\n".join(text)
    return out


def correction_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    from knudsweep.report import relative_error_sentence, status_sentence

    ctx = _caption_context(ds, section)
    return {
        "plane_channel_correction_vs_kn": "\n\n".join(
            [
                "Flow-rate correction factor G_P / (delta/6): the Poiseuille flow rate relative to no-slip continuum flow, "
                "against the Knudsen number Kn = sqrt(pi)/(2 delta) (the axis on which correction factors are usually "
                f"quoted; delta on the top axis). Kinetic models: {ctx['models']} (large open markers BGK, small filled "
                f"markers S-model). Walls: {ctx['wall_list']}. The dotted line at 1 is the no-slip continuum.",
                relative_error_sentence(ds, "G_P", {"problem": "poiseuille"}, "G_P"),
                status_sentence(ds, {"problem": "poiseuille"}),
            ]
        )
    }


def convergence_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    from knudsweep.plot_style import problem_text
    from knudsweep.report import status_sentence

    ctx = _caption_context(ds, section)
    tol = section["resolution"]["tol"]
    out = {}
    for problem in section["problems"]:
        out[f"plane_channel_convergence_{problem}"] = "\n\n".join(
            [
                f"Convergence of the iterative solution, {problem_text(problem)}. Top: iterations each point needed "
                f"to reach the tolerance against delta (colour and marker: wall; open/filled: BGK/S-model). Below, "
                f"one panel per kinetic model ({ctx['models']}): the relative change of the iterate per iteration for "
                f"every wall and delta (colour: log10 delta), with the tolerance {tol:g} as a dashed line. Walls: "
                f"{ctx['wall_list']}. Long histories are sampled at log-spaced iterations in the gathered sweep.",
                status_sentence(ds, {"problem": problem}),
            ]
        )
    return out


def model_error_captions(ds, section: dict[str, Any]) -> dict[str, str]:

    ctx = _caption_context(ds, section)
    refs, eqs, keys = model_error_pairs(section)
    eq_text = ", ".join(model_text(m) for m in eqs)
    ref_text = ", ".join(model_text(r) for r in refs)
    text = [
        f"Model error of the kinetic model equations ({eq_text}): their reduced flow rates "
        f"{' and '.join(keys)} divided by the solution of the linearized Boltzmann equation ({ref_text}; VHS with "
        f"the gas's viscosity index omega) at the same delta and walls, against delta ({ctx['span']}); one panel "
        "per flow rate and Boltzmann operator. Colour and marker: wall "
        f"({ctx['wall_list']}); marker fill: model equation. The dotted line at 1 is agreement; delta uses the "
        "gas's viscosity in every model, so the ratios tend to 1 as delta -> 0 (slowly, like 1/ln delta, between "
        "plates). Error bars: the discretisation error estimates of both solutions, added (usually smaller than "
        "the markers).",
    ]
    text += model_error_sentences(ds, refs, keys, model_text)
    return {"plane_channel_model_error_vs_delta": "\n\n".join(text)}


# ---------------------------------------------------------------- the registry of figures (in drawing order)
@FIGURES.register(coefficient_figure_names, caption=coefficient_captions)
def coefficient_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    return {
        f"plane_channel_{MAIN_COEFFICIENT[p]}_vs_delta": _coefficient_figure(ds, section, settings, p)
        for p in section["problems"]
    }


@FIGURES.register(correction_figure_names, caption=correction_captions)
def correction_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    return {"plane_channel_correction_vs_kn": _correction_figure(ds, section, settings)}


@FIGURES.register(convergence_figure_names, caption=convergence_captions)
def convergence_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    return {
        f"plane_channel_convergence_{p}": _convergence_figure(ds, section, settings, p) for p in section["problems"]
    }


@FIGURES.register(model_error_figure_names, caption=model_error_captions)
def model_error_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    return {"plane_channel_model_error_vs_delta": _model_error_figure(ds, section, settings)}
