"""Shared check of the discretization error estimates (knudsweep.solver.resolution).

An estimate is honest when the actual error against a much finer reference
solve of the same equations is at most HONEST times the estimate (the constant
lives in tests/precision.py with its reason; re-exported here).  It is also informative when it stays below ``max_relative`` of the
value: the bound each caller sets from the measured error of its default grid.
"""

from precision import HONEST

__all__ = ["HONEST", "assert_estimate_honest"]


def assert_estimate_honest(res, ref, names, max_relative, label=""):
    """Each coefficient in ``names`` of ``res``: honest against ``ref`` and below ``max_relative``."""
    for name in names:
        actual = abs(res.coefficient(name) - ref.coefficient(name))
        est = res.coefficient(f"{name}_error_estimate")
        print(f"\n{label} {name}: actual {actual:.2e}, estimate {est:.2e}")
        assert actual <= HONEST * est
        assert est <= max_relative * abs(ref.coefficient(name))
