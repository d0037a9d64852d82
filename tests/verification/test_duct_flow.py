"""Long rectangular duct: continuum series, plane-channel limit, Onsager, acceleration.

Normalisation (knudsweep.solver.duct): height H is the length scale, width W = A H,
M / W = (H p / v0)[G_P X_P + G_T X_T].
"""

import numpy as np
import pytest
import scipy.sparse as sp
from kramers_bgk import bgk_thermal_slip, bgk_viscous_slip  # noqa: E402
from precision import HONEST, ITERATION, ROUND_OFF
from scipy.sparse.linalg import spsolve

from knudsweep.solver.duct import solve_duct
from knudsweep.solver.limits import (
    continuum_flow_rate,
    free_molecular_flow_rate,
    slip_flow_rate,
)
from knudsweep.solver.plane_channel import solve_plane_channel
from knudsweep.solver.walls import CercignaniLampisWall, MaxwellWall

SMALL = {"n_space": 13, "n_velocity": 8}

# White's series against second-order finite differences with h = 1/120: O(h^2) ~ 1e-4 relative.
CONTINUUM_FINITE_DIFFERENCES = 5e-4
# The series at A = 1000 against delta/6: the side walls remove 0.63/A = 6e-4.
SIDE_WALLS_A1000 = 1e-3
# Kinetic G_P at delta = 100 (25 nodes) against Navier-Stokes with first-order slip: second-order slip and corner
# Knudsen layers, O(1/delta) ~ 1 %, plus the coarse kinetic grid (7.711 / 7.631 / 7.612 on 25 / 41 / 65 nodes, against
# 7.593 for Navier-Stokes).
SLIP_FLOW_COARSE = 2e-2
# The same on 65 nodes and 16 speeds: the O(1/delta) terms remain.
SLIP_FLOW_FINE = 1e-2
# Wide duct extrapolated in 1/A against the plane-channel solver: different discretisations (cell-centred 1-D against
# clustered 2-D upwind on a coarse grid) and the neglected O(1/A^2); measured 1.1 % (Maxwell) and 1.0 % (CL).
WIDE_DUCT_EXTRAPOLATION = 2e-2
# Q_P = G_T on the coarse test grids: the upwind operator is not self-adjoint, the mismatch falls as (n - 1)^-2;
# measured 2.1 % on 13 nodes, 0.81 % on 25 (delta = 5), 0.11 % (delta = 0.5) and 4e-4 (CL walls, delta = 0.5) on 13.
ONSAGER_COARSE_GRID = 1e-2
# G_T delta against sigma_T: the O(1/delta) Knudsen-layer and corner corrections, about 2/delta (measured 0.747 at
# delta = 100 and 0.766 at 1000 on the finest grids).
THERMAL_SLIP_LIMIT_100 = 3e-2
THERMAL_SLIP_LIMIT_1000 = 5e-3
# The last step of that grid study moves G_T delta by less than this fraction (a converged study; no measurement
# recorded).
LAST_GRID_STEP = 2e-3
# slip_flow_rate (first order in sigma/delta) against finite differences with slip length 0.01: the O((sigma/delta)^2)
# terms plus O(h^2); measured 6e-4 at A = 1.
SLIP_FORMULA_FINITE_DIFFERENCES = 2e-3
# The first-order slip increment at A = 50 against sigma_P: side walls add O(1/A), measured 0.990 sigma.
SLIP_INCREMENT_A50 = 2e-2
# Discrete ordinates at delta = 0 with 12 angles per quadrant against the free-molecular quadratures: the ray effect,
# measured 0.2 % (diffuse) and 0.18 % / 0.16 % (Maxwell alpha = 0.8 / 0.5).
RAY_EFFECT_12_ANGLES = 5e-3
# The unfolded-ray midpoint quadrature (100 cells, 360 angles) at alpha = 1 against the closed form: measured 3e-5.
UNFOLDING_QUADRATURE = 2e-4


