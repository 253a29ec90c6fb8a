"""Measurement logs of a resolved pair: reading, validation, and the ``MeasurementSet``.

Log files are read by ``tables.read_table`` (CSV, tab- or whitespace-separated, or ECSV;
see there). An ECSV header's column units are honoured (theta, sigma_theta in any angle
unit, e.g. deg, rad, arcmin; rho, sigma_rho e.g. arcsec or mas; an epoch column in ``d``
reads plain numbers as JD/MJD) and its ``meta`` may carry the pair's coordinates
(``target_ra_deg``/``target_dec_deg`` in degrees, or sexagesimal ``ra``/``dec`` strings).

Columns (matched case-insensitively; ``columns={'epoch': 'date'}`` or ``--columns
epoch=date`` names your own headers): ``epoch, theta, rho`` are required;
``sigma_theta, sigma_rho, weight, technique, flag, note`` are optional. Units without an
ECSV header: theta and sigma_theta in degrees, rho and sigma_rho in arcsec. Epochs are
written as described in ``reductions`` (a plain decimal year is Besselian). Other columns
are kept out of the fit and listed as ignored. An empty cell, ``-``, ``--``, ``na``,
``n/a``, ``nan``, ``null`` or ``none`` is a missing value.

Rules
-----
* ``flag``: empty (or a missing-value marker), ``0``, ``no``, ``false`` or ``ok`` keeps the
  row; any other text excludes it from fitting. The row stays in the set (``excluded``).
* Values outside ``PHYSICAL_BOUNDS`` (rho, the sigmas, the weight) reject the row.
* ``weight`` w > 0 (default 1) scales the uncertainties: effective sigma = sigma / sqrt(w).
* A missing sigma is taken from ``TECHNIQUE_DEFAULTS`` for the row's technique
  (``sigma_defaulted``); techniques outside the vocabulary use the conservative 'unknown'.
* A row that cannot be used goes to ``rejected`` with line, column and reason (or, with
  ``strict=True``, raises ``LogFormatError``); a problem of the whole file always raises.
  Every data line ends up accepted or rejected: ``n_lines = len(set) + len(rejected)``.
* With the pair's coordinates, theta is referred to equinox J2000
  (``reductions.precess_theta_to_j2000``); ``theta_input_deg`` keeps the value as written.
  Rows of technique 'space' are not precessed: Hipparcos and Gaia give position angles in
  the ICRS, already aligned with J2000.
"""
from __future__ import annotations

import functools
import math
import re
from collections import deque
from dataclasses import dataclass, field

import numpy as np

from . import formatting as fmt
from .elements import wrap_degrees
from .errors import InputError, LogFormatError
from .reductions import (EPOCH_SCALES, julian_years_of, parse_target_coordinates,
                         precess_theta_to_j2000, split_epoch)
from .tables import KEEP_FLAGS, MISSING_MARKERS, RowError, collect_rows, epochs_in_days, read_table

__all__ = ["MeasurementSet", "Suspicion", "REQUIRED_COLUMNS", "OPTIONAL_COLUMNS",
           "TECHNIQUE_DEFAULTS", "TECHNIQUE_ALIASES", "technique_class", "default_sigmas",
           "read_measurements", "suspicious_rows", "PHYSICAL_BOUNDS"]

REQUIRED_COLUMNS = ("epoch", "theta", "rho")
OPTIONAL_COLUMNS = ("sigma_theta", "sigma_rho", "weight", "technique", "flag", "note")

#: Typical 1-sigma errors of one measurement, by technique: (sigma_theta [deg],
#: sigma_rho [arcsec]). sigma_theta None means an isotropic position error:
#: sigma_theta = sigma_rho / rho (in radians). Values: common practice, no source.
TECHNIQUE_DEFAULTS = {
    "micrometer": (1.5, 0.15),       # visual filar micrometer: 1-2 deg, 0.1-0.2 arcsec
    "photographic": (None, 0.03),    # long-focus plates
    "speckle": (None, 0.005),        # 4 m class telescope: a few mas
    "adaptive_optics": (None, 0.002),  # ~1 mas at best
    "space": (None, 0.003),          # Hipparcos / Gaia relative positions
    "unknown": (2.0, 0.2),           # conservative, micrometer-like
}

