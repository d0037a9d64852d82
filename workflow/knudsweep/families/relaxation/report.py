"""Tables, figures and captions of the relaxation family (read from the gathered sweep only).

Every builder is registered by name in :data:`TABLES` or :data:`FIGURES` (with its caption).

Tables: ``relaxation_times`` (CSV + Markdown, units in the headers): the
anisotropy, heat-flux and fourth-moment relaxation times with their standard
uncertainty (fit window included), in mean collision times and in seconds, the
kind of each time (time to fall by e, or fitted rate), and the initial and late
anisotropy and heat-flux times, per gas and point.  When the study has the
fast spectral method, each model-equation row also gives the relative error of
each of its times against the Boltzmann (fast spectral) time of the same gas,
molecular model, start, p and T ("... vs Boltzmann" columns).

Figures (per initial state, at the first pressure and temperature; reduced
time does not depend on p and T): ``relaxation_h_<state>`` H(t) with the
replica noise band of the particle runs against the deterministic curves, and
``relaxation_anisotropy_<state>`` |anisotropy| on a log axis with the fitted
exp(-t/tau).  When the fast spectral (Boltzmann) curve of the same gas and
molecular model is present, the DSMC band (2 standard errors of the replica
mean) is drawn about that curve and the DSMC mean as a line: DSMC agrees with
the deterministic Boltzmann solution where its mean stays inside the band.  Time series come from the gathered sweep only (gather puts
them there, see ``series_dim``); a sweep without them gives "no data" panels.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from knudsweep.families import Products, Table
from knudsweep.families.relaxation.grid import BOLTZMANN, FIT_NAMES, MODEL_EQUATIONS, gather_dims, options, parse_solver
from knudsweep.identity import canonical

TABLES = Products("table")
FIGURES = Products("figure")


@TABLES.register(lambda section: ["relaxation_times"])
def relaxation_times_tables(ds, section: dict[str, Any]) -> dict[str, Table]:
    """Relaxation times of every point with their uncertainties, in mean collision times and seconds."""
    import pandas as pd

    from knudsweep.solver.relaxation.solve import fit_kind

    rows = []
    dims = gather_dims(section)
    for gas in dims["gas"]:
        for p in dims["pressure"]:
            for t in dims["temperature"]:
                for st in dims["initial_state"]:
                    for model in dims["molecular_model"]:
                        for solver in dims["solver"]:
                            sel = ds.sel(
                                gas=gas,
                                pressure=p,
                                temperature=t,
                                initial_state=st,
                                molecular_model=model,
                                solver=solver,
                            )

                            def val(name):
                                return float(sel[name].values) if name in sel else float("nan")

                            row = {
                                "gas": gas,
                                "pressure [Pa]": p,
                                "temperature [K]": t,
                                "initial state": st,
                                "molecular model": model,
                                "solver": solver,
                                "method": parse_solver(solver)[0],
                                "mean collision time [s]": val("mean_collision_time_s"),
                            }
                            fits = _fit_record(sel)
                            for f in FIT_NAMES:
                                lab = f.replace("_", " ")
                                row[f"{lab} time kind"] = fit_kind(f, st)
                                row[f"{lab} time [tau_c]"] = val(f"{f}_relaxation_time")
                                row[f"{lab} time uncertainty [tau_c]"] = val(f"{f}_relaxation_time_uncertainty")
                                row[f"{lab} time [s]"] = val(f"{f}_relaxation_time_s")
                                row[f"{lab} time uncertainty [s]"] = val(f"{f}_relaxation_time_s_uncertainty")
                                # why a time of a converged point is blank, in the fit's own words
                                note = fits.get(f"{f}_fit", {}).get("note", "") if isinstance(fits, dict) else ""
                                blank = math.isnan(row[f"{lab} time [tau_c]"])
                                row[f"{lab} time note"] = note if (blank and note) else ""
                                if f == "fourth_moment":
                                    continue
                                for part in ("initial", "late"):
                                    row[f"{lab} {part} time [tau_c]"] = val(f"{f}_{part}_relaxation_time")
                                    row[f"{lab} {part} time uncertainty [tau_c]"] = val(
                                        f"{f}_{part}_relaxation_time_uncertainty"
                                    )
                            row["status"] = str(sel["status"].values) if "status" in sel else "missing"
                            rows.append(row)
    if BOLTZMANN in section["methods"]:
        _model_errors(rows)
    notes = [
        "tau_c = mean collision time of the molecular model at (p, T): lambda / c_mean with Bird's "
        "viscosity-based free path, tau_c = f mu(T)/p, f = (7-2w)(5-2w)/30 [x 6a/((a+1)(a+2)) for VSS].",
        "Calibration: mu is the first Chapman-Enskog viscosity of the molecular model (Bird 1994), also for "
        "the p/mu of the model equations; for hard spheres the converged viscosity is about 1.6 % larger "
        "(Chapman & Cowling 1970; not used).",
        "'<signal> time' is the kind named in '<signal> time kind': for the anisotropy of the "
        "temperature tensor and the heat flux, the time to fall by e (model free; the hard-sphere decay is "
        "not exponential); 'initial time' = 1 / (-d ln y/dt at t = 0) from a quadratic in ln y, "
        "'late time' = exponential fit once y < y(0)/e^2.  For <c^4> - 15 from an anisotropic start: "
        "C exp(-t/tau) + D exp(-2 t/tau_aniso) with tau_aniso the anisotropy fit (exact form for Maxwell "
        "molecules and ES-BGK); otherwise one exponential.",
        "Uncertainties: standard uncertainty = statistical (jackknife over replicas; noise-free model "
        "equations: slope standard error) combined with the fit-window dependence (change of the estimate "
        "when the window is shortened, beyond the noise of that change).  An empty time: the reason is in "
        "'<signal> time note' (no such initial non-equilibrium, or the signal fell into the noise before "
        "enough output times), or the point's status is not converged.",
        "Exact for Maxwell molecules (Truesdell & Muncaster 1980; solver/relaxation/moments.py): anisotropy "
        "time 2 tau_c (= mu/p), fourth-moment and heat-flux time 3 tau_c (= 1.5 mu/p).",
    ]
    if BOLTZMANN in section["methods"]:
        notes.append(
            "'<signal> ... vs Boltzmann [relative]' (model-equation rows): tau_model / tau_Boltzmann - 1, "
            "tau_Boltzmann the same time from the fast spectral solution of the Boltzmann equation "
            "(finest velocity grid of the study) for the same gas, molecular model, start, p and T; the "
            "model equations relax at the molecular model's p/mu, so this is the error of the model "
            "equation itself.  fast spectral rows are the deterministic Boltzmann result; DSMC rows solve "
            "the same equation by particles."
        )

    return {"relaxation_times": Table(pd.DataFrame(rows), "Relaxation times", notes)}


def _fit_record(sel) -> dict:
    """The point's fit notes: its discretization record (JSON text in sweep.nc), or {} if absent."""
    if "discretization" not in sel:
        return {}
    try:
        return json.loads(str(sel["discretization"].values))
    except ValueError:
        return {}


