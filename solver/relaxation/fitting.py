"""Relaxation-time fits whose uncertainty includes the choice of fit window.

A relaxing quantity y(t) (zero at equilibrium) is sampled at output times t
by R replicas (particle method) or once (noise-free deterministic solver).
Every estimate below returns a :class:`DecayFit` with a rate r (time 1/r) and a
standard uncertainty

    u(r) = sqrt(u_stat**2 + u_window**2)

u_stat: particle data (R >= 3): jackknife over replicas (leave one replica
out; Efron & Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall
1993, Ch. 11), which carries the correlation of the noise between output
times.  Noise-free data: the standard error of the least-squares slope, a
measure of the misfit of the model over the window.
u_window: the largest change of the estimate when the window loses its first
or its last third (two exponentials: starts half a fast decay time later, or
loses its last third; e-folding time: cubic instead of linear interpolation of
ln y between output times; initial rate: window [0, 2 t_e] instead of
[0, t_e]), counted only beyond the noise of the change itself (see
:func:`_estimate`).  A model that does not
describe the data shows up here; for a signal that is an exact exponential it
is noise only.

Estimates:

* :func:`fit_decay` -- single exponential y = a exp(-r (t - t_1)) over a
  window that ends where the signal sinks into the noise (|mean y| > snr x
  standard error) or below min_fraction of its start.
* :func:`fit_two_exponentials` -- y = C exp(-r t) + D exp(-q t) with q fixed.
  For Maxwell molecules the fourth moment M4 = <c^4> obeys exactly (derived in
  :mod:`knudsweep.solver.relaxation.moments` from the Maxwell-molecule collision
  integral; cf. Truesdell & Muncaster 1980)

      dM4/dt = -r4 (M4 - 15) - r4 tr(sigma^2),   r4 = (2/3) p/mu,

  sigma the traceless temperature tensor, whose square decays at twice the
  anisotropy rate: q = 2 r_aniso.  Linear in C, D for given r (variable
  projection), minimised over r.
* :func:`e_folding_time` -- time at which y / y(0) = 1/e (model free).
* :func:`initial_rate` -- -d ln y/dt at t = 0 from a quadratic in ln y.
* :func:`late_rate` -- single exponential once y has fallen below e^-2 of its
  start.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import curve_fit, minimize_scalar

KIND_EXPONENTIAL = "exponential fit"
KIND_TWO_EXPONENTIAL = "two-exponential fit, slow rate (fast rate 2 x anisotropy rate)"
KIND_E_FOLDING = "time to fall by e"
KIND_INITIAL = "initial rate -d ln y/dt at t = 0"
KIND_LATE = "late rate, exponential fit after y < y(0)/e^2"


@dataclass(frozen=True)
class DecayFit:
    rate: float
    rate_uncertainty: float
    amplitude: float
    t_first: float
    t_last: float
    n_points: int
    note: str = ""
    kind: str = KIND_EXPONENTIAL
    rate_statistical: float = math.nan
    rate_window: float = math.nan

    @property
    def time(self) -> float:
        """Relaxation time 1 / rate."""
        return 1.0 / self.rate if self.rate > 0 else math.nan

    @property
    def time_uncertainty(self) -> float:
        """Standard uncertainty of 1 / rate (first-order propagation)."""
        return self.rate_uncertainty / self.rate**2 if self.rate > 0 else math.nan

    @property
    def ok(self) -> bool:
        return math.isfinite(self.rate) and self.rate > 0 and math.isfinite(self.rate_uncertainty)

    def record(self) -> dict:
        """Plain-data summary for the result's discretization record."""
        return {
            "kind": self.kind,
            "t_first": self.t_first,
            "t_last": self.t_last,
            "n_points": self.n_points,
            "rate_statistical_uncertainty": self.rate_statistical,
            "rate_window_uncertainty": self.rate_window,
            "note": self.note,
        }


def nan_fit(note: str, kind: str = KIND_EXPONENTIAL) -> DecayFit:
    return DecayFit(math.nan, math.nan, math.nan, math.nan, math.nan, 0, note, kind)


def _stats(curves):
    curves = np.atleast_2d(np.asarray(curves, dtype=float))
    n_rep = curves.shape[0]
    mean = curves.mean(axis=0)
    se = curves.std(axis=0, ddof=1) / math.sqrt(n_rep) if n_rep >= 3 else None
    return curves, mean, se


