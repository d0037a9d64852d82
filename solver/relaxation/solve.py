"""solve_relaxation: one point of the space-homogeneous relaxation family.

A gas at pressure p and (equilibrium) temperature T starts from a
non-equilibrium velocity distribution and relaxes to the Maxwellian.  The
particle method (DSMC, :mod:`knudsweep.solver.relaxation.dsmc`) and the fast spectral
method (:mod:`knudsweep.solver.relaxation.fast_spectral`, deterministic) solve the
Boltzmann equation for the chosen molecular model; the model-equation methods
(:mod:`knudsweep.solver.relaxation.deterministic`) solve the BGK, S-model or ES-BGK
equation, whose relaxation frequency is set by the same molecular model's
p/mu.  Everything runs in reduced units (n = 1, velocity sqrt(kT/m), time in
mean collision times tau_c); tau_c in seconds follows from the gas viscosity
at T (:mod:`knudsweep.solver.relaxation.cross_sections`).
"""

from __future__ import annotations

import math
import time as _time
from typing import Any

import numpy as np

from knudsweep.solver import gas as gasmod
from knudsweep.solver.kinetic_models import MODEL_NAMES, RELAXATION_BOLTZMANN
from knudsweep.solver.relaxation import deterministic as det
from knudsweep.solver.relaxation import dsmc
from knudsweep.solver.relaxation import fast_spectral as fs
from knudsweep.solver.relaxation.bkw import BKW_FIRST_TIME
from knudsweep.solver.relaxation.cross_sections import MOLECULAR_MODELS, check_model, molecular_model
from knudsweep.solver.relaxation.deterministic import HIST_BINS, HIST_LO, HIST_WIDTH
from knudsweep.solver.relaxation.fitting import (
    KIND_E_FOLDING,
    KIND_EXPONENTIAL,
    KIND_TWO_EXPONENTIAL,
    DecayFit,
    e_folding_time,
    exponential_rate_jackknife,
    fit_decay,
    fit_two_exponentials,
    initial_rate,
    late_rate,
    nan_fit,
)
from knudsweep.solver.relaxation.h_function import equiprobable_edges, sampling_bias
from knudsweep.solver.relaxation.initial_states import (
    InitialState,
    grid_half_width,
    initial_density_on_grid,
    make_initial_state,
)
from knudsweep.solver.result import CONVERGED, FAILED, ConvergenceRecord, Quantity, SolverResult

# the particle method, the model equations and the deterministic Boltzmann solution, named by the
# one registry of kinetic models (knudsweep.solver.kinetic_models)
METHODS = ("dsmc", *MODEL_NAMES, RELAXATION_BOLTZMANN)
# Default time step per method (mean collision times).  DSMC 0.1 and model
# equations 0.01: the values their verification tests use.  Fast spectral
# (SSP-RK3, third order): 0.25, the default output interval; against 0.125 it
# changes the anisotropy e-folding time of VHS argon by 1.5e-4 relative
# (measured on the default 32^3 grid, anisotropic start).
DEFAULT_TIME_STEP = {"dsmc": 0.1, "bgk": 0.01, "s_model": 0.01, "es_bgk": 0.01, "fast_spectral": 0.25}
FAMILY = "relaxation"
FIT_NAMES = ("anisotropy", "heat_flux", "fourth_moment")

# Minimum particles per H cell: below ~5 expected counts per cell the
# chi-square expansion behind the bias correction fails (Cochran's rule of
# thumb, common practice, no source); such a point is returned as failed.
MIN_PER_CELL = 5
MIN_PARTICLES = 100

# Tolerated drift of total energy per particle (reduced units, value 3/2):
# round-off accumulates like sqrt(collisions) * 1e-16; 1e-9 is far above that
# and far below any physical signal.
MAX_ENERGY_DRIFT = 1e-9

# Fast spectral: Gibbs oscillations of the truncated Fourier series leave small
# negative values of f in the tails (measured -1e-4 of max f on a 24^3 grid,
# tests/verification/test_relaxation_fast_spectral.py).  Values below
# -1e-3 max f mean the grid or box does not resolve f; such a point is returned
# as failed (common practice, no source: a factor 10 above the measured level).
MAX_NEGATIVE_FRACTION = 1e-3