def _poisson_flow_rate(aspect, n=121, slip_over_delta=0.0):
    """Independent check: (2/A) int int u for lap u = -1 (delta = 1), second-order
    finite differences on the full rectangle, optional first-order slip
    u = s du/dn_in at the walls."""
    y = np.linspace(0.0, 1.0, n)
    z = np.linspace(0.0, aspect, int(round(n * aspect)))
    hy, hz = y[1] - y[0], z[1] - z[0]
    ny, nz = y.size, z.size

    def lap1(m, h):
        return sp.diags([np.ones(m - 1), -2 * np.ones(m), np.ones(m - 1)], [-1, 0, 1]) / h**2

    a = (sp.kron(lap1(ny, hy), sp.identity(nz)) + sp.kron(sp.identity(ny), lap1(nz, hz))).tolil()
    b = -np.ones(ny * nz)
    for i in range(ny):
        for j in range(nz):
            if i in (0, ny - 1) or j in (0, nz - 1):
                r = i * nz + j
                a[r, :] = 0.0
                b[r] = 0.0
                # u - s (u_in - u)/h = 0, second-order one-sided inward derivative
                if i == 0:
                    nb, h = (r + nz, r + 2 * nz), hy
                elif i == ny - 1:
                    nb, h = (r - nz, r - 2 * nz), hy
                elif j == 0:
                    nb, h = (r + 1, r + 2), hz
                else:
                    nb, h = (r - 1, r - 2), hz
                s = slip_over_delta
                a[r, r] = 1.0 + s * 1.5 / h
                a[r, nb[0]] = -s * 2.0 / h
                a[r, nb[1]] = s * 0.5 / h
    u = spsolve(a.tocsr(), b).reshape(ny, nz)
    return 2.0 / aspect * np.trapezoid(np.trapezoid(u, z, axis=1), y)


@pytest.mark.parametrize("aspect", [1.0, 2.0, 5.0])
def test_continuum_series_matches_direct_poisson_solution(aspect):
    # Series of White, Viscous Fluid Flow (2006) eq. 3-48 vs a 2nd-order finite-
    # difference solution of lap u = -delta (exact solution of the same
    # problem); h = 1/120 gives O(h^2) ~ 1e-4 relative.
    assert continuum_flow_rate(1.0, aspect) == pytest.approx(
        _poisson_flow_rate(aspect), rel=CONTINUUM_FINITE_DIFFERENCES
    )


def test_continuum_series_wide_duct_is_plane_channel():
    # A -> infinity: plane Poiseuille flow per unit width, delta/6 (check-values 0.3);
    # the side walls remove a fraction 0.63/A (series term), 6e-4 at A = 1000.
    assert continuum_flow_rate(1.0, 1000.0) == pytest.approx(1.0 / 6.0, rel=SIDE_WALLS_A1000)


def test_slip_flow_limit_square_duct():
    # delta = 100: kinetic G_P vs Navier-Stokes with first-order slip
    # (sigma_P of Kramers' problem, computed independently in kramers_bgk.py).  Differences: second-order
    # slip and corner Knudsen layers, O(1/delta) ~ 1 %, plus the discretisation
    # of the kinetic solver (G_P 7.711 / 7.631 / 7.612 on 25 / 41 / 65 nodes,
    # against 7.593 here).
    kin = solve_duct("poiseuille", delta=100.0, aspect_ratio=1.0, n_space=25, n_velocity=8)
    ns = 100.0 * _poisson_flow_rate(1.0, n=81, slip_over_delta=bgk_viscous_slip() / 100.0)
    assert kin.status == "converged"
    assert kin.coefficient("G_P") == pytest.approx(ns, rel=SLIP_FLOW_COARSE)


