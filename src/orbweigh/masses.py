"""Dynamical masses: Kepler's third law, parallax propagation, component masses and the
dynamical parallax.

Units: P in Julian years (365.25 d), a in arcsec, parallaxes in mas, masses in M_sun,
radial-velocity amplitudes in km/s.

Third law (the IAU constants, no literal 1)::

    M1 + M2 = 4 pi^2 (a / plx au)^3 / (GM_sun P^2) = f (a / plx)^3 / P^2,

with f = 4 pi^2 au^3 / (GM_sun yr^2) = 1.0000378 for the Julian year, the nominal
solar mass parameter (IAU 2015 Resolution B3) and the astronomical unit (IAU 2012
Resolution B2), from ``orbweigh.constants``.

Random draws use the stream ``SeedSequence(seed).spawn(1)[0]``, independent of a
``default_rng(seed)`` that made the (P, a) draws with the same seed.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import formatting as fmt
from .constants import KMS_PER_AU_YR, THIRD_LAW_FACTOR
from .errors import InputError
from .spectroscopic import orbital_parallax_mas

__all__ = ["masses_for_document", "implausible_total", "PLAUSIBLE_TOTAL_MSUN", "budget_rows",
    "check_mass_inputs", "MassInputError", "OPTION_NAMES",
    "THIRD_LAW_FACTOR", "KMS_PER_AU_YR", "EKER_RANGE_MSUN", "MANN_RANGE_MKS", "M_BOL_SUN",
    "BANDS", "total_mass_msun", "parallax_for_mass_mas",
    "linear_propagation", "eker_log_luminosity", "eker_mass_from_log_luminosity",
    "mann_mass_from_mks", "mass_from_absolute_magnitude", "RELATION_SCATTER", "DynamicalParallax",
    "dynamical_parallax", "magnitudes_and_errors", "summarise", "mass_blocks",
    "format_mass_blocks",
]

#: Bolometric magnitude of the Sun (IAU 2015 Resolution B2).
M_BOL_SUN = 4.74

# Eker et al. 2018, MNRAS 479, 5491, Table 4: log(L/L_sun) = alpha log(M/M_sun) + beta
# on M_lo < M <= M_hi. Columns: M_lo, M_hi, alpha, beta.
_EKER_PIECES = np.array([
    (0.179, 0.45, 2.028, -0.976),
    (0.45, 0.72, 4.572, -0.102),
    (0.72, 1.05, 5.743, -0.007),
    (1.05, 2.4, 4.329, 0.010),
    (2.4, 7.0, 3.967, 0.093),
    (7.0, 31.0, 2.865, 1.105),
])
EKER_RANGE_MSUN = (0.179, 31.0)
# Scatter: assumed, NOT the paper's number (its per-piece standard deviations were not at
# hand when this was written; replace by those of Table 4 when checked): 0.1 dex in log L,
# the order of the main sequence's width in luminosity at fixed mass (age and
# composition) and of the jumps of up to 0.08 dex between the pieces at their breaks.
_EKER_SCATTER = {"variable": "log10 L", "sigma_dex": 0.10,
                 "source": "assumed 0.1 dex (order of the main-sequence width at fixed mass), "
                           "not a value from Eker et al. 2018"}
# Mann et al. 2019, ApJ 871, 63, Table 6: log(M/M_sun) = sum a_i (M_Ks - 7.5)^i.
_MANN_COEFFS = (-0.642, -0.208, -8.43e-4, 7.87e-3, 1.42e-4, -2.13e-4)
# Scatter: about 2 % in mass (Mann et al. 2019, abstract and the discussion of Table 6's
# fit; from memory: check the paper's quoted fractional scatter).
_MANN_SCATTER = {"variable": "log10 M", "sigma_dex": float(np.log10(1.02)),
                 "source": "2 % in mass, Mann et al. 2019 (ApJ 871, 63), value from memory"}
MANN_RANGE_MKS = (4.0, 11.0)
#: Supported magnitude bands for the dynamical parallax -> what the relation is.
BANDS = {"bol": "apparent bolometric magnitudes, Eker et al. 2018 (MNRAS 479, 5491) "
                "main-sequence relation, valid 0.179-31 M_sun",
         "K": "2MASS Ks magnitudes, Mann et al. 2019 (ApJ 871, 63) M-dwarf relation, "
              "valid 4 < M_Ks < 11"}
#: Scatter of each relation about its fit (beside each relation's coefficients above), as
#: a 1-sigma deviation in dex of its dependent variable: log L at given mass for 'bol',
#: log M at given M_Ks for 'K'. A dynamical parallax carries it (and the magnitudes'
#: errors) by Monte Carlo, see ``_dynamical``.
RELATION_SCATTER = {"bol": _EKER_SCATTER, "K": _MANN_SCATTER}
_PERCENTILES = (2.5, 16.0, 50.0, 84.0, 97.5)
_MAX_ITER = 100
_TOL = 1e-10


# --------------------------------------------------------------------------- third law
def total_mass_msun(a_arcsec, parallax_mas, period_yr):
    """Total mass M1 + M2 [M_sun] from Kepler's third law, vectorised.

    Parameters
    ----------
    a_arcsec : array_like
        Angular semi-major axis of the relative orbit [arcsec].
    parallax_mas : array_like
        Parallax [mas], positive.
    period_yr : array_like
        Period [Julian years].

    Notes
    -----
    M = 4 pi^2 (a/plx au)^3 / (GM_sun P^2) with a/plx in au (same angular unit) and P
    in seconds, i.e. ``THIRD_LAW_FACTOR * (a/plx)^3 / P^2`` with P in Julian years.
    """
    a_au = np.asarray(a_arcsec, float) / (np.asarray(parallax_mas, float) * 1e-3)
    return THIRD_LAW_FACTOR * a_au**3 / np.asarray(period_yr, float) ** 2


def parallax_for_mass_mas(a_arcsec, period_yr, mass_msun):
    """Parallax [mas] at which the orbit (a [arcsec], P [Julian yr]) has total mass M [M_sun].

    The third law solved for the parallax: plx = a (f / (P^2 M))^(1/3).
    """
    ratio = THIRD_LAW_FACTOR / (np.asarray(period_yr, float) ** 2 * np.asarray(mass_msun, float))
    return 1e3 * np.asarray(a_arcsec, float) * np.cbrt(ratio)


def linear_propagation(period_yr, a_arcsec, cov_Pa, parallax_mas, parallax_err_mas):
    """First-order mass, relative error and variance budget.

    Parameters
    ----------
    period_yr, a_arcsec : float
        Best P [Julian yr] and a [arcsec].
    cov_Pa : (2, 2) array_like
        Covariance of (P, a) [yr^2, yr arcsec, arcsec^2].
    parallax_mas, parallax_err_mas : float
        Parallax and its error [mas].

    Returns
    -------
    mass : float
        Third-law mass at the best values [M_sun].
    rel_err : float
        sigma_M / M.
    budget : dict or None
        Share of var(ln M) from ``parallax``, ``a``, ``P`` and ``a_P_covariance`` (sum 1;
        None when every error is zero).

    Notes
    -----
    d ln M = 3 d ln a - 2 d ln P - 3 d ln plx, so
    (sigma_M/M)^2 = (3 sa/a)^2 + (2 sP/P)^2 + (3 splx/plx)^2 - 12 cov(a, P)/(a P).
    The covariance term is reported on its own: it is negative when a and P are
    positively correlated (then it cancels part of the a and P shares).
    """
    cov = np.asarray(cov_Pa, float)
    terms = {"parallax": (3.0 * parallax_err_mas / parallax_mas) ** 2,
             "a": 9.0 * cov[1, 1] / a_arcsec**2,
             "P": 4.0 * cov[0, 0] / period_yr**2,
             "a_P_covariance": -12.0 * cov[0, 1] / (a_arcsec * period_yr)}
    var = sum(terms.values())
    budget = {k: float(v / var) for k, v in terms.items()} if var > 0 else None
    mass = float(total_mass_msun(a_arcsec, parallax_mas, period_yr))
    return mass, float(np.sqrt(max(var, 0.0))), budget


# ------------------------------------------------------------ mass-luminosity relations
def eker_log_luminosity(mass_msun):
    """log10(L/L_sun) from the mass [M_sun] (Eker et al. 2018, Table 4).

    A mass on a break belongs to the lower piece; outside 0.179-31 M_sun the end
    pieces are extrapolated.
    """
    m = np.asarray(mass_msun, float)
    k = np.clip(np.searchsorted(_EKER_PIECES[:, 1], m, side="left"), 0, len(_EKER_PIECES) - 1)
    return _EKER_PIECES[k, 2] * np.log10(m) + _EKER_PIECES[k, 3]


def eker_mass_from_log_luminosity(log_l):
    """Mass [M_sun] from log10(L/L_sun), inverting Eker et al. 2018, Table 4.

    Notes
    -----
    The pieces do not join, so near a break a luminosity is reached by two pieces
    (overlap) or by none (gap). Rule, chosen so that the inverse is continuous and
    increasing (which keeps the dynamical-parallax iteration stable):

    * where one piece alone reaches log L, its inverse;
    * in an overlap [L_upper(b), L_lower(b)] of the pieces below and above the break b,
      log M is blended linearly in log L from the lower piece's inverse (at the
      overlap's faint end) to the upper piece's inverse (at its bright end);
    * in a gap, M is the break mass b.

    Beyond 0.179 and 31 M_sun the end pieces are extrapolated.
    """
    x = np.asarray(log_l, float)
    lo, hi, alpha, beta = (np.log10(_EKER_PIECES[:, 0]), np.log10(_EKER_PIECES[:, 1]),
                           _EKER_PIECES[:, 2], _EKER_PIECES[:, 3])
    cand = (x[..., None] - beta) / alpha  # log M from each piece
    lo_ext, hi_ext = lo.copy(), hi.copy()
    lo_ext[0], hi_ext[-1] = -np.inf, np.inf
    inside = (cand >= lo_ext) & (cand <= hi_ext)
    log_m = np.take_along_axis(cand, inside.argmax(-1)[..., None], -1)[..., 0]
    for j, b in enumerate(hi[:-1]):
        l_below, l_above = alpha[j] * b + beta[j], alpha[j + 1] * b + beta[j + 1]
        if l_above < l_below:  # overlap
            w = (x - l_above) / (l_below - l_above)
            zone = (w >= 0) & (w <= 1)
            blend = (1.0 - w) * cand[..., j] + w * cand[..., j + 1]
            log_m = np.where(zone, blend, log_m)
        else:  # gap
            log_m = np.where((x > l_below) & (x < l_above), b, log_m)
    return 10.0**log_m


def mann_mass_from_mks(mks):
    """Mass [M_sun] from the absolute Ks magnitude (Mann et al. 2019, Table 6).

    Valid for 4 < M_Ks < 11 (M dwarfs, about 0.075-0.70 M_sun).
    """
    return 10.0 ** np.polynomial.polynomial.polyval(np.asarray(mks, float) - 7.5, _MANN_COEFFS)


def _check_band(band):
    key = {"bol": "bol", "k": "K", "ks": "K"}.get(str(band).lower())
    if key is None:
        listed = "; ".join(f"'{k}' ({v})" for k, v in BANDS.items())
        raise InputError(f"band {band!r} is not supported for the dynamical parallax: no "
                         f"relation with a published source for it is built in. Supported "
                         f"bands: {listed}. For V (or any other band) give the bolometric "
                         f"corrections of the two components from a table of your choice "
                         f"with --bolometric-corrections BC1 BC2")
    return key


# ------------------------------------------------------------------ which inputs go together
#: What the user calls each mass input on the command line (the manifest has its own names).
OPTION_NAMES = {"parallax": "--parallax", "mass_ratio": "--mass-ratio",
                "rv_amplitudes": "--rv-amplitudes", "magnitudes": "--magnitudes",
                "band": "--band", "bolometric_corrections": "--bolometric-corrections",
                "velocity_log": "--rv"}


class MassInputError(InputError):
    """A mass input out of range, or in a combination where it would be ignored.

    ``key`` is the input at fault (a key of ``OPTION_NAMES``), so that a reader with its
    own names (the batch manifest) can point at its column.
    """

    def __init__(self, key, message):
        super().__init__(message)
        self.key = key


def check_mass_inputs(parallax=None, mass_ratio=None, rv_amplitudes=None, magnitudes=None,
                      band=None, bolometric_corrections=None, velocity_log=False,
                      names=OPTION_NAMES):
    """The one rule of the mass inputs: what each value may be and what goes together.

    Checked before any fitting or sampling (``fit``, ``mass``, the batch manifest), so no
    input is silently ignored and no slow work ends in a refusal. A mass ratio (or the
    velocity amplitudes that give it) splits a total mass, which needs a trigonometric
    parallax; a velocity log gives q and the orbital parallax itself; magnitudes give a
    dynamical parallax instead of a trigonometric one.

    Parameters
    ----------
    parallax : (float, float), optional
        Trigonometric parallax and its error [mas].
    mass_ratio : (float, float), optional
        q = M2/M1 and its error.
    rv_amplitudes : (float, float, float, float), optional
        K1, its error, K2, its error [km/s].
    magnitudes : (float, float), optional
        Apparent magnitudes of the components in ``band``.
    band : str, optional
        Band of the magnitudes.
    bolometric_corrections : (float, float), optional
        BC of the components in ``band``.
    velocity_log : bool
        A radial-velocity log is fitted with the orbit.
    names : dict
        What to call each input in messages (default: the command-line options).

    Raises
    ------
    MassInputError
        With ``key`` naming the input at fault.
    """
    def refuse(key, message):
        raise MassInputError(key, message)

    ratio_key = "mass_ratio" if mass_ratio is not None else "rv_amplitudes"
    has_ratio = mass_ratio is not None or rv_amplitudes is not None
    if velocity_log:
        for key, value in (("mass_ratio", mass_ratio), ("rv_amplitudes", rv_amplitudes),
                           ("magnitudes", magnitudes)):
            if value is not None:
                refuse(key, f"with {names['velocity_log']} the velocity log gives K1, K2 "
                       f"(hence q) and the orbital parallax; drop {names[key]}")
    if mass_ratio is not None and rv_amplitudes is not None:
        refuse("rv_amplitudes", f"give either {names['mass_ratio']} or "
               f"{names['rv_amplitudes']} (q = K1/K2), not both")
    if parallax is not None and magnitudes is not None:
        refuse("magnitudes", f"give either a trigonometric parallax ({names['parallax']}) or "
               f"{names['magnitudes']} for a dynamical parallax, not both")
    if has_ratio and magnitudes is not None:
        refuse(ratio_key, f"with {names['magnitudes']} the component masses come from the "
               f"mass-luminosity relation; drop {names[ratio_key]}, or give "
               f"{names['parallax']} instead of the magnitudes")
    if has_ratio and parallax is None and not velocity_log:
        refuse(ratio_key, f"{names[ratio_key]} splits the total mass between the "
               f"components, which needs a distance: give {names['parallax']} too "
               f"(without it {names[ratio_key]} would be ignored)")
    if magnitudes is not None and band is None:
        refuse("band", f"{names['magnitudes']} needs {names['band']}: 'bol' (bolometric) or "
               f"'K' (2MASS Ks), or e.g. 'V' with {names['bolometric_corrections']}")
    if band is not None and magnitudes is None:
        refuse("band", f"{names['band']} describes {names['magnitudes']}; give the "
               f"magnitudes too, or drop {names['band']}")
    if bolometric_corrections is not None and magnitudes is None:
        refuse("bolometric_corrections", f"{names['bolometric_corrections']} go with "
               f"{names['magnitudes']} M1 M2 {names['band']} BAND")
    _check_mass_values(parallax, mass_ratio, rv_amplitudes, magnitudes, band,
                       bolometric_corrections, names)


def _check_mass_values(parallax, mass_ratio, rv_amplitudes, magnitudes, band,
                       bolometric_corrections, names):
    def finite(values):
        return all(np.isfinite(float(v)) for v in values)

    if parallax is not None:
        value, error = (float(v) for v in parallax)
        if not (np.isfinite(value) and value > 0):
            raise MassInputError("parallax", f"{names['parallax']}: the parallax {value:g} mas "
                                 "is not positive: the third law gives no mass for it (a zero "
                                 "or negative parallax means the distance is unknown). Give a "
                                 f"positive parallax, or {names['magnitudes']} for a "
                                 "dynamical parallax")
        if not (np.isfinite(error) and error >= 0):
            raise MassInputError("parallax", f"{names['parallax']}: the error must be zero or "
                                 f"positive, got {error:g} mas")
    pairs = []
    if mass_ratio is not None:
        pairs.append(("mass_ratio", "the mass ratio q", mass_ratio))
    if rv_amplitudes is not None:
        pairs += [("rv_amplitudes", "K1", rv_amplitudes[:2]),
                  ("rv_amplitudes", "K2", rv_amplitudes[2:])]
    for key, what, (value, error) in pairs:
        if not (np.isfinite(value) and value > 0):
            raise MassInputError(key, f"{names[key]}: {what} must be a positive number, got "
                                 f"{value:g}")
        if not (np.isfinite(error) and error >= 0):
            raise MassInputError(key, f"{names[key]}: the error of {what} must be zero or "
                                 f"positive, got {error:g}")
    if magnitudes is not None:
        try:
            magnitudes_and_errors(magnitudes)   # M1 M2 or M1 ERR1 M2 ERR2
        except InputError as exc:
            raise MassInputError("magnitudes", f"{names['magnitudes']}: {exc}") from None
        try:
            _check_band(band) if bolometric_corrections is None else None
        except InputError as exc:
            raise MassInputError("band", str(exc)) from None
    if bolometric_corrections is not None:
        if not finite(bolometric_corrections):
            raise MassInputError("bolometric_corrections",
                                 f"{names['bolometric_corrections']} must be finite numbers")
        if str(band).lower() in ("bol", "k", "ks"):
            raise MassInputError("bolometric_corrections", f"bolometric corrections apply to "
                                 f"magnitudes in a band such as V, not to band {band!r}; "
                                 f"drop {names['bolometric_corrections']}")


def mass_from_absolute_magnitude(abs_mag, band, offset_dex=0.0):
    """Main-sequence mass [M_sun] from an absolute magnitude in ``band`` ('bol' or 'K').

    ``offset_dex`` is a star's deviation from the relation in its dependent variable
    (``RELATION_SCATTER``): log L above the relation's at its mass ('bol'), log M above
    the relation's at its M_Ks ('K').
    """
    if _check_band(band) == "K":
        return mann_mass_from_mks(abs_mag) * 10.0 ** np.asarray(offset_dex, float)
    return eker_mass_from_log_luminosity((M_BOL_SUN - np.asarray(abs_mag, float)) / 2.5
                                         - np.asarray(offset_dex, float))


def _outside_validity(abs_mags, masses, band):
    """Boolean mask of draws with a component outside the relation's validity range."""
    if band == "K":
        values, (low, high) = abs_mags, MANN_RANGE_MKS
    else:
        values, (low, high) = masses, EKER_RANGE_MSUN
    return np.any((values < low) | (values > high), axis=0)