def _time_columns() -> list[tuple[str, str]]:
    """(column stem, label) of every relaxation time in the table."""
    out = []
    for f in FIT_NAMES:
        lab = f.replace("_", " ")
        out.append((f"{lab} time", lab))
        if f != "fourth_moment":
            out += [(f"{lab} {part} time", f"{lab} {part}") for part in ("initial", "late")]
    return out


def _model_errors(rows: list[dict[str, Any]]) -> None:
    """Add 'tau_model / tau_Boltzmann - 1' columns to the model-equation rows (NaN elsewhere)."""
    key = ("gas", "pressure [Pa]", "temperature [K]", "initial state", "molecular model")
    boltzmann: dict[tuple, dict[str, Any]] = {}
    for row in rows:
        if row["method"] == BOLTZMANN and row["status"] == "converged":
            k = tuple(row[c] for c in key)
            res = parse_solver(row["solver"])[1]
            if k not in boltzmann or res > parse_solver(boltzmann[k]["solver"])[1]:
                boltzmann[k] = row  # the finest velocity grid of the study
    for row in rows:
        ref = boltzmann.get(tuple(row[c] for c in key)) if row["method"] in MODEL_EQUATIONS else None
        for stem, _ in _time_columns():
            err = float("nan")
            if ref is not None:
                a, b = row[f"{stem} [tau_c]"], ref[f"{stem} [tau_c]"]
                if math.isfinite(a) and math.isfinite(b) and b > 0:
                    err = a / b - 1.0
            row[f"{stem} vs Boltzmann [relative]"] = err


