"""The vectorised polish of search cells against scipy's least squares."""
import numpy as np
from scipy.optimize import least_squares

from orbweigh.refine import _box_levenberg_marquardt

T = np.linspace(0.0, 4.0, 30)
RNG = np.random.default_rng(3)
DATA = 2.0 * np.exp(-0.7 * T) + 0.01 * RNG.standard_normal(T.size)


def decay_residuals(points):
    """Residuals of y = a exp(-b t), one vector per row (a, b) of points."""
    return (points[:, :1] * np.exp(-points[:, 1:] * T) - DATA) / 0.01


def reference(start, lo, hi):
    """scipy's bounded trust-region least squares from one start."""
    return least_squares(lambda p: decay_residuals(p[None])[0], start, bounds=(lo, hi),
                         xtol=1e-12, ftol=1e-12).x


def test_every_start_reaches_scipys_minimum():
    # Five starts advanced together, some far off; each must end where scipy ends alone.
    starts = np.array([[1.0, 1.0], [5.0, 0.1], [0.5, 2.0], [2.0, 0.7], [8.0, 3.0]])
    lo, hi = np.full((5, 2), -10.0), np.full((5, 2), 10.0)
    found = _box_levenberg_marquardt(decay_residuals, starts, lo, hi)
    for k in range(len(starts)):
        np.testing.assert_allclose(found[k], reference(starts[k], lo[k], hi[k]), rtol=1e-3)


def test_a_box_limit_holds_the_step():
    # The decay rate wants about 0.7 but may not exceed 0.5 in the second problem: the
    # solver stops on that limit, as scipy's bounded solver does; the first is free.
    starts = np.array([[1.0, 0.3], [1.0, 0.3]])
    lo, hi = np.zeros((2, 2)), np.array([[10.0, 10.0], [10.0, 0.5]])
    found = _box_levenberg_marquardt(decay_residuals, starts, lo, hi)
    assert found[1, 1] <= 0.5
    for k in range(2):
        np.testing.assert_allclose(found[k], reference(starts[k], lo[k], hi[k]), rtol=1e-3)
