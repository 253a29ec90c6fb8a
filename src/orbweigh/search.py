"""Global search over (P, e, T) with the Thiele-Innes constants solved linearly.

For fixed (P, e, T) the positions are linear in (A, B, F, G):
x = A X + F Y, y = B X + G Y, with X = cos E - e, Y = sqrt(1 - e^2) sin E.
With one weight w per point for both coordinates the weighted least-squares solution
needs seven weighted sums and a 2x2 inverse, which numpy evaluates for hundreds of
thousands of trials at once. X and Y are looked up in tables over a fine grid of the
mean anomaly, so Kepler's equation is solved only once per table entry.

For each (point, period, phase) the table step comes from one floor; one gather of a
table row then brings X and Y, and the products X X, X Y, Y Y, of every eccentricity at
once, and one matrix product with the weights gives the seven sums of all cells (measured
per 50-point search, benchmarks/bench_grid.py: about 13 -> 8 ms of CPU against a modulo per
cell, two gathers per trial and point, the products formed per trial). The phases stay k / 12,
not whole table steps: with whole steps every phase of e = 0 scores the same up to
rounding, and the arbitrary T of that tie decided whether the polish left e = 0 (it did
not for the circular pair of tests/test_combined.py).
"""
from __future__ import annotations

import functools
import math
import threading
from dataclasses import dataclass

import numpy as np

from .kepler import eccentric_anomaly

__all__ = ["SearchGrid", "Trial", "linear_thiele_innes", "isotropic_weights",
           "default_period_range", "grid_search"]

_MEAN_ANOMALY_STEPS = 1024
_ECCENTRICITIES = np.array([0.0, 0.25, 0.5, 0.7, 0.85, 0.93, 0.97])
_PHASE_STEPS = 12
_PHASE_TOLERANCE = 0.08       # largest phase slip across the data span between P steps
# A coarse grid only has to land in the right basin: the polish and the full refinement
# do the rest. These sizes were tuned with benchmarks/bench_fit.py (found rate unchanged
# against a grid four times finer).
_MAX_PERIOD_STEPS = 20000
_CHUNK_ELEMENTS = 150_000     # trials x points per numpy pass (benchmarks/bench_grid.py: 100,000
                              # to 300,000 equally fast; 3,000,000 twice as slow, out of cache)


@dataclass(frozen=True)
class Trial:
    """One cell of the search: period [yr], eccentricity, periastron [Julian yr], chi2."""

    period: float
    e: float
    t_peri: float
    chi2: float


@dataclass(frozen=True)
class SearchGrid:
    """The trial grid and its chi2 profile over period (best over e and T)."""

    periods: np.ndarray
    profile_chi2: np.ndarray
    n_trials: int


def isotropic_weights(rho, sigma_rho, sigma_theta_rad):
    """One weight per point for x and y: 1 / mean of the radial and tangential variances."""
    return 2.0 / (sigma_rho**2 + (rho * sigma_theta_rad) ** 2)


def linear_thiele_innes(X, Y, x, y, w):
    """Weighted linear solve of x = A X + F Y, y = B X + G Y over the last axis.

    X, Y may carry leading trial axes; x, y, w are per point (the polish passes float64).
    Returns (A, B, F, G, chi2) with the trial shape.
    """
    rhs = np.column_stack([w * x, w * y])
    xw, yw = X @ rhs, Y @ rhs              # [..., 0]: sums with w x; [..., 1]: with w y
    A, B, F, G, fitted = _solve_sums((X * X) @ w, (X * Y) @ w, (Y * Y) @ w,
                                     xw[..., 0], xw[..., 1], yw[..., 0], yw[..., 1])
    return A, B, F, G, np.maximum(_data_sum_of_squares(x, y, w) - fitted, 0.0)


def _solve_sums(sxx, sxy, syy, xX, yX, xY, yY):
    """A, B, F, G and the fitted sum of squares from the seven weighted sums.

    sxx = sum w X X, sxy = sum w X Y, syy = sum w Y Y; xX = sum w x X, yX = sum w y X,
    xY = sum w x Y, yY = sum w y Y. A singular 2x2 system gives zeros.
    """
    det = sxx * syy - sxy**2
    det = np.where(np.abs(det) > 0, det, np.inf)
    A = (syy * xX - sxy * xY) / det
    F = (sxx * xY - sxy * xX) / det
    B = (syy * yX - sxy * yY) / det
    G = (sxx * yY - sxy * yX) / det
    return A, B, F, G, A * xX + F * xY + B * yX + G * yY