def test_wide_duct_tends_to_plane_channel():
    # G_duct(A) = G_channel - b / A for wide ducts (side-wall layers of fixed
    # width); extrapolate from A = 8 and 16 and compare with the plane-channel
    # solver of this project at the same delta (gap = H).  WIDE_DUCT_EXTRAPOLATION: the
    # two solvers use different discretisations (cell-centred 1-D vs clustered
    # 2-D upwind on a coarse test grid) and the 1/A extrapolation neglects
    # O(1/A^2).
    d = 1.0
    g8 = solve_duct("poiseuille", delta=d, aspect_ratio=8.0, **SMALL).coefficient("G_P")
    g16 = solve_duct("poiseuille", delta=d, aspect_ratio=16.0, **SMALL).coefficient("G_P")
    g_inf = 2.0 * g16 - g8
    g_channel = solve_plane_channel("poiseuille", delta=d).coefficient("G_P")
    assert g_inf == pytest.approx(g_channel, rel=WIDE_DUCT_EXTRAPOLATION)


@pytest.mark.parametrize("delta", [0.5, 5.0])
def test_onsager_reciprocity_duct(delta):
    # Q_P == G_T (Sharipov 1994).  The upwind discrete-ordinates operator is not
    # self-adjoint, so reciprocity holds only up to the discretisation error,
    # which falls as (n - 1)^-2: measured at delta = 5 (A = 2, 8 speeds) 2.1 %
    # on 13 nodes, 0.81 % on 25, 0.38 % on 41; at delta = 0.5 0.11 % on 13.
    # ONSAGER_COARSE_GRID bounds that error on these coarse grids.
    size = {**SMALL, "n_space": 25} if delta > 1.0 else SMALL
    qp = solve_duct("poiseuille", delta=delta, aspect_ratio=2.0, **size).coefficient("Q_P")
    gt = solve_duct("thermal_creep", delta=delta, aspect_ratio=2.0, **size).coefficient("G_T")
    assert qp == pytest.approx(gt, rel=ONSAGER_COARSE_GRID)


def test_free_molecular_creep_is_half_poiseuille():
    # At delta = 0 both flows are the same ray sum with weights whose ratio is
    # exactly 1/2 (check-values 0.3: G_T/G_P -> 1/2); only rounding remains.
    gp = solve_duct("poiseuille", delta=0.0, aspect_ratio=3.0, **SMALL).coefficient("G_P")
    gt = solve_duct("thermal_creep", delta=0.0, aspect_ratio=3.0, **SMALL).coefficient("G_T")
    assert gt == pytest.approx(0.5 * gp, rel=ROUND_OFF)


def test_plain_and_accelerated_iteration_agree_duct():
    # Same discrete fixed point (the correction is driven by the change of u).
    fast = solve_duct("poiseuille", delta=2.0, aspect_ratio=1.5, tol=1e-11, **SMALL)
    plain = solve_duct("poiseuille", delta=2.0, aspect_ratio=1.5, tol=1e-11, accelerate=False, **SMALL)
    assert fast.status == plain.status == "converged"
    assert fast.coefficient("G_P") == pytest.approx(plain.coefficient("G_P"), rel=ITERATION)
    assert fast.convergence.iterations < plain.convergence.iterations / 3


def test_acceleration_bounded_iterations_duct():
    # 41 nodes: the graded grid needs that many to reach the core at delta = 1000
    # (13 nodes leave cells of 80 free paths there; the answer is then wrong
    # and the iteration slow).  Measured 13 iterations.
    res = solve_duct("thermal_creep", delta=1000.0, aspect_ratio=2.0, n_space=41, n_velocity=8)
    assert res.status == "converged"
    assert res.convergence.iterations <= 50


@pytest.mark.parametrize("model", ["bgk", "s_model", "es_bgk"])
def test_acceleration_bounded_iterations_duct_models(model):
    # ES-BGK: the lagged shear stress enters the correction's right-hand side
    # and Anderson mixing damps what remains; it took 58 iterations before.
    # Measured 15 (ES-BGK), 8 (BGK), 11 (S-model) on the default grid.
    res = solve_duct("poiseuille", delta=1000.0, aspect_ratio=2.0, model=model, tol=1e-8, error_estimate=False)
    assert res.status == "converged"
    assert res.convergence.iterations <= 50


