"""The batch manifest: one row per system of a catalogue, in CSV or TOML.

Layout (our own; every key optional except ``id`` and ``log``):

================== ==========================================================================
key                meaning
================== ==========================================================================
id                 name of the system, unique in the manifest
log                measurement log, relative to the manifest's folder (must stay inside it)
P T e a i Omega    previous (catalogued) orbit: P [yr], T [epoch], a [arcsec], angles [deg];
omega              all seven or none
P_err ... omega_err  their 1-sigma errors (T_err in the unit of T's scale: yr, or d for JD/MJD)
last_epoch         epoch of the last measurement the previous orbit used; newer data decide
                   the revision verdict (all data do when it is missing)
parallax_mas       trigonometric parallax and its error [mas]; both or none
parallax_err_mas
q, q_err           mass ratio M2/M1 and its error
rv_log             radial-velocity log, relative to the manifest's folder like ``log``: the
                   system gets the combined visual-spectroscopic solution (not with q)
ra_deg, dec_deg    target coordinates (J2000) for position-angle precession: degrees, or
                   sexagesimal as on the command line (RA in hours ``05:14:32.3`` or
                   ``05h14m32.3s``, Dec ``-08:12:05`` or ``-08d12m05s``)
================== ==========================================================================

Epochs (T, last_epoch) are written as in measurement logs (``reductions.parse_epoch``): a
plain decimal year is a Besselian year (the trade's custom), ``J2015.5`` a Julian year,
``JD2457000.5`` / ``MJD57000`` dates, ``2015-07-01`` an ISO date. P is in Julian years.

CSV: a header line naming the columns, ``#`` starts a comment line, one system a line (a
quoted value does not continue on the next line, so an unclosed quote fails only its own
row). TOML: an array of tables ``[[system]]`` with the same keys. UTF-8, with or without a
byte-order mark. Unknown columns and duplicate ids stop the whole manifest (a misspelt
column would otherwise be silently ignored, and two systems of one id would share one
output folder); a broken row only makes that system fail, with a message naming the
manifest file, line and column.
"""
from __future__ import annotations

import csv
import functools
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

from .constants import JULIAN_YEAR_D as _JULIAN_YEAR_D
from .elements import ELEMENT_KEYS, CampbellElements
from .errors import InputError
from .masses import MassInputError, check_mass_inputs
from .reductions import epoch_unit, parse_declination, parse_epoch, parse_right_ascension
from .tables import read_bounded_bytes, split_lines

__all__ = ["SystemEntry", "MANIFEST_KEYS", "read_manifest"]

_ERROR_KEYS = tuple(f"{k}_err" for k in ELEMENT_KEYS)
#: Every key a manifest row may carry.
MANIFEST_KEYS = (("id", "log") + ELEMENT_KEYS + _ERROR_KEYS
                 + ("last_epoch", "parallax_mas", "parallax_err_mas", "q", "q_err", "rv_log",
                    "ra_deg", "dec_deg"))


@dataclass
class SystemEntry:
    """One system of the manifest, validated.

    Attributes
    ----------
    id : str
        Name of the system (``"<line N>"`` when the row had none).
    line : int or None
        Line of the row in the manifest (CSV row, or the ``[[system]]`` header in TOML).
    manifest : str
        Path of the manifest.
    fields : dict
        The row exactly as written (key -> text); nothing the user gave is dropped.
    log : str or None
        Absolute, resolved path of the measurement log.
    previous : CampbellElements or None
        The previous orbit, T as a decimal Julian year.
    previous_errors : dict
        1-sigma errors of the previous elements that were given, internal units
        (P, T [yr], e, a [arcsec], angles [deg]).
    last_epoch_yr : float or None
        Epoch of the previous orbit's last data, decimal Julian year.
    parallax_mas : tuple of float or None
        (parallax, error) [mas].
    mass_ratio : tuple of float or None
        (q, error).
    rv_log : str or None
        Absolute, resolved path of the radial-velocity log.
    ra_deg, dec_deg : float or None
        Target coordinates [deg].
    problem : str or None
        Why the row cannot be processed (file, line, column and the fix); None when fine.
    """

    id: str
    line: int | None
    manifest: str
    fields: dict
    log: str | None = None
    previous: CampbellElements | None = None
    previous_errors: dict = field(default_factory=dict)
    last_epoch_yr: float | None = None
    parallax_mas: tuple | None = None
    mass_ratio: tuple | None = None
    rv_log: str | None = None
    ra_deg: float | None = None
    dec_deg: float | None = None
    problem: str | None = None