def _int_in(name: str, value: Any, lo: int, hi: int) -> int:
    try:
        iv = int(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name}: must be an integer in [{lo}, {hi}], got {value!r}") from None
    if iv != value or not (lo <= iv <= hi):
        raise ValueError(f"{name}: must be an integer in [{lo}, {hi}], got {value!r}")
    return iv


def _float_in(name: str, value: Any, lo: float, hi: float, lo_open: bool = True) -> float:
    try:
        fv = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name}: must be a number in {'(' if lo_open else '['}{lo}, {hi}], got {value!r}") from None
    ok = (fv > lo if lo_open else fv >= lo) and fv <= hi and math.isfinite(fv)
    if not ok:
        raise ValueError(f"{name}: must be a number in {'(' if lo_open else '['}{lo}, {hi}], got {value!r}")
    return fv


def _anisotropy_direction(state: InitialState) -> np.ndarray:
    """Unit traceless tensor (xx, yy, zz, xy, xz, yz) of the initial temperature anisotropy."""
    if state.name == "anisotropic":
        d = np.array([state.params[0] - 1.0, state.params[1] - 1.0, state.params[2] - 1.0, 0, 0, 0])
    else:
        d = np.array([2.0, -1.0, -1.0, 0.0, 0.0, 0.0])
    return d / math.sqrt(np.sum(d[:3] ** 2))


def _has_anisotropy(state: InitialState) -> bool:
    return state.name in ("anisotropic", "two_beams")


def _has_heat_flux(state: InitialState) -> bool:
    return state.name == "two_beams" and abs(state.params[1] - 0.5) > 1e-12


