"""Anderson acceleration of a fixed-point iteration x = G(x).

With residuals f_k = G(x_k) - x_k and the last m differences
dF = [f_k - f_{k-1}, ...], dG = [G(x_k) - G(x_{k-1}), ...], the next iterate is

    x_{k+1} = G(x_k) - dG gamma,     gamma = argmin || f_k - dF gamma ||_2

(Anderson, J. ACM 12 (1965) 547; the "type II" form of Walker & Ni, SIAM
J. Numer. Anal. 49 (2011) 1715, who show it is equivalent to GMRES on a
linear problem when no differences are dropped).  A fixed point of G is a
fixed point of the mixed iteration, so converged results do not depend on
the mixing; only the path does.

Used where a sweep lags data that the synthetic correction does not see
(the duct walls re-emit what arrived in the previous sweep; with specular
reflection that lag, not the collisions, sets the iteration count).
"""

from __future__ import annotations

import numpy as np

__all__ = ["AndersonMixer"]


class AndersonMixer:
    """Keeps the last ``depth`` differences; ``mix(x, gx)`` returns the next iterate.

    Safeguard: when the residual norm grows by more than ``restart_growth``
    over the smallest one seen since the last restart, the history is
    dropped and the plain step G(x) is taken.
    """

    def __init__(self, depth: int = 8, restart_growth: float = 1e3):
        if depth < 1:
            raise ValueError(f"depth: must be an integer >= 1, got {depth!r}")
        self.depth = int(depth)
        self.restart_growth = float(restart_growth)
        self._f_prev: np.ndarray | None = None
        self._g_prev: np.ndarray | None = None
        self._dF: list[np.ndarray] = []
        self._dG: list[np.ndarray] = []
        self._best = np.inf
        self.restarts = 0

    def reset(self) -> None:
        self._f_prev = self._g_prev = None
        self._dF.clear()
        self._dG.clear()
        self._best = np.inf

    def mix(self, x: np.ndarray, gx: np.ndarray) -> np.ndarray:
        f = gx - x
        norm = float(np.linalg.norm(f))
        if norm > self.restart_growth * self._best:
            self.restarts += 1
            self.reset()
        self._best = min(self._best, norm)
        if self._f_prev is not None:
            self._dF.append(f - self._f_prev)
            self._dG.append(gx - self._g_prev)
            if len(self._dF) > self.depth:
                self._dF.pop(0)
                self._dG.pop(0)
        self._f_prev = f
        self._g_prev = gx.copy()
        if not self._dF:
            return gx.copy()
        dF = np.stack(self._dF, axis=1)
        # scale the columns: the least-squares problem is then well posed
        # even when the differences shrink by orders of magnitude
        scale = np.linalg.norm(dF, axis=0)
        keep = scale > 0.0
        if not np.any(keep):
            return gx.copy()
        dF = dF[:, keep] / scale[keep]
        gamma, *_ = np.linalg.lstsq(dF, f, rcond=1e-12)
        dG = np.stack([g for g, k in zip(self._dG, keep, strict=True) if k], axis=1) / scale[keep]
        return gx - dG @ gamma