# ------------------------------------------------------------------ dynamical parallax
@dataclass(frozen=True)
class DynamicalParallax:
    """Self-consistent parallax and masses from the third law and a mass-luminosity relation.

    Attributes
    ----------
    parallax_mas : ndarray
        Dynamical parallax [mas], one per (P, a).
    mass1_msun, mass2_msun : ndarray
        Component masses [M_sun] from the relation at that parallax.
    abs_mag1, abs_mag2 : ndarray
        Absolute magnitudes [mag] at that parallax.
    iterations : int
        Iterations done (all draws together).
    converged : bool
        Whether every draw met the tolerance (relative change of the total mass < 1e-10).
    history : list of tuple
        Per iteration: (parallax_mas, abs_mag1, abs_mag2, mass1, mass2) arrays.
    """

    parallax_mas: np.ndarray
    mass1_msun: np.ndarray
    mass2_msun: np.ndarray
    abs_mag1: np.ndarray
    abs_mag2: np.ndarray
    iterations: int
    converged: bool
    history: list


def dynamical_parallax(a_arcsec, period_yr, mag1, mag2, band, offset1_dex=0.0,
                       offset2_dex=0.0):
    """Iterate the third law with a mass-luminosity relation to a self-consistent parallax.

    Parameters
    ----------
    a_arcsec, period_yr : array_like
        Semi-major axis [arcsec] and period [Julian yr]; draws are iterated together.
    mag1, mag2 : float or array_like
        Apparent magnitudes of the primary and secondary in ``band`` [mag] (one per draw).
    band : {'bol', 'K'}
        Band of the magnitudes.
    offset1_dex, offset2_dex : float or array_like
        Each star's deviation from the relation (``mass_from_absolute_magnitude``).

    Notes
    -----
    Start from M1 + M2 = 2 M_sun; plx = a (f / (P^2 (M1 + M2)))^(1/3);
    M_abs = m + 5 + 5 log10(plx["]); masses from the relation; repeat. A mass error
    delta moves the parallax by only delta/3, so the iteration contracts: the factor
    is (2/3) d log M / d log L, below 1/3 on the Eker pieces and 0.66 in their blends.
    References: Russell & Moore 1940; Baize & Romani 1946.
    """
    band = _check_band(band)
    a, p = np.atleast_1d(np.asarray(a_arcsec, float)), np.atleast_1d(np.asarray(period_yr, float))
    with np.errstate(all="ignore"):  # a runaway iteration shows as non-finite values
        return _iterate(a, p, mag1, mag2, band, offset1_dex, offset2_dex)