#: Physical bounds of a row's values (inclusive; internal units), checked by row. Below the
#: floors no astrometry exists (1 micro-arcsec, beyond any interferometer or space mission)
#: and the fit's linear algebra loses all precision; a separation above one degree is no
#: orbiting pair; the weight range keeps the effective sigma above 1e-8 (common practice,
#: no source).
PHYSICAL_BOUNDS = {
    "rho": (1e-6, 3600.0, "arcsec"),
    "sigma_theta": (1e-6, 180.0, "deg"),
    "sigma_rho": (1e-6, 3600.0, "arcsec"),
    "weight": (1e-4, 1e4, ""),
}

#: Other names accepted for the techniques (lower case; '-' and '_' read as spaces).
TECHNIQUE_ALIASES = {
    "visual": "micrometer", "micrometric": "micrometer", "filar": "micrometer",
    "filar micrometer": "micrometer",
    "photo": "photographic", "plate": "photographic", "pg": "photographic",
    "interferometric": "speckle", "interferometry": "speckle",
    "speckle interferometry": "speckle",
    "ao": "adaptive_optics", "adaptive optics": "adaptive_optics",
    "hipparcos": "space", "gaia": "space", "hst": "space", "space astrometry": "space",
}


@dataclass
class MeasurementSet:
    """Validated relative positions, one entry per accepted log line.

    Attributes
    ----------
    source : str
        Path (or name) of the log.
    line : ndarray of int
        1-based line number of each measurement in the source file.
    epoch_yr : ndarray
        Epoch as a decimal Julian year (TT), the internal time axis.
    epoch_text : ndarray of str
        The epoch exactly as written in the log.
    epoch_scale : str
        How the log wrote epochs: 'besselian', 'julian', 'jd', 'mjd' or 'iso'; results
        give epochs back in this scale (see ``reductions.from_julian_year``).
    theta_deg : ndarray
        Position angle [deg], reduced to equinox J2000 when target coordinates were given.
    theta_input_deg : ndarray
        Position angle as written in the log [deg].
    rho_arcsec, sigma_theta_deg, sigma_rho_arcsec : ndarray
        Separation and the 1-sigma uncertainties [arcsec, deg, arcsec].
    weight : ndarray
        Extra weight w (default 1): the effective sigma is sigma / sqrt(w).
    technique : ndarray of str
        Observing technique, one of the ``TECHNIQUE_DEFAULTS`` keys.
    sigma_defaulted : ndarray of bool
        True where a sigma was missing and the technique's default was used.
    excluded : ndarray of bool
        True where the user's ``flag`` column excludes the row from fitting.
    note : ndarray of str
        The log's note column.
    rejected : list of tables.RowProblem
        Lines that were read but could not be used, with the reason.
    n_lines : int
        Number of data lines in the file (accepted + rejected).
    meta : dict
        Metadata: 'format', 'columns' (canonical -> header), 'units', 'ignored_columns',
        'header' (ECSV meta), 'precession', 'epoch_scale_note' (when rows mix scales),
        'file_lines'.
    technique_input : ndarray of str
        The technique as written in the log (empty where the column is absent).
    flag : ndarray of str
        The flag as written in the log.
    """

    source: str
    line: np.ndarray
    epoch_yr: np.ndarray
    epoch_text: np.ndarray
    epoch_scale: str
    theta_deg: np.ndarray
    theta_input_deg: np.ndarray
    rho_arcsec: np.ndarray
    sigma_theta_deg: np.ndarray
    sigma_rho_arcsec: np.ndarray
    weight: np.ndarray
    technique: np.ndarray
    sigma_defaulted: np.ndarray
    excluded: np.ndarray
    note: np.ndarray
    rejected: list = field(default_factory=list)
    n_lines: int = 0
    meta: dict = field(default_factory=dict)
    technique_input: np.ndarray | None = None
    flag: np.ndarray | None = None

    def __post_init__(self):
        if self.epoch_scale not in EPOCH_SCALES:
            raise ValueError(f"epoch_scale {self.epoch_scale!r} is not one of {EPOCH_SCALES}")
        n = len(self.line)
        if self.technique_input is None:
            self.technique_input = np.array(self.technique, dtype=str)
        if self.flag is None:
            self.flag = np.full(n, "", dtype=object).astype(str)

    def __len__(self):
        return len(self.line)

    @property
    def usable(self):
        """Boolean mask of rows not excluded by the user."""
        return ~self.excluded

    @property
    def sigma_theta_eff_deg(self):
        """Effective position-angle uncertainty sigma_theta / sqrt(weight) [deg]."""
        return self.sigma_theta_deg / np.sqrt(self.weight)

    @property
    def sigma_rho_eff_arcsec(self):
        """Effective separation uncertainty sigma_rho / sqrt(weight) [arcsec]."""
        return self.sigma_rho_arcsec / np.sqrt(self.weight)

    @classmethod
    def from_arrays(cls, epoch_yr, theta_deg, rho_arcsec, sigma_theta_deg, sigma_rho_arcsec,
                    technique="unknown", source="<arrays>", epoch_scale="julian"):
        """Build a set directly from arrays (programmatic use and tests)."""
        t = np.asarray(epoch_yr, float)
        n = t.size
        full = lambda v, dtype=float: np.broadcast_to(np.asarray(v, dtype), (n,)).copy()  # noqa: E731
        theta = np.mod(full(theta_deg), 360.0)
        return cls(source=source, line=np.arange(1, n + 1), epoch_yr=t,
                   epoch_text=np.array([repr(float(v)) for v in t]), epoch_scale=epoch_scale,
                   theta_deg=theta, theta_input_deg=theta.copy(), rho_arcsec=full(rho_arcsec),
                   sigma_theta_deg=full(sigma_theta_deg), sigma_rho_arcsec=full(sigma_rho_arcsec),
                   weight=np.ones(n), technique=full(technique, object).astype(str),
                   sigma_defaulted=np.zeros(n, bool), excluded=np.zeros(n, bool),
                   note=np.array([""] * n), n_lines=n)


