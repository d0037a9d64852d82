"""Relaxation family: a space-homogeneous gas relaxing to equilibrium.

Grid: gases x pressures x temperatures x initial states x molecular models x
solvers, where a *solver* is a method with its resolution: ``dsmc-N20000``
(particle method, one per particle number), ``bgk-nv32`` (model equation
on a 32^3 velocity grid) or ``fast_spectral-nv32`` (deterministic Boltzmann
solution, fast spectral method, on a 32^3 velocity grid).  Putting method and particle number on one axis
keeps the grid dense: a deterministic method has no particle number.

Point identity (below ``results/points/``)::

    relaxation/<state label>/gas=<gas>/model=<molecular model>/solver=<solver label>/
        run=<t_end>-<outputs>-<H cells>-<replicas>-<seed>/p=<Pa>/T=<K>.nc

e.g. ``relaxation/anisotropic-1.8-0.6-0.6/gas=Ar/model=vhs/solver=dsmc-N20000/
run=t1.0e+01-o41-k8-R8-s1/p=1.0e+02/T=300.0.nc``.  Every setting that changes
the numbers is in the path (state options, run settings, seed); p and T only
scale the time axis to seconds but are part of the point as the study asks
for them.

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

import functools
import math
from typing import Any

import numpy as np

from knudsweep.families import Family, Point, Table
from knudsweep.identity import canonical, format_exp, format_plain, point_id, segment
from knudsweep.solver.gas import gas_record

METHODS = ("dsmc", "bgk", "s_model", "es_bgk", "fast_spectral")
MODEL_EQUATIONS = ("bgk", "s_model", "es_bgk")
BOLTZMANN = "fast_spectral"  # the deterministic Boltzmann solution the model equations are compared with
STATES = ("equilibrium", "anisotropic", "two_beams", "bkw")
MODELS = ("vhs", "vss", "hard_sphere", "maxwell")
FIT_NAMES = ("anisotropy", "heat_flux", "fourth_moment")
STATE_DEFAULTS = {"axis_temperature_ratios": [1.8, 0.6, 0.6], "beam_separation": 3.0,
                  "beam_fraction": 0.5, "bkw_start_time": 6.0 * math.log(2.5)}
RUN_DEFAULTS = {"n_replicas": 8, "t_end": 10.0, "n_output": 41, "seed": 1, "h_bins_per_axis": 8,
                "n_velocity": 32}


def _options(section: dict[str, Any]) -> tuple[dict[str, Any], dict[str, Any]]:
    state = {**STATE_DEFAULTS, **section.get("state_options", {})}
    run = {**RUN_DEFAULTS, **section.get("run", {})}
    return state, run


def state_label(name: str, opts: dict[str, Any]) -> str:
    """Path-safe label of an initial state with its options."""
    if name == "anisotropic":
        r = np.asarray(opts["axis_temperature_ratios"], dtype=float)
        r = r / r.mean()
        return "anisotropic-" + "-".join(format_plain(x) for x in r)
    if name == "two_beams":
        return f"two_beams-s{format_plain(opts['beam_separation'])}-w{format_plain(opts['beam_fraction'])}"
    if name == "bkw":
        return f"bkw-t{format_plain(opts['bkw_start_time'])}"
    return name


def solver_labels(section: dict[str, Any]) -> list[str]:
    """``dsmc-N<particles>`` per particle number, ``<method>-nv<grid>`` per deterministic method."""
    _, run = _options(section)
    out = []
    for method in section["methods"]:
        if method == "dsmc":
            out += [f"dsmc-N{int(n)}" for n in section["n_particles"]]
        else:
            out.append(f"{method}-nv{int(run['n_velocity'])}")
    return out


def _parse_solver(label: str) -> tuple[str, int | None]:
    method, res = label.rsplit("-", 1)
    return method, (int(res[1:]) if method == "dsmc" else int(res[2:]))


def _run_label(run: dict[str, Any]) -> str:
    return (f"t{format_exp(run['t_end'])}-o{int(run['n_output'])}-k{int(run['h_bins_per_axis'])}"
            f"-R{int(run['n_replicas'])}-s{int(run['seed'])}")


class Relaxation(Family):
    name = "relaxation"
    series_dim = "time"  # gather puts the time series of the points into sweep.nc (knudsweep.gather)

    def check_section(self, section: dict[str, Any]) -> None:
        from knudsweep.solver.relaxation.initial_states import make_initial_state

        state, run = _options(section)
        for key, allowed in (("methods", METHODS), ("initial_states", STATES), ("molecular_models", MODELS)):
            for v in section[key]:
                if v not in allowed:
                    raise ValueError(f"{key}: {v!r} not allowed; allowed are {', '.join(allowed)}")
        for name in section["initial_states"]:
            make_initial_state(name, tuple(state["axis_temperature_ratios"]), state["beam_separation"],
                               state["beam_fraction"], state["bkw_start_time"])
        if "dsmc" in section["methods"]:
            k3 = int(run["h_bins_per_axis"]) ** 3
            for n in section["n_particles"]:
                if int(n) < 5 * k3:
                    raise ValueError(f"n_particles: {n} is below 5 per H cell ({5 * k3} for "
                                     f"h_bins_per_axis={run['h_bins_per_axis']})")
        for key in ("pressures", "temperatures"):
            vals = [canonical(v) for v in section[key]]
            if len(set(vals)) != len(vals):
                raise ValueError(f"{key}: values repeat after rounding to 6 significant digits")

    def points(self, section: dict[str, Any]) -> list[Point]:
        state, run = _options(section)
        out = []
        for st in section["initial_states"]:
            slabel = state_label(st, state)
            for gas in section["gases"]:
                for model in section["molecular_models"]:
                    for solver in solver_labels(section):
                        method, res = _parse_solver(solver)
                        for p in section["pressures"]:
                            for t in section["temperatures"]:
                                p, t = canonical(p), canonical(t)
                                pid = point_id(self.name, [
                                    segment("", slabel), segment("gas", gas), segment("model", model),
                                    segment("solver", solver), segment("run", _run_label(run)),
                                    segment("p", format_exp(p)), segment("T", format_plain(t)),
                                ])
                                values = {
                                    "method": method, "gas": gas, "pressure": p, "temperature": t,
                                    # the gas table's numbers: an edit of config/gases.yaml changes
                                    # the point's values, so its file no longer counts as done
                                    "gas_data": gas_record(gas),
                                    "initial_state": st, "molecular_model": model,
                                    "n_particles": res if method == "dsmc" else None,
                                    "n_velocity": res if method != "dsmc" else None,
                                    "n_replicas": int(run["n_replicas"]), "t_end": canonical(run["t_end"]),
                                    "n_output": int(run["n_output"]), "seed": int(run["seed"]),
                                    "h_bins_per_axis": int(run["h_bins_per_axis"]),
                                    "axis_temperature_ratios": [canonical(x) for x in state["axis_temperature_ratios"]],
                                    "beam_separation": canonical(state["beam_separation"]),
                                    "beam_fraction": canonical(state["beam_fraction"]),
                                    "bkw_start_time": canonical(state["bkw_start_time"]),
                                }
                                index = {"gas": gas, "pressure": p, "temperature": t, "initial_state": st,
                                         "molecular_model": model, "solver": solver}
                                out.append(Point(self.name, pid, values, index))
        return out

    def solve(self, values: dict[str, Any], *, max_iter: int | None, section: dict[str, Any]):
        from knudsweep.solver.relaxation import solve_relaxation

        kw = dict(
            method=values["method"], gas=values["gas"], pressure=values["pressure"],
            temperature=values["temperature"], initial_state=values["initial_state"],
            molecular_model=values["molecular_model"], t_end=values["t_end"], n_output=values["n_output"],
            seed=values["seed"], h_bins_per_axis=values["h_bins_per_axis"],
            axis_temperature_ratios=tuple(values["axis_temperature_ratios"]),
            beam_separation=values["beam_separation"], beam_fraction=values["beam_fraction"],
            bkw_start_time=max(values["bkw_start_time"], 6.0 * math.log(2.5)),
        )
        if values["method"] == "dsmc":
            kw.update(n_particles=values["n_particles"], n_replicas=values["n_replicas"])
        else:
            kw.update(n_velocity=values["n_velocity"])
        return solve_relaxation(**kw)

    def point_cost(self, values: dict[str, Any]) -> float:
        """Seconds per point, measured on the demo settings (t_end 10, 41 outputs): DSMC 0.28 s for
        8 replicas of 2e4 particles (linear in particles x replicas x t_end); on a 32^3 grid BGK
        0.04 s and S-model / ES-BGK 2 s (cubic in n_velocity).  Fast spectral: see
        :func:`_fast_spectral_cost`."""
        t = values["t_end"] / 10.0
        if values["method"] == "dsmc":
            return 0.05 + 0.28 * t * values["n_particles"] * values["n_replicas"] / 160000.0
        if values["method"] == BOLTZMANN:
            return _fast_spectral_cost(values)
        grid = (values["n_velocity"] / 32.0) ** 3
        return 0.05 + (0.04 if values["method"] == "bgk" else 2.0) * t * grid

    def peak_memory_mb(self, section: dict[str, Any]) -> tuple[float, str]:
        """The fast spectral multipliers dominate (16 r M N^2 (N/2+1) bytes); other methods stay small."""
        if BOLTZMANN not in section["methods"]:
            return 0.0, ""
        _, run = _options(section)
        n = int(run["n_velocity"])
        best = (0.0, "")
        for gas in section.get("gases", ["Ar"]):
            for model in section.get("molecular_models", ["vhs"]):
                mb = _fast_spectral_size(model, gas, n)[2] / 1e6
                if mb > best[0]:
                    best = (mb, f"fast_spectral, {gas}, {model}, n_velocity = {n}")
        return best

    def warm_up(self) -> None:
        from knudsweep.solver.relaxation import solve_relaxation

        for model in ("maxwell", "vss"):
            solve_relaxation(method="dsmc", initial_state="two_beams", molecular_model=model, n_particles=200,
                             n_replicas=2, t_end=0.2, n_output=2, h_bins_per_axis=2)
        for method in ("bgk", "s_model", "es_bgk"):
            solve_relaxation(method=method, initial_state="two_beams", beam_fraction=0.3, n_velocity=8,
                             velocity_half_width=7.0, t_end=0.02, n_output=2)

    def gather_dims(self, section: dict[str, Any]) -> dict[str, list]:
        return {
            "gas": list(section["gases"]),
            "pressure": [canonical(p) for p in section["pressures"]],
            "temperature": [canonical(t) for t in section["temperatures"]],
            "initial_state": list(section["initial_states"]),
            "molecular_model": list(section["molecular_models"]),
            "solver": solver_labels(section),
        }

    def dim_attrs(self, section: dict[str, Any]) -> dict[str, dict]:
        labels = solver_labels(section)
        parsed = [_parse_solver(s) for s in labels]
        return {
            "gas": {"attrs": {"long_name": "gas (config/gases.yaml)"}},
            "pressure": {"attrs": {"units": "Pa", "long_name": "pressure"}},
            "temperature": {"attrs": {"units": "K", "long_name": "equilibrium temperature"}},
            "initial_state": {"attrs": {"long_name": "initial velocity distribution"}},
            "molecular_model": {"attrs": {"long_name": "molecular model (sets p/mu in mean collision times)"}},
            "solver": {
                "attrs": {"long_name": "method and resolution"},
                "extra": {
                    "method": ([m for m, _ in parsed], {"long_name": "dsmc, bgk, s_model, es_bgk or fast_spectral"}),
                    "n_particles": ([float(r) if m == "dsmc" else float("nan") for m, r in parsed],
                                    {"units": "1", "long_name": "particles per replica (particle method)"}),
                },
            },
        }

    def table_names(self, section: dict[str, Any]) -> list[str]:
        return ["relaxation_times"]

    def tables(self, ds, section: dict[str, Any]) -> dict[str, Table]:
        import pandas as pd

        from knudsweep.solver.relaxation.solve import fit_kind

        rows = []
        dims = self.gather_dims(section)
        for gas in dims["gas"]:
            for p in dims["pressure"]:
                for t in dims["temperature"]:
                    for st in dims["initial_state"]:
                        for model in dims["molecular_model"]:
                            for solver in dims["solver"]:
                                sel = ds.sel(gas=gas, pressure=p, temperature=t, initial_state=st,
                                             molecular_model=model, solver=solver)

                                def val(name):
                                    return float(sel[name].values) if name in sel else float("nan")

                                row = {"gas": gas, "pressure [Pa]": p, "temperature [K]": t,
                                       "initial state": st, "molecular model": model, "solver": solver,
                                       "method": _parse_solver(solver)[0],
                                       "mean collision time [s]": val("mean_collision_time_s")}
                                for f in FIT_NAMES:
                                    lab = f.replace("_", " ")
                                    row[f"{lab} time kind"] = fit_kind(f, st)
                                    row[f"{lab} time [tau_c]"] = val(f"{f}_relaxation_time")
                                    row[f"{lab} time uncertainty [tau_c]"] = val(f"{f}_relaxation_time_uncertainty")
                                    row[f"{lab} time [s]"] = val(f"{f}_relaxation_time_s")
                                    row[f"{lab} time uncertainty [s]"] = val(f"{f}_relaxation_time_s_uncertainty")
                                    if f == "fourth_moment":
                                        continue
                                    for part in ("initial", "late"):
                                        row[f"{lab} {part} time [tau_c]"] = val(f"{f}_{part}_relaxation_time")
                                        row[f"{lab} {part} time uncertainty [tau_c]"] = val(
                                            f"{f}_{part}_relaxation_time_uncertainty")
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
            "when the window is shortened, beyond the noise of that change).  Empty: no such initial "
            "non-equilibrium, not resolved above the noise, or the point failed.",
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
                "the same equation by particles.")

        return {"relaxation_times": Table(pd.DataFrame(rows), "Relaxation times", notes)}

    def figure_names(self, section: dict[str, Any]) -> list[str]:
        out = []
        for st in section["initial_states"]:
            out.append(f"relaxation_h_{st}")
            if st in ("anisotropic", "two_beams"):
                out.append(f"relaxation_anisotropy_{st}")
        return out

    def figures(self, ds, section: dict[str, Any], settings: dict[str, Any]) -> dict[str, Any]:
        return _relaxation_figures(ds, section, settings, self.figure_names(section))


@functools.lru_cache(maxsize=64)
def _fast_spectral_size(model: str, gas: str, n: int) -> tuple[int, int, float]:
    from knudsweep.solver.gas import get_gas
    from knudsweep.solver.relaxation.cross_sections import molecular_model
    from knudsweep.solver.relaxation.fast_spectral import operator_size

    return operator_size(molecular_model(model, get_gas(gas)), n)


# Fast spectral cost per point (one core): per collision evaluation SEC_PER_TRANSFORM per inverse
# FFT of 32^3 points (2 r M + 2 of them, N^3 log N for other N) plus SEC_PER_EVAL_REST for the
# projection and records; build BUILD_S_PER_TERM per multiplier pair r M.  Measured with
# benchmarks/bench_fast_spectral.py on the shared 2-core machine, default point (anisotropic
# start, t_end 10, 41 outputs, dt 0.25, N = 32): VHS argon (r = 4, M = 50) 11.9 s wall / 11.8 s
# CPU (model 11.8 s), hard spheres (r = 1) 3.6 s / 3.5 s (model 3.6 s); 0.26 s and 0.065 s per
# SSP-RK3 step, build 0.66 s and 0.41 s.
SEC_PER_TRANSFORM = 2.2e-4
SEC_PER_EVAL_REST = 4e-3
BUILD_S_PER_TERM = 3e-3


def _fast_spectral_cost(values: dict[str, Any]) -> float:
    from knudsweep.solver.relaxation.solve import DEFAULT_TIME_STEP

    n = int(values["n_velocity"])
    rank, m, _ = _fast_spectral_size(values["molecular_model"], values["gas"], n)
    interval = values["t_end"] / (values["n_output"] - 1)
    steps = (values["n_output"] - 1) * max(1, math.ceil(interval / DEFAULT_TIME_STEP[BOLTZMANN] - 1e-9))
    size = (n / 32.0) ** 3 * math.log(n) / math.log(32.0)
    per_eval = (SEC_PER_TRANSFORM * (2 * rank * m + 2) + SEC_PER_EVAL_REST) * size
    return 0.3 + BUILD_S_PER_TERM * rank * m * (n / 32.0) ** 3 + 3 * steps * per_eval


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
            res = _parse_solver(row["solver"])[1]
            if k not in boltzmann or res > _parse_solver(boltzmann[k]["solver"])[1]:
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
BAND_SE = 2.0   # half-width of the DSMC band about the Boltzmann curve, in standard errors of the mean
# Boltzmann (fast spectral) curve: dash-dot, no markers (colour = molecular model as for every method)
BOLTZMANN_LINE = {"ls": (0, (6, 1.5, 1.2, 1.5)), "lw": 1.6}


def _curves(ds, section, state: str) -> list[dict]:
    """Converged time series of one initial state at the first pressure and temperature, from the sweep."""
    if "time" not in ds.dims or "h_function" not in ds:
        return []
    p0, t0 = canonical(section["pressures"][0]), canonical(section["temperatures"][0])
    n_rep = max(int(_options(section)[1]["n_replicas"]), 1)
    t = np.asarray(ds["time"].values, float)
    out = []
    for gas in ds["gas"].values:
        for m, model in enumerate(ds["molecular_model"].values):
            for solver in ds["solver"].values:
                sel = ds.sel(gas=gas, pressure=p0, temperature=t0, initial_state=state,
                             molecular_model=model, solver=solver)
                if str(sel["status"].values) != "converged":
                    continue
                method, _ = _parse_solver(str(solver))

                def get(name):
                    return np.asarray(sel[name].values, float) if name in sel else np.full(t.shape, np.nan)

                tau = float(sel["anisotropy_relaxation_time"].values) if "anisotropy_relaxation_time" in sel \
                    else float("nan")
                out.append({"gas": str(gas), "model": str(model), "m": m, "method": method, "time": t,
                            "h": get("h_function"), "h_se": get("h_function_std") / math.sqrt(n_rep),
                            "aniso": get("anisotropy"), "aniso_se": get("anisotropy_std") / math.sqrt(n_rep),
                            "tau": tau})
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
            ax.fill_between(c["time"][:n], np.maximum(ref - BAND_SE * se[:n], ref * 1e-3), ref + BAND_SE * se[:n],
                            color=col, alpha=0.22, lw=0, zorder=2)
            ax.plot(c["time"][:n], y[:n], color=col, lw=1.1, zorder=3)
        elif n:
            ax.fill_between(c["time"][:n], np.maximum(y[:n] - se[:n], y[:n] * 1e-3), y[:n] + se[:n],
                            color=col, alpha=0.22, lw=0, zorder=2)
            ax.plot(c["time"][:n], y[:n], color=col, lw=1.3, zorder=3)
        return
    ok = np.isfinite(y) & (y > 0)
    if c["method"] == BOLTZMANN:
        ax.plot(c["time"][ok], y[ok], color=col, zorder=3, **BOLTZMANN_LINE)
        return
    every = max(len(y) // 6, 1)
    start = 0 if c["method"] == "bgk" else every // 2  # markers of the models side by side, not on top
    ax.plot(c["time"][ok], y[ok], color=col, marker=ps.marker(c["m"]), markevery=(start, every),
            **ps.model_line(c["method"]), **ps.model_marker(c["method"]), zorder=3)


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
            handles.append(ax.plot([], [], color="0.35", marker="o", **ps.model_line(method),
                                   **ps.model_marker(method))[0])
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
                    taus.append(f"{ps.molecular_text(c['model'])}, {ps.model_text(c['method'])}: "
                                f"{ps.number(c['tau'])}")
            if taus:
                ax.text(0.98, 0.98, "$\\tau/\\tau_c$\n" + "\n".join(taus), transform=ax.transAxes, ha="right",
                        va="top", fontsize="x-small", bbox={"fc": "white", "ec": "0.8", "alpha": 0.9})
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


def figure_captions(ds, section: dict[str, Any]) -> dict[str, str]:
    """Report caption (reStructuredText) of every relaxation figure."""
    from knudsweep.plot_style import model_text, molecular_text, state_text

    _, run = _options(section)
    methods = ", ".join(model_text(m) for m in section["methods"])
    models = ", ".join(molecular_text(m) for m in section["molecular_models"])
    where = (f"at {section['pressures'][0]:g} Pa and {section['temperatures'][0]:g} K (reduced time does not "
             f"depend on p and T); gases {', '.join(section['gases'])}, one panel each")
    if BOLTZMANN in section["methods"] and "dsmc" in section["methods"]:
        band = (f"with a band of {BAND_SE:g} standard errors of the mean drawn about the fast spectral "
                "(deterministic Boltzmann) curve of the same gas and molecular model, so DSMC agrees with it "
                "where its mean stays inside the band")
    else:
        band = "with a band of one standard error of the mean"
    unc = (f"Uncertainty: DSMC curves are means over {int(run['n_replicas'])} replicas of "
           f"{', '.join(str(int(n)) for n in section.get('n_particles', []))} particles {band}; each ends "
           "where it falls below 2 standard errors (noise). The model equations and the fast spectral "
           "solution are deterministic (velocity-grid error not estimated here). No model error included.")
    out = {}
    for st in section["initial_states"]:
        out[f"relaxation_h_{st}"] = "\n\n".join([
            f"Relative H-function of a homogeneous gas relaxing from the {state_text(st)} state, on a log axis "
            f"against time in mean collision times, {where}. Methods: {methods} (DSMC solid with band; BGK thick "
            f"translucent line with large open markers; S-model dashed with small filled markers; fast "
            f"spectral Boltzmann solution dash-dot without markers). Molecular "
            f"models (colour and marker): {models}. H is binned on equiprobable cells of the equilibrium and "
            "corrected for the particle sampling bias.", unc])
        out[f"relaxation_anisotropy_{st}"] = "\n\n".join([
            f"Magnitude of the temperature-tensor anisotropy from the {state_text(st)} state against time, "
            f"{where}. Methods: {methods}; molecular models: {models} (styles as in the H-function figure). "
            "Dotted black: exp(-t/tau) from the initial value with tau the anisotropy time of the table (time to "
            "fall by e); the box lists tau in mean collision times (exact for Maxwell molecules: 2).", unc])
    return out


FAMILY = Relaxation()
