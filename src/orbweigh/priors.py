"""Priors of the visual-orbit posterior: the defaults, the user's Gaussian priors, and their
densities in the coordinates the sampler uses.

Default priors (each replaced by a Gaussian of the user's, ``--prior NAME=MEAN,SIGMA``,
within the same support):

* P log-uniform on the period support: the fit's period bounds (``--period-range``), else
  its search range;
* T uniform over one period (density 1/P);
* e uniform on [0, ``E_MAX``);
* a log-uniform from 1/100 to 100 times the fit's a (scale-free: no mass scale favoured;
  the bounds only make it proper);
* cos i uniform on [-1, 1] (isotropic orientation);
* Omega and omega uniform. Without radial velocities (Omega, omega) and (Omega + 180,
  omega + 180) are the same apparent orbit, so a Gaussian prior on Omega or omega acts
  on both branches (the density is the sum over the two).
* the parallax (with ``--parallax``): Gaussian N(value, error) [mas], the measurement.

Gaussian priors are in the result document's units: P [yr], T [the log's epoch scale;
internally a Julian year], a [arcsec], angles [deg], parallax [mas]. A Gaussian on an
angle is taken on the branch nearest its mean (wrapped difference).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .elements import nearest_passage, wrap_degrees
from .errors import InputError

__all__ = ["E_MAX", "PRIOR_NAMES", "ElementPriors", "check_gaussian_priors", "held_words"]

#: Upper bound (excluded) of the eccentricity prior.
E_MAX = 0.99
#: Elements (and the parallax) that may carry a Gaussian prior.
PRIOR_NAMES = ("P", "T", "e", "a", "i", "Omega", "omega", "parallax")
_UNITS = {"P": "yr", "T": "", "e": "", "a": "arcsec", "i": "deg", "Omega": "deg",
          "omega": "deg", "parallax": "mas"}
#: Where a prior's mean may lie: (low, high, low included, high included, in words).
_MEAN_RANGE = {"P": (0.0, math.inf, False, False, "a positive period in yr"),
               "e": (0.0, E_MAX, True, False, f"an eccentricity in [0, {E_MAX})"),
               "a": (0.0, math.inf, False, False, "a positive semi-major axis in arcsec"),
               "i": (0.0, 180.0, True, True, "an inclination in [0, 180] deg"),
               "Omega": (0.0, 360.0, True, False, "a node in [0, 360) deg"),
               "omega": (0.0, 360.0, True, False, "an angle in [0, 360) deg"),
               "parallax": (0.0, math.inf, False, False, "a positive parallax in mas"),
               "T": (-math.inf, math.inf, False, False, "a finite epoch")}


def check_gaussian_priors(priors, fixed=None):
    """Refuse unknown names, sigma <= 0, means outside the element's range, and priors on
    held elements (InputError, before any sampling).

    ``fixed``: the elements held with --fix, name -> value (a circular orbit's omega,
    held by convention, is refused too)."""
    from .elements import convention_held

    fixed = dict(fixed or {})
    for name, (mean, sigma) in priors.items():
        if name not in PRIOR_NAMES:
            raise InputError(f"--prior {name}: no such element; a prior can be put on "
                             f"{', '.join(PRIOR_NAMES)}")
        if not (math.isfinite(sigma) and sigma > 0):
            raise InputError(f"--prior {name}: the width SIGMA must be a positive number, "
                             f"got {sigma:g}")
        lo, hi, lo_in, hi_in, what = _MEAN_RANGE[name]
        inside = (math.isfinite(mean) and (mean > lo or (lo_in and mean == lo))
                  and (mean < hi or (hi_in and mean == hi)))
        if not inside:
            raise InputError(f"--prior {name}: the mean must be {what}; got {mean:g}")
        if name in fixed:
            raise InputError(f"--prior {name}: {name} is held fixed (--fix); a held element "
                             "takes no prior. Drop one of the two")
        if name in convention_held(fixed):
            raise InputError(f"--prior {name}: with e held at 0 (a circular orbit) {name} "
                             "has no meaning and is held at 0 by convention; T is then the "
                             "epoch of passage through the node. Drop the prior, or free e")


def held_words(value, by_convention=False):
    """A held element's prior in words: held with --fix, or by the circular orbit's
    convention (``elements.convention_held``)."""
    from .formatting import number

    if by_convention:
        return (f"held at {number(float(value), 6)} by convention (circular orbit, e held "
                "at 0): not sampled")
    return f"held fixed at {number(float(value), 6)} (--fix): not sampled"


def _gauss(x, mean, sigma):
    """Log of an unnormalised Gaussian density."""
    return -0.5 * ((x - mean) / sigma) ** 2


@dataclass(frozen=True)
class ElementPriors:
    """The priors of one posterior run, in internal units.

    Attributes
    ----------
    period_range : (float, float)
        Support of P [yr].
    a_range : (float, float)
        Support of a [arcsec].
    gaussian : dict
        name -> (mean, sigma): the user's Gaussian priors (T as a Julian year).
    period_source : str
        Where the period support comes from, in words.
    epoch_label : str
        Name of the epoch scale the T prior was given in (for the description).
    gaussian_given : dict
        name -> (mean, sigma) as the user gave them (T in the log's epoch scale).
    fixed : tuple of str
        Held elements: they carry no density (a held T no 1/P).
    convention : tuple of str
        Those of ``fixed`` held by the circular orbit's convention, not by --fix
        (``elements.convention_held``).
    """

    period_range: tuple
    a_range: tuple
    gaussian: dict = field(default_factory=dict)
    period_source: str = "the fit's search range"
    epoch_label: str = ""
    gaussian_given: dict = field(default_factory=dict)
    fixed: tuple = ()
    convention: tuple = ()

    # ------------------------------------------------------------ (ln P, T, e) part
    def log_nonlinear(self, period, t_peri, e):
        """Log density of (P, T, e) with respect to d(ln P) dT de; -inf outside."""
        g = self.gaussian
        lo, hi = self.period_range
        inside = np.ones(np.shape(period), bool)
        if "P" not in self.fixed:
            inside &= (period >= lo) & (period <= hi)
        if "e" not in self.fixed:        # a held e may lie beyond E_MAX (refine allows it)
            inside &= (e >= 0.0) & (e < E_MAX)
        out = np.where(inside, 0.0, -np.inf)
        if "P" in g:
            out = out + _gauss(period, *g["P"]) + np.log(period)
        if "T" in g:
            mean, sigma = g["T"]
            out = out + _gauss(nearest_passage(t_peri, period, mean), mean, sigma)
        elif "T" not in self.fixed:
            out = out - np.log(period)
        if "e" in g:
            out = out + _gauss(e, *g["e"])
        return out

    # ---------------------------------------------------- (a, cos i, Omega, omega) part
    def log_linear(self, a, cos_i, node, omega, bounded=True):
        """Log density of (a, cos i, Omega, omega) [arcsec, -, rad, rad] with respect to
        da d(cos i) dOmega domega. ``bounded=False`` leaves out the support of a (used
        only to shape a proposal)."""
        g = self.gaussian
        out = _gauss(a, *g["a"]) if "a" in g else -np.log(a)
        if bounded:
            out = np.where((a >= self.a_range[0]) & (a <= self.a_range[1]), out, -np.inf)
        if "i" in g:
            cos_i = np.clip(cos_i, -1.0, 1.0)
            out = out + _gauss(np.degrees(np.arccos(cos_i)), *g["i"]) \
                - 0.5 * np.log(np.maximum(1.0 - cos_i * cos_i, 1e-300))
        if "Omega" in g or "omega" in g:
            out = out + self._log_angles(np.degrees(node), np.degrees(omega))
        return out

    def _log_angles(self, node_deg, omega_deg):
        """Gaussian priors on Omega and omega, summed over the two node branches."""
        branches = []
        for shift in (0.0, 180.0):
            term = 0.0
            for name, angle in (("Omega", node_deg), ("omega", omega_deg)):
                if name in self.gaussian:
                    mean, sigma = self.gaussian[name]
                    term = term + _gauss(wrap_degrees(angle + shift - mean), 0.0, sigma)
            branches.append(term)
        return np.logaddexp(*branches)

    # --------------------------------------------------------------------- in words
    def describe(self, fixed=(), t_ref_label="", parallax=None):
        """The priors in words, keyed by element (and "parallax" when sampled)."""
        from .formatting import number

        lo, hi, a_lo, a_hi = (number(float(v), 6) for v in (*self.period_range, *self.a_range))
        out = {"P": f"log-uniform on [{lo}, {hi}] yr ({self.period_source})",
               "T": "uniform over one period (density 1/P)" + t_ref_label,
               "e": f"uniform on [0, {E_MAX})",
               "a": f"log-uniform on [{a_lo}, {a_hi}] arcsec (1/100 to 100 times "
                    "the fit's a)",
               "i": "uniform in cos i on [-1, 1] (isotropic orientation)",
               "Omega": "uniform; reported in [0, 180) deg (node ambiguity without radial "
                        "velocities)",
               "omega": "uniform; reported in [0, 360) deg"}
        support = {"P": f" on [{lo}, {hi}] yr", "e": f" on [0, {E_MAX})",
                   "a": f" on [{a_lo}, {a_hi}] arcsec", "T": "", "i": " in i",
                   "Omega": " on both node branches (Omega, Omega + 180)",
                   "omega": " on both node branches (omega, omega + 180)"}
        for name, (mean, sigma) in self.gaussian_given.items():
            if name == "parallax":
                continue
            unit = self.epoch_label if name == "T" else _UNITS[name]
            out[name] = f"Gaussian N({number(mean, 6)}, {number(sigma, 6)}) {unit}".rstrip() + \
                f"{support[name]} (--prior)"
        for name, value in fixed.items():
            out[name] = held_words(value, name in self.convention)
        if parallax is not None:
            out["parallax"] = (f"Gaussian N({number(float(parallax[0]), 6)}, "
                               f"{number(float(parallax[1]), 6)}) mas; the "
                               "positions do not depend on it, so its posterior is this prior")
        return out
