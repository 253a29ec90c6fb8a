"""Measurement logs of a resolved pair: reading, validation, and the ``MeasurementSet``.

Log files
---------
* **CSV** (comma-separated), **tab-separated** or **whitespace-separated** text: the first
  line that is neither blank nor a ``#`` comment is the header naming the columns; the
  delimiter is a comma when the header has one, else a tab when it has one, else runs of
  spaces. With commas and tabs an empty cell between two delimiters is a cell (a missing
  value). Values containing the delimiter go in double quotes. Rows may stop early when the
  cells left out belong to optional columns. Lines end at ``\n``, ``\r\n`` or ``\r`` only;
  a file must be a regular file of at most ``MAX_LOG_BYTES``.
* **ECSV** (first line ``# %ECSV 1.0``): the YAML header is read with astropy; its column
  units are honoured (theta, sigma_theta in any angle unit, e.g. deg, rad, arcmin; rho,
  sigma_rho e.g. arcsec or mas; an epoch column in ``d`` reads plain numbers as JD/MJD) and
  its ``meta`` may carry the pair's coordinates (``target_ra_deg``/``target_dec_deg`` in
  degrees, or sexagesimal ``ra``/``dec`` strings).

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

import csv
import re
from dataclasses import dataclass, field

import numpy as np

from .elements import wrap_degrees
from .errors import InputError, LogFormatError
from .reductions import (EPOCH_SCALES, julian_years_of, parse_target_coordinates,
                         precess_theta_to_j2000, split_epoch)

__all__ = ["RowProblem", "MeasurementSet", "LogTable", "Suspicion", "REQUIRED_COLUMNS",
           "OPTIONAL_COLUMNS", "MISSING_MARKERS", "TECHNIQUE_DEFAULTS", "TECHNIQUE_ALIASES",
           "technique_class", "default_sigmas", "parse_column_mapping", "read_table",
           "read_measurements", "suspicious_rows", "collect_rows", "epochs_in_days",
           "PHYSICAL_BOUNDS", "MAX_LOG_BYTES"]

REQUIRED_COLUMNS = ("epoch", "theta", "rho")
OPTIONAL_COLUMNS = ("sigma_theta", "sigma_rho", "weight", "technique", "flag", "note")
MISSING_MARKERS = frozenset({"", "-", "--", "na", "n/a", "nan", "null", "none"})
_KEEP_FLAGS = MISSING_MARKERS | {"0", "no", "false", "ok"}

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

#: Other names accepted for the techniques (lower case; '-' and '_' read as spaces).
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

TECHNIQUE_ALIASES = {
    "visual": "micrometer", "micrometric": "micrometer", "filar": "micrometer",
    "filar micrometer": "micrometer",
    "photo": "photographic", "plate": "photographic", "pg": "photographic",
    "interferometric": "speckle", "interferometry": "speckle",
    "speckle interferometry": "speckle",
    "ao": "adaptive_optics", "adaptive optics": "adaptive_optics",
    "hipparcos": "space", "gaia": "space", "hst": "space", "space astrometry": "space",
}


@dataclass(frozen=True)
class RowProblem:
    """A log line that could not be used, and why."""

    line: int
    column: str | None
    reason: str


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
    rejected : list of RowProblem
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


# ------------------------------------------------------------------------ generic table reader

@dataclass
class LogTable:
    """A text table read line by line, cells still as text.

    Attributes
    ----------
    path : str
        The file.
    format : str
        'csv', 'whitespace' or 'ecsv'.
    columns : dict
        Canonical name -> header name as written, for the columns found.
    units : dict
        Canonical name -> unit string from an ECSV header (absent: no unit given).
    rows : list of (int, dict)
        1-based file line and {canonical name: cell text} of each well-formed data line.
    problems : list of RowProblem
        Data lines of the wrong shape (too many or too few cells).
    ignored_columns : list of str
        Header names not used.
    meta : dict
        The ECSV ``meta`` block (empty for CSV).
    header_line : int
        1-based line of the header.
    n_file_lines : int
        Number of lines in the file, blank and comment lines included.
    """

    path: str
    format: str
    columns: dict
    units: dict
    rows: list
    problems: list
    ignored_columns: list
    meta: dict
    header_line: int
    n_file_lines: int

    @property
    def n_data_lines(self):
        """Data lines: well-formed rows plus lines of the wrong shape."""
        return len(self.rows) + len(self.problems)


def parse_column_mapping(text, option="--columns"):
    """``'epoch=date,theta=pa'`` -> ``{'epoch': 'date', 'theta': 'pa'}``.

    Raises
    ------
    InputError
        When a pair is not ``canonical=header``.
    """
    mapping = {}
    for pair in str(text).split(","):
        if not pair.strip():
            continue
        name, sep, header = pair.partition("=")
        if not sep or not name.strip() or not header.strip():
            raise InputError(f"{option}: cannot read '{pair.strip()}'; expected pairs "
                             f"canonical=your_header separated by commas, e.g. "
                             f"{option} epoch=date")
        mapping[name.strip().lower()] = header.strip()
    return mapping


_TOKEN = re.compile(r'"([^"]*)"|(\S+)')
_OTHER_DELIMITERS = ((";", "semicolon ';'"), ("\t", "tab"), (",", "comma ','"), ("|", "bar '|'"),
                     (" ", "spaces"))


def _split_whitespace(text):
    return [quoted if bare == "" else bare for quoted, bare in _TOKEN.findall(text)]


def _split_comma(text):
    return [cell.strip() for cell in next(csv.reader([text], skipinitialspace=True))]


def _split_tab(text):
    """Tab-separated cells; an empty cell between two tabs is a cell."""
    return [cell.strip() for cell in next(csv.reader([text], delimiter="\t"))]


def _other_delimiter(text, used):
    """Name of a delimiter other than ``used`` that appears in ``text``, or None."""
    for char, name in _OTHER_DELIMITERS:
        if char in text and char not in used:
            return name
    return None


#: Largest log read [bytes]: a log of 100,000 rows is a few MB; a bigger file is a mistake.
MAX_LOG_BYTES = 64 * 2 ** 20
_LINE_END = re.compile(r"\r\n|\r|\n")   # only these end a line (not U+2028, form feed, ...)


def _read_lines(path):
    from .tables import read_bounded_bytes
    try:
        text = read_bounded_bytes(path, MAX_LOG_BYTES, what="log").decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise LogFormatError(path, f"not a UTF-8 text file (byte {exc.start} cannot be "
                             "decoded); save the log as plain text") from None
    except InputError as exc:
        raise LogFormatError(path, str(exc).removeprefix(f"{path}: ")) from None
    lines = _LINE_END.split(text)
    return lines[:-1] if lines[-1] == "" else lines


def _ecsv_header(path, lines):
    """(delimiter, {name: unit}, meta) from the YAML header of an ECSV file."""
    from astropy.table.meta import YamlParseError, get_header_from_yaml

    yaml_lines = []
    for text in lines[1:]:
        if not text.startswith("#"):
            break
        yaml_lines.append(text[2:] if text.startswith("# ") else text[1:])
    try:
        header = get_header_from_yaml(yaml_lines)
    except (YamlParseError, ValueError, TypeError) as exc:
        raise LogFormatError(path, f"the ECSV header is not valid YAML ({exc}); compare "
                             "with a file written by astropy Table.write(format='ascii.ecsv')",
                             line=2) from None
    units = {d["name"]: d.get("unit") for d in header.get("datatype", [])}
    return header.get("delimiter", " "), units, dict(header.get("meta") or {})


def _match_columns(path, line, names, required, optional, columns, option):
    """{canonical: index in names}; file-level errors for missing or unknown columns."""
    columns = {k.lower(): v for k, v in (columns or {}).items()}
    unknown = sorted(set(columns) - set(required) - set(optional))
    if unknown:
        raise InputError(f"{option} names {', '.join(unknown)}, which the log does not use; "
                         f"known columns: {', '.join(required + optional)}")
    lower = [n.strip().lower() for n in names]
    doubled = sorted({n for n in lower if lower.count(n) > 1})
    if doubled:
        raise LogFormatError(path, f"the header names column(s) {', '.join(doubled)} twice; "
                             "give every column a distinct name", line=line)
    index = {}
    for name in required + optional:
        wanted = columns.get(name, name).lower()
        if wanted in lower:
            index[name] = lower.index(wanted)
        elif name in columns:
            raise LogFormatError(path, f"{option} maps '{name}' to '{columns[name]}', but the "
                                 f"header has no such column (found: {', '.join(names)})",
                                 line=line)
    missing = [n for n in required if n not in index]
    if missing:
        spare = [n for k, n in enumerate(names) if k not in index.values()]
        example = ",".join(f"{m}={s}" for m, s in zip(missing, spare)) or f"{missing[0]}=NAME"
        raise LogFormatError(path, f"required column(s) {', '.join(missing)} not found; the "
                             f"header has: {', '.join(names)}. Rename the header or map your "
                             f"names with {option}, e.g. {option} {example}", line=line)
    return index


def _header(path, lines, body):
    """(format, split function, names, units, meta) of a CSV, whitespace or ECSV file."""
    line, text = body[0]
    if lines[0].startswith("# %ECSV"):
        delimiter, units, meta = _ecsv_header(path, lines)
        split = _split_comma if delimiter == "," else _split_whitespace
        names = _split_header(path, split, text, line)
        undeclared = [n for n in names if n not in units]
        if units and undeclared:
            raise LogFormatError(path, f"column(s) {', '.join(undeclared)} of the column line "
                                 "are not declared in the ECSV header's datatype list; make "
                                 "the two agree", line=line)
        return "ecsv", split, names, units, meta
    if path.lower().endswith(".ecsv"):
        raise LogFormatError(path, "the name ends in .ecsv but the first line is not "
                             "'# %ECSV 1.0'; write it with astropy or rename it .csv", line=1)
    if "," in text:
        fmt, split, used = "csv", _split_comma, ","
    elif "\t" in text:
        fmt, split, used = "tab", _split_tab, "\t"
    else:
        fmt, split, used = "whitespace", _split_whitespace, " "
    names = _split_header(path, split, text, line)
    other = _other_delimiter(text, used)
    if len(names) == 1 and other:
        raise LogFormatError(path, f"wrong delimiter: the header '{text.strip()}' is one "
                             f"column; it seems separated by {other}. Separate columns with "
                             "commas or whitespace", line=line)
    if all(_is_number(n) for n in names):
        raise LogFormatError(path, "this line looks like data, not a header; add a first "
                             "line naming the columns, e.g. 'epoch,theta,rho,sigma_theta,"
                             "sigma_rho' (a header written as a '#' comment is ignored)",
                             line=line)
    return fmt, split, names, {}, {}


def _split_header(path, split, text, line):
    try:
        return split(text)
    except csv.Error as exc:
        raise LogFormatError(path, f"the header cannot be split into columns ({exc})",
                             line=line) from None


def _split_row(split, text):
    """(cells, None), or (None, reason) when the line cannot be split (e.g. a cell over the
    CSV field limit of 128 kB)."""
    try:
        return split(text), None
    except csv.Error as exc:
        return None, f"the line cannot be split into cells ({exc}); shorten the cell"


def _is_number(text):
    try:
        float(text)
    except ValueError:
        return False
    return True


def _shape_problem(cells, names, index, required, text, used, header_line):
    """Cells padded to the header, or a RowProblem reason when the shape is wrong.

    ``used`` holds the delimiter characters of the file (',' or ' \t').
    """
    n = len(names)
    if len(cells) == n:
        return cells, None
    hint = _other_delimiter(text, used)
    hint = f" The line seems to use {hint}; use the header's delimiter throughout." if hint else ""
    required_idx = {index[r] for r in required}
    if len(cells) < n and not any(k >= len(cells) for k in required_idx):
        return cells + [""] * (n - len(cells)), None
    return None, (f"found {len(cells)} value(s), but the header (line {header_line}) names "
                  f"{n} columns; quote values that contain the delimiter.{hint}")


def read_table(path, required, optional=(), columns=None, option="--columns"):
    """Read a CSV, whitespace-separated or ECSV table, keeping file line numbers.

    Parameters
    ----------
    path : str or Path
        The file.
    required, optional : sequence of str
        Canonical column names the caller needs / can use.
    columns : dict, optional
        Canonical name -> header name in this file (see ``parse_column_mapping``).
    option : str
        The command-line option that maps columns for this kind of log, named in the
        messages ('--columns' for measurement logs, '--rv-columns' for velocity logs).

    Returns
    -------
    LogTable

    Raises
    ------
    LogFormatError
        For problems of the whole file: unreadable, empty, no data rows, wrong delimiter,
        missing required columns, no data line matching the header.
    InputError
        When ``columns`` names a column the caller does not use.
    """
    path = str(path)
    required, optional = tuple(required), tuple(optional)
    lines = _read_lines(path)
    body = [(k + 1, t) for k, t in enumerate(lines) if t.strip() and not t.lstrip().startswith("#")]
    if not body:
        raise LogFormatError(path, "the file is empty (no header and no data lines); a log "
                             "starts with a header such as 'epoch,theta,rho,sigma_theta,"
                             "sigma_rho'")
    header_line = body[0][0]
    fmt, split, names, units, meta = _header(path, lines, body)
    index = _match_columns(path, header_line, names, required, optional, columns, option)
    if len(body) == 1:
        raise LogFormatError(path, f"no data rows after the header (line {header_line})",
                             line=header_line)
    rows, problems = [], []
    used = {_split_comma: ",", _split_tab: "\t"}.get(split, " \t")
    for line, text in body[1:]:
        cells, reason = _split_row(split, text)
        if cells is not None:
            cells, reason = _shape_problem(cells, names, index, required, text, used,
                                           header_line)
        if reason:
            problems.append(RowProblem(line, None, reason))
        else:
            rows.append((line, {name: cells[k].strip() for name, k in index.items()}))
    if not rows:
        raise LogFormatError(path, f"no data line matches the header (wrong delimiter?): "
                             f"{problems[0].reason}", line=problems[0].line)
    return LogTable(path=path, format=fmt, columns={c: names[k] for c, k in index.items()},
                    units={c: units[names[k]] for c, k in index.items() if units.get(names[k])},
                    rows=rows, problems=problems,
                    ignored_columns=[n for k, n in enumerate(names) if k not in index.values()],
                    meta=meta, header_line=header_line, n_file_lines=len(lines))


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


class _RowError(Exception):
    def __init__(self, column, reason):
        super().__init__(reason)
        self.column, self.reason = column, reason


def epochs_in_days(table):
    """Whether the table's epoch column carries a day unit (ECSV), so plain numbers are
    JD/MJD rather than years."""
    unit = table.units.get("epoch")
    return unit is not None and unit.strip().lower() in ("d", "day", "days")


def collect_rows(table, parse, key_of, same_what, strict):
    """Parse every data row of ``table``; return (records, problems), nothing dropped.

    ``parse(cells)`` returns a record dict or raises ``_RowError``; rows whose
    ``key_of(record)`` repeats an earlier row are rejected as duplicates. With ``strict``
    the first problem raises ``LogFormatError`` instead.
    """
    problems, records, seen = list(table.problems), [], {}
    for line, cells in table.rows:
        try:
            record = parse(cells)
        except _RowError as exc:
            problems.append(RowProblem(line, exc.column, exc.reason))
            continue
        key = key_of(record)
        if key in seen:
            problems.append(RowProblem(line, None, f"duplicate of line {seen[key]} (same "
                                       f"{same_what}); delete one of the two lines"))
            continue
        seen[key] = record["line"] = line
        records.append(record)
    problems.sort(key=lambda p: p.line)
    if strict and problems:
        raise LogFormatError(table.path, problems[0].reason, line=problems[0].line,
                             column=problems[0].column)
    return records, problems


def _number(cells, name, factors, header):
    """The cell as a float in internal units, None when missing."""
    text = cells.get(name, "")
    if text.lower() in MISSING_MARKERS:
        return None
    try:
        value = float(text)
    except ValueError:
        raise _RowError(header.get(name, name), f"'{text}' is not a number; expected "
                        f"{_EXPECTED[name]}") from None
    if not np.isfinite(value):
        raise _RowError(header.get(name, name), f"'{text}' is not finite; expected "
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
    """_RowError when a read value lies outside ``PHYSICAL_BOUNDS``."""
    if value is None:
        return
    low, high, unit = PHYSICAL_BOUNDS[name]
    if not low <= value <= high:
        shown = f"'{text}'" if text.strip() else f"{value:.6g}"
        raise _RowError(column, f"{shown} is outside [{low:g}, {high:g}] {unit}, the range a "
                        f"measurement can have; expected {_EXPECTED[name]}")


def _parse_row(cells, factors, header, day_unit):
    """A validated record from one row's cells; _RowError on the first bad cell."""
    col = lambda name: header.get(name, name)  # noqa: E731 - column name as the user wrote it
    epoch_text = cells["epoch"]
    if epoch_text.lower() in MISSING_MARKERS:
        raise _RowError(col("epoch"), "the epoch is missing; every row needs one")
    try:
        epoch_value, scale = split_epoch(epoch_text, day_unit)
    except ValueError as exc:
        raise _RowError(col("epoch"), str(exc)) from None
    theta, rho = _number(cells, "theta", factors, header), _number(cells, "rho", factors, header)
    for name, value in (("theta", theta), ("rho", rho)):
        if value is None:
            raise _RowError(col(name), f"the value is missing; expected {_EXPECTED[name]}")
    if not 0.0 <= theta < 360.0:
        shown = cells["theta"] if "theta" not in factors else f"{cells['theta']} = {theta:.6g} deg"
        raise _RowError(col("theta"), f"'{shown}' is outside [0, 360) deg; position "
                        "angles run from 0 (North) through 90 (East); correct it (e.g. add or "
                        "subtract 360)")
    if rho <= 0.0:
        raise _RowError(col("rho"), f"'{cells['rho']}' is not > 0; a separation must be "
                        "positive (an unresolved observation has no place in the log)")
    record = {"epoch_text": epoch_text, "epoch_value": epoch_value, "scale": scale,
              "theta": theta, "rho": rho}
    for name in ("sigma_theta", "sigma_rho", "weight"):
        value = _number(cells, name, factors, header)
        if value is not None and value <= 0.0:
            what = "negative" if value < 0 else ("zero, which would give the row infinite "
                                                 "weight" if name != "weight" else "zero")
            raise _RowError(col(name), f"'{cells[name]}' is {what}; expected {_EXPECTED[name]}")
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
    sig_theta, sig_rho = default_sigmas(technique, record["rho"], record["sigma_rho"])
    record["defaulted"] = record["sigma_theta"] is None or record["sigma_rho"] is None
    if record["sigma_theta"] is None:
        record["sigma_theta"] = sig_theta
    record["sigma_rho"] = sig_rho
    record["weight"] = 1.0 if record["weight"] is None else record["weight"]
    record["technique"] = technique
    record["excluded"] = record["flag"].lower() not in _KEEP_FLAGS
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
                      strict=False):
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

    Returns
    -------
    MeasurementSet

    Raises
    ------
    LogFormatError
        For problems of the whole file, and for any bad row when ``strict``.
    """
    table = read_table(path, REQUIRED_COLUMNS, OPTIONAL_COLUMNS, columns)
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
      differing from one of them in theta or rho by more than ``DISCORDANT_SIGMAS``
      combined effective sigmas (one suspicion a row, naming the first such earlier row).

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
    for j, earlier in _discordant(t, th, rho, s_th, s_rho, SAME_EPOCH_YR):
        i = earlier[0]
        d_th, d_rho = abs(wrap_degrees(th[i] - th[j])), abs(rho[i] - rho[j])
        more = f" (and {earlier.size - 1} other earlier row(s))" if earlier.size > 1 else ""
        out.append(Suspicion(int(lines[j]), "discordant_same_epoch",
                             f"same epoch as line {lines[i]}{more} but differs by {d_th:.2f} "
                             f"deg in theta and {d_rho:.4f} arcsec in rho (more than "
                             f"{DISCORDANT_SIGMAS:g} combined sigmas)"))
    return sorted(out, key=lambda s: s.line)


def _discordant(t, th, rho, s_th, s_rho, window):
    """(j, earlier discordant indices) for time-sorted rows within ``window`` of each other.

    Each row is compared with the earlier rows of its window (found by ``searchsorted``),
    one vector operation a row: memory stays linear however many rows share an epoch.
    """
    start = np.searchsorted(t, t - window, side="left")
    for j in range(1, t.size):
        i = np.arange(start[j], j)
        if not i.size:
            continue
        bad = ((np.abs(wrap_degrees(th[i] - th[j])) > DISCORDANT_SIGMAS * np.hypot(s_th[i], s_th[j]))
               | (np.abs(rho[i] - rho[j]) > DISCORDANT_SIGMAS * np.hypot(s_rho[i], s_rho[j])))
        if bad.any():
            yield j, i[bad]


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
                      f"theta {th[k]:.1f} deg is about 180 deg from line(s) "
                      f"{', '.join(str(lines[p]) for p in sorted(partners[k]))} at similar rho: "
                      f"possible quadrant flip (theta + 180 = {(th[k] + 180) % 360:.1f})")
            for k in range(n) if 2 * len(partners[k]) > n_near[k]]


def _tight_sigma(technique, rho, sig_theta, sig_rho):
    """Message when a sigma is implausibly small for the technique, else None."""
    if technique not in TECHNIQUE_DEFAULTS or technique == "unknown":  # no typical value
        return None
    typ_theta, typ_rho = TECHNIQUE_DEFAULTS[technique]
    small = []
    if sig_rho < TIGHT_FRACTION * typ_rho:
        small.append(f"sigma_rho {sig_rho:.4g} arcsec")
    if typ_theta is None:
        if rho * np.radians(sig_theta) < TIGHT_FRACTION * typ_rho:
            small.append(f"sigma_theta {sig_theta:.3g} deg")
    elif sig_theta < TIGHT_FRACTION * typ_theta:
        small.append(f"sigma_theta {sig_theta:.3g} deg")
    if not small:
        return None
    return (f"{' and '.join(small)} below {TIGHT_FRACTION:g} x the typical value for "
            f"{technique} (sigma_rho {typ_rho:g} arcsec); check the unit or the technique")
