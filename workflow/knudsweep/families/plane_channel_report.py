"""Tables and figures of the plane-channel family (read from the gathered sweep).

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

from knudsweep.families import Table
from knudsweep.families.plane_channel import COEFFICIENTS, MAIN_COEFFICIENT, wall_settings

SIGMA_P_DIFFUSE = 1.0162  # BGK viscous-slip coefficient, diffuse walls (from memory, unconfirmed)
SIGMA_T_DIFFUSE_BGK = 0.7663  # BGK thermal-slip coefficient, diffuse walls (from memory, unconfirmed)
SQRT_PI = math.sqrt(math.pi)
FM_MATCH_MAX_DELTA = 0.1  # free-molecular form matched only if the smallest delta is this small
FM_SHOW_MAX_DELTA = 1.0  # ... and used only up to this delta (common practice, no source)

NOTES_COMMON = [
    "delta = p a / (mu v0), a = plate gap, v0 = sqrt(2 k T / m); Kn = sqrt(pi) / (2 delta).",
    "Normalisation of G_P, G_T: Sharipov & Seleznev, J. Phys. Chem. Ref. Data 27 (1998) 657.",
    "Pressure for each gas: p = delta mu(T) v0 / a at the study temperature and gap "
    "(solver.gas.pressure_from_delta; mu(T) from config/gases.yaml).",
    "status 'failed', 'missing' or 'corrupt': the coefficient columns are empty for that row.",
]


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


def _walls(section):
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
def table_names(section: dict[str, Any]) -> list[str]:
    return [f"plane_channel_{p}" for p in section["problems"]]


def _gas_columns(gas: str, delta: float, section: dict[str, Any], g: float, kind: str) -> dict[str, float]:
    from solver.gas import most_probable_speed, pressure_from_delta

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


def build_tables(ds, section: dict[str, Any]) -> dict[str, Table]:
    walls = _walls(section)
    delta = ds["delta"].values.astype(float)
    tables = {}
    for problem in section["problems"]:
        key = MAIN_COEFFICIENT[problem]
        rows = []
        for model in section["models"]:
            for label, (lower, upper) in walls.items():
                sel = dict(problem=problem, model=model, wall=label)
                status = ds["status"].sel(**sel).values
                g = ds[key].sel(**sel).values.astype(float) if key in ds else np.full(delta.shape, np.nan)
                err_name = f"{key}_error_estimate"
                g_err = (ds[err_name].sel(**sel).values.astype(float) if err_name in ds
                         else np.full(delta.shape, np.nan))
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
                        gt = ds["G_T"].sel(problem="thermal_creep", model=model, wall=label).values
                        extra_cols["G_T / G_P [1]"] = gt / g
                elif key == "G_T":
                    if model == "bgk" and _is_diffuse(lower, upper):
                        extra_cols["G_T / (sigma_T/delta) [1]"] = g / (SIGMA_T_DIFFUSE_BGK / delta)
                    else:
                        extra_cols["G_T / (sigma_T/delta) [1]"] = np.full_like(delta, np.nan)
                elif key in ("shear_stress", "heat_flux"):
                    extra_cols[f"{key} * sqrt(pi) [1]"] = g * SQRT_PI
                for gas in section["gases"]:
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
            "extrapolation over a coarser solve (solver.resolution); it does not include the model error."
        )
        notes.append(
            f"temperature {section['conditions']['temperature']:g} K, gap "
            f"{section['conditions']['gap']:g} m."
        )
        if key == "G_P":
            notes += [
                "G_P / (delta/6): ratio to the continuum (no-slip Navier-Stokes) value delta/6.",
                "G_P / G_slip: ratio to first-order slip flow, delta/6 + sigma_P for equal plates, "
                f"sigma_P = {SIGMA_P_DIFFUSE} (BGK, diffuse; Sone's k0, from memory, unconfirmed) "
                "times (2 - alpha)/alpha (Maxwell 1879, approximate; alpha_t for Cercignani-Lampis walls).",
                "G_P / G_fm,asymptotic: ratio to the free-molecular asymptotic form "
                "-(1/sqrt(pi)) ln delta + c (Cercignani; from memory, unconfirmed) with c matched "
                "to the computed G_P at the smallest delta of this sweep; diffuse walls only and only "
                f"if that delta <= {FM_MATCH_MAX_DELTA}; given for delta <= {FM_SHOW_MAX_DELTA} only. The infinite channel has no finite "
                "free-molecular flow rate, so this is a shape reference (ratio 1 at the smallest delta).",
            ]
        if key == "G_T":
            notes.append(
                f"G_T / (sigma_T/delta): ratio to first-order thermal slip, sigma_T = {SIGMA_T_DIFFUSE_BGK} "
                "(BGK, diffuse; Sone's K1, from memory, unconfirmed); BGK with diffuse walls only."
            )
        if key in ("shear_stress", "heat_flux"):
            notes.append(f"{key} * sqrt(pi): ratio to the free-molecular value 1/sqrt(pi) for diffuse walls "
                         "(derived, check-values.md section 3), if the solver uses that normalisation.")
        tables[f"plane_channel_{problem}"] = Table(frame, f"Plane channel, {problem.replace('_', ' ')}", notes)
    return tables


# ---------------------------------------------------------------- figures
def figure_names(section: dict[str, Any]) -> list[str]:
    names = []
    for problem in section["problems"]:
        for model in section["models"]:
            names.append(f"plane_channel_{MAIN_COEFFICIENT[problem]}_vs_delta_{model}")
    if "poiseuille" in section["problems"]:
        names.append("plane_channel_correction_vs_kn")
    names += [f"plane_channel_convergence_{p}" for p in section["problems"]]
    return names


def _mark_failed(ax, delta, status, color):
    bad = np.isin(status, ["failed", "corrupt"])
    if bad.any():
        ax.plot(delta[bad], np.full(bad.sum(), 0.03), "x", color=color, ms=7,
                transform=ax.get_xaxis_transform(), clip_on=False)
    return int(bad.sum())


def _no_data(ax):
    ax.text(0.5, 0.5, "no converged points", transform=ax.transAxes, ha="center", va="center")


def build_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    from knudsweep.figures import new_figure

    import matplotlib.pyplot as plt

    walls = _walls(section)
    delta = ds["delta"].values.astype(float)
    dense = np.geomspace(delta.min(), delta.max(), 200) if len(delta) > 1 else delta
    colors = plt.get_cmap("viridis")(np.linspace(0.0, 0.85, max(len(walls), 1)))
    figs = {}
    for problem in section["problems"]:
        key = MAIN_COEFFICIENT[problem]
        for model in section["models"]:
            fig, ax = new_figure(settings)
            n_failed = 0
            drawn = fm_drawn = False
            for color, (label, (lower, upper)) in zip(colors, walls.items()):
                sel = dict(problem=problem, model=model, wall=label)
                g = ds[key].sel(**sel).values.astype(float) if key in ds else np.full(delta.shape, np.nan)
                n_failed += _mark_failed(ax, delta, ds["status"].sel(**sel).values, color)
                if np.isfinite(g).any():
                    drawn = True
                    ax.plot(delta, g, "o-", color=color, ms=4, label=label)
                if key == "G_P":
                    s_lo = _slip_sigma(lower, SIGMA_P_DIFFUSE)
                    s_up = s_lo if upper is None else _slip_sigma(upper, SIGMA_P_DIFFUSE)
                    ax.plot(dense, slip_gp(dense, s_lo, s_up), "--", color=color, lw=0.8)
                    c = free_molecular_constant(delta, g) if _is_diffuse(lower, upper) else math.nan
                    if math.isfinite(c):
                        fm_drawn = True
                        small = dense[dense <= FM_SHOW_MAX_DELTA]
                        fm = -np.log(small) / SQRT_PI + c
                        ax.plot(small[fm > 0], fm[fm > 0], "-.", color=color, lw=0.9)
                if key == "G_T" and model == "bgk" and _is_diffuse(lower, upper):
                    big = dense[dense >= 1.0]
                    ax.plot(big, SIGMA_T_DIFFUSE_BGK / big, "--", color=color, lw=0.8,
                            label="thermal slip sigma_T/delta")
            if key == "G_P":
                ax.plot(dense, dense / 6.0, ":", color="k", lw=1.0, label="continuum, no slip: delta/6")
                ax.plot([], [], "--", color="0.5", lw=0.8, label="first-order slip: delta/6 + sigma_P")
                if fm_drawn:
                    ax.plot([], [], "-.", color="0.5", lw=0.9,
                            label="free-molecular asymptotic form (matched at smallest delta)")
            if not drawn:
                _no_data(ax)
            ax.set_xscale("log")
            if drawn:
                ax.set_yscale("log")
                # keep the computed curves readable: reference lines may leave the frame
                finite = np.concatenate([ds[key].sel(problem=problem, model=model).values.ravel()])
                finite = finite[np.isfinite(finite) & (finite > 0)]
                ax.set_ylim(0.3 * finite.min(), 3.0 * finite.max())
            ax.set_xlabel("rarefaction parameter delta [1]")
            ax.set_ylabel(f"{key} [1]")
            title = f"Plane channel, {problem.replace('_', ' ')}, {model}"
            if n_failed:
                title += f" ({n_failed} failed: x)"
            ax.set_title(title, fontsize="medium")
            ax.legend(loc="upper right" if key != "G_P" else "upper center", fontsize="x-small")
            figs[f"plane_channel_{key}_vs_delta_{model}"] = fig

    if "poiseuille" in section["problems"]:
        fig, ax = new_figure(settings)
        kn = ds["kn"].values.astype(float)
        styles = ["-", "--", "-.", ":"]
        drawn = False
        for m, model in enumerate(section["models"]):
            for color, label in zip(colors, walls):
                g = ds["G_P"].sel(problem="poiseuille", model=model, wall=label).values if "G_P" in ds else np.full(delta.shape, np.nan)
                if np.isfinite(g).any():
                    drawn = True
                    ax.plot(kn, g / (delta / 6.0), styles[m % 4], marker="os^v"[m % 4], ms=4,
                            mfc="none" if m else color, color=color, label=f"{model}, {label}")
        if drawn:
            ax.set_yscale("log")
        else:
            _no_data(ax)
        ax.set_xscale("log")
        ax.axhline(1.0, color="k", lw=0.8, ls=":")
        ax.set_xlabel("Knudsen number Kn = sqrt(pi)/(2 delta) [1]")
        ax.set_ylabel("G_P / (delta/6) [1]")
        ax.set_title("Flow-rate correction factor against no-slip continuum flow", fontsize="medium")
        ax.legend(loc="upper left", fontsize="x-small")
        figs["plane_channel_correction_vs_kn"] = fig

    norm = plt.Normalize(np.log10(delta.min()), np.log10(delta.max()) if len(delta) > 1 else np.log10(delta.min()) + 1)
    cmap = plt.get_cmap("viridis")
    it = ds["iteration"].values
    for problem in section["problems"]:
        fig, ax = new_figure(settings)
        res = ds["residual"].sel(problem=problem)
        drawn = False
        for model in section["models"]:
            for label in walls:
                for j, d in enumerate(delta):
                    r = res.sel(model=model, wall=label).values[j]
                    ok = np.isfinite(r) & (r > 0)
                    if ok.any():
                        drawn = True
                        ax.plot(it[ok], r[ok], color=cmap(norm(np.log10(d))), lw=0.7, alpha=0.8)
        if drawn:
            ax.set_yscale("log")
            ax.set_xscale("log")
            sm = plt.cm.ScalarMappable(norm=norm, cmap=cmap)
            fig.colorbar(sm, ax=ax, label="log10 delta")
        else:
            _no_data(ax)
        ax.set_xlabel("iteration [1]")
        ax.set_ylabel("relative change of the iterate [1]")
        ax.set_title(f"Convergence histories, {problem.replace('_', ' ')} (all models and walls)", fontsize="medium")
        figs[f"plane_channel_convergence_{problem}"] = fig
    return figs