#: Largest manifest read (about a million systems of one short line each); a device, a
#: pipe or a runaway file is refused at once rather than read without end.
MAX_MANIFEST_BYTES = 256 * 2 ** 20


def read_manifest(path):
    """Read and validate a manifest (``.toml`` as TOML, anything else as CSV).

    Parameters
    ----------
    path : str or Path
        The manifest file.

    Returns
    -------
    list of SystemEntry
        In manifest order; rows that cannot be used carry ``problem``.

    Raises
    ------
    InputError
        When the manifest as a whole cannot be read (missing file, syntax, unknown or
        missing columns).
    """
    path = Path(path)
    data = read_bounded_bytes(path, MAX_MANIFEST_BYTES, what="manifest")
    try:
        text = data.decode("utf-8-sig")   # a byte-order mark is not a character
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: the manifest is not UTF-8 text ({exc.reason} at byte "
                         f"{exc.start})") from None
    rows = _toml_rows(path, text) if path.suffix.lower() == ".toml" else _csv_rows(path, text)
    folder = path.resolve().parent        # once: resolving walks every path component
    entries = [_entry(path, folder, line, row, problems) for line, row, problems in rows]
    if not entries:
        raise InputError(f"{path}: the manifest lists no systems")
    _refuse_duplicate_ids(path, entries)
    return entries


def _refuse_duplicate_ids(path, entries):
    """Each system writes into a folder named after its id: two rows of one id would mix
    their outputs, so the manifest as a whole is refused."""
    rows = {}
    for k, entry in enumerate(entries, start=1):
        where = f"line {entry.line}" if entry.line is not None else f"system {k}"
        rows.setdefault(entry.id, []).append(where)
    repeated = [(i, where) for i, where in rows.items() if len(where) > 1]
    if repeated:
        told = "; ".join(f"id {i!r} on {' and '.join(where)}" for i, where in repeated)
        raise InputError(f"{path}: ids must be unique (each system has its own output folder), "
                         f"but the manifest gives {told}; rename or remove the repeated rows")


def _where(path, line, column=None):
    where = f"{path}, line {line}" if line is not None else str(path)
    return where + (f", column '{column}'" if column else "")


def _check_keys(path, keys, line=None):
    unknown = [k for k in keys if k not in MANIFEST_KEYS]
    if unknown:
        raise InputError(f"{_where(path, line)}: unknown column(s) {', '.join(map(repr, unknown))};"
                         f" a manifest may have {', '.join(MANIFEST_KEYS)}")


def _csv_rows(path, text):
    """(line, {key: text}, problems) for each data row of a CSV manifest.

    One system a line: every line is read on its own (only \\n, \\r\\n and \\r end a
    line), so an unclosed quote is reported on the line where it opens and every later
    row is still read.
    """
    header, rows = None, []
    for number, text_line in enumerate(split_lines(text), start=1):
        if not text_line.strip() or text_line.lstrip().startswith("#"):
            continue
        record, problem = _split_line(text_line, header)
        if header is None:
            if problem:
                raise InputError(f"{_where(path, number)}: {problem[0]}")
            header = _header(path, number, record)
            continue
        if problem:   # the row cannot be split: only its id (before the quote) is known
            row = {"id": record[0].strip()} if record and record[0].strip() else {}
            rows.append((number, row, [_where(path, number, problem[1]) + ": " + problem[0]]))
            continue
        problems = []
        if len(record) != len(header):
            problems.append(_where(path, number) + f": {len(record)} fields where the "
                            f"header has {len(header)}; quote values that contain commas")
        if not any(cell.strip() for cell in record):
            continue
        row = {k: v.strip() for k, v in zip(header, record) if v.strip()}
        rows.append((number, row, problems))
    if header is None:
        raise InputError(f"{path}: the manifest is empty; expected a header line such as "
                         "'id,log,P,T,e,a,i,Omega,omega' and one row per system")
    return rows


