"""Campbell elements and Thiele-Innes constants of an apparent (relative) orbit.

Conventions (those of the trade):

* theta counts from North through East; x = rho cos theta (North), y = rho sin theta (East).
* i < 90 deg is direct motion (theta increasing), i > 90 deg retrograde.
* A = a( cos w cos W - sin w sin W cos i),  B = a( cos w sin W + sin w cos W cos i),
  F = a(-sin w cos W - cos w sin W cos i),  G = a(-sin w sin W + cos w cos W cos i),
  with W the node Omega and w the periastron argument omega.
* Positions alone fix (Omega, omega) only up to a common 180 deg shift; without radial
  velocities Omega is reported in [0, 180) deg.
* A circular orbit (e held at 0, omega and T free) has no periastron: the position
  depends on T and omega only through omega + 2 pi (t - T) / P. By convention omega is
  then held at 0 and T is the epoch of passage through the node Omega
  (``held_elements``; common practice, no source).

The vectorised functions work in radians; ``CampbellElements`` holds the public values
in the units its field names state.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

__all__ = [
    "CampbellElements",
    "ELEMENT_KEYS",
    "ELEMENT_UNITS",
    "thiele_innes_from_campbell",
    "campbell_from_thiele_innes",
    "normalise_node",
    "wrap_degrees",
    "centre_angles",
    "held_angles_as_reported",
    "CIRCULAR_NOTE",
    "convention_held",
    "held_elements",
    "phase_in_periastron",
    "turn_node",
    "nearest_passage",
]

#: Keys of the elements in result documents, in the order used everywhere.
ELEMENT_KEYS = ("P", "T", "e", "a", "i", "Omega", "omega")
ELEMENT_UNITS = {"P": "yr", "T": "yr", "e": "", "a": "arcsec",
                 "i": "deg", "Omega": "deg", "omega": "deg"}
_FIELDS = ("period_yr", "periastron_yr", "e", "a_arcsec", "i_deg", "node_deg", "omega_deg")


@dataclass(frozen=True)
class CampbellElements:
    """The seven Campbell elements of an apparent orbit.

    Attributes
    ----------
    period_yr : float
        Period P [Julian years of 365.25 d].
    periastron_yr : float
        Epoch of periastron T, as a decimal Julian year (J2000.0 = 2000.0).
    e : float
        Eccentricity, 0 <= e < 1.
    a_arcsec : float
        Angular semi-major axis a [arcsec].
    i_deg : float
        Inclination i [deg], 0..180; < 90 direct, > 90 retrograde.
    node_deg : float
        Position angle of the ascending node Omega [deg].
    omega_deg : float
        Argument of periastron omega [deg], measured in the orbit plane from the node.
    """

    period_yr: float
    periastron_yr: float
    e: float
    a_arcsec: float
    i_deg: float
    node_deg: float
    omega_deg: float

    def __post_init__(self):
        if not self.period_yr > 0:
            raise ValueError(f"period must be positive, got {self.period_yr}")
        if not 0 <= self.e < 1:
            raise ValueError(f"eccentricity must satisfy 0 <= e < 1, got {self.e}")
        if not self.a_arcsec > 0:
            raise ValueError(f"semi-major axis must be positive, got {self.a_arcsec}")

    @classmethod
    def from_keys(cls, values):
        """Build from a mapping with the trade's keys P, T, e, a, i, Omega, omega."""
        return cls(*(float(values[k]) for k in ELEMENT_KEYS))

    def to_keys(self):
        """Mapping with the trade's keys P, T, e, a, i, Omega, omega."""
        return dict(zip(ELEMENT_KEYS, (getattr(self, f) for f in _FIELDS)))

    def as_tuple(self):
        return tuple(asdict(self)[f] for f in _FIELDS)

    def thiele_innes(self):
        """(A, B, F, G) in arcsec."""
        return thiele_innes_from_campbell(
            self.a_arcsec, *np.radians([self.i_deg, self.node_deg, self.omega_deg]))

    def normalised(self):
        """Same orbit with Omega in [0, 180) and omega in [0, 360) (node ambiguity)."""
        node, omega = normalise_node(np.radians(self.node_deg), np.radians(self.omega_deg))
        return CampbellElements(self.period_yr, self.periastron_yr, self.e, self.a_arcsec,
                                self.i_deg, float(np.degrees(node)), float(np.degrees(omega)))


def thiele_innes_from_campbell(a, i, node, omega):
    """Thiele-Innes constants (A, B, F, G) from a and the angles i, Omega, omega [rad]."""
    cw, sw, cn, sn, ci = np.cos(omega), np.sin(omega), np.cos(node), np.sin(node), np.cos(i)
    A = a * (cw * cn - sw * sn * ci)
    B = a * (cw * sn + sw * cn * ci)
    F = a * (-sw * cn - cw * sn * ci)
    G = a * (-sw * sn + cw * cn * ci)
    return A, B, F, G


