"""Direct simulation Monte Carlo of the space-homogeneous Boltzmann equation.

One spatial cell with N simulated molecules in reduced units (number density
1, velocity unit sqrt(kT/m), time unit the equilibrium mean collision time).
Collisions follow the no-time-counter (NTC) scheme of Bird, *Molecular Gas
Dynamics and the Direct Simulation of Gas Flows* (Oxford 1994), Sec. 11.1:
in a step dt the number of candidate pairs is

    M = (1/2) N n (sigma c_r)_max dt      (n = 1; fractional part carried over),

a candidate pair (i, j), i != j uniform, collides with probability
sigma c_r / (sigma c_r)_max, so the collision frequency per molecule is
n <sigma c_r>.  The majorant (sigma c_r)_max starts at 1.2 times the largest
value over N random pairs and is raised whenever a candidate exceeds it (that
candidate is then accepted with probability 1; the number of such events is
reported, it measures the small bias this causes).

Scattering.  VHS: isotropic in the centre-of-mass frame.  VSS (Koura &
Matsumoto, Phys. Fluids A 3 (1991) 2459, citation from memory; Bird 1994
Sec. 2.6): cos(chi) = 2 U**(1/alpha) - 1
for U uniform on (0, 1), and the relative velocity is rotated by chi about a
random azimuth eps (Bird 1994, eq. 2.22).  Post-collision velocities are
v_cm +- g'/2 with |g'| = |g|, so momentum and energy are conserved in each
collision to round-off.

Random numbers: each replica owns a xoshiro256** generator state
(:mod:`solver.relaxation.rng`) spawned from the point seed by numpy's
SeedSequence and runs wholly on one thread, so a replica depends only on the
seed and its index, not on the number of threads.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from solver.relaxation.h_function import _binned_divergence_particles
from solver.relaxation.initial_states import _sample_initial
from solver.relaxation.rng import replica_states, uniform

# Columns of the per-output moment record.
COL_UX, COL_UY, COL_UZ = 0, 1, 2
COL_TXX, COL_TYY, COL_TZZ, COL_TXY, COL_TXZ, COL_TYZ = 3, 4, 5, 6, 7, 8
COL_M4 = 9
COL_QX, COL_QY, COL_QZ = 10, 11, 12
COL_ENERGY = 13
COL_H = 14
COL_COLLISIONS = 15
COL_MAJORANT = 16
N_COLUMNS = 17

# candidates drawn ahead per batch (pass 1 of _run_replica); 64 pairs = 128
# cache lines stay in L1
_BATCH = 64


@njit(cache=True)
def _scatter(gx: float, gy: float, gz: float, cos_chi: float, eps: float, isotropic: bool):
    """Post-collision relative velocity with |g'| = |g| (Bird 1994, eq. 2.22)."""
    cr = math.sqrt(gx * gx + gy * gy + gz * gz)
    sin_chi = math.sqrt(max(0.0, 1.0 - cos_chi * cos_chi))
    ce = math.cos(eps)
    se = math.sin(eps)
    if isotropic:
        # the direction (cos_chi, sin_chi cos eps, sin_chi sin eps) is uniform on the sphere
        return cr * cos_chi, cr * sin_chi * ce, cr * sin_chi * se
    gyz = math.sqrt(gy * gy + gz * gz)
    if gyz > 1e-12 * cr:
        nx = cos_chi * gx + sin_chi * se * gyz
        ny = cos_chi * gy + sin_chi * (cr * gz * ce - gx * gy * se) / gyz
        nz = cos_chi * gz - sin_chi * (cr * gy * ce + gx * gz * se) / gyz
        return nx, ny, nz
    return cos_chi * gx, cr * sin_chi * ce, cr * sin_chi * se