@pytest.mark.parametrize(("alpha", "delta"), [(0.3, 0.1), (0.3, 10.0), (0.3, 1000.0), (0.1, 10.0), (0.1, 1000.0)])
def test_acceleration_bounded_iterations_duct_low_accommodation(alpha, delta):
    # Walls re-emit what arrived in the previous sweep, so specular reflection
    # lags.  Anderson mixing of the moments and the wall inflow
    # (knudsweep.solver.anderson) and the correction of the specular inflow
    # (duct.boundary.correct_inflow) cut alpha = 0.3 from > 300 iterations (delta >= 1)
    # to 13-39 and alpha = 0.1 at delta = 1000 from > 300 to 15-20 (measured,
    # three models).  Near delta = 0 alpha = 0.1 still takes 64-88: no bound
    # is asked there (see the knudsweep.solver.duct docstring).
    res = solve_duct(
        "poiseuille",
        delta=delta,
        aspect_ratio=2.0,
        wall=MaxwellWall(alpha),
        tol=1e-8,
        error_estimate=False,
        n_space=13 if delta < 1000 else None,
    )
    assert res.status == "converged"
    assert res.convergence.iterations <= 50


@pytest.mark.parametrize(
    ("model", "wall"),
    [("es_bgk", MaxwellWall(1.0)), ("bgk", MaxwellWall(0.3)), ("s_model", CercignaniLampisWall(0.5, 0.7))],
)
def test_plain_and_accelerated_iteration_agree_duct_other_cases(model, wall):
    # Anderson mixing and the ES-BGK term change the path, not the fixed point
    kw = dict(delta=2.0, aspect_ratio=1.5, tol=1e-11, model=model, wall=wall, error_estimate=False, **SMALL)
    for problem in ("poiseuille", "thermal_creep"):
        fast = solve_duct(problem, **kw)
        plain = solve_duct(problem, accelerate=False, **kw)
        assert fast.status == plain.status == "converged"
        for name in plain.coefficients:
            if name.endswith("_error_estimate"):
                continue
            # the asked agreement (both stop at a relative change of 1e-11)
            assert fast.coefficient(name) == pytest.approx(plain.coefficient(name), rel=ITERATION)
        assert fast.convergence.iterations < plain.convergence.iterations


@pytest.mark.parametrize(
    "kwargs, field",
    [
        ({"aspect_ratio": 0.5}, "aspect_ratio"),
        ({"aspect_ratio": 1.0, "delta": float("nan")}, "delta"),
        ({"aspect_ratio": 1.0, "delta": 5.0e3}, r"delta: must be in \[0, 1000\]"),
    ],
)
def test_bad_input_duct(kwargs, field):
    kwargs = {"delta": 1.0, **kwargs}
    with pytest.raises(ValueError, match=field):
        solve_duct("poiseuille", **kwargs)


def test_cl_with_full_tangential_accommodation_is_diffuse_duct():
    # alpha_t = 1 removes the c_x-odd perturbation for any alpha_n (Cercignani &
    # Lampis 1971): identical to diffuse walls up to rounding.
    kw = {"delta": 1.0, "aspect_ratio": 2.0, **SMALL}
    cl = solve_duct("poiseuille", wall=CercignaniLampisWall(1.0, 0.4), **kw).coefficient("G_P")
    assert cl == pytest.approx(solve_duct("poiseuille", wall=MaxwellWall(1.0), **kw).coefficient("G_P"), rel=ROUND_OFF)


def test_onsager_reciprocity_duct_cercignani_lampis():
    # Q_P == G_T (Sharipov 1994) with CL walls; measured mismatch 4e-4 at
    # delta = 0.5 on this grid; the Maxwell-wall duct tolerance applies.
    wall = CercignaniLampisWall(0.7, 0.5)
    qp = solve_duct("poiseuille", delta=0.5, aspect_ratio=2.0, wall=wall, **SMALL).coefficient("Q_P")
    gt = solve_duct("thermal_creep", delta=0.5, aspect_ratio=2.0, wall=wall, **SMALL).coefficient("G_T")
    assert qp == pytest.approx(gt, rel=ONSAGER_COARSE_GRID)


