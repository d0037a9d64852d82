"""Stored reference outputs: a handful of points per family solved again and compared with their committed values.

The points, their sections and how they are solved (through the study layer, as a study point) are in
``store_reference_outputs.py``; the values are in ``reference_outputs/<family>.json``.  A difference means the
answers changed: if that was intended, run ``store_reference_outputs.py``, raise the version and say so in the
commit message; if not, the change broke something.

Tolerance: REFERENCE_RTOL relative, with REFERENCE_ATOL absolute for values at round-off level (conservation
drifts).  The channel points are iterated to tol 1e-12 and the relaxation points run a fixed number of steps, so a
rerun of the same code differs only by the summation order of numba's parallel loops (thread count, scheduling)
and by the 15 stored digits: measured at most 4e-15 relative between 1 and 2 numba threads.  DSMC runs one random
stream per replica spawned from the seed, so its numbers do not depend on the thread count either.  1e-9 leaves
room for other machines and library versions (common practice, no source) and is far below the size of an
intended change of grid, scheme or model term.
"""

from __future__ import annotations

import json

import pytest
from precision import ROUND_OFF
from store_reference_outputs import POINTS, REFERENCE_DIR, solve_section

from knudsweep.solver import __version__

REFERENCE_RTOL = 1e-9
REFERENCE_ATOL = ROUND_OFF


def _stored(family: str) -> dict:
    return json.loads((REFERENCE_DIR / f"{family}.json").read_text())


CASES = [(family, i) for family in POINTS for i in range(len(POINTS[family]))]


@pytest.mark.parametrize("family", list(POINTS))
def test_stored_file_matches_the_point_list_and_version(family):
    data = _stored(family)
    assert data["family"] == family
    # a changed answer goes with a new version (DEVELOPERS.md, commit rules): rewrite the file when raising it
    assert data["code_version"] == __version__
    assert len(data["points"]) == len(POINTS[family])


@pytest.mark.parametrize(("family", "index"), CASES, ids=[f"{f}-{i}" for f, i in CASES])
def test_reference_outputs_are_reproduced(family, index):
    stored = _stored(family)["points"][index]
    point, result = solve_section(family, stored["section"])
    assert point.pid == stored["point_id"]
    assert point.values == stored["point_values"]
    assert result.status == "converged", result.convergence.reason
    got = {name: q.value for name, q in result.coefficients.items()}
    assert sorted(got) == sorted(stored["coefficients"])
    for name, want in stored["coefficients"].items():
        if want is None:  # NaN when stored (a fit that does not apply)
            assert got[name] != got[name], name
            continue
        assert got[name] == pytest.approx(want, rel=REFERENCE_RTOL, abs=REFERENCE_ATOL), f"{point.pid}: {name}"
