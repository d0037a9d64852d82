"""Shared test settings.

Tolerances that several test modules use are named here with the reason for
their size; module-specific tolerances stay beside their test with a comment.
"""

import os
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]

# numba caches compiled kernels beside the sources unless told otherwise; keep
# them in one project-local folder so parallel test processes share them.
os.environ.setdefault("NUMBA_CACHE_DIR", str(REPO / ".numba_cache"))
os.environ.setdefault("MPLBACKEND", "Agg")