def campbell_from_thiele_innes(A, B, F, G):
    """Invert the Thiele-Innes constants.

    Returns
    -------
    a, i, node, omega
        a in the unit of A..G; angles [rad], i in [0, pi], node in [0, pi),
        omega in [0, 2 pi).

    Notes
    -----
    A + G = a(1 + cos i) cos(w + W),  B - F = a(1 + cos i) sin(w + W),
    A - G = a(1 - cos i) cos(w - W), -B - F = a(1 - cos i) sin(w - W),
    so both sums come from atan2 without quadrant guessing, and with
    p = a(1 + cos i), q = a(1 - cos i) the hypotenuses of those pairs:
    a = (p + q)/2 and tan(i/2) = sqrt(q/p).
    """
    A, B, F, G = (np.asarray(v, float) for v in (A, B, F, G))
    # p = a(1 + cos i) and q = a(1 - cos i) from the same sums as the angles: no
    # cancellation near face-on orbits, unlike a^2 = k + sqrt(k^2 - j^2).
    p = np.hypot(A + G, B - F)
    q = np.hypot(A - G, B + F)
    a = 0.5 * (p + q)
    i = 2.0 * np.arctan2(np.sqrt(q), np.sqrt(p))
    w_plus = np.arctan2(B - F, A + G)
    w_minus = np.arctan2(-B - F, A - G)
    node, omega = normalise_node(0.5 * (w_plus - w_minus), 0.5 * (w_plus + w_minus))
    return a, i, node, omega


def normalise_node(node, omega):
    """Shift (Omega, omega) together by 180 deg so that Omega lies in [0, pi).

    The apparent orbit is unchanged by the common shift; omega is returned in [0, 2 pi).
    """
    node = np.asarray(node, float)
    omega = np.asarray(omega, float)
    shift = np.floor(node / np.pi) * np.pi
    node, omega = node - shift, omega - shift
    wrap = node >= np.pi                       # rounding can land exactly on pi
    node = np.maximum(np.where(wrap, node - np.pi, node), 0.0)
    omega = np.mod(np.where(wrap, omega - np.pi, omega), 2.0 * np.pi)
    return node, np.where(omega >= 2.0 * np.pi, 0.0, omega)


def wrap_degrees(angle):
    """Wrap an angle difference [deg] into (-180, 180]."""
    return 180.0 - np.mod(180.0 - np.asarray(angle, float), 360.0)


def centre_angles(node_deg, omega_deg, best_node_deg, best_omega_deg, node_period_deg):
    """(Omega, omega) draws [deg] moved onto the branch nearest the best values.

    Percentiles of draws wrapped into [0, 360) split a cloud near 0 deg in two; centred,
    an interval may cross 0 deg. ``node_period_deg`` is 180 without radial velocities
    (Omega and omega move together by 180 deg, the node ambiguity) and 360 with them.
    """
    node = np.asarray(node_deg, float)
    shift = node_period_deg * np.round((node - best_node_deg) / node_period_deg)
    omega = best_omega_deg + wrap_degrees(np.asarray(omega_deg, float) - shift - best_omega_deg)
    return node - shift, omega


def held_angles_as_reported(fixed, node_deg, omega_deg):
    """Held elements with a held Omega or omega [deg] on the branch of the reported orbit.

    Without radial velocities (Omega, omega) and (Omega + 180, omega + 180) are one
    apparent orbit, and the orbit is reported with Omega in [0, 180): a held angle on the
    other branch (e.g. Omega = 200, or omega = 70 where the fit's omega is 250) is shifted
    by 180 deg. Other held elements are returned as given.
    """
    out = dict(fixed)
    for name, shown in (("Omega", node_deg), ("omega", omega_deg)):
        if name in out and abs(float(wrap_degrees(out[name] - shown))) > 90.0:
            out[name] = float(np.mod(out[name] + 180.0, 360.0))
    return out


#: The circular orbit's convention in words, for the result's notes.
CIRCULAR_NOTE = ("Circular orbit (e held at 0): omega is 0 by convention and T is the epoch "
                 "of passage through the node Omega.")


def convention_held(fixed):
    """{"omega": 0.0} when ``fixed`` (the user's held elements) holds e at 0 and leaves
    omega and T free, else {}: the circular orbit's convention (see the module notes).

    With T held as well, omega is what places the node passage, so it stays free."""
    circular = fixed.get("e") == 0.0 and "omega" not in fixed and "T" not in fixed
    return {"omega": 0.0} if circular else {}


def held_elements(fixed):
    """Every element a fit holds: ``fixed`` (--fix) as given and the convention's omega.

    The one place the circular orbit's omega = 0 is added: the visual fit
    (``FitOptions.held``), the combined fit and the posterior all take it from here."""
    return {**fixed, **convention_held(fixed)}


def phase_in_periastron(held):
    """Whether a 180 deg turn of the node moves T rather than omega: e held at 0, omega
    held and T free, where (Omega + 180, omega, T + P/2) is (Omega, omega + 180, T) and
    omega keeps its held value."""
    return held.get("e") == 0.0 and "omega" in held and "T" not in held


def turn_node(node_deg, omega_deg, t_peri, period, shift_deg, phase):
    """The same apparent orbit with Omega moved by ``-shift_deg`` (a multiple of 180):
    omega moves alike, or with ``phase`` (``phase_in_periastron``) T by shift/360 P.

    Returns (Omega, omega, T); arrays broadcast."""
    node = np.asarray(node_deg, float) - shift_deg
    if phase:
        return node, np.asarray(omega_deg, float), t_peri + period * (shift_deg / 360.0)
    return node, np.asarray(omega_deg, float) - shift_deg, t_peri


def nearest_passage(t_peri, period, t_ref):
    """T moved by whole periods (the same orbit) into [t_ref - P/2, t_ref + P/2)."""
    return t_ref + np.mod(t_peri - t_ref + 0.5 * period, period) - 0.5 * period