def _jackknife_se(values: np.ndarray) -> float:
    m = values.size
    return float(math.sqrt((m - 1) / m * np.sum((values - values.mean()) ** 2)))


def _loo_means(curves: np.ndarray):
    """Leave-one-replica-out means."""
    total = curves.sum(axis=0)
    n = curves.shape[0]
    for r in range(n):
        yield (total - curves[r]) / (n - 1)


def _estimate(variants, curves, mean, se):
    """Nominal estimate, u_stat and u_window from ``variants[i](y, r)`` (first: nominal window).

    ``variants[i](y, r)`` returns the rate from the mean curve y (r: index of the
    replica left out, None for all).  u_window is the largest difference between
    a variant and the nominal estimate beyond its own noise,
    sqrt(max(d**2 - se(d)**2, 0)), se(d) the jackknife error of the difference
    (a check is significant only against its uncorrelated error: R. Barlow,
    "Systematic errors: facts and fictions", arXiv:hep-ex/0207026, 2002).
    Noise-free data: u_window = max |d|, u_stat = 0.
    """
    values = np.array([v(mean, None) for v in variants])
    if se is None:
        return float(values[0]), 0.0, float(np.max(np.abs(values[1:] - values[0]), initial=0.0))
    rows = []
    for r, sub in enumerate(_loo_means(curves)):
        row = []
        for v in variants:
            try:
                row.append(v(sub, r))
            except (RuntimeError, ValueError, np.linalg.LinAlgError):
                row.append(math.nan)
        rows.append(row)
    jack = np.asarray(rows)
    good = np.all(np.isfinite(jack), axis=1)
    if good.sum() < max(2, int(0.75 * jack.shape[0])):
        raise ValueError("jackknife: too few usable replica subsets")
    jack = jack[good]
    stat = _jackknife_se(jack[:, 0])
    window = 0.0
    for i in range(1, values.size):
        d = values[i] - values[0]
        se_d = _jackknife_se(jack[:, i] - jack[:, 0])
        window = max(window, math.sqrt(max(d * d - se_d * se_d, 0.0)))
    return float(values[0]), stat, window


def _window(t, mean, se, t_start, snr, min_fraction, t_stop=math.inf):
    """Consecutive outputs from t_start with one sign, above the noise and above min_fraction of the first."""
    idx = np.flatnonzero((t >= t_start - 1e-12) & (t <= t_stop + 1e-12))
    if idx.size == 0:
        return np.zeros(0, dtype=int)
    y0 = mean[idx[0]]
    keep = []
    for i in idx:
        if not np.isfinite(mean[i]) or mean[i] * np.sign(y0) <= 0.0:
            break
        if se is not None and abs(mean[i]) <= snr * se[i]:
            break
        if abs(mean[i] / y0) <= min_fraction:
            break
        keep.append(i)
    return np.asarray(keep, dtype=int)


def _variants(win: np.ndarray, min_points: int) -> list[np.ndarray]:
    """The window without its first third and without its last third (where enough points remain)."""
    cut = win.size // 3
    out = []
    if cut >= 1 and win.size - cut >= min_points:
        out += [win[cut:], win[:-cut]]
    return out


# --------------------------------------------------------------------------- single exponential


def _exp_rate(t, y, sigma):
    """Rate and amplitude of a exp(-r (t - t_0)): weighted least squares (sigma) or log-linear (sigma None)."""
    t1 = t[0]
    sign = np.sign(y[0])
    ys = y * sign
    if np.any(ys <= 0):
        raise ValueError("signal changes sign inside the window")
    slope, intercept = np.polyfit(t - t1, np.log(ys), 1)
    if sigma is None:
        return -float(slope), float(sign * math.exp(intercept))
    p0 = (math.exp(intercept), max(-slope, 1e-6))
    popt, _ = curve_fit(
        lambda tt, a, r: a * np.exp(-r * (tt - t1)), t, ys, p0=p0, sigma=sigma, absolute_sigma=True, maxfev=2000
    )
    return float(popt[1]), float(popt[0] * sign)