def _data_sum_of_squares(x, y, w):
    x, y, w = (np.asarray(v, np.float64) for v in (x, y, w))
    return float(np.dot(w * x, x) + np.dot(w * y, y))


def default_period_range(t):
    """Period range [yr] derived from the sampling of epochs ``t`` [yr].

    Shortest: twice the median interval between distinct epochs (shorter periods are
    aliased by the sampling), but at least 0.5 yr. Longest: 20 times the time span (an
    arc of a few per cent of an orbit constrains little beyond that). Common practice,
    no single source.
    """
    epochs = np.unique(np.round(np.asarray(t, float), 3))
    span = max(float(epochs[-1] - epochs[0]), 0.1)
    gaps = np.diff(epochs)
    shortest = max(2.0 * float(np.median(gaps)) if gaps.size else 0.5, 0.5)
    return min(shortest, span / 2.0), 20.0 * span


def _period_grid(pmin, pmax, span):
    """Log grid whose step slips the phase by at most _PHASE_TOLERANCE over the span."""
    periods = [pmin]
    while periods[-1] < pmax and len(periods) < _MAX_PERIOD_STEPS:
        p = periods[-1]
        periods.append(p * (1.0 + _PHASE_TOLERANCE * p / max(span, 1e-3)))
    return np.array(periods[:-1] + [pmax]) if periods[-1] > pmax else np.array(periods)


@functools.lru_cache(maxsize=8)
def _anomaly_tables(eccentricities):
    """Tables over the mean-anomaly grid, one row per grid step, float32.

    ``basis`` has the columns X for each eccentricity (a tuple), then Y for each;
    ``products`` the columns X X, X Y, Y Y, each for every eccentricity. Kept between
    searches: the default grid is the same for every fit of a batch.
    """
    e = np.array(eccentricities)
    mean_anom = 2.0 * np.pi * np.arange(_MEAN_ANOMALY_STEPS) / _MEAN_ANOMALY_STEPS
    E = eccentric_anomaly(mean_anom[:, None], e[None, :])
    X, Y = np.cos(E) - e, np.sqrt(1.0 - e**2) * np.sin(E)
    tables = [np.hstack([X, Y]).astype(np.float32),
              np.hstack([X * X, X * Y, Y * Y]).astype(np.float32)]
    for table in tables:
        table.flags.writeable = False
    return tuple(tables)