@njit(cache=True)
def _collide(v: np.ndarray, i: int, j: int, cos_chi: float, eps: float, isotropic: bool) -> None:
    """Replace v[i], v[j] by post-collision velocities (equal masses)."""
    gx = v[i, 0] - v[j, 0]
    gy = v[i, 1] - v[j, 1]
    gz = v[i, 2] - v[j, 2]
    cx = 0.5 * (v[i, 0] + v[j, 0])
    cy = 0.5 * (v[i, 1] + v[j, 1])
    cz = 0.5 * (v[i, 2] + v[j, 2])
    nx, ny, nz = _scatter(gx, gy, gz, cos_chi, eps, isotropic)
    v[i, 0] = cx + 0.5 * nx
    v[i, 1] = cy + 0.5 * ny
    v[i, 2] = cz + 0.5 * nz
    v[j, 0] = cx - 0.5 * nx
    v[j, 1] = cy - 0.5 * ny
    v[j, 2] = cz - 0.5 * nz


@njit(cache=True)
def _sigma_cr(g2: float, coef: float, expo: float) -> float:
    """sigma * c_r = coef * c_r**expo, written with g2 = c_r**2."""
    if expo == 0.0:
        return coef
    if expo == 1.0:
        return coef * math.sqrt(g2)  # hard spheres: sqrt is much cheaper than pow
    return coef * g2 ** (0.5 * expo)


@njit(cache=True)
def _record(v: np.ndarray, edges: np.ndarray, counts: np.ndarray, ncoll: float, majorant: float,
            out: np.ndarray, hist_lo: float, hist_width: float, hist: np.ndarray) -> None:
    """Moments, binned H and the x-marginal histogram of the current sample."""
    n = v.shape[0]
    ux = 0.0
    uy = 0.0
    uz = 0.0
    for i in range(n):
        ux += v[i, 0]
        uy += v[i, 1]
        uz += v[i, 2]
    ux /= n
    uy /= n
    uz /= n
    sxx = syy = szz = sxy = sxz = syz = 0.0
    m4 = qx = qy = qz = 0.0
    energy = 0.0
    nb = hist.shape[0]
    hist[:] = 0.0
    for i in range(n):
        cx = v[i, 0] - ux
        cy = v[i, 1] - uy
        cz = v[i, 2] - uz
        c2 = cx * cx + cy * cy + cz * cz
        sxx += cx * cx
        syy += cy * cy
        szz += cz * cz
        sxy += cx * cy
        sxz += cx * cz
        syz += cy * cz
        m4 += c2 * c2
        qx += c2 * cx
        qy += c2 * cy
        qz += c2 * cz
        energy += v[i, 0] * v[i, 0] + v[i, 1] * v[i, 1] + v[i, 2] * v[i, 2]
        b = int(math.floor((cx - hist_lo) / hist_width))
        if 0 <= b < nb:
            hist[b] += 1.0
    out[COL_UX] = ux
    out[COL_UY] = uy
    out[COL_UZ] = uz
    out[COL_TXX] = sxx / n
    out[COL_TYY] = syy / n
    out[COL_TZZ] = szz / n
    out[COL_TXY] = sxy / n
    out[COL_TXZ] = sxz / n
    out[COL_TYZ] = syz / n
    out[COL_M4] = m4 / n
    out[COL_QX] = 0.5 * qx / n
    out[COL_QY] = 0.5 * qy / n
    out[COL_QZ] = 0.5 * qz / n
    out[COL_ENERGY] = 0.5 * energy / n
    out[COL_H] = _binned_divergence_particles(v, edges, counts)
    out[COL_COLLISIONS] = ncoll
    out[COL_MAJORANT] = majorant
    for b in range(nb):
        hist[b] /= n * hist_width