def _exp_fit_on(t, curves, mean, se, win, min_points, kind=KIND_EXPONENTIAL, note=""):
    tw = t[win]
    try:
        if se is None:
            sign = np.sign(mean[win[0]])
            coef, cov = np.polyfit(tw - tw[0], np.log(mean[win] * sign), 1, cov=True)
            slope_se = float(math.sqrt(max(cov[0, 0], 0.0)))
            sigma = None
        else:
            sigma = np.maximum(se, 1e-12 * abs(mean[win[0]]))
            slope_se = 0.0

        def variant(w):
            return lambda y, r: _exp_rate(t[w], y[w], None if sigma is None else sigma[w])[0]

        rate, stat, window = _estimate(
            [variant(win)] + [variant(w) for w in _variants(win, min_points)], curves, mean, se
        )
        amp = _exp_rate(tw, mean[win], None if sigma is None else sigma[win])[1]
    except (RuntimeError, ValueError, np.linalg.LinAlgError) as exc:
        return nan_fit(f"least-squares fit failed: {exc}", kind)
    stat = max(stat, slope_se)
    return DecayFit(
        rate, math.hypot(stat, window), amp, float(tw[0]), float(tw[-1]), int(win.size), note, kind, stat, window
    )


def fit_decay(
    t: np.ndarray,
    curves: np.ndarray,
    t_start: float = 0.0,
    snr: float = 5.0,
    min_fraction: float = 0.02,
    min_points: int = 4,
    kind: str = KIND_EXPONENTIAL,
) -> DecayFit:
    """Single exponential fitted to ``curves[R, T]`` at times ``t[T]`` from ``t_start`` (see module doc)."""
    t = np.asarray(t, dtype=float)
    curves, mean, se = _stats(curves)
    win = _window(t, mean, se, t_start, snr, min_fraction)
    if win.size < min_points:
        return nan_fit(f"fewer than {min_points} output times above the noise/threshold after t={t_start:.3g}", kind)
    return _exp_fit_on(t, curves, mean, se, win, min_points, kind=kind)


# --------------------------------------------------------------------------- two exponentials


def _two_exp_chi2(t, y, w, r, q):
    """Weighted misfit of the best C exp(-r t) + D exp(-q t) for each r (array), with C and D."""
    r = np.atleast_1d(np.asarray(r, dtype=float))
    a = np.exp(-np.outer(r, t)) * w  # (n_r, T)
    b = np.exp(-q * t) * w  # (T,)
    z = y * w
    aa, ab, bb = np.sum(a * a, axis=1), a @ b, b @ b
    az, bz = a @ z, b @ z
    det = aa * bb - ab * ab
    c = (bb * az - ab * bz) / det
    d = (aa * bz - ab * az) / det
    chi2 = z @ z - c * az - d * bz
    return chi2, c, d


def _two_exp_rate(t, y, w, q):
    """Slow rate r in (0, 0.95 q] minimising the weighted misfit (grid scan, then bounded refinement)."""
    t = t - t[0]
    hi = 0.95 * q
    grid = np.geomspace(1e-3 * q, hi, 120)
    chi = _two_exp_chi2(t, y, w, grid, q)[0]
    k = int(np.argmin(chi))
    lo_b, hi_b = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
    res = minimize_scalar(
        lambda r: float(_two_exp_chi2(t, y, w, r, q)[0][0]),
        bounds=(lo_b, hi_b),
        method="bounded",
        options={"xatol": 1e-12 * q},
    )
    r = float(res.x)
    if r >= hi * (1 - 1e-6):
        raise ValueError("slow rate at the bound 0.95 x fast rate")
    _, c, d = _two_exp_chi2(t, y, w, r, q)
    return r, float(c[0]), float(d[0])