def _iterate(a, p, mag1, mag2, band, offset1, offset2):
    shape = np.broadcast(a, p, mag1, mag2, offset1, offset2).shape
    total = np.full(shape, 2.0)  # start: M1 + M2 = 2 M_sun
    history = []
    for iteration in range(1, _MAX_ITER + 1):
        plx = parallax_for_mass_mas(a, p, total)
        shift = 5.0 + 5.0 * np.log10(plx * 1e-3)
        mabs1, mabs2 = mag1 + shift, mag2 + shift
        m1 = mass_from_absolute_magnitude(mabs1, band, offset1)
        m2 = mass_from_absolute_magnitude(mabs2, band, offset2)
        history.append((plx, mabs1, mabs2, m1, m2))
        new_total = m1 + m2
        done = bool(np.all(np.abs(new_total / total - 1.0) < _TOL))
        total = new_total
        if done:
            break
    plx = parallax_for_mass_mas(a, p, total)  # consistent with the final masses
    return DynamicalParallax(plx, m1, m2, mabs1, mabs2, iteration, done, history)


# ------------------------------------------------------------------------- summaries
def _json_float(x):
    x = float(x)
    return x if np.isfinite(x) else None


def summarise(samples, unit):
    """Median and 16/84, 2.5/97.5 percentiles of draws; +inf draws count as unbounded.

    A percentile that falls among unbounded draws is reported as None.
    """
    s = np.asarray(samples, float)
    finite_max = np.max(s[np.isfinite(s)], initial=-np.inf)
    p = np.percentile(np.where(np.isinf(s), np.finfo(float).max, s), _PERCENTILES)
    p = [v if v <= finite_max else np.inf for v in p]
    keys = ("low95", "low", "value", "high", "high95")
    return {**{k: _json_float(v) for k, v in zip(keys, p)}, "unit": unit}