def _split_line(text_line, header):
    """(cells, None) of one CSV line, or (cells before the quote, (what is wrong, column))
    for an unclosed quote, naming the column where it opens."""
    try:
        return next(csv.reader([text_line], strict=True)), None
    except csv.Error as exc:
        opened, inside = None, False
        for k, char in enumerate(text_line):
            if char == '"':
                inside = not inside
                opened = k if inside else opened
        fields_before = text_line[:opened].count(",") if opened is not None else 0
        column = header[fields_before] if header and fields_before < len(header) else None
        where = f"a quote opens at character {opened + 1} " if opened is not None else ""
        before = next(csv.reader([text_line[:opened]]), []) if opened else []
        return before, (f"{where}and is not closed on this line ({exc}); close it with a "
                      "second \" (a manifest row is one line), or drop the quote", column)


def _header(path, number, record):
    header = [c.strip() for c in record]
    missing = [k for k in ("id", "log") if k not in header]
    if missing:
        raise InputError(f"{_where(path, number)}: the header has no "
                         f"{' and no '.join(map(repr, missing))} column; the first "
                         "line must name the columns, e.g. 'id,log,P,T,e,a,i,Omega,omega'")
    _check_keys(path, header, number)
    return header


def _toml_rows(path, text):
    """(line, {key: text}, problems) for each ``[[system]]`` table of a TOML manifest."""
    import tomllib
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML ({exc})") from None
    other = [k for k in doc if k != "system"]
    systems = doc.get("system")
    if other or not isinstance(systems, list):
        raise InputError(f"{path}: expected only an array of tables [[system]] (one per "
                         f"system, keys {', '.join(MANIFEST_KEYS)})"
                         + (f"; found {', '.join(map(repr, other))}" if other else ""))
    headers = [n for n, ln in enumerate(text.splitlines(), 1)
               if re.match(r"\s*\[\[\s*system\s*\]\]", ln)]
    if len(headers) != len(systems):
        headers = [None] * len(systems)  # inline tables: no line to point at
    rows = []
    for line, table in zip(headers, systems):
        _check_keys(path, table, line)
        problems = [_where(path, line, k) + f": expected a number or a string, got {v!r}"
                    for k, v in table.items() if not isinstance(v, (str, int, float))
                    or isinstance(v, bool)]
        row = {k: (v if isinstance(v, str) else repr(v)).strip() for k, v in table.items()
               if isinstance(v, (str, int, float)) and not isinstance(v, bool)}
        rows.append((line, {k: v for k, v in row.items() if v}, problems))
    return rows


class _RowProblem(Exception):
    """A problem with one value of a row (caught per row)."""


def _entry(path, folder, line, row, problems):
    """Validate one row (files named relative to the resolved ``folder`` of the manifest);
    problems go into ``entry.problem``, never raise."""
    entry = SystemEntry(id=row.get("id") or f"<line {line}>", line=line, manifest=str(path),
                        fields=dict(row))
    if problems and set(row) <= {"id"}:   # nothing else of the row could be read
        entry.problem = "; ".join(problems)
        return entry
    for check in (_check_id, functools.partial(_set_log, folder=folder), _set_previous,
                  _set_last_epoch, _set_parallax, _set_mass_ratio,
                  functools.partial(_set_rv_log, folder=folder), _check_masses,
                  _set_coordinates):
        try:
            check(entry, row)
        except _RowProblem as exc:
            problems.append(_where(path, line, exc.args[0]) + ": " + exc.args[1])
    entry.problem = "; ".join(problems) or None
    return entry


def _check_id(entry, row):
    if not row.get("id"):
        raise _RowProblem("id", "the system has no id; give each system a unique name")


def _number(row, key, what):
    text = row[key]
    try:
        value = float(text)
    except ValueError:
        raise _RowProblem(key, f"expected {what}, got {text!r}") from None
    if not math.isfinite(value):
        raise _RowProblem(key, f"expected a finite number ({what}), got {text!r}")
    return value


def _inside(folder, row, key):
    """Resolved path of a file named in column ``key``, refused when it leaves the
    manifest's ``folder``."""
    written = row[key]
    try:
        target = (folder / written).resolve()  # resolves '..' and symbolic links
        is_file = target.is_file()
    except (OSError, ValueError) as exc:  # a NUL byte, a name too long, ...
        raise _RowProblem(key, f"{written!r} is not a usable file name ({exc}); give the "
                          "path of the file relative to the manifest") from None
    if not target.is_relative_to(folder):
        raise _RowProblem(key, f"{written!r} leads outside the manifest's folder ({folder}) "
                          f"to {target}; put the file inside that folder and give its path "
                          "relative to the manifest")
    if not is_file:
        raise _RowProblem(key, f"the file {written!r} does not exist (looked for {target})")
    return str(target)


