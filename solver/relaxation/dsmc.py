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
reported, it measures the small bias this causes).  For Maxwell molecules
sigma c_r is a constant, which is then the exact majorant (every candidate
collides).  Candidate pairs come from one 64-bit random output
(:func:`knudsweep.solver.relaxation.rng.distinct_pair`).

Scattering.  VHS: isotropic in the centre-of-mass frame, the direction drawn
by Marsaglia's method (Ann. Math. Stat. 43 (1972) 645).  VSS (Koura &
Matsumoto, Phys. Fluids A 3 (1991) 2459, citation from memory; Bird 1994
Sec. 2.6): cos(chi) = 2 U**(1/alpha) - 1
for U uniform on (0, 1), and the relative velocity is rotated by chi about a
random azimuth eps (Bird 1994, eq. 2.22).  Post-collision velocities are
v_cm +- g'/2 with |g'| = |g|, so momentum and energy are conserved in each
collision to round-off.

Random numbers: each replica owns a xoshiro256** generator state
(:mod:`knudsweep.solver.relaxation.rng`) spawned from the point seed by numpy's
SeedSequence and runs wholly on one thread, so a replica depends only on the
seed and its index, not on the number of threads.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from knudsweep.solver.relaxation.h_function import _binned_divergence_particles
from knudsweep.solver.relaxation.initial_states import _sample_initial
from knudsweep.solver.relaxation.rng import distinct_pair, replica_states, uniform

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
def _collide_direction(v: np.ndarray, i: int, j: int, g2: float, dx: float, dy: float, dz: float) -> None:
    """Replace v[i], v[j] by v_cm +- |g| d / 2 for the unit vector d (equal masses, |g|**2 = g2)."""
    cr = math.sqrt(g2)
    cx = 0.5 * (v[i, 0] + v[j, 0])
    cy = 0.5 * (v[i, 1] + v[j, 1])
    cz = 0.5 * (v[i, 2] + v[j, 2])
    hx = 0.5 * cr * dx
    hy = 0.5 * cr * dy
    hz = 0.5 * cr * dz
    v[i, 0] = cx + hx
    v[i, 1] = cy + hy
    v[i, 2] = cz + hz
    v[j, 0] = cx - hx
    v[j, 1] = cy - hy
    v[j, 2] = cz - hz


@njit(cache=True)
def _sigma_cr(g2: float, coef: float, expo: float) -> float:
    """sigma * c_r = coef * c_r**expo, written with g2 = c_r**2."""
    if expo == 0.0:
        return coef
    if expo == 1.0:
        return coef * math.sqrt(g2)  # hard spheres: sqrt is much cheaper than pow
    return coef * g2 ** (0.5 * expo)


# Bracketing tables for sigma c_r = coef * g2**p (p = expo / 2) without pow:
# g2 = m 2**e with m in [1, 2); 2**(e p) is tabulated per biased exponent and
# m**p is bracketed over _MANT_BINS equal sub-intervals of [1, 2).  The bounds
# are widened by _BRACKET_MARGIN (relative), far above the few-ulp rounding of
# the tables, so a decision taken from them equals the one from the exact value.
_MANT_BITS = 8
_MANT_BINS = 1 << _MANT_BITS
_BRACKET_MARGIN = 1e-12


@njit(cache=True)
def _bracket_tables(coef: float, expo: float):
    """(scale[2048], low[bins], high[bins]): coef*2**(e p) and bounds of m**p, p = expo/2."""
    p = 0.5 * expo
    scale = np.empty(2048)
    for e in range(2048):
        scale[e] = coef * 2.0 ** ((e - 1023) * p)
    # zero / subnormal and inf / nan g2: an infinite bracket sends them to the exact path
    scale[0] = np.inf
    scale[2047] = np.inf
    low = np.empty(_MANT_BINS)
    high = np.empty(_MANT_BINS)
    for k in range(_MANT_BINS):
        low[k] = (1.0 + k / _MANT_BINS) ** p * (1.0 - _BRACKET_MARGIN)
        high[k] = (1.0 + (k + 1) / _MANT_BINS) ** p * (1.0 + _BRACKET_MARGIN)
    return scale, low, high