def _linear_block(value, rel_err):
    return {"value": value, "error": value * rel_err}


def _positive_normal(rng, value, error, n, name, warnings):
    """Normal draws truncated to > 0 by redrawing; warns how many were redrawn."""
    draws = rng.normal(value, error, n)
    redrawn = 0
    while np.any(bad := draws <= 0):
        redrawn += int(bad.sum())
        draws[bad] = rng.normal(value, error, int(bad.sum()))
    if redrawn:
        warnings.append(f"{redrawn} draws of {name} were not positive and were drawn again "
                        f"(its distribution is truncated at zero).")
    return draws


def _mass_ratio(rng, n, mass_ratio, rv_amplitudes, warnings):
    """Draws of q = M2/M1, its value and relative error, and draws of K1 + K2 (or None)."""
    if mass_ratio is not None:
        q, q_err = _pair(mass_ratio)
        return _positive_normal(rng, q, q_err, n, "the mass ratio", warnings), q, q_err / q, None
    k1, k1_err = _pair(rv_amplitudes[:2])
    k2, k2_err = _pair(rv_amplitudes[2:])
    k1_draws = _positive_normal(rng, k1, k1_err, n, "K1", warnings)
    k2_draws = _positive_normal(rng, k2, k2_err, n, "K2", warnings)
    return (k1_draws / k2_draws, k1 / k2, float(np.hypot(k1_err / k1, k2_err / k2)),
            k1_draws + k2_draws)


