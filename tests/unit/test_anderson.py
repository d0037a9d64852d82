"""Anderson mixing (knudsweep.solver.anderson) on linear fixed-point problems with known solutions.

Reference: Walker & Ni, SIAM J. Numer. Anal. 49 (2011) 1715 -- without
dropped differences, Anderson mixing of x = M x + b is GMRES on (I - M) x = b,
so it converges in at most n + 1 steps in exact arithmetic for n unknowns.
"""

import numpy as np
import pytest

from knudsweep.solver.anderson import AndersonMixer

# n + 1 = 7 steps solve the 6 unknowns exactly in exact arithmetic; the least-squares steps lose digits in proportion
# to the condition number of I - M (1 / 0.005 = 200), so 1e-10 rather than round-off.
GMRES_EXACT_STEP = 1e-10
# A history of 3 (restarted-GMRES-like) after 50 steps: measured 2e-7 (plain iteration is 1e-2 off).
SHORT_HISTORY_ERROR = 1e-5


def run(M, b, depth, steps):
    mixer = AndersonMixer(depth=depth)
    x = np.zeros(b.size)
    exact = np.linalg.solve(np.eye(b.size) - M, b)
    errors = []
    for _ in range(steps):
        x = mixer.mix(x, M @ x + b)
        errors.append(np.linalg.norm(x - exact) / np.linalg.norm(exact))
    return errors


def slow_contraction(n=6, seed=3):
    rng = np.random.default_rng(seed)
    Q, _ = np.linalg.qr(rng.standard_normal((n, n)))
    # eigenvalues up to 0.995: the plain iteration needs ~4000 steps for 1e-8
    M = Q @ np.diag(np.linspace(0.2, 0.995, n)) @ Q.T
    return M, rng.standard_normal(n)


def test_converges_like_gmres_in_n_plus_one_steps():
    M, b = slow_contraction()
    errors = run(M, b, depth=10, steps=8)
    assert errors[-1] < GMRES_EXACT_STEP


def test_fixed_point_unchanged_and_plain_is_slow():
    M, b = slow_contraction()
    x = np.zeros(b.size)
    for _ in range(50):
        x = M @ x + b
    exact = np.linalg.solve(np.eye(b.size) - M, b)
    assert np.linalg.norm(x - exact) / np.linalg.norm(exact) > 1e-2  # plain: far off after 50 steps
    assert run(M, b, depth=3, steps=50)[-1] < SHORT_HISTORY_ERROR


def test_rejects_bad_depth():
    with pytest.raises(ValueError, match="depth"):
        AndersonMixer(depth=0)