def test_wide_duct_tends_to_plane_channel_cercignani_lampis():
    # As test_wide_duct_tends_to_plane_channel, with CL walls (alpha_t = 0.7,
    # alpha_n = 0.5) on both sides: the plane-channel solver implements the CL
    # kernel independently (normal-speed matrix on its own nodes).  Measured
    # 2.287 vs 2.311 (1.0 %; the Maxwell case differs by 1.1 %).
    wall = CercignaniLampisWall(0.7, 0.5)
    g8 = solve_duct("poiseuille", delta=1.0, aspect_ratio=8.0, wall=wall, **SMALL).coefficient("G_P")
    g16 = solve_duct("poiseuille", delta=1.0, aspect_ratio=16.0, wall=wall, **SMALL).coefficient("G_P")
    g_channel = solve_plane_channel("poiseuille", delta=1.0, lower_wall=wall).coefficient("G_P")
    assert 2.0 * g16 - g8 == pytest.approx(g_channel, rel=WIDE_DUCT_EXTRAPOLATION)


def _extrapolated(problem, delta, aspect, n1, n2):
    """Richardson value from two fine grids, n1 < n2 nodes across the half height.

    The mapped grid of knudsweep.solver.duct.grids.clustered converges as
    (n - 1)^-2 (measured: ratios 3.6-4.0 per halving at delta = 5 to 100); the
    extrapolated value errs by about a tenth of the n2 grid's error.
    """
    out = {}
    r1, r2 = (
        solve_duct(problem, delta=delta, aspect_ratio=aspect, n_space=n, n_velocity=12, tol=1e-11, error_estimate=False)
        for n in (n1, n2)
    )
    ratio = ((n2 - 1) / (n1 - 1)) ** 2
    for name in (n for n in r2.coefficients if not n.endswith("_error_estimate")):
        a, b = r1.coefficient(name), r2.coefficient(name)
        out[name] = b + (b - a) / (ratio - 1.0)
    return out


# Target of the default grid (issue: every number within its stated error):
# G_P and G_T within 0.1 % at every delta and aspect ratio 1 to 50.
DEFAULT_GRID_TARGET = 1e-3


@pytest.mark.parametrize("problem, delta", [("poiseuille", 5.0), ("thermal_creep", 10.0)])
def test_default_grid_meets_the_target_between_slip_and_transition(problem, delta):
    # Square duct, BGK, diffuse walls; reference extrapolated from 161 and 241
    # nodes (converging as (n - 1)^-2, see _extrapolated).  Measured on the default grid (81 nodes): G_P -5.2e-4 at delta = 5,
    # G_T -8.8e-4 at delta = 10 (the old 41-node grid with a fixed wall cell:
    # -1.9e-3 and -2.9e-3).  The heat flows Q_P, Q_T err by up to 2.6e-3 on the
    # default grid: not within the target, but within their estimates.
    res = solve_duct(problem, delta=delta, aspect_ratio=1.0, tol=1e-11)
    ref = _extrapolated(problem, delta, 1.0, 161, 241)
    assert res.discretization["n_y_half"] == 81
    for name, value in ref.items():
        actual = abs(res.coefficient(name) - value)
        est = res.coefficient(f"{name}_error_estimate")
        print(f"\n{problem} delta={delta} {name}: actual {actual / abs(value):.2e}, estimate {est / abs(value):.2e}")
        assert actual <= HONEST * est
        if name in ("G_P", "G_T"):
            assert actual <= DEFAULT_GRID_TARGET * abs(value)