def _pair(value_error):
    value, error = (float(v) for v in value_error)   # checked by check_mass_inputs
    return value, error


def _components(total_draws, q_draws, total_linear, q, q_rel):
    """Primary and secondary blocks from total-mass and q draws (independent)."""
    m1, m2 = total_draws / (1.0 + q_draws), total_draws * q_draws / (1.0 + q_draws)
    blocks = {"primary": summarise(m1, "solMass"), "secondary": summarise(m2, "solMass")}
    if total_linear is not None:
        value, rel = total_linear["value"], total_linear["error"] / total_linear["value"]
        dq = q * q_rel  # absolute error of q
        # d ln M1 = d ln M - dq/(1+q);  d ln M2 = d ln M + dq/(q (1+q))
        blocks["primary"]["linear"] = _linear_block(value / (1 + q), np.hypot(rel, dq / (1 + q)))
        blocks["secondary"]["linear"] = _linear_block(value * q / (1 + q),
                                                      np.hypot(rel, dq / (q * (1 + q))))
    return blocks


def _trigonometric(period, a, parallax, best, cov_Pa, rng, warnings, parallax_draws=None):
    value, error = (float(v) for v in parallax)   # checked by check_mass_inputs
    if error > 0 and value / error < 10:
        warnings.append(f"The parallax is only {value / error:.1f} times its error (below 10): "
                        f"the mass, which goes as the inverse cube of the parallax, is biased "
                        f"and its distribution is skewed; quote the percentiles, not the "
                        f"linear error.")
    plx = rng.normal(value, error, len(period)) if parallax_draws is None else parallax_draws
    bad = plx <= 0
    total = np.where(bad, np.inf, total_mass_msun(a, np.where(bad, 1.0, plx), period))
    if bad.any():
        warnings.append(f"{int(bad.sum())} of {len(plx)} parallax draws were zero or negative: "
                        f"their mass is unbounded; they are counted above every finite mass, "
                        f"and a percentile that falls among them is reported as null.")
    mass, rel, budget = linear_propagation(best[0], best[1], cov_Pa, value, error)
    block = {"value": value, "error": error, "unit": "mas", "kind": "trigonometric"}
    return total, block, _linear_block(mass, rel), budget, int(bad.sum())


def magnitudes_and_errors(magnitudes):
    """(m1, err1, m2, err2) from (m1, m2) (errors 0) or (m1, err1, m2, err2) [mag]."""
    values = [float(v) for v in magnitudes]
    if len(values) == 2:
        values = [values[0], 0.0, values[1], 0.0]
    if len(values) != 4:
        raise InputError(f"expected M1 M2 or M1 ERR1 M2 ERR2 (apparent magnitudes "
                         f"of primary and secondary, optionally each with its 1-sigma "
                         f"error); got {len(values)} numbers")
    if not all(np.isfinite(values)):
        raise InputError(f"the magnitudes and their errors must be finite numbers, got "
                         f"{values}")
    if values[1] < 0 or values[3] < 0:
        raise InputError(f"a magnitude error must be zero or positive, got {values[1]:g} and "
                         f"{values[3]:g}; write --magnitudes M1 ERR1 M2 ERR2")
    return tuple(values)


def _bolometric(magnitudes, band, corrections):
    """Magnitudes and band for the relation: with bolometric corrections BC (m_bol = m +
    BC, the user's choice of table), any band becomes 'bol'."""
    mag1, mag2 = magnitudes
    if corrections is None:
        return mag1, mag2, _check_band(band)
    bc1, bc2 = (float(v) for v in corrections)
    return mag1 + bc1, mag2 + bc2, "bol"