# ----------------------------------------------------------------------------- techniques

@functools.lru_cache(maxsize=256)      # a log repeats a few techniques on every row
def technique_class(text):
    """The ``TECHNIQUE_DEFAULTS`` key for a technique as written ('unknown' if not known)."""
    key = re.sub(r"[\s_-]+", " ", str(text).strip().lower())
    if key.replace(" ", "_") in TECHNIQUE_DEFAULTS:
        return key.replace(" ", "_")
    return TECHNIQUE_ALIASES.get(key, "unknown")


def default_sigmas(technique, rho_arcsec, sigma_rho_arcsec=None):
    """Default (sigma_theta [deg], sigma_rho [arcsec]) of a technique at separation rho.

    A given ``sigma_rho_arcsec`` is used for the isotropic sigma_theta = sigma_rho / rho.
    """
    sig_theta, sig_rho = TECHNIQUE_DEFAULTS[technique]
    if sigma_rho_arcsec is not None:
        sig_rho = sigma_rho_arcsec
    if sig_theta is None:
        sig_theta = float(np.degrees(sig_rho / rho_arcsec))
    return sig_theta, sig_rho


# ------------------------------------------------------------------------ measurement logs

_INTERNAL_UNITS = {"theta": "deg", "sigma_theta": "deg", "rho": "arcsec", "sigma_rho": "arcsec",
                   "weight": ""}


def _unit_factors(table):
    """Factor to internal units of each numeric column ({} entries default to 1)."""
    if not table.units:
        return {}
    import astropy.units as u

    factors = {}
    for name, unit in table.units.items():
        if name not in _INTERNAL_UNITS:
            continue
        try:
            factors[name] = u.Unit(unit).to(_INTERNAL_UNITS[name])
        except (ValueError, u.UnitsError):
            wanted = {"deg": "an angle (deg, rad, arcmin)", "arcsec": "an angle (arcsec, mas)",
                      "": "dimensionless"}[_INTERNAL_UNITS[name]]
            raise LogFormatError(table.path, f"the ECSV header gives unit '{unit}'; expected "
                                 f"{wanted}", column=table.columns[name]) from None
    return factors

def _number(cells, name, factors, header):
    """The cell as a float in internal units, None when missing."""
    text = cells.get(name, "")
    if text.lower() in MISSING_MARKERS:
        return None
    try:
        value = float(text)
    except ValueError:
        raise RowError(header.get(name, name), f"'{text}' is not a number; expected "
                        f"{_EXPECTED[name]}") from None
    if not math.isfinite(value):
        raise RowError(header.get(name, name), f"'{text}' is not finite; expected "
                        f"{_EXPECTED[name]}")
    return value * factors.get(name, 1.0)


