"""Radial velocities of a visual binary: the model and the classical spectroscopic quantities.

Convention (stated once, used everywhere in orbweigh):

* The astrometric omega is the argument of periastron of the SECONDARY relative to the
  primary; the node Omega is the ASCENDING node, the one where the secondary passes the
  plane of the sky moving AWAY from the observer (radial velocity of 2 relative to 1
  positive). Positive radial velocity means recession.
* The primary's spectroscopic argument of periastron is omega1 = omega + 180 deg, and

      V1 = gamma + K1 [cos(nu + omega1) + e cos omega1]
      V2 = gamma - K2 [cos(nu + omega1) + e cos omega1]

  so V2 - V1 = (K1 + K2) [cos(nu + omega) + e cos omega], the line-of-sight velocity of
  the relative orbit, whose distance behind the primary is z = r sin(nu + omega) sin i.
* With velocities, Omega runs over [0, 360): the common 180 deg shift of (Omega, omega)
  that leaves the apparent orbit unchanged flips the sign of every velocity.

Units are in the names: K in km/s, periods in days (spectroscopic formulas, the trade's
custom) or Julian years (orbit formulas). Constants come from ``orbweigh.constants`` (the
IAU's numbers, tested against astropy.constants).

Velocity logs (``read_velocities``) are read like measurement logs, by ``tables.read_table``:
CSV, tab- or whitespace-separated or ECSV; columns ``epoch, component, rv, sigma_rv``
required, ``flag, note`` optional; ``columns`` maps your own headers; every data line ends
up accepted or rejected with its line, column and reason.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .constants import DAY_S, GM_SUN_KM3_S2, KMS_PER_AU_YR, THIRD_LAW_FACTOR
from .errors import LogFormatError
from .kepler import eccentric_anomaly, mean_anomaly, true_anomaly
from .reductions import julian_years_of, split_epoch
from .tables import KEEP_FLAGS, MISSING_MARKERS, RowError, collect_rows, epochs_in_days, read_table

__all__ = [
    "VelocitySet",
    "read_velocities",
    "radial_velocities",
    "a1_sin_i_km",
    "mass_function_msun",
    "m_sin3i_msun",
    "rv_semi_amplitude_kms",
    "semi_major_axis_au_from_rv",
    "orbital_parallax_mas",
    "component_masses_from_orbit",
]


def radial_velocities(t_yr, period_yr, t_peri_yr, e, omega_deg, K1_kms, K2_kms, gamma_kms):
    """Radial velocities of both components.

    Parameters
    ----------
    t_yr : array_like
        Epochs as decimal Julian years.
    period_yr, t_peri_yr : float
        Period P [Julian years] and epoch of periastron T [decimal Julian year].
    e : float
        Eccentricity.
    omega_deg : float
        Astrometric argument of periastron omega [deg] (secondary relative to primary);
        the primary's omega1 = omega + 180 deg.
    K1_kms, K2_kms : float
        Semi-amplitudes of the primary and the secondary [km/s].
    gamma_kms : float
        Systemic velocity [km/s].

    Returns
    -------
    V1, V2 : ndarray
        Radial velocities [km/s], positive away from the observer.
    """
    nu = true_anomaly(eccentric_anomaly(mean_anomaly(t_yr, period_yr, t_peri_yr), e), e)
    omega1 = np.radians(omega_deg) + np.pi
    shape = np.cos(nu + omega1) + e * np.cos(omega1)
    return gamma_kms + K1_kms * shape, gamma_kms - K2_kms * shape


def a1_sin_i_km(K1_kms, P_days, e):
    """Projected semi-major axis of a component's orbit about the centre of mass.

    a1 sin i = K1 P sqrt(1 - e^2) / (2 pi)  [km], K1 [km/s], P [d].
    """
    return K1_kms * P_days * DAY_S * np.sqrt(1.0 - np.square(e)) / (2.0 * np.pi)


def mass_function_msun(K1_kms, P_days, e):
    """Spectroscopic mass function f(M) = M2^3 sin^3 i / (M1 + M2)^2 [M_sun].

    f(M) = P K1^3 (1 - e^2)^(3/2) / (2 pi G M_sun), K1 [km/s], P [d].
    """
    return (P_days * DAY_S * np.power(K1_kms, 3) * np.power(1.0 - np.square(e), 1.5)
            / (2.0 * np.pi * GM_SUN_KM3_S2))


def m_sin3i_msun(K1_kms, K2_kms, P_days, e):
    """Minimum masses (M1 sin^3 i, M2 sin^3 i) [M_sun] of a double-lined binary.

    M1 sin^3 i = P (1 - e^2)^(3/2) (K1 + K2)^2 K2 / (2 pi G M_sun), and the same with K1
    for M2; K [km/s], P [d].
    """
    common = (P_days * DAY_S * np.power(1.0 - np.square(e), 1.5)
              * np.square(K1_kms + K2_kms) / (2.0 * np.pi * GM_SUN_KM3_S2))
    return common * K2_kms, common * K1_kms


def rv_semi_amplitude_kms(a_au, period_yr, e, i_deg):
    """Semi-amplitude K1 + K2 [km/s] of the relative orbit.

    K = 2 pi a sin i / (P sqrt(1 - e^2)), a [au], P [Julian years].
    """
    k_au_yr = (2.0 * np.pi * a_au * np.sin(np.radians(i_deg))
               / (period_yr * np.sqrt(1.0 - np.square(e))))
    return k_au_yr * KMS_PER_AU_YR


def semi_major_axis_au_from_rv(K1_kms, K2_kms, period_yr, e, i_deg):
    """Relative semi-major axis a = (K1 + K2) P sqrt(1 - e^2) / (2 pi sin i) [au]."""
    k_au_yr = (np.asarray(K1_kms, float) + K2_kms) / KMS_PER_AU_YR
    return (k_au_yr * period_yr * np.sqrt(1.0 - np.square(e))
            / (2.0 * np.pi * np.sin(np.radians(i_deg))))


def orbital_parallax_mas(a_arcsec, K1_kms, K2_kms, period_yr, e, i_deg):
    """Orbital parallax [mas]: the angular semi-major axis over the one in au from the RVs.

    Parameters
    ----------
    a_arcsec : float
        Angular semi-major axis of the relative orbit [arcsec].
    K1_kms, K2_kms : float
        Velocity semi-amplitudes [km/s].
    period_yr : float
        Period [Julian years].
    e, i_deg : float
        Eccentricity and inclination [deg].
    """
    return 1e3 * np.asarray(a_arcsec, float) / semi_major_axis_au_from_rv(
        K1_kms, K2_kms, period_yr, e, i_deg)


def component_masses_from_orbit(a_au, P_yr, K1_kms, K2_kms):
    """Component masses (M1, M2) [M_sun] from the third law and q = M2/M1 = K1/K2.

    M1 + M2 = 4 pi^2 a^3 / (G M_sun P^2) with a [au], P [Julian years], using the IAU
    nominal GM_sun (so the total is 1.0000378 a^3/P^2, not exactly a^3/P^2).
    """
    total = THIRD_LAW_FACTOR * np.asarray(a_au, float) ** 3 / np.asarray(P_yr, float) ** 2
    q = np.asarray(K1_kms, float) / K2_kms
    return total / (1.0 + q), total * q / (1.0 + q)


# ------------------------------------------------------------------------ velocity logs

RV_REQUIRED_COLUMNS = ("epoch", "component", "rv", "sigma_rv")
RV_OPTIONAL_COLUMNS = ("flag", "note")
# Barycentric / heliocentric Julian dates are read as JD: the few minutes between the
# time scales are nothing against periods of years.
_JD_PREFIXES = ("BJD", "HJD")


@dataclass
class VelocitySet:
    """Validated radial velocities, one entry per accepted log line.

    Attributes
    ----------
    source : str
        Path (or name) of the log.
    line : ndarray of int
        1-based line number of each velocity in the source file.
    epoch_yr : ndarray
        Epoch as a decimal Julian year (TT), the internal time axis.
    epoch_text : ndarray of str
        The epoch exactly as written.
    epoch_scale : str
        How the log wrote epochs ('jd', 'mjd', 'besselian', 'julian' or 'iso'; BJD and HJD
        count as 'jd'); results give epochs back in this scale.
    component : ndarray of int
        1 (primary) or 2 (secondary).
    rv_kms, sigma_rv_kms : ndarray
        Radial velocity (positive = receding) and its 1-sigma uncertainty [km/s].
    excluded : ndarray of bool
        True where the ``flag`` column excludes the row from fitting.
    flag, note : ndarray of str
        The log's flag and note columns as written.
    rejected : list of tables.RowProblem
        Lines that were read but could not be used, with the reason.
    n_lines : int
        Number of data lines in the file (accepted + rejected).
    meta : dict
        'format', 'columns' (canonical -> header), 'units', 'ignored_columns', 'header'
        (ECSV meta), 'epoch_scale_note' (when rows mix scales).
    """

    source: str
    line: np.ndarray
    epoch_yr: np.ndarray
    epoch_text: np.ndarray
    epoch_scale: str
    component: np.ndarray
    rv_kms: np.ndarray
    sigma_rv_kms: np.ndarray
    excluded: np.ndarray
    flag: np.ndarray
    note: np.ndarray
    rejected: list = field(default_factory=list)
    n_lines: int = 0
    meta: dict = field(default_factory=dict)

    def __len__(self):
        return len(self.line)

    @property
    def usable(self):
        """Boolean mask of rows not excluded by the user."""
        return ~self.excluded

    @property
    def double_lined(self):
        """True when usable velocities of both components exist (SB2), else SB1."""
        return bool(np.any(self.component[self.usable] == 2)
                    and np.any(self.component[self.usable] == 1))


def _velocity_factors(table):
    """Factor to km/s of the rv and sigma_rv columns (ECSV units; 1 without a unit)."""
    factors = {}
    for name in ("rv", "sigma_rv"):
        unit = table.units.get(name)
        if unit is None:
            continue
        import astropy.units as u
        try:
            factors[name] = u.Unit(unit).to(u.km / u.s)
        except (ValueError, u.UnitsError):
            raise LogFormatError(table.path, f"the ECSV header gives unit '{unit}'; expected "
                                 "a velocity (km / s or m / s)",
                                 column=table.columns[name]) from None
    return factors


def _velocity_row(cells, header, factors, day_unit):
    """A validated record of one velocity row; RowError on the first bad cell."""
    col = lambda name: header.get(name, name)  # noqa: E731 - column name as the user wrote it
    text = cells["epoch"]
    if text.lower() in MISSING_MARKERS:
        raise RowError(col("epoch"), "the epoch is missing; every row needs one")
    number = text
    if text[:3].upper() in _JD_PREFIXES:
        number = "JD" + text[3:]
    try:
        epoch_value, scale = split_epoch(number, day_unit)
    except ValueError as exc:
        raise RowError(col("epoch"), str(exc)) from None
    component = cells["component"].strip()
    if component not in ("1", "2"):
        raise RowError(col("component"), f"'{component}' is not a component; expected 1 "
                        "(primary) or 2 (secondary)")
    values = {}
    for name, what in (("rv", "a radial velocity in km/s (positive = receding)"),
                       ("sigma_rv", "a 1-sigma uncertainty > 0 in km/s (velocity logs "
                                    "have no default uncertainty)")):
        cell = cells[name]
        try:
            value = float(cell) * factors.get(name, 1.0)
        except ValueError:
            missing = cell.lower() in MISSING_MARKERS
            reason = "the value is missing" if missing else f"'{cell}' is not a number"
            raise RowError(col(name), f"{reason}; expected {what}") from None
        if not np.isfinite(value):
            raise RowError(col(name), f"'{cell}' is not finite; expected {what}")
        values[name] = value
    if values["sigma_rv"] <= 0.0:
        raise RowError(col("sigma_rv"), f"'{cells['sigma_rv']}' is not > 0; expected a "
                        "1-sigma uncertainty > 0 in km/s (to leave the row out use the flag "
                        "column)")
    return {"epoch_text": text, "epoch_value": epoch_value, "scale": scale,
            "component": int(component), "rv": values["rv"], "sigma_rv": values["sigma_rv"],
            "flag": cells.get("flag", ""), "note": cells.get("note", "")}


def read_velocities(path, columns=None, strict=False, shown_as=None):
    """Read and validate a radial-velocity log.

    Parameters
    ----------
    path : str or Path
        CSV, whitespace-separated or ECSV log with columns ``epoch, component, rv,
        sigma_rv`` and optional ``flag, note``. Epochs: a plain number above 100000 is a
        JD, other plain numbers Besselian years; ``JD``, ``BJD``, ``HJD``, ``MJD``, ``B``,
        ``J`` prefixes and ISO dates as in measurement logs; an ECSV epoch column in days
        reads plain numbers as JD/MJD. rv and sigma_rv in km/s, or the ECSV unit.
    columns : dict, optional
        Canonical name -> your header name, e.g. ``{'rv': 'vrad'}``.
    strict : bool
        Raise ``LogFormatError`` on the first unusable row instead of rejecting it.
    shown_as : str, optional
        The log's name in messages and as ``source`` (``tables.read_table``).

    Returns
    -------
    VelocitySet

    Raises
    ------
    LogFormatError
        For problems of the whole file, and for any bad row when ``strict``.
    """
    table = read_table(path, RV_REQUIRED_COLUMNS, RV_OPTIONAL_COLUMNS, columns,
                       option="--rv-columns", shown_as=shown_as)
    factors = _velocity_factors(table)
    day_unit = epochs_in_days(table)
    records, problems = collect_rows(
        table, lambda cells: _velocity_row(cells, table.columns, factors, day_unit),
        lambda r: (r["scale"], r["epoch_value"], r["component"], r["rv"]),
        "epoch, component and rv", strict)
    return _velocity_set(table, records, problems)


def _velocity_set(table, records, problems):
    """The VelocitySet of the accepted records."""
    scales = [r["scale"] for r in records]
    meta = {"format": table.format, "columns": table.columns, "units": table.units,
            "ignored_columns": table.ignored_columns, "header": table.meta}
    counts = {s: scales.count(s) for s in dict.fromkeys(scales)}
    scale = scales[0] if scales else "jd"
    if len(counts) > 1:
        meta["epoch_scale_note"] = (
            f"rows mix epoch scales ({', '.join(f'{s}: {n}' for s, n in counts.items())}); "
            f"results are written as {scale}, the scale of the first row")
    col = lambda key, dtype=float: np.array([r[key] for r in records], dtype=dtype)  # noqa: E731
    flag = col("flag", str)
    return VelocitySet(
        source=table.path, line=col("line", int),
        epoch_yr=np.asarray(julian_years_of(col("epoch_value"), scales), float),
        epoch_text=col("epoch_text", str), epoch_scale=scale, component=col("component", int),
        rv_kms=col("rv"), sigma_rv_kms=col("sigma_rv"),
        excluded=np.array([f.lower() not in KEEP_FLAGS for f in flag], bool), flag=flag,
        note=col("note", str), rejected=problems, n_lines=table.n_data_lines, meta=meta)