def grid_search(t, x, y, w, period_range, n_best=12, e=None, t_peri=None):
    """Scan the (P, e, T) grid and return the best trials at distinct periods.

    Parameters
    ----------
    t, x, y, w : ndarray
        Epochs [Julian yr], positions [arcsec] and isotropic weights [arcsec^-2].
    period_range : (float, float)
        Shortest and longest trial period [yr].
    n_best : int
        Number of local minima of the chi2-versus-period profile to return.
    e, t_peri : float, optional
        Held eccentricity and periastron epoch [Julian yr]: the grid then has only that
        eccentricity, or only that phase at each period.

    Returns
    -------
    trials : list of Trial
        Best cell of each of the n_best deepest local minima over period, best first.
    grid : SearchGrid
    """
    t0 = float(np.average(t, weights=w)) if t_peri is None else float(t_peri)
    dt = t - t0
    steps = _MEAN_ANOMALY_STEPS
    periods = _period_grid(*period_range, span=float(np.ptp(t)))
    eccentricities = _ECCENTRICITIES if e is None else np.array([float(e)])
    basis, products = _anomaly_tables(tuple(map(float, eccentricities)))
    phases = np.arange(_PHASE_STEPS if t_peri is None else 1) / _PHASE_STEPS
    n_e, n_phase, n = len(eccentricities), len(phases), len(t)
    chunk = max(1, _CHUNK_ELEMENTS // (n_e * n_phase * n))
    best_chi2 = np.empty(len(periods))
    best_cell = np.empty((len(periods), 2), int)
    # The weighted sums in float32 halve the memory traffic; the coarse chi2 only has to
    # rank cells (refinement recomputes everything in float64). The 2x2 solves, one per
    # cell, take the sums in float64: extreme weights cannot overflow them.
    x32, y32, w32 = (np.asarray(v, np.float32) for v in (x, y, w))
    rhs = np.stack([w32 * x32, w32 * y32])
    total = _data_sum_of_squares(x, y, w)
    for start in range(0, len(periods), chunk):
        p = periods[start:start + chunk]
        # Table step floor(steps * ((dt / p - phase) mod 1)); steps is a power of two, so
        # the scaling is exact and the modulo can follow the floor on integers.
        cycles = _BUFFERS.get("cycles", (n, len(p), n_phase), np.float64)
        np.subtract((dt[:, None] / p)[:, :, None], phases, out=cycles)   # (point, P, phase)
        np.multiply(cycles, steps, out=cycles)
        np.floor(cycles, out=cycles)
        row = _BUFFERS.get("row", (n, len(p) * n_phase), np.intp)
        np.copyto(row, cycles.reshape(n, -1), casting="unsafe")
        np.bitwise_and(row, steps - 1, out=row)
        xy = rhs @ _table_rows(basis, row).reshape(n, -1)   # w x, w y times X, Y
        xy = xy.reshape(2, len(p), n_phase, 2, n_e).astype(np.float64)
        sq = w32 @ _table_rows(products, row).reshape(n, -1)   # w XX, XY, YY
        sq = sq.reshape(len(p), n_phase, 3, n_e).astype(np.float64)
        fitted = _solve_sums(sq[:, :, 0], sq[:, :, 1], sq[:, :, 2], xy[0, :, :, 0],
                             xy[1, :, :, 0], xy[0, :, :, 1], xy[1, :, :, 1])[4]
        chi2 = np.maximum(total - fitted, 0.0).transpose(0, 2, 1)   # (P, e, phase)
        flat = chi2.reshape(len(p), -1)
        k = np.argmin(flat, axis=1)
        best_chi2[start:start + chunk] = flat[np.arange(len(p)), k]
        best_cell[start:start + chunk] = np.column_stack(np.unravel_index(k, (n_e, n_phase)))
    minima = _profile_minima(best_chi2)[:n_best]
    trials = [Trial(period=float(periods[j]), e=float(eccentricities[best_cell[j, 0]]),
                    t_peri=t0 + phases[best_cell[j, 1]] * periods[j],
                    chi2=float(best_chi2[j]))
              for j in minima]
    n_trials = len(periods) * n_e * n_phase
    return trials, SearchGrid(periods, best_chi2, n_trials)


class _Buffers(threading.local):
    """The search's largest arrays, reused from chunk to chunk and search to search in
    this thread (about 2 MB, kept). Made afresh, each (0.2 to 2 MB) is mapped and unmapped
    by malloc wherever its adaptive threshold is off, as in a Dask worker
    (MALLOC_TRIM_THRESHOLD_ set by its nanny), and every page of it faults. Measured per
    search (40 catalogue logs): 4.5 ms of CPU, and 14.0 with that variable set; with the
    buffers 4.5 and 5.7."""

    def get(self, name, shape, dtype):
        size = math.prod(shape)
        buffer = self.__dict__.get(name)
        if buffer is None or buffer.size < size or buffer.dtype != dtype:
            buffer = self.__dict__[name] = np.empty(size, dtype)
        return buffer[:size].reshape(shape)


_BUFFERS = _Buffers()


def _table_rows(table, row):
    """table[row] for a (point, cell) index array, in this thread's one buffer for it
    (both tables take turns: two buffers would hold twice the cache and ran slower).

    mode='wrap' (the indices are in range already): with the default 'raise' numpy
    writes into a temporary first."""
    out = _BUFFERS.get("rows", row.shape + table.shape[1:], table.dtype)
    return np.take(table, row, axis=0, out=out, mode="wrap")


def _profile_minima(profile):
    """Indices of the local minima of a 1-D profile, deepest first."""
    left = np.r_[np.inf, profile[:-1]]
    right = np.r_[profile[1:], np.inf]
    idx = np.flatnonzero((profile <= left) & (profile <= right))
    return idx[np.argsort(profile[idx])]
