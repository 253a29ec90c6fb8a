"""The fitted model's residuals and their analytic Jacobian."""
import numpy as np
import pytest

from orbweigh.model import normalised_residuals, residual_jacobian, wrap_degrees


@pytest.mark.parametrize("e", [0.01, 0.3, 0.9, 0.97])  # e - h must stay >= 0
def test_analytic_jacobian_matches_central_differences(e):
    # Reference: central finite differences of the residuals themselves (independent of
    # the hand-derived chain rule in residual_jacobian).
    rng = np.random.default_rng(11)
    t = np.sort(rng.uniform(1900, 2000, 40))
    params = np.array([41.6, 1934.0, e, 0.6, 0.3, 0.1, 0.7])
    theta, rho = rng.uniform(0, 360, 40), rng.uniform(0.1, 1, 40)
    sig_t, sig_r = np.full(40, 0.5), np.full(40, 0.01)

    def resid(q):
        r_t, r_r, _, _ = normalised_residuals(q, t, theta, rho, sig_t, sig_r)
        return np.concatenate([r_t, r_r])

    numeric = np.empty((80, 7))
    for k in range(7):
        h = 1e-6 * max(1.0, abs(params[k]))
        up, down = params.copy(), params.copy()
        up[k] += h
        down[k] -= h
        numeric[:, k] = (resid(up) - resid(down)) / (2 * h)
    analytic = residual_jacobian(params, t, sig_t, sig_r)
    assert np.allclose(analytic, numeric, rtol=1e-5, atol=1e-4 * np.abs(numeric).max())


def test_wrap_degrees_half_open_interval():
    assert wrap_degrees(180.0) == 180.0
    assert wrap_degrees(-180.0) == 180.0
    assert wrap_degrees(190.0) == pytest.approx(-170.0)
    assert wrap_degrees(359.0) == pytest.approx(-1.0)