def _dynamical(period, a, magnitudes, band, best, rng, warnings, corrections=None):
    """Dynamical parallax and masses by Monte Carlo over the orbit's (P, a) draws, the
    magnitudes' errors and the relation's scatter; the block, with the iteration at the
    best values summarised in one line (iterations, last change)."""
    given_band = band
    mag1, err1, mag2, err2 = magnitudes_and_errors(magnitudes)
    mag1, mag2, band = _bolometric((mag1, mag2), band, corrections)
    scatter = RELATION_SCATTER[band]
    n = len(period)
    # The components share age and composition, the main causes of the scatter, so one
    # deviation is drawn for both (fully correlated: also the wider choice for M1 + M2).
    offset = rng.normal(0.0, scatter["sigma_dex"], n)
    draws = dynamical_parallax(a, period, rng.normal(mag1, err1, n), rng.normal(mag2, err2, n),
                               band, offset, offset)
    at_best = dynamical_parallax(best[1], best[0], mag1, mag2, band)
    if not (np.all(np.isfinite(draws.parallax_mas)) and np.isfinite(at_best.parallax_mas[0])):
        raise InputError(f"the dynamical parallax runs away for the magnitudes {mag1}, {mag2} "
                         f"(band {band}): they lie far outside the relation's range "
                         f"({BANDS[band]}). Check the magnitudes and the band")
    if not (draws.converged and at_best.converged):
        warnings.append(f"The dynamical parallax did not converge in {_MAX_ITER} iterations; "
                        f"the magnitudes are probably far outside the relation's range.")
    outside = _outside_validity(np.array([draws.abs_mag1, draws.abs_mag2]),
                                np.array([draws.mass1_msun, draws.mass2_msun]), band)
    if outside.any():
        warnings.append(f"In {outside.mean():.0%} of the draws a component lies outside the "
                        f"validity range of the relation ({BANDS[band]}); those masses are "
                        f"extrapolated.")
    if err1 == 0 and err2 == 0:
        warnings.append("The magnitudes were given without errors and taken as exact; give "
                        "--magnitudes M1 ERR1 M2 ERR2 for an interval that includes them.")
    warnings.append(f"The dynamical parallax's interval carries the orbit's P and a, the "
                    f"magnitudes' errors and the relation's scatter ({scatter['variable']} "
                    f"{scatter['sigma_dex']:.3g} dex, {scatter['source']}; one deviation "
                    f"shared by both stars), by {n} seeded draws. It assumes both stars on the "
                    f"main sequence: an evolved or unresolved third component makes it wrong "
                    f"beyond the interval.")
    steps = [{"iteration": k + 1, "parallax_mas": float(s[0][0]), "abs_mag1": float(s[1][0]),
              "abs_mag2": float(s[2][0]), "mass1": float(s[3][0]), "mass2": float(s[4][0])}
             for k, s in enumerate(at_best.history)]
    last_change = (abs(steps[-1]["parallax_mas"] - steps[-2]["parallax_mas"])
                   if len(steps) > 1 else None)
    summary = summarise(draws.parallax_mas, "mas")
    block = {"value": summary["value"], "error": (summary["high"] - summary["low"]) / 2,
             "low": summary["low"], "high": summary["high"], "low95": summary["low95"],
             "high95": summary["high95"], "unit": "mas", "kind": "dynamical",
             "band": band, "relation": BANDS[band], "magnitudes": [mag1, mag2],
             "magnitude_errors": [err1, err2],
             "relation_scatter": {"variable": scatter["variable"],
                                  "sigma_dex": scatter["sigma_dex"],
                                  "source": scatter["source"], "shared_by_components": True},
             "at_best": float(at_best.parallax_mas[0]),
             **({} if corrections is None else {
                 "input_band": str(given_band),
                 "input_magnitudes": [float(v) for v in magnitudes],
                 "bolometric_corrections": list(map(float, corrections))}),
             "iterations": at_best.iterations, "converged": bool(at_best.converged),
             "last_change_mas": last_change, "steps": steps}
    return draws, block