@njit(cache=True)
def _record(
    v: np.ndarray,
    edges: np.ndarray,
    counts: np.ndarray,
    ncoll: float,
    majorant: float,
    out: np.ndarray,
    hist_lo: float,
    hist_width: float,
    hist: np.ndarray,
) -> None:
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
def _run_replica(
    rs: np.ndarray,
    kind: int,
    params: np.ndarray,
    n: int,
    coef: float,
    expo: float,
    inv_alpha: float,
    dt: float,
    steps_per_output: int,
    edges: np.ndarray,
    hist_lo: float,
    hist_width: float,
    out: np.ndarray,
    hist_out: np.ndarray,
) -> int:
    """One replica: sample the initial state, run NTC collisions, record at each output.

    out[n_output, N_COLUMNS] and hist_out[n_output, n_bins] are filled; the
    return value is the number of candidates that exceeded the majorant.

    The acceptance test u (sigma c_r)_max <= sigma c_r is decided without pow
    or sqrt where possible: Maxwell molecules (expo = 0) have the exact
    majorant coef and accept every candidate; hard spheres (expo = 1) compare
    squares; other VHS exponents compare against the bracketing tables and
    evaluate g2**(expo/2) only when the bracket straddles the threshold or
    reaches the majorant.  All three give the same decision as the direct
    comparison, so the collision statistics are those of Bird's NTC scheme.
    """
    v = np.empty((n, 3))
    _sample_initial(kind, params, v, rs)
    isotropic = inv_alpha == 1.0
    counts = np.zeros((edges.shape[0] + 1) ** 3, dtype=np.int64)
    mode = 0 if expo == 0.0 else (1 if expo == 1.0 else 2)
    half_expo = 0.5 * expo
    coef2 = coef * coef
    scale, mlow, mhigh = _bracket_tables(coef, expo)
    bits = np.empty(1)
    ibits = bits.view(np.int64)

    if mode == 0:
        majorant = coef  # sigma c_r is the constant coef: this majorant is exact
    else:
        majorant = 0.0
        for _ in range(n):
            i, j = distinct_pair(rs, n)
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
                    i, j = distinct_pair(rs, n)
                    bi[c] = i
                    bj[c] = j
                    # both ends: a 24-byte record may straddle two cache lines
                    touch += v[i, 0] + v[j, 0] + v[i, 2] + v[j, 2]
                # pass 2: the sequential NTC acceptance with current velocities
                for c in range(nb):
                    i = bi[c]
                    j = bj[c]
                    g2 = (v[i, 0] - v[j, 0]) ** 2 + (v[i, 1] - v[j, 1]) ** 2 + (v[i, 2] - v[j, 2]) ** 2
                    if mode == 1:
                        t = uniform(rs) * majorant
                        sc2 = coef2 * g2
                        if sc2 < t * t:
                            continue
                        if sc2 > majorant * majorant:
                            sc = coef * math.sqrt(g2)
                            if sc > majorant:
                                majorant = sc
                                exceed += 1
                    elif mode == 2:
                        t = uniform(rs) * majorant
                        bits[0] = g2
                        w = ibits[0]
                        base = scale[(w >> 52) & 2047]
                        hi = base * mhigh[(w >> (52 - _MANT_BITS)) & (_MANT_BINS - 1)]
                        if hi < t:
                            continue  # sigma c_r <= hi < t <= majorant
                        lo = base * mlow[(w >> (52 - _MANT_BITS)) & (_MANT_BINS - 1)]
                        if lo < t or hi > majorant:
                            sc = coef * g2**half_expo
                            if sc > majorant:
                                majorant = sc
                                exceed += 1
                            elif sc < t:
                                continue
                    if isotropic:
                        # uniform direction on the sphere without trigonometry
                        # (Marsaglia, Ann. Math. Stat. 43 (1972) 645)
                        while True:
                            a1 = 2.0 * uniform(rs) - 1.0
                            a2 = 2.0 * uniform(rs) - 1.0
                            q = a1 * a1 + a2 * a2
                            if q < 1.0:
                                break
                        f = 2.0 * math.sqrt(1.0 - q)
                        _collide_direction(v, i, j, g2, 1.0 - 2.0 * q, a1 * f, a2 * f)
                    else:
                        cos_chi = 2.0 * uniform(rs) ** inv_alpha - 1.0
                        eps = 2.0 * math.pi * uniform(rs)
                        _collide(v, i, j, cos_chi, eps, False)
                    ncoll += 1.0
                done += nb
        _record(v, edges, counts, ncoll, majorant, out[k], hist_lo, hist_width, hist_out[k])
    if touch != touch:  # keeps pass 1 from being optimised away; NaN never occurs
        exceed = -1
    return exceed


@njit(parallel=True, cache=True)
def _run_replicas(
    states: np.ndarray,
    kind: int,
    params: np.ndarray,
    n: int,
    coef: float,
    expo: float,
    inv_alpha: float,
    dt: float,
    steps_per_output: int,
    edges: np.ndarray,
    hist_lo: float,
    hist_width: float,
    out: np.ndarray,
    hist_out: np.ndarray,
    exceed: np.ndarray,
) -> None:
    """Independent replicas in parallel; replica r writes only out[r], hist_out[r], exceed[r]."""
    for r in prange(states.shape[0]):
        exceed[r] = _run_replica(
            states[r],
            kind,
            params,
            n,
            coef,
            expo,
            inv_alpha,
            dt,
            steps_per_output,
            edges,
            hist_lo,
            hist_width,
            out[r],
            hist_out[r],
        )


def run_particles(
    seed: int,
    n_replicas: int,
    kind: int,
    params,
    n_particles: int,
    coef: float,
    expo: float,
    alpha: float,
    dt: float,
    steps_per_output: int,
    n_output: int,
    edges: np.ndarray,
    hist_lo: float,
    hist_width: float,
    n_hist: int,
):
    """Checked-input wrapper around the replica kernel.

    Returns (moments[R, n_output, N_COLUMNS], x-marginal[R, n_output, n_hist],
    majorant exceedances[R]).
    """
    if not 2 <= int(n_particles) < 2**32:
        raise ValueError(f"n_particles: must lie in [2, 2**32), got {n_particles!r}")
    states = replica_states(seed, n_replicas)
    out = np.zeros((n_replicas, n_output, N_COLUMNS))
    hist = np.zeros((n_replicas, n_output, n_hist))
    exceed = np.zeros(n_replicas, dtype=np.int64)
    _run_replicas(
        states,
        int(kind),
        np.asarray(params, dtype=float),
        int(n_particles),
        float(coef),
        float(expo),
        1.0 / float(alpha),
        float(dt),
        int(steps_per_output),
        np.ascontiguousarray(edges, dtype=float),
        float(hist_lo),
        float(hist_width),
        out,
        hist,
        exceed,
    )
    return out, hist, exceed