_EXPECTED = {
    "theta": "a position angle in [0, 360) deg, North through East",
    "rho": "a separation > 0 in arcsec",
    "sigma_theta": "a 1-sigma uncertainty > 0 in deg, or an empty cell for the technique's "
                   "default",
    "sigma_rho": "a 1-sigma uncertainty > 0 in arcsec, or an empty cell for the technique's "
                 "default",
    "weight": "a weight > 0 (effective sigma = sigma / sqrt(weight)); to leave a row out use "
              "the flag column",
}


def _check_bounds(value, text, column, name):
    """RowError when a read value lies outside ``PHYSICAL_BOUNDS``."""
    if value is None:
        return
    low, high, unit = PHYSICAL_BOUNDS[name]
    if not low <= value <= high:
        shown = f"'{text}'" if text.strip() else fmt.number(value, 6)
        raise RowError(column, f"{shown} is outside [{low:g}, {high:g}] {unit}, the range a "
                        f"measurement can have; expected {_EXPECTED[name]}")


def _parse_row(cells, factors, header, day_unit):
    """A validated record from one row's cells; RowError on the first bad cell."""
    col = lambda name: header.get(name, name)  # noqa: E731 - column name as the user wrote it
    epoch_text = cells["epoch"]
    if epoch_text.lower() in MISSING_MARKERS:
        raise RowError(col("epoch"), "the epoch is missing; every row needs one")
    try:
        epoch_value, scale = split_epoch(epoch_text, day_unit)
    except ValueError as exc:
        raise RowError(col("epoch"), str(exc)) from None
    theta, rho = _number(cells, "theta", factors, header), _number(cells, "rho", factors, header)
    for name, value in (("theta", theta), ("rho", rho)):
        if value is None:
            raise RowError(col(name), f"the value is missing; expected {_EXPECTED[name]}")
    if not 0.0 <= theta < 360.0:
        shown = cells["theta"] if "theta" not in factors else f"{cells['theta']} = {fmt.number(theta, 6)} deg"
        raise RowError(col("theta"), f"'{shown}' is outside [0, 360) deg; position "
                        "angles run from 0 (North) through 90 (East); correct it (e.g. add or "
                        "subtract 360)")
    if rho <= 0.0:
        raise RowError(col("rho"), f"'{cells['rho']}' is not > 0; a separation must be "
                        "positive (an unresolved observation has no place in the log)")
    record = {"epoch_text": epoch_text, "epoch_value": epoch_value, "scale": scale,
              "theta": theta, "rho": rho}
    for name in ("sigma_theta", "sigma_rho", "weight"):
        value = _number(cells, name, factors, header)
        if value is not None and value <= 0.0:
            what = "negative" if value < 0 else ("zero, which would give the row infinite "
                                                 "weight" if name != "weight" else "zero")
            raise RowError(col(name), f"'{cells[name]}' is {what}; expected {_EXPECTED[name]}")
        record[name] = value
    for name in ("rho", "sigma_theta", "sigma_rho", "weight"):
        _check_bounds(record[name], cells[name] if name in cells else "", col(name), name)
    record["technique_input"] = cells.get("technique", "")
    record["flag"] = cells.get("flag", "")
    record["note"] = cells.get("note", "")
    return record


def _complete(record):
    """Fill defaults: technique class, sigmas from the technique table, weight 1, flag."""
    technique = technique_class(record["technique_input"])
    record["defaulted"] = record["sigma_theta"] is None or record["sigma_rho"] is None
    if record["defaulted"]:
        sig_theta, record["sigma_rho"] = default_sigmas(technique, record["rho"],
                                                        record["sigma_rho"])
        if record["sigma_theta"] is None:
            record["sigma_theta"] = sig_theta
    record["weight"] = 1.0 if record["weight"] is None else record["weight"]
    record["technique"] = technique
    record["excluded"] = record["flag"].lower() not in KEEP_FLAGS
    return record


def _target(path, table, ra, dec):
    """(ra_deg, dec_deg, source) of the pair from arguments or the ECSV meta, or None."""
    if (ra is None) != (dec is None):
        raise InputError("give both target coordinates (--target-ra and --target-dec), or "
                         "neither")
    if ra is not None:
        return (*parse_target_coordinates(ra, dec), "arguments")
    meta = {str(k).lower(): v for k, v in table.meta.items()}
    for ra_key, dec_key in (("target_ra_deg", "target_dec_deg"), ("ra", "dec")):
        if ra_key in meta and dec_key in meta:
            try:
                return (*parse_target_coordinates(meta[ra_key], meta[dec_key]),
                        f"ECSV meta ({ra_key}, {dec_key})")
            except InputError as exc:
                raise LogFormatError(path, f"ECSV meta: {exc}", line=2) from None
    return None