def mass_blocks(period_draws, a_draws, parallax=None, mass_ratio=None, rv_amplitudes=None,
                magnitudes=None, band=None, seed=0, best=None, cov_Pa=None,
                e_draws=None, i_draws=None, bolometric_corrections=None, parallax_draws=None):
    """The "mass" and "parallax" blocks of the result document, from (P, a) draws.

    Parameters
    ----------
    period_draws, a_draws : array_like
        Draws of P [Julian yr] and a [arcsec] (posterior or covariance draws).
    parallax : (float, float), optional
        Trigonometric parallax and its error [mas]; drawn from N(value, error) per draw.
    mass_ratio : (float, float), optional
        q = M2/M1 and its error.
    rv_amplitudes : (K1, K1_err, K2, K2_err), optional
        Radial-velocity amplitudes [km/s]; q = K1/K2. With ``e_draws`` and ``i_draws``
        the orbital parallax is reported too.
    magnitudes : (m1, m2) or (m1, err1, m2, err2), optional
        Apparent magnitudes in ``band`` (and their 1-sigma errors) for a dynamical parallax
        instead of ``parallax``; drawn per draw with the relation's scatter
        (``RELATION_SCATTER``).
    band : {'bol', 'K'} or str, optional
        Band of ``magnitudes``; any other band (e.g. 'V') needs ``bolometric_corrections``.
    bolometric_corrections : (BC1, BC2), optional
        Bolometric corrections of the two components in ``band`` (m_bol = m + BC, from a
        table of the user's choice); the bolometric relation is then used.
    seed : int
        Seed of the parallax, mass-ratio, magnitude and relation-scatter draws (reported
        in the block).
    best : (P, a), optional
        Best P [yr] and a [arcsec] for the linear estimate; default: medians of the draws.
    cov_Pa : (2, 2) array_like, optional
        Covariance of (P, a); default: covariance of the draws.
    e_draws, i_draws : array_like, optional
        Eccentricity and inclination [deg] draws, used with ``rv_amplitudes``.
    parallax_draws : array_like, optional
        Parallax draws [mas] paired with the (P, a) draws (the joint posterior of
        ``fit --sample``), used instead of drawing from ``parallax``.

    Returns
    -------
    dict
        {"mass": {"total", ["primary", "secondary", "mass_ratio"], ["budget"], "draws",
        "seed", "warnings", ...}, "parallax": {"value", "error", "unit", "kind", ...},
        "warnings": [...]}. With RV amplitudes and e, i draws, parallax["orbital"] holds
        the orbital parallax's percentiles (a check on the trigonometric one).
        Each mass entry: value (median), low/high (16/84 %), low95/high95 (2.5/97.5 %),
        unit, and with a trigonometric parallax "linear": {"value", "error"}. The mass
        ratio used for the components: {"value", "error", "source": "given" or "K1/K2"}. The
        budget (trigonometric parallax only) is the share of the linear variance from
        parallax, a, P and the a-P covariance. The warnings are also stored in
        mass["warnings"], so a caller can keep its own top-level list.
    """
    period, a = np.asarray(period_draws, float).ravel(), np.asarray(a_draws, float).ravel()
    if period.shape != a.shape or period.size < 2:
        raise InputError(f"need at least two (P, a) draws of equal number, got {period.size} "
                         f"and {a.size}")
    if not (np.all(np.isfinite(period)) and np.all(period > 0) and np.all(np.isfinite(a))
            and np.all(a > 0)):
        raise InputError("the P and a draws must be finite and positive")
    if parallax is None and magnitudes is None:
        raise InputError("give either a trigonometric parallax (--parallax VALUE ERROR) or the "
                         "component magnitudes for a dynamical parallax (--magnitudes M1 M2 "
                         "--band bol|K)")
    check_mass_inputs(parallax, mass_ratio, rv_amplitudes, magnitudes, band,
                      bolometric_corrections)
    best = (float(np.median(period)), float(np.median(a))) if best is None else best
    cov_Pa = np.cov(np.vstack([period, a])) if cov_Pa is None else cov_Pa
    rng = np.random.default_rng(np.random.SeedSequence(seed).spawn(1)[0])
    warnings = []
    mass = {"draws": int(period.size), "seed": seed}
    if parallax is not None:
        total, plx_block, linear, budget, n_bad = _trigonometric(
            period, a, parallax, best, cov_Pa, rng, warnings,
            None if parallax_draws is None else np.asarray(parallax_draws, float).ravel())
        mass["total"] = {**summarise(total, "solMass"), "linear": linear}
        mass["budget"] = budget
        mass["draws_nonpositive_parallax"] = n_bad
        if mass_ratio is not None or rv_amplitudes is not None:
            q_draws, q, q_rel, k_sum = _mass_ratio(rng, period.size, mass_ratio, rv_amplitudes,
                                                   warnings)
            mass.update(_components(total, q_draws, linear, q, q_rel))
            mass["mass_ratio"] = {"value": float(q), "error": float(q * q_rel),
                                  "source": "given" if mass_ratio is not None else "K1/K2"}
            if k_sum is not None and e_draws is not None and i_draws is not None:
                plx_block["orbital"] = summarise(orbital_parallax_mas(
                    a, k_sum, 0.0, period, np.asarray(e_draws, float),
                    np.asarray(i_draws, float)),
                    "mas")
    else:
        draws, plx_block = _dynamical(period, a, magnitudes, band, best, rng, warnings,
                                      bolometric_corrections)
        mass["total"] = summarise(draws.mass1_msun + draws.mass2_msun, "solMass")
        mass["primary"] = summarise(draws.mass1_msun, "solMass")
        mass["secondary"] = summarise(draws.mass2_msun, "solMass")
    reason = implausible_total(mass["total"]["value"])
    if reason is not None:
        warnings.append(reason)
    mass["warnings"] = list(warnings)
    return {"mass": mass, "parallax": plx_block, "warnings": warnings}


#: Total masses [M_sun] of the known binaries, from pairs of brown dwarfs (about 0.01
#: M_sun together) to the heaviest massive binaries (of order 100-200 M_sun); from memory,
#: as orders of magnitude. A total outside this range is far more likely a wrong parallax
#: or a wrong scale of the orbit than a new kind of star.
PLAUSIBLE_TOTAL_MSUN = (0.01, 300.0)


def implausible_total(total_msun):
    """Why a median total mass [M_sun] fits no known binary, or None."""
    low, high = PLAUSIBLE_TOTAL_MSUN
    if total_msun is None or low <= total_msun <= high:
        return None
    than = (f"more than any binary known (the heaviest weigh of order 100-200 M_sun)"
            if total_msun > high else
            f"less than any pair of stars or brown dwarfs known (the lightest weigh about "
            f"{low:g} M_sun together)")
    return (f"The total mass, {fmt.number(total_msun, 3)} M_sun, is {than}: check the "
            "parallax (in mas) and the orbit's a (in arcsec), which the mass takes cubed, "
            "before using it.")


