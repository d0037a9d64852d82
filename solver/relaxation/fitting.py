"""Relaxation-time fits with uncertainty.

A relaxing quantity y(t) (zero at equilibrium) is fitted by

    y(t) = a exp(-r (t - t_1)),   relaxation time tau = 1 / r,

over a window [t_1, t_2] that starts at a chosen time and ends before the
signal sinks into the noise: consecutive output times with
|mean y| > snr * (standard error of the mean over replicas) and
|y / y(t_1)| > min_fraction.

Particle data (R >= 3 replicas): weighted non-linear least squares on the
replica mean with the replica standard error as weights; the uncertainty of r
is the jackknife (leave one replica out) standard error (Efron & Tibshirani,
*An Introduction to the Bootstrap*, Chapman & Hall 1993, Ch. 11), which
accounts for the correlation of the noise between output times that the
least-squares covariance would ignore.

Noise-free data (deterministic solver, R = 1): least squares on ln y; the
uncertainty is the standard error of the slope, i.e. it measures how far the
curve is from a single exponential over the window.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import curve_fit


@dataclass(frozen=True)
class DecayFit:
    rate: float
    rate_uncertainty: float
    amplitude: float
    t_first: float
    t_last: float
    n_points: int
    note: str = ""

    @property
    def time(self) -> float:
        """Relaxation time 1 / rate."""
        return 1.0 / self.rate if self.rate > 0 else math.nan

    @property
    def time_uncertainty(self) -> float:
        """Standard uncertainty of 1 / rate (first-order propagation)."""
        return self.rate_uncertainty / self.rate**2 if self.rate > 0 else math.nan


def _nan_fit(note: str) -> DecayFit:
    return DecayFit(math.nan, math.nan, math.nan, math.nan, math.nan, 0, note)


def _window(t, mean, se, t_start, snr, min_fraction):
    idx = np.flatnonzero(t >= t_start)
    if idx.size == 0:
        return np.zeros(0, dtype=int)
    first = idx[0]
    y0 = mean[first]
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


def _weighted_rate(t, y, sigma, t1):
    sign = np.sign(y[0])
    ys = y * sign
    slope, intercept = np.polyfit(t - t1, np.log(ys), 1)
    p0 = (math.exp(intercept), max(-slope, 1e-6))
    popt, _ = curve_fit(
        lambda tt, a, r: a * np.exp(-r * (tt - t1)), t, ys, p0=p0, sigma=sigma, absolute_sigma=True,
        maxfev=2000,
    )
    return float(popt[1]), float(popt[0] * sign)


def fit_decay(t: np.ndarray, curves: np.ndarray, t_start: float = 0.0, snr: float = 5.0,
              min_fraction: float = 0.02, min_points: int = 4) -> DecayFit:
    """Fit an exponential decay to ``curves[R, T]`` sampled at times ``t[T]`` (see module doc)."""
    t = np.asarray(t, dtype=float)
    curves = np.atleast_2d(np.asarray(curves, dtype=float))
    n_rep = curves.shape[0]
    mean = curves.mean(axis=0)
    se = curves.std(axis=0, ddof=1) / math.sqrt(n_rep) if n_rep >= 3 else None
    win = _window(t, mean, se, t_start, snr, min_fraction)
    if win.size < min_points:
        return _nan_fit(f"fewer than {min_points} output times above the noise/threshold after t={t_start:.3g}")
    tw = t[win]
    t1 = tw[0]
    if se is None:
        yw = mean[win]
        sign = np.sign(yw[0])
        coef, cov = np.polyfit(tw - t1, np.log(yw * sign), 1, cov=True) if win.size > 3 else (None, None)
        rate = -float(coef[0])
        unc = float(math.sqrt(max(cov[0, 0], 0.0)))
        return DecayFit(rate, unc, sign * math.exp(coef[1]), float(t1), float(tw[-1]), int(win.size))
    floor = 1e-12 * abs(mean[win[0]])
    sigma = np.maximum(se[win], floor)
    try:
        rate, amp = _weighted_rate(tw, mean[win], sigma, t1)
        jack = []
        for r in range(n_rep):
            sub = np.delete(curves, r, axis=0).mean(axis=0)[win]
            if np.any(sub * np.sign(sub[0]) <= 0):
                continue
            jack.append(_weighted_rate(tw, sub, sigma, t1)[0])
    except (RuntimeError, ValueError) as exc:
        return _nan_fit(f"least-squares fit failed: {exc}")
    jack = np.asarray(jack)
    if jack.size < 2:
        return _nan_fit("jackknife: too few usable replica subsets")
    m = jack.size
    unc = float(math.sqrt((m - 1) / m * np.sum((jack - jack.mean()) ** 2)))
    return DecayFit(rate, unc, amp, float(t1), float(tw[-1]), int(win.size))