# ---------------------------------------------------------------- figures (from sweep.nc only)
NOISE_SE = 2.0  # a particle curve ends where its mean falls below 2 standard errors (noise)
BAND_SE = 2.0  # half-width of the DSMC band about the Boltzmann curve, in standard errors of the mean
# Boltzmann (fast spectral) curve: dash-dot, no markers (colour = molecular model as for every method)
BOLTZMANN_LINE = {"ls": (0, (6, 1.5, 1.2, 1.5)), "lw": 1.6}


def _curves(ds, section, state: str) -> list[dict]:
    """Converged time series of one initial state at the first pressure and temperature, from the sweep."""
    if "time" not in ds.dims or "h_function" not in ds:
        return []
    p0, t0 = canonical(section["pressures"][0]), canonical(section["temperatures"][0])
    n_rep = max(int(options(section)[1]["n_replicas"]), 1)
    t = np.asarray(ds["time"].values, float)
    out = []
    for gas in ds["gas"].values:
        for m, model in enumerate(ds["molecular_model"].values):
            for solver in ds["solver"].values:
                sel = ds.sel(
                    gas=gas, pressure=p0, temperature=t0, initial_state=state, molecular_model=model, solver=solver
                )
                if str(sel["status"].values) != "converged":
                    continue
                method, _ = parse_solver(str(solver))

                def get(name):
                    return np.asarray(sel[name].values, float) if name in sel else np.full(t.shape, np.nan)

                tau = (
                    float(sel["anisotropy_relaxation_time"].values)
                    if "anisotropy_relaxation_time" in sel
                    else float("nan")
                )
                out.append(
                    {
                        "gas": str(gas),
                        "model": str(model),
                        "m": m,
                        "method": method,
                        "time": t,
                        "h": get("h_function"),
                        "h_se": get("h_function_std") / math.sqrt(n_rep),
                        "aniso": get("anisotropy"),
                        "aniso_se": get("anisotropy_std") / math.sqrt(n_rep),
                        "tau": tau,
                    }
                )
    return out


def _until_noise(y: np.ndarray, se: np.ndarray) -> int:
    """Number of leading samples above the noise (y > NOISE_SE standard errors and y > 0)."""
    bad = ~(np.isfinite(y) & (y > 0) & (y > NOISE_SE * np.nan_to_num(se)))
    return int(np.argmax(bad)) if bad.any() else y.size