def _precess(records, target):
    """theta [deg] referred to J2000 for every record, and the meta entry saying so."""
    theta_in = np.array([r["theta"] for r in records], float)
    if target is None:
        return theta_in.copy(), {"applied": False, "equinox": "of date, not precessed",
                                 "reason": "no target coordinates (--target-ra/--target-dec "
                                           "or ECSV meta target_ra_deg/target_dec_deg)"}
    ra, dec, source = target
    epoch = np.array([r["epoch_yr"] for r in records], float)
    space = np.array([r["technique"] == "space" for r in records], bool)
    theta = theta_in.copy()
    if (~space).any():
        theta[~space] = precess_theta_to_j2000(theta_in[~space], epoch[~space], ra, dec)
    change = (theta - theta_in + 180.0) % 360.0 - 180.0
    return theta, {"applied": True, "equinox": "J2000", "target_ra_deg": ra, "target_dec_deg": dec,
                   "source": source, "method": "rigorous FK5 precession (astropy), equinox "
                                               "of date -> J2000",
                   "rows_precessed": int((~space).sum()), "rows_space_not_precessed":
                   int(space.sum()), "max_abs_change_deg": float(np.abs(change).max(initial=0))}


def read_measurements(path, columns=None, target_ra_deg=None, target_dec_deg=None,
                      strict=False, shown_as=None):
    """Read and validate a measurement log (see the module notes for the format).

    Parameters
    ----------
    path : str or Path
        CSV, whitespace-separated or ECSV log.
    columns : dict, optional
        Canonical name -> your header name (``parse_column_mapping('epoch=date')``).
    target_ra_deg, target_dec_deg : float or str, optional
        J2000 coordinates of the pair [deg, or sexagesimal text]; theta is then referred
        to equinox J2000. Without them the ECSV meta is searched.
    strict : bool
        Raise ``LogFormatError`` on the first unusable row instead of rejecting it.
    shown_as : str, optional
        The log's name in messages and as ``source`` (``tables.read_table``).

    Returns
    -------
    MeasurementSet

    Raises
    ------
    LogFormatError
        For problems of the whole file, and for any bad row when ``strict``.
    """
    table = read_table(path, REQUIRED_COLUMNS, OPTIONAL_COLUMNS, columns, shown_as=shown_as)
    factors = _unit_factors(table)
    day_unit = epochs_in_days(table)
    records, problems = collect_rows(
        table, lambda cells: _complete(_parse_row(cells, factors, table.columns, day_unit)),
        lambda r: (r["scale"], r["epoch_value"], r["theta"], r["rho"]),
        "epoch, theta and rho", strict)
    return _assemble(table, records, problems, _target(table.path, table, target_ra_deg,
                                                       target_dec_deg))


def _assemble(table, records, problems, target):
    """The MeasurementSet of the accepted records."""
    scales = [r["scale"] for r in records]
    epoch_yr = julian_years_of([r["epoch_value"] for r in records], scales)
    for r, t in zip(records, epoch_yr):
        r["epoch_yr"] = float(t)
    theta, precession = _precess(records, target)
    meta = {"format": table.format, "columns": table.columns, "units": table.units,
            "ignored_columns": table.ignored_columns, "header": table.meta,
            "precession": precession, "header_line": table.header_line,
            "file_lines": table.n_file_lines}
    scale = scales[0] if scales else "besselian"
    counts = {s: scales.count(s) for s in dict.fromkeys(scales)}
    if len(counts) > 1:
        mix = ", ".join(f"{s}: {n}" for s, n in counts.items())
        meta["epoch_scale_note"] = (f"rows mix epoch scales ({mix}); results are written as "
                                    f"{scale}, the scale of the first row")
    col = lambda key, dtype=float: np.array([r[key] for r in records], dtype=dtype)  # noqa: E731
    return MeasurementSet(
        source=table.path, line=col("line", int), epoch_yr=np.asarray(epoch_yr, float),
        epoch_text=col("epoch_text", str), epoch_scale=scale, theta_deg=theta,
        theta_input_deg=col("theta"), rho_arcsec=col("rho"), sigma_theta_deg=col("sigma_theta"),
        sigma_rho_arcsec=col("sigma_rho"), weight=col("weight"), technique=col("technique", str),
        sigma_defaulted=col("defaulted", bool), excluded=col("excluded", bool),
        note=col("note", str), rejected=problems, n_lines=table.n_data_lines, meta=meta,
        technique_input=col("technique_input", str), flag=col("flag", str))