def solve_relaxation(
    method: str = "dsmc",
    gas: gasmod.GasData | str = "Ar",
    pressure: float = 100.0,
    temperature: float = 300.0,
    initial_state: str = "anisotropic",
    molecular_model: str = "vhs",
    n_particles: int = 20000,
    n_replicas: int = 8,
    t_end: float = 10.0,
    n_output: int = 41,
    seed: int = 0,
    time_step: float | None = None,
    h_bins_per_axis: int = 8,
    axis_temperature_ratios: tuple[float, float, float] = (1.8, 0.6, 0.6),
    beam_separation: float = 3.0,
    beam_fraction: float = 0.5,
    bkw_start_time: float = BKW_FIRST_TIME,
    n_velocity: int = 32,
    velocity_half_width: float | None = None,
) -> SolverResult:
    """Relax a space-homogeneous gas from ``initial_state`` to equilibrium.

    Parameters (reduced units: velocity sqrt(kT/m), time in mean collision times)
    ----------
    method : "dsmc" | "bgk" | "s_model" | "es_bgk" | "fast_spectral"
    gas : gas name from config/gases.yaml or a GasData
    pressure : Pa, > 0;  temperature : K, > 0 (the equilibrium temperature)
    initial_state : "equilibrium" | "anisotropic" | "two_beams" | "bkw"
    molecular_model : "vhs" | "vss" | "hard_sphere" | "maxwell"; the cross-section
        of DSMC and fast spectral, and p/mu in mean collision times for the model equations
    n_particles : per replica, integer in [2, 1e8] (DSMC)
    n_replicas : independent replicas, integer in [1, 4096] (DSMC; >= 3 for error bars)
    t_end : (0, 1e4] mean collision times;  n_output : output times, [2, 100001]
    seed : integer >= 0; replica seeds are spawned from it (numpy SeedSequence)
    time_step : (0, 1] mean collision times; default 0.1 (DSMC), 0.01 (model equations),
        0.25 (fast spectral); shortened to divide the output interval
    h_bins_per_axis : k in [2, 64]; the H estimator uses k**3 equiprobable cells
    axis_temperature_ratios, beam_separation, beam_fraction, bkw_start_time :
        options of the initial state (see :func:`make_initial_state`)
    n_velocity, velocity_half_width : discrete velocity grid (model equations, fast spectral;
        default half-width from the initial state, :func:`grid_half_width` or
        :func:`fast_spectral.spectral_half_width`)

    Returns a SolverResult of family "relaxation"; bad input raises ValueError
    naming the field; a run that cannot give a valid result has status "failed".
    """
    t_wall = _time.perf_counter()
    if method not in METHODS:
        raise ValueError(f"method: must be one of {', '.join(METHODS)}, got {method!r}")
    g = gas if isinstance(gas, gasmod.GasData) else gasmod.get_gas(gas)
    pressure = _float_in("pressure", pressure, 0.0, 1e9)
    temperature = _float_in("temperature", temperature, 0.0, 1e5)
    if molecular_model not in MOLECULAR_MODELS:
        raise ValueError(f"molecular_model: must be one of {', '.join(MOLECULAR_MODELS)}, got {molecular_model!r}")
    model = check_model(_model_for(molecular_model, g))
    state = make_initial_state(initial_state, axis_temperature_ratios, beam_separation, beam_fraction, bkw_start_time)
    n_particles = _int_in("n_particles", n_particles, 2, 100_000_000)
    n_replicas = _int_in("n_replicas", n_replicas, 1, 4096)
    t_end = _float_in("t_end", t_end, 0.0, 1e4)
    n_output = _int_in("n_output", n_output, 2, 100_001)
    seed = _int_in("seed", seed, 0, 2**63 - 1)
    default_step = DEFAULT_TIME_STEP[method]
    time_step = default_step if time_step is None else _float_in("time_step", time_step, 0.0, 1.0)
    k_bins = _int_in("h_bins_per_axis", h_bins_per_axis, 2, 64)

    viscosity = gasmod.viscosity(g, temperature)
    mu_over_p = viscosity / pressure
    tau_c = model.collision_time_factor * mu_over_p
    interval = t_end / (n_output - 1)
    steps_per_output = max(1, int(math.ceil(interval / time_step - 1e-9)))
    dt = interval / steps_per_output
    times = np.arange(n_output) * interval
    edges = equiprobable_edges(k_bins)

    parameters: dict[str, Any] = {
        "method": method,
        "gas": g.name,
        "pressure": pressure,
        "temperature": temperature,
        "initial_state": state.name,
        "molecular_model": model.name,
        "omega": model.omega,
        "alpha_vss": model.alpha,
        "t_end": t_end,
        "n_output": n_output,
        "seed": seed,
        "h_bins_per_axis": k_bins,
        "initial_state_description": state.description,
    }
    if state.name == "anisotropic":
        parameters["axis_temperature_ratios"] = list(state.params)
    if state.name == "two_beams":
        parameters.update(beam_separation=state.params[0], beam_fraction=state.params[1])
    if state.name == "bkw":
        parameters["bkw_start_time"] = state.params[0]
    discretization: dict[str, Any] = {"time_step": dt, "steps_per_output": steps_per_output}

    if method == "dsmc":
        parameters.update(n_particles=n_particles, n_replicas=n_replicas)
        n_cells = k_bins**3
        need = max(MIN_PARTICLES, MIN_PER_CELL * n_cells)
        if n_particles < need:
            return _failed(
                parameters,
                discretization,
                times,
                tau_c,
                t_wall,
                f"n_particles={n_particles} too small: need >= {need} "
                f"({MIN_PER_CELL} per H cell for h_bins_per_axis={k_bins}, and >= {MIN_PARTICLES})",
            )
        data = _run_dsmc(model, state, n_particles, n_replicas, seed, dt, steps_per_output, n_output, edges)
        discretization.update(
            n_particles=n_particles, n_replicas=n_replicas, scheme="no-time-counter (Bird 1994)", h_cells=n_cells
        )
    elif method == "fast_spectral":
        half_width = fs.spectral_half_width(state) if velocity_half_width is None else velocity_half_width
        grid = det.make_grid(n_velocity, half_width)
        try:
            data = fs.run_fast_spectral(model, state, grid, dt, steps_per_output, n_output, edges)
        except det.NewtonFailure as exc:  # the start cannot be normalised on this grid
            return _failed(parameters, discretization, times, tau_c, t_wall, str(exc))
        min_f, max_f = data.pop("min_distribution"), data.pop("max_distribution")
        discretization.update(
            n_velocity=grid.n,
            velocity_half_width=grid.half_width,
            scheme="fast spectral (Mouhot & Pareschi 2006), " + fs.SCHEME,
            min_distribution=min_f,
            max_distribution=max_f,
        )
        if not min_f >= -MAX_NEGATIVE_FRACTION * max_f:
            return _failed(
                parameters,
                discretization,
                times,
                tau_c,
                t_wall,
                f"distribution not resolved: min f = {min_f:.3e} below -{MAX_NEGATIVE_FRACTION:g} "
                f"x max f = {max_f:.3e} (raise n_velocity or velocity_half_width)",
            )
    else:
        half_width = grid_half_width(state) if velocity_half_width is None else velocity_half_width
        grid = det.make_grid(n_velocity, half_width)
        try:
            data = _run_model_equation(method, model, state, grid, dt, steps_per_output, n_output, edges)
        except det.NewtonFailure as exc:
            return _failed(parameters, discretization, times, tau_c, t_wall, str(exc))
        discretization.update(
            n_velocity=grid.n,
            velocity_half_width=grid.half_width,
            scheme="exponential relaxation step, conservative discrete target (Mieussens 2000)",
            min_distribution=data.pop("min_distribution"),
        )
        data.pop("max_distribution")
    bad = [
        name
        for name, arr in data.items()
        if isinstance(arr, np.ndarray) and name != "collisions" and not np.all(np.isfinite(arr))
    ]
    if bad:
        return _failed(parameters, discretization, times, tau_c, t_wall, f"non-finite values in {', '.join(bad)}")
    if data["energy_drift"] > MAX_ENERGY_DRIFT:
        return _failed(
            parameters,
            discretization,
            times,
            tau_c,
            t_wall,
            f"energy drift {data['energy_drift']:.3e} exceeds {MAX_ENERGY_DRIFT:.0e}",
        )
    return _assemble(parameters, discretization, times, tau_c, mu_over_p, model, state, data, t_wall, n_output)


