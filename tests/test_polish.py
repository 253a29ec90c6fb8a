"""The vectorised polish of search cells against scipy's least squares."""
import numpy as np
from scipy.optimize import least_squares

from orbweigh.elements import thiele_innes_from_campbell
from orbweigh.ephemeris import orbit_basis
from orbweigh.refine import _box_levenberg_marquardt, polish_cells
from orbweigh.search import Trial, linear_thiele_innes

T = np.linspace(0.0, 4.0, 30)
RNG = np.random.default_rng(3)
DATA = 2.0 * np.exp(-0.7 * T) + 0.01 * RNG.standard_normal(T.size)


def decay_residuals(points):
    """Residuals of y = a exp(-b t), one vector per row (a, b) of points."""
    return (points[:, :1] * np.exp(-points[:, 1:] * T) - DATA) / 0.01


def decay_with_differences(points, h):
    """The residuals at the points and at their forward-difference points (the solver's
    interface)."""
    shifted = points[:, None, :] + np.eye(points.shape[1])[None] * h[:, None, :]
    return (decay_residuals(points),
            decay_residuals(shifted.reshape(-1, points.shape[1])).reshape(len(points), 2, -1))


def reference(start, lo, hi):
    """scipy's bounded trust-region least squares from one start."""
    return least_squares(lambda p: decay_residuals(p[None])[0], start, bounds=(lo, hi),
                         xtol=1e-12, ftol=1e-12).x


def test_every_start_reaches_scipys_minimum():
    # Five starts advanced together, some far off; each must end where scipy ends alone.
    starts = np.array([[1.0, 1.0], [5.0, 0.1], [0.5, 2.0], [2.0, 0.7], [8.0, 3.0]])
    lo, hi = np.full((5, 2), -10.0), np.full((5, 2), 10.0)
    found = _box_levenberg_marquardt(decay_with_differences, starts, lo, hi)
    for k in range(len(starts)):
        np.testing.assert_allclose(found[k], reference(starts[k], lo[k], hi[k]), rtol=1e-3)


def test_a_box_limit_holds_the_step():
    # The decay rate wants about 0.7 but may not exceed 0.5 in the second problem: the
    # solver stops on that limit, as scipy's bounded solver does; the first is free.
    starts = np.array([[1.0, 0.3], [1.0, 0.3]])
    lo, hi = np.zeros((2, 2)), np.array([[10.0, 10.0], [10.0, 0.5]])
    found = _box_levenberg_marquardt(decay_with_differences, starts, lo, hi)
    assert found[1, 1] <= 0.5
    for k in range(2):
        np.testing.assert_allclose(found[k], reference(starts[k], lo[k], hi[k]), rtol=1e-3)


def test_polished_cell_is_the_variable_projection_minimum():
    # The polish differences X and Y to first order from one Kepler solution per point
    # (its own Jacobian); scipy's least squares on the same variable-projection residuals
    # with Kepler solved exactly at every point it asks for is the reference minimum.
    rng = np.random.default_rng(11)
    t = np.sort(rng.uniform(1990.0, 2025.0, 40))
    A, B, F, G = thiele_innes_from_campbell(1.2, *np.radians([60.0, 40.0, 100.0]))
    X, Y = orbit_basis(t, 20.0, 2005.0, 0.4)
    x = A * X + F * Y + 0.01 * rng.standard_normal(t.size)
    y = B * X + G * Y + 0.01 * rng.standard_normal(t.size)
    w = np.full(t.size, 1e4)

    def projected(q):
        basis = orbit_basis(t, np.exp(q[0]), q[2], q[1])
        a, b, f, g, _ = linear_thiele_innes(basis[0][None], basis[1][None], x, y, w)
        return np.concatenate([np.sqrt(w) * (x - a * basis[0] - f * basis[1]),
                               np.sqrt(w) * (y - b * basis[0] - g * basis[1])])

    start = [np.log(20.4), 0.35, 2005.3]
    ref = least_squares(projected, start, bounds=([np.log(2.0), 0.0, 1985.0],
                                                  [np.log(200.0), 0.995, 2025.0]),
                        xtol=1e-14, ftol=1e-14)
    polished = polish_cells([Trial(20.4, 0.35, 2005.3, 0.0)], t, x, y, w, (2.0, 200.0))[0]
    np.testing.assert_allclose(polished.params[:3],
                               [np.exp(ref.x[0]), ref.x[2], ref.x[1]], rtol=1e-6, atol=1e-5)
    np.testing.assert_allclose(polished.chi2, 2.0 * ref.cost, rtol=1e-6)