# ------------------------------------------------------------------------- suspicious points

#: Rules of ``suspicious_rows`` (common practice, no source).
FLIP_NEIGHBOURS = 2        # rows compared on each side in time for the quadrant-flip test
FLIP_WINDOW_YR = 5.0       # ... when no farther away in time than this [yr]
FLIP_MIN_DEG = 150.0       # |delta theta| at least this is "about 180 deg"
FLIP_RHO_TOL = 0.25        # "similar rho": relative difference at most this
TIGHT_FRACTION = 0.1       # sigma below this fraction of the technique's typical value
SAME_EPOCH_YR = 0.001      # epochs closer than this are the same epoch [yr]
DISCORDANT_SIGMAS = 3.0    # same-epoch rows differing by more than this many combined sigmas


@dataclass(frozen=True)
class Suspicion:
    """A usable row that looks wrong: 1-based file line, rule name and explanation."""

    line: int
    rule: str
    message: str


def suspicious_rows(ms):
    """Rows worth a second look; they stay in the set (advice only).

    Rules, on rows not excluded by a flag:

    * ``quadrant_flip``: theta differs by at least ``FLIP_MIN_DEG`` from most of its
      neighbours: the ``FLIP_NEIGHBOURS`` nearest rows in time on each side, within
      ``FLIP_WINDOW_YR``, whose rho agrees within ``FLIP_RHO_TOL`` (relative to the smaller). With a
      single neighbour both rows are named, since either may be the flipped one.
    * ``small_sigma``: an effective sigma below ``TIGHT_FRACTION`` of the technique's
      typical value (``TECHNIQUE_DEFAULTS``; for isotropic techniques sigma_theta is
      compared as rho * sigma_theta); not applied to technique 'unknown'.
    * ``discordant_same_epoch``: a row within ``SAME_EPOCH_YR`` of earlier rows and
      differing in theta or rho by more than ``DISCORDANT_SIGMAS`` combined effective
      sigmas from one of the earlier rows that bound them: the highest and the lowest
      3-sigma edges in theta and in rho (one suspicion a row, naming the earliest such
      row). Comparing with these bounds, not with every earlier row, keeps the cost
      linear however many rows share an epoch.

    Returns
    -------
    list of Suspicion, ordered by line
    """
    use = np.flatnonzero(ms.usable)
    use = use[np.argsort(ms.epoch_yr[use], kind="stable")]  # time order: neighbours adjacent
    t, th, rho = ms.epoch_yr[use], ms.theta_deg[use], ms.rho_arcsec[use]
    s_th, s_rho = ms.sigma_theta_eff_deg[use], ms.sigma_rho_eff_arcsec[use]
    lines = ms.line[use]
    out = _flips(t, th, rho, lines)
    for k in range(use.size):
        message = _tight_sigma(ms.technique[use[k]], rho[k], s_th[k], s_rho[k])
        if message and not ms.sigma_defaulted[use[k]]:
            out.append(Suspicion(int(lines[k]), "small_sigma", message))
    for j, i, n_earlier in _discordant(t, th, rho, s_th, s_rho, SAME_EPOCH_YR):
        d_th, d_rho = abs(wrap_degrees(th[i] - th[j])), abs(rho[i] - rho[j])
        among = f" (one of {n_earlier} earlier rows at that epoch)" if n_earlier > 1 else ""
        out.append(Suspicion(int(lines[j]), "discordant_same_epoch",
                             f"same epoch as line {lines[i]}{among} but differs by {d_th:.2f} "
                             f"deg in theta and {d_rho:.4f} arcsec in rho (more than "
                             f"{DISCORDANT_SIGMAS:g} combined sigmas)"))
    return sorted(out, key=lambda s: s.line)


