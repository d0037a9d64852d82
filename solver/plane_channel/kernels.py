"""numba kernels of the plane-channel discrete-velocity solver.

Unknowns.  Two reduced distribution functions F[comp, dir, k, i] on the
positive half-range nodes c_k (dir 0: c_y = +c_k, dir 1: c_y = -c_k) and the
spatial nodes y_i, i = 0..N (y_0 = -1/2 lower wall, y_N = +1/2 upper wall).
Each obeys the 1-D transport equation

    c_y dF/dy + d F = S(y, c_y),      S = d * sum_j Q[comp, j, dir, k] m_j(y) + src[comp, dir, k]

with the macroscopic moments m_j(y) = sum_{comp,dir,k} P[j, comp, dir, k] F
(the tables P, Q, src are built in ``problems.py``).  Walls:

    F_out = Fw + R (F_in - Fw)                                  (boundary.py)

Space discretisation: linear discontinuous Galerkin (upwind DG with P1
elements; Reed & Hill 1973, Lesaint & Raviart 1974).  In cell i of width h
F = a + b xi, xi in [-1, 1]; the source is linear in the cell too,
S = s0 + s1 xi.  For c > 0, with t = d h / (2 c) and inflow F_in,

    (1 + 2t) a + b            = (h/c) s0 + F_in
    -a + (1 + 2t/3) b         = (h/(3c)) s1 - F_in,     outflow a + b.

Its transmission factor (1 - tau/3) / (1 + 2 tau/3 + tau^2/6), tau = 2t, is
the (1,2) Pade approximant of exp(-tau): damped for thick cells (no
oscillation carried from the wall along grazing rays), and the scheme keeps
the thick diffusion limit (Larsen & Morel, Nucl. Sci. Eng. 102 (1989) 224;
Adams, Nucl. Sci. Eng. 137 (2001) 298), so cells much wider than the mean
free path still give the right Navier-Stokes flow at large delta.  (A
linear-characteristic scheme with exponential integrating factor was tried
first: its effective viscosity is wrong by a factor ~ tau/2 in thick cells.)
F[..., i, 0] holds cell averages a, F[..., i, 1] the slopes b.

Iteration: source iteration (kinetic sweep, then moment update), optionally
with a synthetic-acceleration correction of the moments; the accelerated
iteration also couples the two walls exactly within each sweep.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

CONVERGED_CODE = 0
MAX_ITER_CODE = 1
NOT_FINITE_CODE = 2


@njit(cache=True)
def cell_coefficients(y, c, d):
    """Per (velocity node k, cell i): g = h/c and the inverse of the 2x2 cell matrix.

    Returns g, A11, A12, A21, A22 (each (m, N)) so that
    a = A11 r1 + A12 r2, b = A21 r1 + A22 r2 with r1 = g s0 + F_in,
    r2 = g s1 / 3 - F_in.
    """
    m = c.size
    n_cells = y.size - 1
    g = np.empty((m, n_cells))
    A11 = np.empty((m, n_cells))
    A12 = np.empty((m, n_cells))
    A21 = np.empty((m, n_cells))
    A22 = np.empty((m, n_cells))
    for k in range(m):
        for i in range(n_cells):
            h = y[i + 1] - y[i]
            t = 0.5 * d * h / c[k]
            det = (1.0 + 2.0 * t) * (1.0 + 2.0 * t / 3.0) + 1.0
            g[k, i] = h / c[k]
            A11[k, i] = (1.0 + 2.0 * t / 3.0) / det
            A12[k, i] = -1.0 / det
            A21[k, i] = 1.0 / det
            A22[k, i] = (1.0 + 2.0 * t) / det
    return g, A11, A12, A21, A22


@njit(cache=True)
def compute_moments(F, P, M):
    """M[j, i, p] = sum_{comp, dir, k} P[j, comp, dir, k] F[comp, dir, k, i, p] (p: average, slope)."""
    n_mom = P.shape[0]
    n_comp, n_dir, m, n, two = F.shape
    for j in range(n_mom):
        for i in range(n):
            M[j, i, 0] = 0.0
            M[j, i, 1] = 0.0
    for j in range(n_mom):
        for a in range(n_comp):
            for s in range(n_dir):
                for k in range(m):
                    p = P[j, a, s, k]
                    if p != 0.0:
                        for i in range(n):
                            M[j, i, 0] += p * F[a, s, k, i, 0]
                            M[j, i, 1] += p * F[a, s, k, i, 1]


@njit(cache=True)
def compute_sources(M, Q, src, d, S):
    """S[comp, dir, k, i, :] = d * sum_j Q[comp, j, dir, k] M[j, i, :] (+ src on the average)."""
    n_comp, n_dir, m, n, two = S.shape
    n_mom = M.shape[0]
    for a in range(n_comp):
        for s in range(n_dir):
            for k in range(m):
                for i in range(n):
                    acc0 = 0.0
                    acc1 = 0.0
                    for j in range(n_mom):
                        acc0 += Q[a, j, s, k] * M[j, i, 0]
                        acc1 += Q[a, j, s, k] * M[j, i, 1]
                    S[a, s, k, i, 0] = d * acc0 + src[a, s, k]
                    S[a, s, k, i, 1] = d * acc1


@njit(cache=True)
def _boundary_values(F_wall_in, R, Fw, out):
    """out[comp, k] = Fw[comp, k] + sum_j R[comp, k, j] (F_wall_in[comp, j] - Fw[comp, j])."""
    n_comp, m = F_wall_in.shape
    for a in range(n_comp):
        for k in range(m):
            acc = Fw[a, k]
            for j in range(m):
                acc += R[a, k, j] * (F_wall_in[a, j] - Fw[a, j])
            out[a, k] = acc


@njit(cache=True, parallel=True)
def transport_sweep(F, S, g, A11, A12, A21, A22, R_low, R_up, Fw_low, Fw_up, bvals, wall_in):
    """One kinetic sweep: downward rays from the upper wall, then upward rays from the lower wall.

    The upper-wall reflection uses the upward values of the previous sweep,
    the lower-wall reflection the fresh downward ones.  The loop over
    velocity nodes runs in parallel (numba prange; pool size
    numba.get_num_threads()).
    """
    n_comp, n_dir, m, n, two = F.shape
    for a in range(n_comp):
        for k in range(m):
            wall_in[a, k] = F[a, 0, k, n - 1, 0] + F[a, 0, k, n - 1, 1]
    _boundary_values(wall_in, R_up, Fw_up, bvals)
    for km in prange(n_comp * m):
        a = km // m
        k = km % m
        f_in = bvals[a, k]
        for i in range(n - 1, -1, -1):
            # mirrored cell: slope and source slope change sign
            r1 = g[k, i] * S[a, 1, k, i, 0] + f_in
            r2 = -g[k, i] * S[a, 1, k, i, 1] / 3.0 - f_in
            av = A11[k, i] * r1 + A12[k, i] * r2
            sl = A21[k, i] * r1 + A22[k, i] * r2
            F[a, 1, k, i, 0] = av
            F[a, 1, k, i, 1] = -sl
            f_in = av + sl
    for a in range(n_comp):
        for k in range(m):
            wall_in[a, k] = F[a, 1, k, 0, 0] - F[a, 1, k, 0, 1]
    _boundary_values(wall_in, R_low, Fw_low, bvals)
    for km in prange(n_comp * m):
        a = km // m
        k = km % m
        f_in = bvals[a, k]
        for i in range(n):
            r1 = g[k, i] * S[a, 0, k, i, 0] + f_in
            r2 = g[k, i] * S[a, 0, k, i, 1] / 3.0 - f_in
            av = A11[k, i] * r1 + A12[k, i] * r2
            sl = A21[k, i] * r1 + A22[k, i] * r2
            F[a, 0, k, i, 0] = av
            F[a, 0, k, i, 1] = sl
            f_in = av + sl


@njit(cache=True)
def wall_transmission(A11, A12, A21, A22):
    """T[k]: outflow of a ray crossing the whole gap per unit inflow, no source (product of cell factors)."""
    m, n = A11.shape
    T = np.ones(m)
    for k in range(m):
        for i in range(n):
            T[k] *= A11[k, i] + A21[k, i] - A12[k, i] - A22[k, i]
    return T


@njit(cache=True)
def _close_upper_wall(F, A11, A12, A21, A22, R_low, R_up, Fw_up, T, G, f_used, f_new, delta_up, delta_low):
    """Make the sweep's upper-wall reflection exact instead of lagged.

    The sweep started the downward rays from f_used (the reflection of the
    previous sweep's upward values).  With the sources fixed, the ray
    solutions are affine in their inflow, so the inflow x that satisfies
    both walls at once obeys  (I - R_up T R_low T)(x - f_used) = f_new - f_used,
    f_new the reflection of this sweep's upward values; G is that inverse
    (per component).  The responses of both ray families to the change are
    added cell by cell.  Same fixed point as the lagged sweep; it removes the
    one-sweep lag that slows the iteration when the upper wall reflects
    specularly (low accommodation).
    """
    n_comp, n_dir, m, n, two = F.shape
    for a in range(n_comp):
        for k in range(m):
            acc = 0.0
            for j in range(m):
                acc += G[a, k, j] * (f_new[a, j] - f_used[a, j])
            delta_up[a, k] = acc
        for k in range(m):
            acc = 0.0
            for j in range(m):
                acc += R_low[a, k, j] * T[j] * delta_up[a, j]
            delta_low[a, k] = acc
    for km in range(n_comp * m):
        a = km // m
        k = km % m
        f = delta_up[a, k]
        for i in range(n - 1, -1, -1):
            av = (A11[k, i] - A12[k, i]) * f
            sl = (A21[k, i] - A22[k, i]) * f
            F[a, 1, k, i, 0] += av
            F[a, 1, k, i, 1] -= sl
            f = av + sl
        f = delta_low[a, k]
        for i in range(n):
            av = (A11[k, i] - A12[k, i]) * f
            sl = (A21[k, i] - A22[k, i]) * f
            F[a, 0, k, i, 0] += av
            F[a, 0, k, i, 1] += sl
            f = av + sl


@njit(cache=True)
def _remove_mean_density(F, M, P, wy):
    """Subtract the channel-mean of moment 0 (density) from component 0.

    Used by the heat-transfer problem, whose density level is not fixed by the
    equations (constants are an exact solution); requires sum P[0] = 1 on
    component 0 (true: the density moment integrates a constant to 1).
    """
    n_comp, n_dir, m, n, two = F.shape
    mean = 0.0
    for i in range(n):
        mean += wy[i] * M[0, i, 0]
    for s in range(n_dir):
        for k in range(m):
            for i in range(n):
                F[0, s, k, i, 0] -= mean
    for i in range(n):
        M[0, i, 0] -= mean


@njit(cache=True)
def _change_norm(M, M_old, wy, primary, integral_floor):
    """Relative change of moment `primary`: max over the cell averages and their y-integral.

    The integral change is measured against max(|int m|, integral_floor * int |m|).
    """
    n = M.shape[1]
    num = 0.0
    den = 0.0
    int_new = 0.0
    int_old = 0.0
    int_abs = 0.0
    for i in range(n):
        dv = abs(M[primary, i, 0] - M_old[primary, i, 0])
        if dv > num:
            num = dv
        av = abs(M[primary, i, 0])
        if av > den:
            den = av
        int_new += wy[i] * M[primary, i, 0]
        int_old += wy[i] * M_old[primary, i, 0]
        int_abs += wy[i] * av
    if den == 0.0:
        den = 1.0
    prof = num / den
    # relative to the integral, or to (a fraction of) the integral of |m| when
    # the profile is odd in y (Couette velocity, heat-transfer temperature
    # integrate to ~0)
    scale = max(abs(int_new), integral_floor * int_abs)
    if scale > 0.0:
        integ = abs(int_new - int_old) / scale
    else:
        integ = abs(int_new - int_old)
    return max(prof, integ)


@njit(cache=True)
def _solve_diffusion_correction(h, kappa, robin_low, robin_up, r0, r1, factor, lag_factor, lag, M, M_old, x):
    """Continuous linear finite elements for  -kappa x'' = factor * r  on the nodes.

    r is piecewise linear (cell averages r0, half-cell slopes r1, like the DG
    moments); Robin walls x_w = robin * kappa * dx/dn (n into the gas).  The
    result x lives on the N+1 nodes; in the thick limit the DG-P1 solution is
    continuous and linear in each cell, so this is the consistent diffusion
    operator for it (cf. Adams & Martin, Nucl. Sci. Eng. 111 (1992) 145).
    Thomas algorithm on the tridiagonal stiffness matrix.
    """
    n = h.size
    lo = np.zeros(n + 1)
    di = np.zeros(n + 1)
    up = np.zeros(n + 1)
    rhs = np.zeros(n + 1)
    for i in range(n):
        k = kappa / h[i]
        di[i] += k
        di[i + 1] += k
        up[i] -= k
        lo[i + 1] -= k
        rhs[i] += factor * 0.5 * h[i] * (r0[i] - r1[i] / 3.0)
        rhs[i + 1] += factor * 0.5 * h[i] * (r0[i] + r1[i] / 3.0)
    if lag_factor != 0.0:
        # a flux moment that also enters the gain (ES-BGK stress p_xy, S-model
        # heat flux q_y) lags one sweep; its change rp adds -lag_factor * rp'
        # to the right-hand side (weak form, rp per cell, moment index lag).
        for i in range(n):
            rp = M[lag, i, 0] - M_old[lag, i, 0]
            rhs[i] -= lag_factor * rp
            rhs[i + 1] += lag_factor * rp
        # boundary terms -lag_factor [rp v] with the wall traces of rp
        rhs[0] += lag_factor * ((M[lag, 0, 0] - M_old[lag, 0, 0]) - (M[lag, 0, 1] - M_old[lag, 0, 1]))
        rhs[n] -= lag_factor * ((M[lag, n - 1, 0] - M_old[lag, n - 1, 0]) + (M[lag, n - 1, 1] - M_old[lag, n - 1, 1]))
    di[0] += 1.0 / robin_low
    di[n] += 1.0 / robin_up
    cp = np.zeros(n + 1)
    dp = np.zeros(n + 1)
    cp[0] = up[0] / di[0]
    dp[0] = rhs[0] / di[0]
    for i in range(1, n + 1):
        den = di[i] - lo[i] * cp[i - 1]
        cp[i] = up[i] / den
        dp[i] = (rhs[i] - lo[i] * dp[i - 1]) / den
    x[n] = dp[n]
    for i in range(n - 1, -1, -1):
        x[i] = dp[i] - cp[i] * x[i + 1]


@njit(cache=True)
def _add_nodal_correction(M, j, x, sign, shift):
    """Add sign * x + shift (x piecewise linear on the nodes) to moment j (averages and slopes)."""
    n = M.shape[1]
    for i in range(n):
        M[j, i, 0] += sign * 0.5 * (x[i] + x[i + 1]) + shift
        M[j, i, 1] += sign * 0.5 * (x[i + 1] - x[i])


@njit(cache=True)
def _synthetic_step(M, M_old, accel_kind, d, kappa, lag_factor, robin_low, robin_up, h, r0, r1, x):
    """Synthetic-acceleration correction of the moments after a kinetic sweep.

    accel_kind 1 (odd problems: Poiseuille, thermal creep, Couette).  The DG
    cell balance of x-momentum is exact in every sweep:
        (P_{i+1/2} - P_{i-1/2}) + X_P h_i = -2 d h_i (u^{k+1/2} - u^k)_i,
    so the remaining error e of u obeys, with the Navier-Stokes closure
    P = -u'/(d(1-e_ES)) used for the error only,
        -kappa e'' = 2 d r,    kappa = 1/(d (1 - e_ES)),  r = u^{k+1/2} - u^k,
    with first-order slip at the walls.

    accel_kind 2 (heat transfer; moments rho, tau, p_yy, q_y, u_y).  The
    sweep conserves mass, y-momentum and energy exactly:
        u_y' = -d r_rho,   (p_yy/2)' = -d r_u,   (q_y + 5/2 u_y)' = -(3/2) d (r_tau + r_rho),
    while the fixed point has u_y = 0, uniform p_yy and uniform q_y.  So the
    errors e = M* - M^{k+1/2} obey e_u = -u_y^{k+1/2},  e_p' = 2 d r_u  and,
    with Fourier's law e_q = -kappa e_tau' (kappa = 5/(4 Pr delta)) and a
    temperature jump at the walls,
        -kappa e_tau'' = d [(3/2) r_tau - r_rho]  (- lag_factor r_q' for the S-model),
    the density error from the pressure e_rho = e_p - e_tau, with its
    constant fixed by zero mean density, and e_u = d int r_rho from the
    walls (mass balance).  q_y takes e_q too (the S-model gain uses it).
    (Resetting u_y to 0 instead converges as fast but to a state off the
    discrete fixed point by the DG error of u_y, ~1e-9 here.)

    The right-hand sides vanish at the fixed point, so the converged
    solution is exactly that of the plain iteration.  This is
    diffusion-synthetic acceleration (Larsen, Nucl. Sci. Eng. 82 (1982) 47)
    in the spirit of the general synthetic iterative scheme of Su, Zhu & Wu,
    J. Comput. Phys. 407 (2020) 109245 (macroscopic conservation laws
    coupled to each kinetic sweep), discretised with continuous linear
    elements to stay consistent with the DG-P1 sweep in thick cells (a
    cell-centred version diverged at delta = 1000).
    """
    n = h.size
    if accel_kind == 1:
        for i in range(n):
            r0[i] = M[0, i, 0] - M_old[0, i, 0]
            r1[i] = M[0, i, 1] - M_old[0, i, 1]
        _solve_diffusion_correction(h, kappa, robin_low, robin_up, r0, r1, 2.0 * d, lag_factor, 2, M, M_old, x)
        _add_nodal_correction(M, 0, x, 1.0, 0.0)
    elif accel_kind == 2:
        for i in range(n):
            r0[i] = 1.5 * (M[1, i, 0] - M_old[1, i, 0]) - (M[0, i, 0] - M_old[0, i, 0])
            r1[i] = 1.5 * (M[1, i, 1] - M_old[1, i, 1]) - (M[0, i, 1] - M_old[0, i, 1])
        _solve_diffusion_correction(h, kappa, robin_low, robin_up, r0, r1, d, lag_factor, 3, M, M_old, x)
        # pressure error e_p = C + 2 d int r_u (cell averages into r0, slopes
        # into r1) and velocity error e_u = d int r_rho (zero at both walls)
        acc = 0.0
        acc_rho = 0.0
        for i in range(n):
            ru0 = M[4, i, 0] - M_old[4, i, 0]
            ru1 = M[4, i, 1] - M_old[4, i, 1]
            rr0 = M[0, i, 0] - M_old[0, i, 0]
            rr1 = M[0, i, 1] - M_old[0, i, 1]
            r0[i] = 2.0 * d * (acc + 0.5 * h[i] * (ru0 - ru1 / 3.0))
            r1[i] = 2.0 * d * 0.5 * h[i] * ru0
            M[4, i, 0] += d * (acc_rho + 0.5 * h[i] * (rr0 - rr1 / 3.0))
            M[4, i, 1] += d * 0.5 * h[i] * rr0
            acc += h[i] * ru0
            acc_rho += h[i] * rr0
        shift = 0.0
        for i in range(n):
            shift -= h[i] * (r0[i] - 0.5 * (x[i] + x[i + 1]))
        for i in range(n):
            et0 = 0.5 * (x[i] + x[i + 1])
            et1 = 0.5 * (x[i + 1] - x[i])
            M[0, i, 0] += r0[i] + shift - et0
            M[0, i, 1] += r1[i] - et1
            M[1, i, 0] += et0
            M[1, i, 1] += et1
            M[2, i, 0] += r0[i] + shift
            M[2, i, 1] += r1[i]
            M[3, i, 0] -= kappa * (x[i + 1] - x[i]) / h[i]


@njit(cache=True)
def source_iteration(
    F,
    g,
    A11,
    A12,
    A21,
    A22,
    P,
    Q,
    src,
    d,
    R_low,
    R_up,
    Fw_low,
    Fw_up,
    wy,
    fix_mass,
    primary,
    integral_floor,
    max_iter,
    tol,
    history,
    accel_kind,
    kappa,
    lag_factor,
    robin_low,
    robin_up,
    close_walls,
    T,
    G,
):
    """Source iteration to convergence, optionally with synthetic acceleration.

    One loop: moment -> gain (sources) -> kinetic sweep [-> exact
    upper-wall coupling, ``_close_upper_wall``, if close_walls; T, G from
    ``wall_transmission`` and the driver] -> moments ->
    [synthetic correction of the moments, ``_synthetic_step``, if
    accel_kind > 0] -> convergence test.  wy are the cell widths.

    Stopping rule: with e_k the relative change of the primary moment in
    iteration k and rho the contraction estimated as (e_k / e_{k-4})^(1/4),
    stop when e_k * rho / (1 - rho) < tol, an estimate of the remaining
    distance to the fixed point of a linearly converging iteration (a plain
    e_k < tol is misleading when rho is close to 1).

    Returns (iterations, status code, last error estimate, rho).
    history[k] receives the error estimate of iteration k.
    """
    n_comp, n_dir, m, n, two = F.shape
    n_mom = P.shape[0]
    M = np.zeros((n_mom, n, 2))
    M_old = np.zeros((n_mom, n, 2))
    S = np.zeros_like(F)
    bvals = np.zeros((n_comp, m))
    wall_in = np.zeros((n_comp, m))
    r0 = np.zeros(n)
    r1 = np.zeros(n)
    x = np.zeros(n + 1)
    f_used = np.zeros((n_comp, m))
    f_new = np.zeros((n_comp, m))
    delta_up = np.zeros((n_comp, m))
    delta_low = np.zeros((n_comp, m))
    compute_moments(F, P, M)
    estimate = np.inf
    rho = 0.0
    lag = 4
    changes = np.zeros(lag + 1)
    for it in range(max_iter):
        M_old[:, :, :] = M
        compute_sources(M, Q, src, d, S)
        if close_walls:
            for a in range(n_comp):
                for k in range(m):
                    wall_in[a, k] = F[a, 0, k, n - 1, 0] + F[a, 0, k, n - 1, 1]
            _boundary_values(wall_in, R_up, Fw_up, f_used)
        transport_sweep(F, S, g, A11, A12, A21, A22, R_low, R_up, Fw_low, Fw_up, bvals, wall_in)
        if close_walls:
            for a in range(n_comp):
                for k in range(m):
                    wall_in[a, k] = F[a, 0, k, n - 1, 0] + F[a, 0, k, n - 1, 1]
            _boundary_values(wall_in, R_up, Fw_up, f_new)
            _close_upper_wall(F, A11, A12, A21, A22, R_low, R_up, Fw_up, T, G, f_used, f_new, delta_up, delta_low)
        compute_moments(F, P, M)
        if fix_mass:
            _remove_mean_density(F, M, P, wy)
        if accel_kind > 0:
            _synthetic_step(M, M_old, accel_kind, d, kappa, lag_factor, robin_low, robin_up, wy, r0, r1, x)
        e = _change_norm(M, M_old, wy, primary, integral_floor)
        if not np.isfinite(e):
            history[it] = e
            return it + 1, NOT_FINITE_CODE, e, rho
        for j in range(lag):
            changes[j] = changes[j + 1]
        changes[lag] = e
        if it >= lag and changes[0] > 0.0:
            rho = (e / changes[0]) ** (1.0 / lag)
            if e == 0.0:
                estimate = 0.0
            elif rho < 1.0:
                estimate = e * rho / (1.0 - rho)
            else:
                estimate = np.inf
        elif e == 0.0:
            estimate = 0.0
        history[it] = estimate if np.isfinite(estimate) else e
        if estimate < tol:
            return it + 1, CONVERGED_CODE, estimate, rho
    return max_iter, MAX_ITER_CODE, estimate, rho