def fit_two_exponentials(
    t: np.ndarray,
    curves: np.ndarray,
    fast_rate: float,
    fast_rate_jackknife: np.ndarray | None = None,
    t_start: float = 0.0,
    snr: float = 5.0,
    min_fraction: float = 1e-3,
    min_points: int = 6,
) -> DecayFit:
    """Slow rate r of y = C exp(-r t) + D exp(-q t), q = ``fast_rate`` fixed (see module doc).

    ``fast_rate_jackknife[R]``: q from each leave-one-replica-out subset, so that
    the jackknife carries the uncertainty of q into r.  The window runs from
    t_start while |mean y| > snr x standard error (particles) and
    |y| > min_fraction x max |y|; amplitude is C.
    """
    kind = KIND_TWO_EXPONENTIAL
    t = np.asarray(t, dtype=float)
    curves, mean, se = _stats(curves)
    if not (math.isfinite(fast_rate) and fast_rate > 0):
        return nan_fit("no fast rate (anisotropy fit failed)", kind)
    idx = np.flatnonzero(t >= t_start - 1e-12)
    scale = np.max(np.abs(mean[idx])) if idx.size else 0.0
    keep = []
    for i in idx:
        if not np.isfinite(mean[i]) or abs(mean[i]) <= min_fraction * scale:
            break
        if se is not None and abs(mean[i]) <= snr * se[i]:
            break
        keep.append(i)
    win = np.asarray(keep, dtype=int)
    if win.size < min_points:
        return nan_fit(f"fewer than {min_points} output times above the noise/threshold after t={t_start:.3g}", kind)
    tw = t[win]
    weight = (1.0 / np.maximum(se, 1e-12 * scale)) if se is not None else np.ones(t.size)
    qs = (
        np.full(curves.shape[0], fast_rate)
        if fast_rate_jackknife is None
        else np.asarray(fast_rate_jackknife, dtype=float)
    )

    def variant(w):
        def est(y, r):
            q = fast_rate if r is None else qs[r]
            if not (math.isfinite(q) and q > 0):
                raise ValueError("no fast rate for this replica subset")
            return _two_exp_rate(t[w], y[w], weight[w], q)[0]

        return est

    try:
        # Window variants: start later by half the fast decay time (a later start
        # leaves the fast term unresolved and the fit degenerate), and drop the
        # last third.
        late_start = win[t[win] >= tw[0] + 0.5 / fast_rate - 1e-12]
        shorter = win[: win.size - win.size // 3]
        others = [w for w in (late_start, shorter) if min_points <= w.size < win.size]
        rate, stat, window = _estimate([variant(win)] + [variant(w) for w in others], curves, mean, se)
        c = _two_exp_rate(tw, mean[win], weight[win], fast_rate)[1]
    except (RuntimeError, ValueError, np.linalg.LinAlgError) as exc:
        return nan_fit(f"two-exponential fit failed: {exc}", kind)
    return DecayFit(
        rate,
        math.hypot(stat, window),
        c,
        float(tw[0]),
        float(tw[-1]),
        int(win.size),
        f"fast rate q = {fast_rate:.6g} fixed",
        kind,
        stat,
        window,
    )


# --------------------------------------------------------------------------- model-free descriptions


def _crossing(t, y, level):
    """First time y/y[0] falls to ``level``: (linear-in-ln-y time, cubic-in-ln-y time) or None."""
    ratio = y / y[0]
    below = np.flatnonzero(ratio <= level)
    if below.size == 0 or below[0] == 0 or np.any(ratio[: below[0] + 1] <= 0):
        return None
    k = int(below[0])
    la, lb, target = math.log(ratio[k - 1]), math.log(ratio[k]), math.log(level)
    t_lin = t[k - 1] + (target - la) / (lb - la) * (t[k] - t[k - 1])
    lo = max(0, k - 2)
    hi = min(t.size, lo + 4)
    lo = max(0, hi - 4)
    seg = np.arange(lo, hi)
    if seg.size < 4 or np.any(ratio[seg] <= 0):
        return t_lin, t_lin
    coef = np.polyfit(t[seg] - t_lin, np.log(ratio[seg]) - target, 3)
    roots = np.roots(coef)
    real = roots[np.abs(roots.imag) < 1e-9].real + t_lin
    inside = real[(real >= t[k - 1] - 1e-12) & (real <= t[k] + 1e-12)]
    t_cub = float(inside[np.argmin(np.abs(inside - t_lin))]) if inside.size else t_lin
    return float(t_lin), t_cub


def e_folding_time(t: np.ndarray, curves: np.ndarray) -> DecayFit:
    """Time t_e with y(t_e) = y(0)/e; rate = 1/t_e.  Window part: linear vs cubic interpolation of ln y."""
    kind = KIND_E_FOLDING
    t = np.asarray(t, dtype=float)
    curves, mean, se = _stats(curves)
    level = math.exp(-1.0)
    cross = _crossing(t, mean, level)
    if cross is None:
        return nan_fit("signal does not fall by e within the run (or changes sign first)", kind)
    if se is not None and abs(mean[0]) <= 5.0 * se[0]:
        return nan_fit("initial value not above the noise", kind)

    def variant(which):
        def est(y, r):
            c = _crossing(t, y, level)
            if c is None:
                raise ValueError("no crossing")
            return 1.0 / c[which]

        return est

    try:
        rate, stat, window = _estimate([variant(0), variant(1)], curves, mean, se)
    except ValueError as exc:
        return nan_fit(str(exc), kind)
    k = int(np.searchsorted(t, cross[0]))
    return DecayFit(
        rate,
        math.hypot(stat, window),
        float(mean[0]),
        0.0,
        float(t[min(k, t.size - 1)]),
        k + 1,
        "window part: cubic instead of linear interpolation of ln y",
        kind,
        stat,
        window,
    )


def _quadratic_slope(t, y, sigma):
    """-d ln y/dt at t[0] from a weighted quadratic in ln y."""
    sign = np.sign(y[0])
    ly = np.log(y * sign)
    w = None if sigma is None else y * sign / sigma
    coef = np.polyfit(t - t[0], ly, 2, w=w)
    return -float(coef[1])


def initial_rate(t: np.ndarray, curves: np.ndarray, t_e: float, min_points: int = 4) -> DecayFit:
    """-d ln y/dt at t = 0: quadratic in ln y over [0, t_e], window part from [0, 2 t_e] (t_e: e-folding time)."""
    kind = KIND_INITIAL
    t = np.asarray(t, dtype=float)
    curves, mean, se = _stats(curves)
    if not math.isfinite(t_e):
        return nan_fit("no e-folding time", kind)
    ratio = mean / mean[0]

    def window(t_w):
        idx = np.flatnonzero(t <= t_w + 1e-12)
        good = np.flatnonzero(ratio[idx] <= 0)
        return idx[: good[0]] if good.size else idx

    w1, w2 = window(t_e), window(2.0 * t_e)
    if w1.size < min_points:
        w1 = np.arange(min(min_points, t.size))
    if w2.size <= w1.size:
        return nan_fit(f"fewer than {w1.size + 1} output times within twice the e-folding time", kind)
    if np.any(mean[w2] * np.sign(mean[0]) <= 0):
        return nan_fit("signal changes sign within twice the e-folding time", kind)

    def variant(w):
        def est(y, r):
            if np.any(y[w] * np.sign(y[0]) <= 0):
                raise ValueError("sign change")
            return _quadratic_slope(t[w], y[w], None if se is None else np.maximum(se[w], 1e-12 * abs(mean[0])))

        return est

    try:
        rate, stat, window = _estimate([variant(w1), variant(w2)], curves, mean, se)
    except (ValueError, np.linalg.LinAlgError) as exc:
        return nan_fit(f"initial-rate fit failed: {exc}", kind)
    return DecayFit(
        rate,
        math.hypot(stat, window),
        float(mean[0]),
        float(t[w1[0]]),
        float(t[w1[-1]]),
        int(w1.size),
        "window part: quadratic over [0, 2 t_e] instead of [0, t_e]",
        kind,
        stat,
        window,
    )


def late_rate(
    t: np.ndarray, curves: np.ndarray, snr: float = 5.0, min_fraction: float = 0.02, min_points: int = 4
) -> DecayFit:
    """Single exponential from the first output with |y| < |y(0)|/e^2 to the noise or min_fraction cut."""
    kind = KIND_LATE
    t = np.asarray(t, dtype=float)
    curves, mean, se = _stats(curves)
    ratio = mean / mean[0]
    start = np.flatnonzero(ratio <= math.exp(-2.0))
    if start.size == 0:
        return nan_fit("signal does not fall by e^2 within the run", kind)
    t_start = t[max(int(start[0]) - 1, 0)]
    win = _window(t, mean, se, t_start, snr, min_fraction)
    if win.size < min_points:
        return nan_fit(f"fewer than {min_points} output times above the noise after y < y(0)/e^2", kind)
    fit = _exp_fit_on(t, curves, mean, se, win, min_points, kind=kind)
    return replace(fit, note=fit.note or f"window [{fit.t_first:.3g}, {fit.t_last:.3g}]")


def exponential_rate_jackknife(t: np.ndarray, curves: np.ndarray, fit: DecayFit) -> np.ndarray | None:
    """Leave-one-replica-out rates of the single-exponential ``fit`` on its own window (None: < 3 replicas)."""
    t = np.asarray(t, dtype=float)
    curves, mean, se = _stats(curves)
    if se is None or not fit.ok:
        return None
    win = np.flatnonzero((t >= fit.t_first - 1e-12) & (t <= fit.t_last + 1e-12))
    sigma = np.maximum(se[win], 1e-12 * abs(mean[win[0]]))
    out = []
    for sub in _loo_means(curves):
        try:
            out.append(_exp_rate(t[win], sub[win], sigma)[0])
        except (RuntimeError, ValueError):
            out.append(math.nan)
    return np.asarray(out)
