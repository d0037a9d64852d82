"""Test precision: one named tolerance per kind of check.

A test compares a computed value with an expected one; the tolerance says how
far apart they may be, and it follows from where the difference comes from.
Each constant below is one such source.  A bound that belongs to one measured
check (for example "the default grid errs by 0.04-0.08 %") stays beside that
test as a named module-level constant with its measurement.

Import as ``from precision import ROUND_OFF`` (pytest puts ``tests/`` on the
path through ``tests/conftest.py``, a rootdir conftest without ``__init__``).

Floating point: IEEE 754 double precision, machine epsilon 2.2e-16 (IEEE Std
754-2019).  A result of n rounded operations differs from the exact one by at
most about n eps (Higham, Accuracy and Stability of Numerical Algorithms, 2nd
ed. 2002, Sec. 3.1); in practice the errors partly cancel (about sqrt(n) eps).
"""

# --- exact identities that hold up to round-off -------------------------------------------------------------------
# Three lengths of computation, since the round-off grows with the number of operations (Higham 2002, Sec. 3.1).
ROUND_OFF_FORMULA = 1e-14
"""A closed formula or a short loop (tens of operations): ~45 eps.  Common practice, no source."""

ROUND_OFF_SUM = 1e-13
"""A sum over a quadrature rule or a velocity grid, a few hundred to a few thousand terms: ~450 eps.
Common practice, no source."""

ROUND_OFF = 1e-12
"""A long computation: linear solves, many time steps, sums of ~1e4 terms, or a value passed through files and
unit conversions: ~4500 eps.  Common practice, no source."""

# --- values rounded to 6 significant digits -----------------------------------------------------------------------
SIX_DIGITS = 1e-5
"""A value that passed through 6 significant digits: point parameters (knudsweep.identity.canonical), table columns
(knudsweep.tables, format .6g) or a number typed with 6 digits.  Half a unit of the 6th digit is at most 5e-6
relative; 1e-5 allows two such roundings (an input and a value derived from it)."""

# --- closed forms checked by quadrature ---------------------------------------------------------------------------
QUADRATURE = 1e-10
"""A closed form against scipy.integrate.quad (adaptive Gauss-Kronrod, QUADPACK: Piessens et al. 1983) of a smooth,
Gaussian-weighted integrand.  quad reaches round-off on these (measured <= 9e-16 on the BKW moments and marginal);
1e-10 leaves room for integrands with a kink or a wide range.  Common practice, no source."""

# --- the solver's own iteration tolerance carried into a coefficient ----------------------------------------------
ITERATION = 1e-6
"""Two solves of the same discrete equations (plain and accelerated iteration, or two stopping points), each stopped
when the estimated remaining change is below its tol (knudsweep.solver.iteration: e rho/(1-rho) < tol; 1e-8 by
default, 1e-10 to 1e-12 in the comparisons).  Both approach the same discrete fixed point, so they differ by the
remaining iteration error, which the estimate can miss by a small factor (Anderson mixing: 1.5e-8 left at tol 1e-8,
DEVELOPERS.md).  1e-6 is the agreement asked of every acceleration (DEVELOPERS.md, "A geometry"), 100x the default
tol.  Common practice, no source."""

# --- discretisation error of the default grid ---------------------------------------------------------------------
DISCRETISATION = 1e-4
"""An identity of the continuous equations checked on the default grid, where each side carries its own truncation
error (Onsager reciprocity Q_P = G_T: the two problems are solved on the same grid but with different right-hand
sides; measured differences <= 2e-5 with 100 cells), or a quadrature at the density the solver defaults use
(the accuracy they are chosen for, tests/unit/test_quadrature.py).  Common practice, no source."""

ASYMPTOTIC = 1e-3
"""A finite-delta solve against a limit (free molecular, continuum, slip): the neglected terms of the expansion
(O(delta ln delta) near delta = 0, O(1/delta^2) near the continuum) plus the grid error.  Used where the point is
chosen so that the neglected terms are well below it.  Common practice, no source."""

# --- statistics ---------------------------------------------------------------------------------------------------
STANDARD_ERRORS = 5.0
"""A Monte Carlo mean against its expected value: 5 standard errors, a false failure for a normal estimate has
probability 5.7e-7 (two-sided normal tail).  Common practice, no source."""

# --- estimate honesty ---------------------------------------------------------------------------------------------
HONEST = 3.0
"""An a-posteriori error estimate (a discretisation error estimate, or a fitted time's stated uncertainty) is honest
when the actual error, against a much finer reference or an exact value, is at most HONEST times the estimate.  The
acceptance bound of the project brief; common practice, no source."""

# --- published tables ---------------------------------------------------------------------------------------------
# No single constant: a value read from a table is known to half a unit of its last printed digit, so each check
# states its own bar (that half unit plus the grid error of our solve) beside the value and its source
# (tests/unit/test_gas_data.py VISCOSITY_RTOL, tests/verification/test_conductance_limits.py HANDBOOK_RTOL).