def _model_for(name, g):
    return molecular_model(name, g)


def _run_dsmc(model, state, n, n_rep, seed, dt, steps, n_output, edges) -> dict[str, Any]:
    out, hist, exceed = dsmc.run_particles(
        seed,
        n_rep,
        state.code,
        state.params,
        n,
        model.sigma_cr_coefficient,
        model.collision_exponent,
        model.alpha,
        dt,
        steps,
        n_output,
        edges,
        HIST_LO,
        HIST_WIDTH,
        HIST_BINS,
    )
    k = edges.size + 1  # cells per axis
    temp = out[:, :, dsmc.COL_TXX : dsmc.COL_TYZ + 1]  # R, T, 6
    momentum = out[:, :, dsmc.COL_UX : dsmc.COL_UZ + 1]
    energy = out[:, :, dsmc.COL_ENERGY]
    return {
        "temperature": temp,
        "fourth_moment": out[:, :, dsmc.COL_M4],
        "heat_flux": out[:, :, dsmc.COL_QX : dsmc.COL_QZ + 1],
        "h_function": out[:, :, dsmc.COL_H] - sampling_bias(k, n),
        "h_fine": None,
        "collisions": 2.0 * out[:, :, dsmc.COL_COLLISIONS] / n,
        "distribution": hist,
        "momentum_drift": float(np.max(np.abs(momentum))),
        "energy_drift": float(np.max(np.abs(energy - 1.5))),
        "exceedances": float(exceed.sum()),
        "h_bias": sampling_bias(k, n),
    }


def _run_model_equation(method, model, state, grid, dt, steps, n_output, edges) -> dict[str, Any]:
    v = grid.nodes()
    w = grid.weight
    code = det.MODEL_CODE[method]
    nu = det.relaxation_frequency(method, model.pressure_over_viscosity)
    f = initial_density_on_grid(state, v[:, 0], v[:, 1], v[:, 2])
    f = det.normalise_initial(f, v, w)
    m_eq = det.discrete_target(0, f, v, w)  # discrete Maxwellian of the conserved moments
    record = det.GridRecord(grid, m_eq, edges, n_output)
    decay = math.exp(-nu * dt)
    record.record(0, f)
    for k in range(1, n_output):
        for _ in range(steps):
            gd = m_eq if code == 0 else det.discrete_target(code, f, v, w)
            det._exponential_step(f, gd, decay)
        record.record(k, f)
    return record.result()