def _set_log(entry, row, folder):
    if not row.get("log"):
        raise _RowProblem("log", "no measurement log given; give its path relative to the "
                          "manifest")
    entry.log = _inside(folder, row, "log")


def _set_rv_log(entry, row, folder):
    if row.get("rv_log"):
        entry.rv_log = _inside(folder, row, "rv_log")


def _epoch(row, key):
    try:
        return parse_epoch(row[key])
    except ValueError as exc:
        raise _RowProblem(key, str(exc)) from None


def _set_previous(entry, row):
    given = [k for k in ELEMENT_KEYS if row.get(k)]
    errors_given = [k for k in _ERROR_KEYS if row.get(k)]
    if not given:
        if errors_given:
            raise _RowProblem(errors_given[0], "element errors given without the previous "
                              "elements; give P, T, e, a, i, Omega, omega too")
        return
    missing = [k for k in ELEMENT_KEYS if k not in given]
    if missing:
        raise _RowProblem(missing[0], "the previous orbit needs all seven elements; missing "
                          + ", ".join(missing))
    values = {k: _number(row, k, "a number") for k in ELEMENT_KEYS if k != "T"}
    values["T"], scale = _epoch(row, "T")
    for key, check, text in (("P", values["P"] > 0, "a positive period [yr]"),
                             ("e", 0 <= values["e"] < 1, "an eccentricity 0 <= e < 1"),
                             ("a", values["a"] > 0, "a positive semi-major axis [arcsec]")):
        if not check:
            raise _RowProblem(key, f"expected {text}, got {row[key]!r}")
    entry.previous = CampbellElements.from_keys(values)
    for key in errors_given:
        err = _number(row, key, "a non-negative error")
        if err < 0:
            raise _RowProblem(key, f"expected a non-negative error, got {row[key]!r}")
        if key == "T_err" and epoch_unit(scale) == "d":
            err /= _JULIAN_YEAR_D  # T written as a date: its error is in days
        entry.previous_errors[key[:-4]] = err


def _set_last_epoch(entry, row):
    if row.get("last_epoch"):
        entry.last_epoch_yr = _epoch(row, "last_epoch")[0]


def _pair(row, key, err_key, what):
    if not row.get(key) and not row.get(err_key):
        return None
    for k in (key, err_key):
        if not row.get(k):
            raise _RowProblem(k, f"{key} and {err_key} go together; give both or neither")
    return _number(row, key, what), _number(row, err_key, "an error")  # ranges: _check_masses


def _set_parallax(entry, row):
    entry.parallax_mas = _pair(row, "parallax_mas", "parallax_err_mas", "a parallax [mas]")


def _set_mass_ratio(entry, row):
    entry.mass_ratio = _pair(row, "q", "q_err", "a mass ratio M2/M1")


#: The manifest's names of the mass inputs, for the shared rule's messages.
_MASS_COLUMNS = {"parallax": "parallax_mas", "mass_ratio": "q", "velocity_log": "rv_log",
                 "rv_amplitudes": "rv_amplitudes", "magnitudes": "magnitudes", "band": "band",
                 "bolometric_corrections": "bolometric_corrections"}


def _check_masses(entry, row):
    """The mass inputs by the rule of the command line (``masses.check_mass_inputs``)."""
    try:
        check_mass_inputs(entry.parallax_mas, entry.mass_ratio,
                          velocity_log=bool(row.get("rv_log")), names=_MASS_COLUMNS)
    except MassInputError as exc:
        raise _RowProblem(_MASS_COLUMNS[exc.key], str(exc)) from None


def _set_coordinates(entry, row):
    if not row.get("ra_deg") and not row.get("dec_deg"):
        return
    for k in ("ra_deg", "dec_deg"):
        if not row.get(k):
            raise _RowProblem(k, "ra_deg and dec_deg go together; give both or neither")
    for key, parse in (("ra_deg", parse_right_ascension), ("dec_deg", parse_declination)):
        try:
            setattr(entry, key, parse(row[key]))
        except InputError as exc:
            raise _RowProblem(key, str(exc)) from None