def _discordant(t, th, rho, s_th, s_rho, window):
    """(j, i, n_earlier) for time-sorted rows j discordant with an earlier row i within
    ``window`` (rule in ``suspicious_rows``); n_earlier counts the rows of j's window.

    The candidates i are the earlier rows of the window with the extreme 3-sigma edges,
    found by ``_window_argmax`` in linear time; theta is unwrapped along time so that the
    edges of a window straddling 0/360 deg are ordered.
    """
    n = t.size
    start = np.searchsorted(t, t - window, side="left")
    if not np.any(start < np.arange(n)):
        return []
    u = np.unwrap(th, period=360.0)
    wide = DISCORDANT_SIGMAS
    cand = np.stack([_window_argmax(u - wide * s_th, start),
                     _window_argmax(-(u + wide * s_th), start),
                     _window_argmax(rho - wide * s_rho, start),
                     _window_argmax(-(rho + wide * s_rho), start)], axis=1)
    j, i = np.arange(n)[:, None], np.maximum(cand, 0)
    bad = (cand >= 0) & ((np.abs(wrap_degrees(th[i] - th[j])) > wide * np.hypot(s_th[i], s_th[j]))
                         | (np.abs(rho[i] - rho[j]) > wide * np.hypot(s_rho[i], s_rho[j])))
    first = np.where(bad, i, n).min(axis=1)
    return [(k, int(first[k]), int(k - start[k])) for k in np.flatnonzero(first < n)]


def _window_argmax(key, start):
    """Index of the largest ``key`` among rows ``start[j] .. j-1`` for each row j (-1 when
    none; the earliest on ties). ``start`` never decreases, so a queue of candidates in
    decreasing key order serves every window, each row entering and leaving it once."""
    key, start = key.tolist(), start.tolist()
    best, queue = np.full(len(key), -1), deque()
    for j, value in enumerate(key):
        while queue and queue[0] < start[j]:
            queue.popleft()
        if queue:
            best[j] = queue[0]
        while queue and key[queue[-1]] < value:
            queue.pop()
        queue.append(j)
    return best


def _flips(t, th, rho, lines):
    """Quadrant-flip suspicions among time-sorted rows (rule in ``suspicious_rows``)."""
    n = t.size
    n_near, partners = np.zeros(n, int), [[] for _ in range(n)]
    for d in range(1, FLIP_NEIGHBOURS + 1):
        i = np.arange(max(n - d, 0))
        j = i + d
        near = ((t[j] - t[i] <= FLIP_WINDOW_YR)
                & (np.abs(rho[j] - rho[i]) <= FLIP_RHO_TOL * np.minimum(rho[i], rho[j])))
        np.add.at(n_near, i[near], 1)
        np.add.at(n_near, j[near], 1)
        for a in i[near & (np.abs(wrap_degrees(th[j] - th[i])) >= FLIP_MIN_DEG)]:
            partners[a].append(a + d)
            partners[a + d].append(a)
    return [Suspicion(int(lines[k]), "quadrant_flip",
                      f"theta {th[k]:.1f} deg is about 180 deg from "
                      f"{fmt.line_list([lines[p] for p in sorted(partners[k])], most=n)} at "
                      "similar rho: "
                      f"possible quadrant flip (theta + 180 = {(th[k] + 180) % 360:.1f})")
            for k in range(n) if 2 * len(partners[k]) > n_near[k]]


def _tight_sigma(technique, rho, sig_theta, sig_rho):
    """Message when a sigma is implausibly small for the technique, else None."""
    if technique not in TECHNIQUE_DEFAULTS or technique == "unknown":  # no typical value
        return None
    typ_theta, typ_rho = TECHNIQUE_DEFAULTS[technique]
    small = []
    if sig_rho < TIGHT_FRACTION * typ_rho:
        small.append(f"sigma_rho {fmt.number(sig_rho, 6)} arcsec")
    if typ_theta is None:
        if rho * np.radians(sig_theta) < TIGHT_FRACTION * typ_rho:
            small.append(f"sigma_theta {fmt.number(sig_theta, 6)} deg")
    elif sig_theta < TIGHT_FRACTION * typ_theta:
        small.append(f"sigma_theta {fmt.number(sig_theta, 6)} deg")
    if not small:
        return None
    return (f"{' and '.join(small)} below {TIGHT_FRACTION:g} x the typical value for "
            f"{technique} (sigma_rho {typ_rho:g} arcsec); check the unit or the technique")