def _draw_curve(ax, c, y, se, about=None):
    """One curve; a DSMC curve with ``about`` (the Boltzmann curve of the same gas and molecular
    model) gets its band of BAND_SE standard errors about that curve instead of about its mean."""
    from knudsweep import plot_style as ps

    col = ps.color(c["m"])
    if c["method"] == "dsmc":
        n = _until_noise(y, se)
        if n and about is not None:
            ref = about[:n]
            ax.fill_between(
                c["time"][:n],
                np.maximum(ref - BAND_SE * se[:n], ref * 1e-3),
                ref + BAND_SE * se[:n],
                color=col,
                alpha=0.22,
                lw=0,
                zorder=2,
            )
            ax.plot(c["time"][:n], y[:n], color=col, lw=1.1, zorder=3)
        elif n:
            ax.fill_between(
                c["time"][:n],
                np.maximum(y[:n] - se[:n], y[:n] * 1e-3),
                y[:n] + se[:n],
                color=col,
                alpha=0.22,
                lw=0,
                zorder=2,
            )
            ax.plot(c["time"][:n], y[:n], color=col, lw=1.3, zorder=3)
        return
    ok = np.isfinite(y) & (y > 0)
    if c["method"] == BOLTZMANN:
        ax.plot(c["time"][ok], y[ok], color=col, zorder=3, **BOLTZMANN_LINE)
        return
    every = max(len(y) // 6, 1)
    start = 0 if c["method"] == "bgk" else every // 2  # markers of the models side by side, not on top
    ax.plot(
        c["time"][ok],
        y[ok],
        color=col,
        marker=ps.marker(c["m"]),
        markevery=(start, every),
        **ps.model_line(c["method"]),
        **ps.model_marker(c["method"]),
        zorder=3,
    )


def _boltzmann(curves: list[dict], c: dict, key: str) -> np.ndarray | None:
    """The Boltzmann (fast spectral) series ``key`` of c's gas and molecular model, for a DSMC curve c."""
    if c["method"] != "dsmc":
        return None
    for b in curves:
        if b["method"] == BOLTZMANN and b["gas"] == c["gas"] and b["model"] == c["model"]:
            return b[key]
    return None


def _legend(fig, ax, section, with_fit: bool):
    from knudsweep import plot_style as ps

    handles, labels = [], []
    for m, model in enumerate(section["molecular_models"]):
        handles.append(ax.plot([], [], color=ps.color(m), marker=ps.marker(m), lw=1.3, ms=5)[0])
        labels.append(ps.molecular_text(model))
    for method in section["methods"]:
        if method == "dsmc":
            from matplotlib.patches import Patch

            handles.append((Patch(color="0.4", alpha=0.3, lw=0), ax.plot([], [], color="0.35", lw=1.3)[0]))
            if BOLTZMANN in section["methods"]:
                labels.append(f"DSMC mean; band: Boltzmann ±{BAND_SE:g} DSMC std. errors")
            else:
                labels.append("DSMC, band: ±1 standard error of the replica mean")
        elif method == BOLTZMANN:
            handles.append(ax.plot([], [], color="0.35", **BOLTZMANN_LINE)[0])
            labels.append("Boltzmann (fast spectral)")
        else:
            handles.append(
                ax.plot([], [], color="0.35", marker="o", **ps.model_line(method), **ps.model_marker(method))[0]
            )
            labels.append(ps.model_text(method))
    if with_fit:
        handles.append(ax.plot([], [], **ps.reference("fit"))[0])
        labels.append(r"$\exp(-t/\tau)$, $\tau$ = time to fall by $e$ (table)")
    ps.bottom_legend(fig, handles, labels, ncol=2)


def _relaxation_figures(ds, section, settings, names) -> dict[str, Any]:
    from knudsweep import plot_style as ps
    from knudsweep.figures import new_figure

    gases = list(section["gases"])
    figs = {}
    size = (0.55 + 0.45 * len(gases), 1.25)
    for st in section["initial_states"]:
        curves = _curves(ds, section, st)
        fig, axes = new_figure(settings, mosaic=[gases], scale=size, sharey=True)
        for gas in gases:
            ax = axes[gas]
            mine = [c for c in curves if c["gas"] == gas]
            for c in mine:
                _draw_curve(ax, c, c["h"], c["h_se"], _boltzmann(mine, c, "h"))
            ax.set_yscale("log")
            ax.set_xlabel(r"time $t/\tau_c$ (mean collision times)")
            ax.set_title(f"{gas}, {ps.state_text(st)}", fontsize="medium")
            if not mine:
                ps.no_data(ax, "no data")
        axes[gases[0]].set_ylabel(r"relative H-function $H - H_\mathrm{eq}$ (binned)")
        _legend(fig, axes[gases[0]], section, with_fit=False)
        figs[f"relaxation_h_{st}"] = fig
        if f"relaxation_anisotropy_{st}" not in names:
            continue
        fig, axes = new_figure(settings, mosaic=[gases], scale=size, sharey=True)
        a0 = max((abs(float(c["aniso"][0])) for c in curves if np.isfinite(c["aniso"][0])), default=1.0)
        for gas in gases:
            ax = axes[gas]
            mine = [c for c in curves if c["gas"] == gas]
            taus = []
            for c in mine:
                a = np.abs(c["aniso"])
                ref = _boltzmann(mine, c, "aniso")
                _draw_curve(ax, c, a, c["aniso_se"], None if ref is None else np.abs(ref))
                if np.isfinite(c["tau"]) and c["tau"] > 0:
                    ax.plot(c["time"], abs(c["aniso"][0]) * np.exp(-c["time"] / c["tau"]), **ps.reference("fit"))
                    taus.append(f"{ps.molecular_text(c['model'])}, {ps.model_text(c['method'])}: {ps.number(c['tau'])}")
            if taus:
                ax.text(
                    0.98,
                    0.98,
                    "$\\tau/\\tau_c$\n" + "\n".join(taus),
                    transform=ax.transAxes,
                    ha="right",
                    va="top",
                    fontsize="x-small",
                    bbox={"fc": "white", "ec": "0.8", "alpha": 0.9},
                )
            ax.set_yscale("log")
            ax.set_ylim(1e-3 * a0, 1.5 * a0)
            ax.set_xlabel(r"time $t/\tau_c$ (mean collision times)")
            ax.set_title(f"{gas}, {ps.state_text(st)}", fontsize="medium")
            if not mine:
                ps.no_data(ax, "no data")
        axes[gases[0]].set_ylabel(r"$|$anisotropy of $T_{ij}|\,/\,T$")
        _legend(fig, axes[gases[0]], section, with_fit=True)
        figs[f"relaxation_anisotropy_{st}"] = fig
    return figs


def figure_names(section: dict[str, Any]) -> list[str]:
    """``relaxation_h_<state>`` per initial state, ``relaxation_anisotropy_<state>`` where the start is anisotropic."""
    out = []
    for st in section["initial_states"]:
        out.append(f"relaxation_h_{st}")
        if st in ("anisotropic", "two_beams"):
            out.append(f"relaxation_anisotropy_{st}")
    return out


def figure_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    """Report caption (reStructuredText) of every relaxation figure."""
    from knudsweep.plot_style import model_text, molecular_text, state_text

    _, run = options(section)
    methods = ", ".join(model_text(m) for m in section["methods"])
    models = ", ".join(molecular_text(m) for m in section["molecular_models"])
    where = (
        f"at {section['pressures'][0]:g} Pa and {section['temperatures'][0]:g} K (reduced time does not "
        f"depend on p and T); gases {', '.join(section['gases'])}, one panel each"
    )
    if BOLTZMANN in section["methods"] and "dsmc" in section["methods"]:
        band = (
            f"with a band of {BAND_SE:g} standard errors of the mean drawn about the fast spectral "
            "(deterministic Boltzmann) curve of the same gas and molecular model, so DSMC agrees with it "
            "where its mean stays inside the band"
        )
    else:
        band = "with a band of one standard error of the mean"
    unc = (
        f"Uncertainty: DSMC curves are means over {int(run['n_replicas'])} replicas of "
        f"{', '.join(str(int(n)) for n in section.get('n_particles', []))} particles {band}; each ends "
        "where it falls below 2 standard errors (noise). The model equations and the fast spectral "
        "solution are deterministic (velocity-grid error not estimated here). No model error included."
    )
    out = {}
    for st in section["initial_states"]:
        out[f"relaxation_h_{st}"] = "\n\n".join(
            [
                f"Relative H-function of a homogeneous gas relaxing from the {state_text(st)} state, on a log axis "
                f"against time in mean collision times, {where}. Methods: {methods} (DSMC solid with band; BGK thick "
                f"translucent line with large open markers; S-model dashed with small filled markers; fast "
                f"spectral Boltzmann solution dash-dot without markers). Molecular "
                f"models (colour and marker): {models}. H is binned on equiprobable cells of the equilibrium and "
                "corrected for the particle sampling bias.",
                unc,
            ]
        )
        out[f"relaxation_anisotropy_{st}"] = "\n\n".join(
            [
                f"Magnitude of the temperature-tensor anisotropy from the {state_text(st)} state against time, "
                f"{where}. Methods: {methods}; molecular models: {models} (styles as in the H-function figure). "
                "Dotted black: exp(-t/tau) from the initial value with tau the anisotropy time of the table (time to "
                "fall by e); the box lists tau in mean collision times (exact for Maxwell molecules: 2).",
                unc,
            ]
        )
    return out


@FIGURES.register(figure_names, caption=figure_captions)
def relaxation_figures(ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
    return _relaxation_figures(ds, section, settings, figure_names(section))
