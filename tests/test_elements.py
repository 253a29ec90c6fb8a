"""Campbell elements <-> Thiele-Innes constants, the node ambiguity, sense of motion,
published examples, and an independent 3-D rotation-matrix construction of the orbit."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from orbweigh.elements import (
    CampbellElements,
    campbell_from_thiele_innes,
    normalise_node,
    thiele_innes_from_campbell,
)
from orbweigh.ephemeris import ephemeris, orbit_xy
from orbweigh.kepler import eccentric_anomaly, mean_anomaly

EPS = np.finfo(float).eps
TWO_PI = 2.0 * math.pi

semi_axes = st.floats(1e-3, 100.0)
# node and omega, any turn; subnormal angles are pinned in test_half_open_ranges...
angles = st.floats(-TWO_PI, 2 * TWO_PI, allow_subnormal=False)


def circle_diff(x, y):
    """x - y wrapped to (-pi, pi] [rad]."""
    return np.angle(np.exp(1j * (np.asarray(x) - np.asarray(y))))


def reference_normalisation(node, omega):
    """Omega in [0, pi), omega in [0, 2 pi): shift both by k pi (written independently)."""
    k = math.floor(node / math.pi)
    return node - k * math.pi, (omega - k * math.pi) % TWO_PI


# --- round trip ---------------------------------------------------------------------------

def assert_same_orientation(node2, omega2, node, omega, tol):
    """(Omega, omega) equal up to the common 180 deg shift: compare Omega +- omega mod 2 pi.

    Omega = 0 and Omega = 180 - 1 ulp are the same node, hence no test on Omega alone.
    The ranges are checked closed: the half-open ends are pinned in a separate test.
    """
    assert 0.0 <= node2 <= math.pi and 0.0 <= omega2 <= TWO_PI
    assert abs(circle_diff(node2 + omega2, node + omega)) <= tol
    assert abs(circle_diff(node2 - omega2, node - omega)) <= tol


def assert_round_trip(a, i, node, omega, i_tol, node_tol, a_rtol):
    a2, i2, node2, omega2 = campbell_from_thiele_innes(
        *thiele_innes_from_campbell(a, i, node, omega))
    assert abs(a2 / a - 1.0) <= a_rtol
    assert abs(i2 - i) <= i_tol
    assert_same_orientation(node2, omega2, node, omega, node_tol)


@settings(max_examples=400, deadline=None)
@given(semi_axes, st.floats(math.radians(2.0), math.radians(178.0)), angles, angles)
def test_round_trip_campbell_thiele_innes(a, i, node, omega):
    # 1e-9 rad is far below any measurement's precision; see the strict test below for
    # the floating-point limit near face-on orbits.
    assert_round_trip(a, i, node, omega, i_tol=1e-9, node_tol=1e-9, a_rtol=1e-12)


@settings(max_examples=300, deadline=None)
@given(semi_axes, st.floats(math.radians(0.01), math.radians(179.99)), angles, angles)
def test_round_trip_at_floating_point_limit(a, i, node, omega):
    # What the data allow (error analysis of the forward formulas, no source): A..G carry
    # absolute errors ~ a eps, a(1 -+ cos i) is then known to ~ a eps, so
    # |di| ~ eps / sin i, and Omega -+ omega (from atan2 of a(1 -+ cos i) terms) to
    # ~ eps / (1 - |cos i|).
    s = math.sin(i)
    assert_round_trip(a, i, node, omega, i_tol=32 * EPS / s,
                      node_tol=32 * EPS / (1 - abs(math.cos(i))), a_rtol=16 * EPS)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.floats(-10.0, 10.0), min_size=4, max_size=4).filter(
    lambda v: max(map(abs, v)) > 1e-3))
def test_round_trip_thiele_innes_campbell(abfg):
    # Any four constants are an orbit: a is the larger singular value of [[A, F], [B, G]].
    back = thiele_innes_from_campbell(*campbell_from_thiele_innes(*abfg))
    scale = max(map(abs, abfg))
    # loose: near |cos i| = 1 the inverse loses digits (strict version below)
    assert np.allclose(back, abfg, rtol=0, atol=1e-7 * scale)


def test_round_trip_thiele_innes_campbell_exact():
    abfg = [0.0, 1.75, 1.75, 5.960464477539063e-08]   # found by hypothesis: i ~ 180 deg
    back = thiele_innes_from_campbell(*campbell_from_thiele_innes(*abfg))
    assert np.allclose(back, abfg, rtol=0, atol=1e-12 * 1.75)


@pytest.mark.parametrize("i_deg", [0.0, 180.0])
@settings(max_examples=100, deadline=None)
@given(a=semi_axes, node=angles, omega=angles, shift=angles)
def test_degenerate_inclination(i_deg, a, node, omega, shift):
    # At i = 0 only Omega + omega is defined, at i = 180 deg only omega - Omega
    # (the orbit plane is the sky plane; geometry, common practice, no source).
    i = math.radians(i_deg)
    s = 1.0 if i_deg == 0.0 else -1.0
    abfg = thiele_innes_from_campbell(a, i, node, omega)
    assert np.allclose(thiele_innes_from_campbell(a, i, node + shift, omega - s * shift),
                       abfg, rtol=0, atol=1e-14 * a)  # sin, cos of angles up to ~20 rad
    a2, i2, node2, omega2 = campbell_from_thiele_innes(*abfg)
    assert abs(circle_diff(omega2 + s * node2, omega + s * node)) <= 1e-12
    # a and i: loose bounds here, the floating-point limit is in the strict test below
    assert abs(a2 / a - 1.0) < 1e-7 and abs(i2 - i) < 1e-3


def test_degenerate_inclination_a_and_i_exact():
    rng = np.random.default_rng(7)  # seed 7
    a = 10 ** rng.uniform(-3, 2, 1000)
    node, omega = rng.uniform(0, TWO_PI, (2, 1000))
    for i in (0.0, math.pi):
        a2, i2, _, _ = campbell_from_thiele_innes(*thiele_innes_from_campbell(a, i, node,
                                                                              omega))
        assert np.max(np.abs(a2 / a - 1.0)) <= 16 * EPS
        # at i = 0, 1 - cos i ~ i^2 / 2 is known to ~eps, so i itself only to ~sqrt(eps)
        assert np.max(np.abs(i2 - i)) <= 4 * math.sqrt(EPS)


# --- the 180 deg node ambiguity ----------------------------------------------------------

@settings(max_examples=200, deadline=None)
@given(semi_axes, st.floats(0.0, math.pi), angles, angles)
def test_node_ambiguity_same_constants(a, i, node, omega):
    # (Omega + 180, omega + 180) flips the signs of both cos and sin of each angle, so
    # every product in A, B, F, G is unchanged (Heintz, Double Stars, 1978, ch. 4, memory).
    one = thiele_innes_from_campbell(a, i, node, omega)
    two = thiele_innes_from_campbell(a, i, node + math.pi, omega + math.pi)
    assert np.allclose(one, two, rtol=0, atol=1e-14 * a)


@settings(max_examples=200, deadline=None)
@given(angles, angles)
def test_normalise_node(node, omega):
    n2, w2 = normalise_node(node, omega)
    n_ref, w_ref = reference_normalisation(node, omega)
    assert_same_orientation(n2, w2, n_ref, w_ref, 1e-12)


def test_half_open_ranges_at_rounding_edges():
    # Cases found by hypothesis above.
    _, w = normalise_node(0.0, -5.499745249025908e-95)
    assert w < TWO_PI
    node, _ = normalise_node(-5e-324, 0.0)
    assert node >= 0.0
    _, _, node, _ = campbell_from_thiele_innes(*thiele_innes_from_campbell(1.0, 1.0, 0.0, 1.0))
    assert node < math.pi


def test_normalise_node_edges():
    # Omega = 180 exactly becomes 0 with omega shifted by 180; Omega = -10 becomes 170.
    n, w = normalise_node(math.pi, 0.5)
    assert n == 0.0 and w == pytest.approx(0.5 + math.pi, abs=1e-15)
    n, w = normalise_node(math.radians(-10.0), math.radians(30.0))
    assert math.degrees(n) == pytest.approx(170.0, abs=1e-12)
    assert math.degrees(w) == pytest.approx(210.0, abs=1e-12)


def test_elements_normalised_same_orbit():
    el = CampbellElements(41.623, 1934.008, 0.2763, 0.907, 59.025, 203.717, 39.907)
    norm = el.normalised()
    assert norm.node_deg == pytest.approx(23.717, abs=1e-12)
    assert norm.omega_deg == pytest.approx(219.907, abs=1e-12)
    t = np.linspace(1900, 2000, 17)
    a, b = ephemeris(el, t), ephemeris(norm, t)
    assert np.allclose(a.x_arcsec, b.x_arcsec, atol=1e-14)
    assert np.allclose(a.y_arcsec, b.y_arcsec, atol=1e-14)


# --- sense of motion ----------------------------------------------------------------------

def winding(el, n=4001):
    """Signed angle swept by theta over one period [deg], and the signs of each step."""
    t = el.periastron_yr + el.period_yr * np.linspace(0.0, 1.0, n)
    eph = ephemeris(el, t)
    x, y = eph.x_arcsec, eph.y_arcsec
    cross = x[:-1] * y[1:] - y[:-1] * x[1:]    # > 0: turning from North toward East
    return np.degrees(np.sum(np.arctan2(cross, x[:-1] * x[1:] + y[:-1] * y[1:]))), cross


orbit_shapes = dict(P=st.floats(1.0, 500.0), T=st.floats(1900.0, 2100.0),
                    e=st.floats(0.0, 0.9), a=semi_axes, node=st.floats(0.0, 360.0),
                    omega=st.floats(0.0, 360.0))


@settings(max_examples=60, deadline=None)
@given(i=st.floats(1.0, 88.0), **orbit_shapes)
def test_direct_motion_below_90(P, T, e, a, i, node, omega):
    # i < 90 deg: theta increases with time (Aitken, The Binary Stars, 1935, ch. 3, memory)
    sweep, cross = winding(CampbellElements(P, T, e, a, i, node, omega))
    assert np.all(cross > 0)
    assert sweep == pytest.approx(360.0, abs=1e-6)


@settings(max_examples=60, deadline=None)
@given(i=st.floats(92.0, 179.0), **orbit_shapes)
def test_retrograde_motion_above_90(P, T, e, a, i, node, omega):
    sweep, cross = winding(CampbellElements(P, T, e, a, i, node, omega))
    assert np.all(cross < 0)
    assert sweep == pytest.approx(-360.0, abs=1e-6)


# --- published example --------------------------------------------------------------------

# Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 57, Example 57.a (secondary)
MEEUS = CampbellElements(41.623, 1934.008, 0.2763, 0.907, 59.025, 23.717, 219.907)


def test_meeus_57a_through_ephemeris():
    eph = ephemeris(MEEUS, 1980.0)
    M = mean_anomaly(1980.0, MEEUS.period_yr, MEEUS.periastron_yr)
    # Meeus 1998, ch. 57, Ex. 57.a: M = 37.788, E = 49.896, theta = 318.4 deg,
    # rho = 0.411" (book rounding). The book's decimal years are used as given: the
    # Julian/Besselian year lengths differ by 2e-5, ~0.001 deg here.
    assert math.degrees(M) == pytest.approx(37.788, abs=5e-4)
    assert math.degrees(eccentric_anomaly(M, MEEUS.e)) == pytest.approx(49.896, abs=5e-4)
    assert eph.theta_deg[0] == pytest.approx(318.4, abs=0.05)
    assert eph.rho_arcsec[0] == pytest.approx(0.411, abs=5e-4)


def test_meeus_57b_apparent_eccentricity():
    # The apparent orbit is the image of the circle (cos E, sin E) under
    # [[A, F], [B, G]] diag(1, sqrt(1 - e^2)) (plus a shift): its semi-axes are that
    # matrix's singular values.
    A, B, F, G = MEEUS.thiele_innes()
    s = np.linalg.svd(np.array([[A, F], [B, G]]) @ np.diag([1.0, math.sqrt(1 - MEEUS.e**2)]),
                      compute_uv=False)
    e_apparent = math.sqrt(1.0 - (s[1] / s[0]) ** 2)
    # Meeus 1998, ch. 57, Example 57.b: e' = 0.860 (secondary)
    assert e_apparent == pytest.approx(0.860, abs=5e-4)


# --- independent construction with 3-D rotation matrices ---------------------------------

def rotation_xyz(el):
    """R_z(Omega) R_x(i) R_z(omega) as active rotations, from astropy's matrices.

    Frame: right-handed (x, y, z) = (North, East, z = North x East), so z points from the
    pair TOWARD the observer. A positive rotation about z turns North toward East, so the
    node's unit vector (1, 0, 0) goes to position angle Omega, and i < 90 deg gives a
    counter-clockwise (North->East) motion: direct. astropy's ``rotation_matrix`` rotates
    the coordinate frame (passive), hence the transposes. The z-sign of the node only
    matters for radial velocities, not for x, y.
    """
    from astropy.coordinates.matrix_utilities import rotation_matrix

    def active(angle_deg, axis):
        return rotation_matrix(angle_deg, axis, unit="deg").T
    return active(el.node_deg, "z") @ active(el.i_deg, "x") @ active(el.omega_deg, "z")


@settings(max_examples=80, deadline=None)
@given(P=st.floats(5.0, 500.0), T=st.floats(1900.0, 2100.0), e=st.floats(0.0, 0.95),
       a=semi_axes, i=st.floats(0.0, 180.0), node=st.floats(0.0, 360.0),
       omega=st.floats(0.0, 360.0))
def test_rotation_matrices_match_orbit_xy(P, T, e, a, i, node, omega):
    el = CampbellElements(P, T, e, a, i, node, omega)
    # Epochs from chosen E (Kepler's equation forward, no root solving): M = E - e sin E.
    E = np.linspace(-3.0, 9.5, 25)
    t = T + P * (E - e * np.sin(E)) / TWO_PI
    q = 1.0 - e * np.cos(E)
    cos_nu, sin_nu = (np.cos(E) - e) / q, math.sqrt(1 - e * e) * np.sin(E) / q
    r = a * q
    in_plane = np.vstack([r * cos_nu, r * sin_nu, np.zeros_like(r)])  # x toward periastron
    north, east, _ = rotation_xyz(el) @ in_plane
    x, y = orbit_xy(t, P, T, e, *el.thiele_innes())
    # t carries ~1e-13 yr of rounding, magnified by dE/dM <= 1/(1 - e) = 20
    assert np.allclose(x, north, rtol=0, atol=1e-10 * a)
    assert np.allclose(y, east, rtol=0, atol=1e-10 * a)


def test_rotation_matrices_reproduce_meeus_57a():
    # The same independent construction at Meeus' epoch: theta 318.4, rho 0.411"
    # (Meeus 1998, ch. 57, Ex. 57.a, secondary); E = 49.896 deg is the book's value.
    E = math.radians(49.896)
    e, a = MEEUS.e, MEEUS.a_arcsec
    nu = math.atan2(math.sqrt(1 - e * e) * math.sin(E), math.cos(E) - e)
    r = a * (1 - e * math.cos(E))
    north, east, _ = rotation_xyz(MEEUS) @ [r * math.cos(nu), r * math.sin(nu), 0.0]
    assert math.degrees(math.atan2(east, north)) % 360 == pytest.approx(318.4, abs=0.05)
    assert math.hypot(north, east) == pytest.approx(0.411, abs=5e-4)


def test_centre_angles_across_the_seam():
    # Draws around Omega = 0.2 deg wrapped into [0, 360): centred on the best value they
    # form one cloud, and the 68 % interval crosses 0 (the median is the cloud's centre).
    from orbweigh.elements import centre_angles

    rng = np.random.default_rng(3)
    node = np.mod(0.2 + rng.normal(0.0, 0.3, 4000), 360.0)
    omega = np.mod(359.8 + rng.normal(0.0, 0.3, 4000), 360.0)
    node_c, omega_c = centre_angles(node, omega, 0.2, 359.8, 360.0)
    low, med, high = np.percentile(node_c, [16, 50, 84])
    assert low < 0.0 < high and med == pytest.approx(0.2, abs=0.03)
    assert np.percentile(omega_c, 50) == pytest.approx(359.8, abs=0.03)
    assert np.ptp(omega_c) < 5.0
    # Without velocities (Omega, omega) -> (Omega + 180, omega + 180) is the same orbit:
    # a draw on the other node comes back with both angles shifted together.
    node_c, omega_c = centre_angles([180.3], [179.8], 0.2, 359.8, 180.0)
    assert node_c[0] == pytest.approx(0.3) and omega_c[0] == pytest.approx(359.8)