@njit(cache=True)
def _run_replica(rs: np.ndarray, kind: int, params: np.ndarray, n: int, coef: float, expo: float,
                 inv_alpha: float, dt: float, steps_per_output: int, edges: np.ndarray,
                 hist_lo: float, hist_width: float, out: np.ndarray, hist_out: np.ndarray) -> int:
    """One replica: sample the initial state, run NTC collisions, record at each output.

    out[n_output, N_COLUMNS] and hist_out[n_output, n_bins] are filled; the
    return value is the number of candidates that exceeded the majorant.
    """
    v = np.empty((n, 3))
    _sample_initial(kind, params, v, rs)
    isotropic = inv_alpha == 1.0
    counts = np.zeros((edges.shape[0] + 1) ** 3, dtype=np.int64)

    majorant = 0.0
    for _ in range(n):
        i = int(uniform(rs) * n)
        j = int(uniform(rs) * (n - 1))
        if j >= i:
            j += 1
        g2 = (v[i, 0] - v[j, 0]) ** 2 + (v[i, 1] - v[j, 1]) ** 2 + (v[i, 2] - v[j, 2]) ** 2
        majorant = max(majorant, _sigma_cr(g2, coef, expo))
    majorant *= 1.2

    exceed = 0
    ncoll = 0.0
    remainder = 0.0
    n_output = out.shape[0]
    _record(v, edges, counts, ncoll, majorant, out[0], hist_lo, hist_width, hist_out[0])
    bi = np.empty(_BATCH, dtype=np.int64)
    bj = np.empty(_BATCH, dtype=np.int64)
    bu = np.empty(_BATCH)
    touch = 0.0
    for k in range(1, n_output):
        for _ in range(steps_per_output):
            expected = 0.5 * n * majorant * dt + remainder
            m = int(expected)
            remainder = expected - m
            done = 0
            while done < m:
                nb = min(_BATCH, m - done)
                # pass 1: draw the candidates of the batch and touch their
                # velocities, so that the independent memory loads overlap
                for c in range(nb):
                    i = int(uniform(rs) * n)
                    j = int(uniform(rs) * (n - 1))
                    if j >= i:
                        j += 1
                    bi[c] = i
                    bj[c] = j
                    bu[c] = uniform(rs)
                    touch += v[i, 0] + v[j, 0]
                # pass 2: the sequential NTC acceptance with current velocities
                for c in range(nb):
                    i = bi[c]
                    j = bj[c]
                    g2 = (v[i, 0] - v[j, 0]) ** 2 + (v[i, 1] - v[j, 1]) ** 2 + (v[i, 2] - v[j, 2]) ** 2
                    sc = _sigma_cr(g2, coef, expo)
                    if sc > majorant:
                        majorant = sc
                        exceed += 1
                    elif sc < bu[c] * majorant:
                        continue
                    u = uniform(rs)
                    cos_chi = 2.0 * u - 1.0 if isotropic else 2.0 * u**inv_alpha - 1.0
                    eps = 2.0 * math.pi * uniform(rs)
                    _collide(v, i, j, cos_chi, eps, isotropic)
                    ncoll += 1.0
                done += nb
        _record(v, edges, counts, ncoll, majorant, out[k], hist_lo, hist_width, hist_out[k])
    if touch != touch:  # keeps pass 1 from being optimised away; NaN never occurs
        exceed = -1
    return exceed


@njit(parallel=True, cache=True)
def _run_replicas(states: np.ndarray, kind: int, params: np.ndarray, n: int, coef: float,
                  expo: float, inv_alpha: float, dt: float, steps_per_output: int,
                  edges: np.ndarray, hist_lo: float, hist_width: float, out: np.ndarray,
                  hist_out: np.ndarray, exceed: np.ndarray) -> None:
    """Independent replicas in parallel; replica r writes only out[r], hist_out[r], exceed[r]."""
    for r in prange(states.shape[0]):
        exceed[r] = _run_replica(states[r], kind, params, n, coef, expo, inv_alpha, dt,
                                 steps_per_output, edges, hist_lo, hist_width, out[r], hist_out[r])


def run_particles(seed: int, n_replicas: int, kind: int, params, n_particles: int, coef: float,
                  expo: float, alpha: float, dt: float, steps_per_output: int, n_output: int,
                  edges: np.ndarray, hist_lo: float, hist_width: float, n_hist: int):
    """Checked-input wrapper around the replica kernel.

    Returns (moments[R, n_output, N_COLUMNS], x-marginal[R, n_output, n_hist],
    majorant exceedances[R]).
    """
    states = replica_states(seed, n_replicas)
    out = np.zeros((n_replicas, n_output, N_COLUMNS))
    hist = np.zeros((n_replicas, n_output, n_hist))
    exceed = np.zeros(n_replicas, dtype=np.int64)
    _run_replicas(states, int(kind), np.asarray(params, dtype=float), int(n_particles), float(coef),
                  float(expo), 1.0 / float(alpha), float(dt), int(steps_per_output),
                  np.ascontiguousarray(edges, dtype=float), float(hist_lo), float(hist_width),
                  out, hist, exceed)
    return out, hist, exceed