@pytest.mark.slow
@pytest.mark.parametrize(
    "problem, delta, aspect",
    [(p, d, a) for p in ("poiseuille", "thermal_creep") for d, a in ((3.0, 1.0), (3.0, 4.0), (30.0, 1.0), (30.0, 4.0))]
    + [("poiseuille", 100.0, 1.0), ("thermal_creep", 100.0, 1.0)],
)
def test_default_grid_meets_the_target_slow(problem, delta, aspect):
    # As above over delta and A (A = 50 measured separately: G_P -1.6e-4 at
    # delta = 3 and -8.5e-5 at 30); reference from 1.5x and 2x the default
    # intervals.  Above delta = 50 the default has 161 nodes: with 81, the
    # heat flow Q_P at delta = 100 still converged non-monotonically between
    # the coarse level and the default (errors -1.8e-4 at 41, -4.1e-4 at 81,
    # -1.7e-4 at 161 nodes) and erred by 4.6x its estimate; with 161, 1.6x.
    res = solve_duct(problem, delta=delta, aspect_ratio=aspect, tol=1e-11)
    n = res.discretization["n_y_half"]
    ref = _extrapolated(problem, delta, aspect, (3 * n - 1) // 2, 2 * n - 1)
    for name, value in ref.items():
        actual = abs(res.coefficient(name) - value)
        print(f"\n{problem} delta={delta} A={aspect} {name}: actual {actual / abs(value):.2e}")
        assert actual <= HONEST * res.coefficient(f"{name}_error_estimate")
        if name in ("G_P", "G_T"):
            assert actual <= DEFAULT_GRID_TARGET * abs(value)


@pytest.mark.slow
@pytest.mark.parametrize(
    "delta, sizes, limit_tol",
    [(100.0, (25, 33, 41, 49, 65), THERMAL_SLIP_LIMIT_100), (1000.0, (49, 65, 81, 97), THERMAL_SLIP_LIMIT_1000)],
)
def test_thermal_creep_grid_convergence_large_delta(delta, sizes, limit_tol):
    # Grid study, square duct, BGK, diffuse walls.  G_T delta -> sigma_T (BGK
    # thermal slip, 0.76627, computed from its half-space problem in kramers_bgk.py) as delta ->
    # infinity, with O(1/delta) Knudsen-layer and corner corrections: measured
    # 0.747 at delta = 100 and 0.766 at delta = 1000 on the finest grids, i.e.
    # a correction of about 2/delta -> THERMAL_SLIP_LIMIT_100 and
    # THERMAL_SLIP_LIMIT_1000.  The successive differences must shrink (convergence).
    vals = [
        solve_duct("thermal_creep", delta=delta, aspect_ratio=1.0, n_space=n).coefficient("G_T") * delta for n in sizes
    ]
    diffs = np.abs(np.diff(vals))
    assert np.all(diffs[1:] < diffs[:-1])
    assert vals[-1] == pytest.approx(bgk_thermal_slip(), rel=limit_tol)
    assert diffs[-1] < LAST_GRID_STEP * vals[-1]


@pytest.mark.slow
def test_slip_flow_limit_square_duct_fine():
    # As test_slip_flow_limit_square_duct on a fine grid.
    kin = solve_duct("poiseuille", delta=100.0, aspect_ratio=1.0, n_space=65, n_velocity=16)
    ns = 100.0 * _poisson_flow_rate(1.0, n=161, slip_over_delta=bgk_viscous_slip() / 100.0)
    assert kin.coefficient("G_P") == pytest.approx(ns, rel=SLIP_FLOW_FINE)


@pytest.mark.parametrize("aspect", [1.0, 2.0])
def test_first_order_slip_formula_matches_direct_poisson_solution(aspect):
    # slip_flow_rate is first order in sigma/delta (Green's identity); the
    # finite-difference solution with slip length 0.01 includes all orders:
    # the O((sigma/delta)^2) difference plus the O(h^2) discretisation error
    # measured 6e-4 relative at A = 1 (h = 1/120).
    fd = _poisson_flow_rate(aspect, n=81, slip_over_delta=0.01)
    assert slip_flow_rate(1.0, aspect, 0.01) == pytest.approx(fd, rel=SLIP_FORMULA_FINITE_DIFFERENCES)


def test_first_order_slip_wide_duct_is_plane_channel():
    # A -> infinity: delta/6 + sigma_P (check-values 0.3); side walls add O(1/A):
    # measured slip increment 0.990 sigma at A = 50.
    assert slip_flow_rate(1.0, 50.0, 1.0) - continuum_flow_rate(1.0, 50.0) == pytest.approx(1.0, rel=SLIP_INCREMENT_A50)


def test_free_molecular_closed_form_against_solver():
    # free_molecular_flow_rate is an independent quadrature of the delta = 0
    # solution.  The solver's discrete ordinates converge to it slowly in the
    # angle (ray effect): 1.14859 / 1.15014 / 1.15049 with 6 / 12 / 24 angles
    # per quadrant against 1.15245.  Here 12 angles (n_velocity = 24): 0.2 %
    # measured.
    res = solve_duct("poiseuille", delta=0.0, aspect_ratio=2.0, n_space=25, n_velocity=24)
    assert res.coefficient("G_P") == pytest.approx(free_molecular_flow_rate(2.0), rel=RAY_EFFECT_12_ANGLES)


def _free_molecular_maxwell_by_unfolding(aspect, alpha, n=100, n_theta=360):
    """Independent delta = 0 flow rate with Maxwell walls (midpoint quadrature).

    At delta = 0 the drive accumulates along a ray since the molecule's last
    diffuse emission, and a specular reflection keeps c_x, so the diffuse-wall
    relation of :func:`knudsweep.solver.limits.free_molecular_flow_rate`,
    u(P) = (1/(4 sqrt(pi))) int s(P, theta) dtheta, holds with s replaced by the
    expected unfolded distance back to that emission,
    E[s] = sum_k alpha (1 - alpha)^k t_k, t_k the k-th wall crossing of the
    straight backward ray in the rectangle unfolded by its mirror images.
    (Derived here; for the tube every chord repeats and this gives Knudsen's
    value times (2 - alpha)/alpha, for the rectangle it does not.)
    """
    y = (np.arange(n) + 0.5) / n
    z = (np.arange(int(n * aspect)) + 0.5) / n
    Y, Z = np.meshgrid(y, z, indexing="ij")
    f = 1.0 - alpha
    kmax = int(np.ceil(np.log(1e-13) / np.log(f))) + 2 if f > 0.0 else 1
    total = 0.0
    for t in (np.arange(n_theta) + 0.5) * 2.0 * np.pi / n_theta:
        cy, cz = np.cos(t), np.sin(t)
        ty0 = Y / abs(cy) if cy > 0 else (1.0 - Y) / abs(cy)
        tz0 = Z / abs(cz) if cz > 0 else (aspect - Z) / abs(cz)
        iy, iz = np.zeros_like(Y), np.zeros_like(Z)
        es, w = np.zeros_like(Y), alpha
        for _ in range(kmax):
            ny, nz = ty0 + iy / abs(cy), tz0 + iz * aspect / abs(cz)
            take_y = ny <= nz
            es += w * np.where(take_y, ny, nz)
            iy += take_y
            iz += ~take_y
            w *= f
        total += es.mean()
    return 2.0 * total * (2.0 * np.pi / n_theta) / (4.0 * np.sqrt(np.pi))  # G = (2/A) int int u = 2 <u>


def test_unfolding_quadrature_reproduces_the_diffuse_closed_form():
    # the check of the check: alpha = 1 must give free_molecular_flow_rate (measured 3e-5)
    assert _free_molecular_maxwell_by_unfolding(2.0, 1.0) == pytest.approx(
        free_molecular_flow_rate(2.0), rel=UNFOLDING_QUADRATURE
    )


@pytest.mark.parametrize("alpha", [0.8, 0.5])
def test_free_molecular_specular_walls_against_unfolded_rays(alpha):
    # Specular reflection inside the sweep (wall inflow from the previous sweep,
    # Anderson-mixed, duct.boundary.correct_inflow).  Measured 0.18 % / 0.16 % low with
    # 12 angles per quadrant, the same ray effect as for diffuse walls
    # (test_free_molecular_closed_form_against_solver).
    res = solve_duct("poiseuille", delta=0.0, aspect_ratio=2.0, n_space=25, n_velocity=24, wall=MaxwellWall(alpha))
    assert res.status == "converged"
    assert res.coefficient("G_P") == pytest.approx(
        _free_molecular_maxwell_by_unfolding(2.0, alpha), rel=RAY_EFFECT_12_ANGLES
    )