# ------------------------------------------------------------------------- formatting
def budget_rows(budget):
    """(label, share, detail) rows of a variance budget: the orbit's share (a and P
    together, the variance of 3 ln a - 2 ln P) beside the parallax's, then the separate a,
    P and covariance terms as detail (those can exceed 100 % and cancel each other when a
    and P are strongly correlated; their sum is the orbit's share)."""
    names = {"a": "a", "P": "P", "a_P_covariance": "a\N{EN DASH}P covariance"}
    orbit = sum(budget.get(k, 0.0) for k in names)
    return ([("orbit (a and P)", orbit, False), ("parallax", budget.get("parallax", 0.0), False)]
            + [(label, budget[k], True) for k, label in names.items() if k in budget])


def _budget_lines(budget):
    lines = ["", "Share of the mass variance (linear propagation):"]
    for label, share, detail in budget_rows(budget):
        if detail and "detail" not in lines[-1] and not lines[-1].startswith("    "):
            lines.append("  detail of the orbit's share (3 ln a - 2 ln P):")
        lines.append(f"  {'  ' * detail}{label:<{22 - 2 * detail}}{fmt.percent(share):>9}")
    return lines


def _mass_row(name, m):
    value, low, high, low95, high95 = fmt.interval_parts(m["value"], m["low"], m["high"],
                                                         m.get("low95"), m.get("high95"))
    linear = m.get("linear")
    lin = fmt.value_error(linear["value"], linear["error"]) if linear else ""
    return (f"{name:<14}{value:>10}  {'[' + low + ', ' + high + ']':<25}"
            f"{'[' + low95 + ', ' + high95 + ']':<25}{lin}")


def _dynamical_lines(plx):
    """The dynamical parallax's interval, inputs and iteration, a few lines."""
    value, low, high, low95, high95 = fmt.interval_parts(
        plx["value"], plx["low"], plx["high"], plx.get("low95"), plx.get("high95"))
    (m1, m2), (e1, e2) = plx["magnitudes"], plx.get("magnitude_errors", (0.0, 0.0))
    scatter = plx.get("relation_scatter") or {}
    lines = [f"  median {value} mas, 68% [{low}, {high}], 95% [{low95}, {high95}]",
             f"  {plx['relation']}",
             f"  magnitudes {fmt.value_error(m1, e1)} and {fmt.value_error(m2, e2)} "
             f"(band {plx['band']})"]
    if scatter:
        lines.append(f"  relation scatter {fmt.number(scatter['sigma_dex'], 3)} dex in "
                     f"{scatter['variable']} ({scatter['source']})")
    change = plx.get("last_change_mas")
    state = "converged" if plx.get("converged", True) else "NOT converged"
    lines.append(f"  iteration at the best (P, a): {state} after {plx['iterations']} steps"
                 + ("" if change is None else f", last change {fmt.number(change, 2)} mas"))
    return lines


def format_mass_blocks(blocks):
    """Plain-text table of the blocks returned by ``mass_blocks``."""
    mass, plx = blocks["mass"], blocks["parallax"]
    lines = [f"Parallax ({plx['kind']}): {fmt.value_error(plx['value'], plx['error'], 'mas')}"]
    if "orbital" in plx:
        o = plx["orbital"]
        value, low, high = fmt.interval_parts(o["value"], o["low"], o["high"])
        lines.append(f"Orbital parallax (visual orbit with K1 + K2): {value} mas, "
                     f"68% [{low}, {high}]")
    if plx["kind"] == "dynamical":
        lines += _dynamical_lines(plx)
    lines += ["", f"{'Mass [M_sun]':<14}{'median':>10}  {'68% interval':<25}{'95% interval':<25}"
                  f"linear"]
    lines += [_mass_row(name, mass[name]) for name in ("total", "primary", "secondary")
              if name in mass]
    if mass.get("budget"):
        lines += _budget_lines(mass["budget"])
    lines += ["", f"{mass['draws']} draws, seed {mass['seed']}"
              + (f"; parallax {mass['parallax_draws']}" if "parallax_draws" in mass else "")]
    if blocks["warnings"]:
        lines += ["", "Warnings:"] + [f"  - {w}" for w in blocks["warnings"]]
    return "\n".join(lines)


def masses_for_document(doc, parallax=None, mass_ratio=None, rv_amplitudes=None,
                        magnitudes=None, band=None, n_draws=4000, seed=1,
                        bolometric_corrections=None):
    """Mass blocks for a result document: element draws (posterior, else covariance,
    else independent errors) through ``mass_blocks``. Returns the blocks with
    ``mass["draws_source"]`` set; the document itself is not changed."""
    from .result import draws_for_masses, elements_from_document

    joint = _sampled_parallax(doc, parallax)
    draws, source, cov_pa, notes = draws_for_masses(doc, n_draws, seed, with_parallax=joint)
    best = elements_from_document(doc)
    blocks = mass_blocks(draws[:, 0], draws[:, 3], parallax=parallax, mass_ratio=mass_ratio,
                         rv_amplitudes=rv_amplitudes, magnitudes=magnitudes, band=band,
                         seed=seed, best=(best.period_yr, best.a_arcsec), cov_Pa=cov_pa,
                         e_draws=draws[:, 2], i_draws=draws[:, 4],
                         bolometric_corrections=bolometric_corrections,
                         parallax_draws=draws[:, 7] if joint else None)
    blocks["warnings"][:0] = notes
    blocks["mass"]["warnings"][:0] = notes
    blocks["mass"]["draws_source"] = source
    if parallax is not None:
        blocks["mass"]["parallax_draws"] = ("sampled with the elements (posterior draws)"
                                            if joint else "drawn from N(value, error)")
    return blocks


def _sampled_parallax(doc, parallax):
    """Whether the posterior draws hold this very parallax, sampled with the elements."""
    prior = (doc.get("posterior") or {}).get("parallax_prior")
    return bool(prior and parallax is not None and doc["posterior"].get("draws_file")
                and (float(prior["value"]), float(prior["error"]))
                == (float(parallax[0]), float(parallax[1])))