def _stats(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    mean = a.mean(axis=0)
    std = a.std(axis=0, ddof=1) if a.shape[0] > 1 else np.zeros_like(mean)
    return mean, std


def _time_coords(times, tau_c, n_bins=HIST_BINS):
    centres = HIST_LO + (np.arange(n_bins) + 0.5) * HIST_WIDTH
    return {
        "time": Quantity(
            times,
            "1",
            "time in mean collision times tau_c (tau_c = lambda/c_mean, lambda Bird's "
            "viscosity-based free path of the molecular model calibrated to mu(T); see time_s)",
            ("time",),
        ),
        "velocity_x": Quantity(
            centres, "1", "bin centre of the x velocity component in units of sqrt(k T/m)", ("velocity_x",)
        ),
    }


def _assemble(parameters, discretization, times, tau_c, mu_over_p, model, state, data, t_wall, n_output):
    temperature = parameters["temperature"]
    tens = data["temperature"]  # R, T, 6 reduced
    direction = _anisotropy_direction(state)
    weights = np.array([1.0, 1.0, 1.0, 2.0, 2.0, 2.0])  # off-diagonal entries appear twice in A:B
    aniso = np.einsum("rtk,k->rt", tens - np.array([1, 1, 1, 0, 0, 0.0]), direction * weights)
    heat_x = data["heat_flux"][:, :, 0]
    m4 = data["fourth_moment"]

    coords = _time_coords(times, tau_c)
    profiles: dict[str, Quantity] = {
        "time_s": Quantity(times * tau_c, "s", "time in seconds, time * tau_c at the point's p and T", ("time",)),
    }

    def add(name, arr, units, long_name, scale=1.0, dims=("time",)):
        mean, std = _stats(arr)
        profiles[name] = Quantity(mean * scale, units, long_name, dims)
        profiles[name + "_std"] = Quantity(std * scale, units, "replica standard deviation of " + name, dims)

    add(
        "h_function",
        data["h_function"],
        "1",
        "relative H-function sum p_b ln(B p_b) on B equiprobable cells of the equilibrium Maxwellian, "
        "minus the sampling bias (B-1)/(2N) for particles",
    )
    for i, ax in enumerate(("xx", "yy", "zz")):
        add(f"temperature_{ax}", tens[:, :, i], "K", f"kinetic temperature m <c_{ax[0]}^2>/k", scale=temperature)
    add(
        "anisotropy",
        aniso,
        "1",
        "projection of the traceless temperature tensor (T_ij - T delta_ij)/T on its initial direction",
    )
    add("heat_flux_x", heat_x, "1", "heat flux q_x / (n k T sqrt(k T/m)) = <c^2 c_x>/2 in reduced units")
    add("fourth_moment", m4, "1", "<c^4> / (k T/m)^2 (equilibrium value 15)")
    if data["collisions"] is not None:
        add("collisions_per_particle", data["collisions"], "1", "collisions per particle since t = 0")
    else:
        profiles["collisions_per_particle"] = Quantity(
            np.full(n_output, np.nan), "1", "collisions per particle (particle method only)", ("time",)
        )
        profiles["collisions_per_particle_std"] = Quantity(
            np.full(n_output, np.nan), "1", "replica standard deviation of collisions_per_particle", ("time",)
        )
    add(
        "velocity_distribution_x",
        data["distribution"],
        "1",
        "marginal distribution f_x(v_x) in units of 1/sqrt(k T/m), bin averages",
        dims=("time", "velocity_x"),
    )
    h_fine = data["h_fine"]
    profiles["h_function_grid"] = Quantity(
        h_fine if h_fine is not None else np.full(n_output, np.nan),
        "1",
        "relative H-function sum f ln(f/M_d) w on the velocity grid (deterministic methods)",
        ("time",),
    )

    fits, extra = _relaxation_fits(times, state, aniso, heat_x, m4)

    coefficients: dict[str, Quantity] = {
        "mean_collision_time_s": Quantity(
            tau_c, "s", "mean collision time tau_c = factor * mu/p of the molecular model"
        ),
        "viscosity_over_pressure_s": Quantity(mu_over_p, "s", "mu(T)/p"),
        "pressure_over_viscosity_reduced": Quantity(
            model.pressure_over_viscosity,
            "1",
            "p/mu in units of 1/tau_c, mu the first Chapman-Enskog "
            "viscosity of the molecular model (Bird 1994 eqs. 4.62, 4.64; "
            "for hard spheres about 1.6 % below the converged value, "
            "Chapman & Cowling 1970, value from memory); the model "
            "equations relax at this p/mu",
        ),
        "h_function_sampling_bias": Quantity(data["h_bias"], "1", "(B-1)/(2N) subtracted from h_function"),
        "momentum_drift": Quantity(
            data["momentum_drift"], "1", "max |mean velocity| / sqrt(kT/m) over time and replicas"
        ),
        "energy_drift": Quantity(data["energy_drift"], "1", "max |energy per particle - 3/2| in units of kT"),
        "majorant_exceedances": Quantity(
            data["exceedances"], "1", "candidate pairs above the majorant (sigma c_r)_max"
        ),
    }
    if "mass_drift" in data:
        coefficients["mass_drift"] = Quantity(data["mass_drift"], "1", "max |density - 1| on the velocity grid")
    for name in FIT_NAMES:
        fit = fits[name]
        discretization[f"{name}_fit"] = fit.record()
        if not fit.ok:
            # Not defined for this start (e.g. no initial heat flux) or not resolved above
            # the noise: the time is left out, and the reason stays in the fit note.
            continue
        label = f"{name.replace('_', ' ')} relaxation time ({fit.kind})"
        coefficients[f"{name}_relaxation_time"] = Quantity(fit.time, "1", f"{label} in mean collision times")
        coefficients[f"{name}_relaxation_time_uncertainty"] = Quantity(
            fit.time_uncertainty, "1", f"standard uncertainty of the {label}, fit window included"
        )
        coefficients[f"{name}_relaxation_time_s"] = Quantity(fit.time * tau_c, "s", label)
        coefficients[f"{name}_relaxation_time_s_uncertainty"] = Quantity(
            fit.time_uncertainty * tau_c, "s", f"standard uncertainty of the {label}, fit window included"
        )
    for (name, part), fit in extra.items():
        discretization[f"{name}_{part}_fit"] = fit.record()
        if not fit.ok:
            continue
        label = f"{name.replace('_', ' ')} {part} relaxation time 1/rate ({fit.kind})"
        coefficients[f"{name}_{part}_relaxation_time"] = Quantity(fit.time, "1", f"{label} in mean collision times")
        coefficients[f"{name}_{part}_relaxation_time_uncertainty"] = Quantity(
            fit.time_uncertainty, "1", f"standard uncertainty of the {label}, fit window included"
        )
    conv = ConvergenceRecord(
        np.zeros(0),
        iterations=int((n_output - 1) * discretization["steps_per_output"]),
        status=CONVERGED,
        reason="",
        tolerance=MAX_ENERGY_DRIFT,
    )
    return SolverResult(
        FAMILY,
        state.name,
        parameters,
        coords,
        profiles,
        coefficients,
        discretization,
        conv,
        _time.perf_counter() - t_wall,
    )


def _fit_opts(curves: np.ndarray) -> dict[str, float]:
    # particle data: stop at 5 standard errors (window ends before noise dominates;
    # common practice, no source); noise-free data: stop at 1e-4 of the start,
    # well above round-off of the moments (~1e-14)
    return {"min_fraction": 0.02} if curves.shape[0] >= 3 else {"min_fraction": 1e-4}


def fit_kind(name: str, initial_state: str) -> str:
    """What ``<name>_relaxation_time`` is for this initial state (see :func:`_relaxation_fits`)."""
    if name in ("anisotropy", "heat_flux"):
        return KIND_E_FOLDING
    return KIND_TWO_EXPONENTIAL if initial_state in ("anisotropic", "two_beams") else KIND_EXPONENTIAL


def _relaxation_fits(times, state, aniso, heat_x, m4):
    """Headline fits per signal and the initial/late rates of anisotropy and heat flux.

    anisotropy, heat flux: the time to fall by e (model free; the hard-sphere
    decay is not exponential), plus the initial rate and the late rate.
    <c^4> - 15: with an initial anisotropy, C exp(-r t) + D exp(-q t) with
    q = 2 x the anisotropy rate (exact for Maxwell molecules and ES-BGK, see
    :mod:`knudsweep.solver.relaxation.moments`); otherwise one exponential.
    """
    fits: dict[str, DecayFit] = {}
    extra: dict[tuple[str, str], DecayFit] = {}
    signals = {
        "anisotropy": (aniso, _has_anisotropy(state), "no initial anisotropy"),
        "heat_flux": (heat_x, _has_heat_flux(state), "no initial heat flux"),
    }
    for name, (curves, present, why) in signals.items():
        if not present:
            fits[name] = nan_fit(why, KIND_E_FOLDING)
            continue
        fits[name] = e_folding_time(times, curves)
        extra[(name, "initial")] = initial_rate(times, curves, fits[name].time)
        extra[(name, "late")] = late_rate(times, curves, **_fit_opts(curves))
    y4 = m4 - 15.0
    if state.name == "equilibrium":
        fits["fourth_moment"] = nan_fit("initial state is the equilibrium")
    elif _has_anisotropy(state):
        whole = fit_decay(times, aniso, **_fit_opts(aniso))
        jack = exponential_rate_jackknife(times, aniso, whole)
        fits["fourth_moment"] = fit_two_exponentials(
            times, y4, 2.0 * whole.rate, None if jack is None else 2.0 * jack, **_fit_opts(y4)
        )
    else:
        fits["fourth_moment"] = fit_decay(times, y4, **_fit_opts(y4))
    return fits, extra


def _failed(parameters, discretization, times, tau_c, t_wall, reason) -> SolverResult:
    """A result with status failed, the full set of variables filled with NaN."""
    n_output = times.size
    coords = _time_coords(times, tau_c)
    nan_t = np.full(n_output, np.nan)
    profiles = {"time_s": Quantity(times * tau_c, "s", "time in seconds", ("time",))}
    for name in (
        "h_function",
        "temperature_xx",
        "temperature_yy",
        "temperature_zz",
        "anisotropy",
        "heat_flux_x",
        "fourth_moment",
        "collisions_per_particle",
    ):
        profiles[name] = Quantity(nan_t, "1", name.replace("_", " "), ("time",))
        profiles[name + "_std"] = Quantity(nan_t, "1", "replica standard deviation of " + name, ("time",))
    for name in ("temperature_xx", "temperature_yy", "temperature_zz"):
        profiles[name].units = profiles[name + "_std"].units = "K"
    profiles["h_function_grid"] = Quantity(nan_t, "1", "relative H-function on the velocity grid", ("time",))
    nan_d = np.full((n_output, HIST_BINS), np.nan)
    profiles["velocity_distribution_x"] = Quantity(nan_d, "1", "marginal distribution f_x(v_x)", ("time", "velocity_x"))
    profiles["velocity_distribution_x_std"] = Quantity(nan_d, "1", "replica standard deviation", ("time", "velocity_x"))
    coefficients = {"mean_collision_time_s": Quantity(tau_c, "s", "mean collision time")}
    for name in FIT_NAMES:
        for suffix, units in (("", "1"), ("_uncertainty", "1"), ("_s", "s"), ("_s_uncertainty", "s")):
            coefficients[f"{name}_relaxation_time{suffix}"] = Quantity(
                math.nan, units, f"{name} relaxation time{suffix}"
            )
    for name in ("anisotropy", "heat_flux"):
        for part in ("initial", "late"):
            for suffix in ("", "_uncertainty"):
                coefficients[f"{name}_{part}_relaxation_time{suffix}"] = Quantity(
                    math.nan, "1", f"{name} {part} relaxation time{suffix}"
                )
    conv = ConvergenceRecord(np.zeros(0), 0, FAILED, reason, MAX_ENERGY_DRIFT)
    return SolverResult(
        FAMILY,
        parameters["initial_state"],
        parameters,
        coords,
        profiles,
        coefficients,
        discretization,
        conv,
        _time.perf_counter() - t_wall,
    )
