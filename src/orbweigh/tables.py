"""Reading text tables: the generic part of every log reader.

A measurement log and a velocity log share one way of being read (``read_table``); each
reader then validates its own columns from the cells, still as text (``collect_rows``).

Files
-----
* **CSV** (comma-separated), **tab-separated** or **whitespace-separated** text: the first
  line that is neither blank nor a ``#`` comment is the header naming the columns; the
  delimiter is a comma when the header has one, else a tab when it has one, else runs of
  spaces. With commas and tabs an empty cell between two delimiters is a cell (a missing
  value). Values containing the delimiter go in double quotes. Rows may stop early when the
  cells left out belong to optional columns. Lines end at ``\n``, ``\r\n`` or ``\r`` only;
  a file must be a regular file of at most ``MAX_LOG_BYTES``.
* **ECSV** (first line ``# %ECSV 1.0``): the YAML header is read with astropy; its column
  units and ``meta`` are handed to the reader (``LogTable.units``, ``LogTable.meta``).

Columns are matched case-insensitively; a mapping ``{'epoch': 'date'}`` (``--columns
epoch=date`` on the command line) names your own headers. Other columns are listed as
ignored. An empty cell, ``-``, ``--``, ``na``, ``n/a``, ``nan``, ``null`` or ``none`` is a
missing value (``MISSING_MARKERS``); a ``flag`` cell in ``KEEP_FLAGS`` keeps the row.
Every data line ends up in ``LogTable.rows`` or, when its shape is wrong, in
``LogTable.problems`` with its line and reason.

Any input file (log, manifest, result document) is read by ``read_bounded_bytes``: a
device (``/dev/zero``), a FIFO or a runaway file would hang or exhaust memory, so the file
type is checked with ``os.stat`` before reading and the read itself is capped.
"""
from __future__ import annotations

import csv
import os
import re
import stat
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError, LogFormatError

__all__ = ["read_bounded_bytes", "split_lines", "read_table", "collect_rows", "epochs_in_days",
           "parse_column_mapping", "is_number", "LogTable", "RowProblem", "RowError",
           "rows_left_out",
           "MISSING_MARKERS", "KEEP_FLAGS", "MAX_LOG_BYTES"]

MISSING_MARKERS = frozenset({"", "-", "--", "na", "n/a", "nan", "null", "none"})
KEEP_FLAGS = MISSING_MARKERS | {"0", "no", "false", "ok"}


def rows_left_out(rejected, excluded_lines=(), most=3):
    """What kept a log's lines from use, for a message that finds too few usable: '2 lines
    rejected (line 2, column 'rv': ... | line 3, column 'rv': ...), 1 excluded by its flag
    (line 7)'; '' when nothing was left out. The first ``most`` reasons are given (a
    reason may hold semicolons, hence the bars)."""
    from .formatting import counted, line_list
    parts = []
    if rejected:
        reasons = " | ".join(f"line {p.line}" + (f", column '{p.column}'" if p.column else "")
                             + f": {p.reason}" for p in rejected[:most])
        more = f" | {len(rejected) - most} more" if len(rejected) > most else ""
        parts.append(f"{counted(len(rejected), 'line')} rejected ({reasons}{more})")
    if len(excluded_lines):
        parts.append(f"{len(excluded_lines)} excluded by its flag ({line_list(excluded_lines)})")
    return ", ".join(parts)


def read_bounded_bytes(path, limit, what="file"):
    """The bytes of a regular file of at most ``limit`` bytes.

    Raises
    ------
    InputError
        When the file is missing or unreadable, is not a regular file, or is larger than
        ``limit`` (checked on the size reported and again on the bytes read).
    """
    path = Path(path)
    try:
        info = os.stat(path)
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror})") from None
    if not stat.S_ISREG(info.st_mode):
        kind = "a folder" if stat.S_ISDIR(info.st_mode) else "not a regular file"
        raise InputError(f"{path}: the {what} is {kind} (a device, pipe or folder cannot "
                         "be read); give the path of a file")
    too_big = (f"{path}: the {what} is larger than {limit // 2 ** 20} MiB, the limit for "
               "this input; split it or check that it is the right file")
    if info.st_size > limit:
        raise InputError(too_big)
    try:
        with open(path, "rb") as fh:
            data = fh.read(limit + 1)
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror})") from None
    if len(data) > limit:
        raise InputError(too_big)
    return data


@dataclass(frozen=True)
class RowProblem:
    """A log line that could not be used, and why."""

    line: int
    column: str | None
    reason: str


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
_LINE_END = re.compile(r"\r\n|\r|\n")


def split_lines(text):
    """The lines of a text file: only ``\\n``, ``\\r\\n`` and ``\\r`` end a line (not U+2028,
    a form feed, U+0085 or the other ends of ``str.splitlines``), so line numbers are
    those of any editor; no empty last line for a final line end."""
    lines = _LINE_END.split(text)
    return lines[:-1] if lines[-1] == "" else lines


def _read_lines(path, shown):
    """The file's lines; its errors name it ``shown``."""
    try:
        text = read_bounded_bytes(path, MAX_LOG_BYTES, what="log").decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise LogFormatError(shown, f"not a UTF-8 text file (byte {exc.start} cannot be "
                             "decoded); save the log as plain text") from None
    except InputError as exc:
        raise LogFormatError(shown, str(exc).removeprefix(f"{path}: ")) from None
    return split_lines(text)


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
    if all(is_number(n) for n in names):
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


def is_number(text):
    """Whether the text reads as a float."""
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


def read_table(path, required, optional=(), columns=None, option="--columns", shown_as=None):
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
    shown_as : str, optional
        The file's name in every message and as ``LogTable.path`` (default ``path``): a
        batch gives the path as its manifest wrote it, not the absolute one it opens.

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
    opened, path = str(path), str(shown_as or path)
    required, optional = tuple(required), tuple(optional)
    lines = _read_lines(opened, path)
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


class RowError(Exception):
    """A data row that cannot be used: the column at fault and the reason (caught by
    ``collect_rows``, which turns it into a ``RowProblem``)."""

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

    ``parse(cells)`` returns a record dict or raises ``RowError``; rows whose
    ``key_of(record)`` repeats an earlier row are rejected as duplicates. With ``strict``
    the first problem raises ``LogFormatError`` instead.
    """
    problems, records, seen = list(table.problems), [], {}
    for line, cells in table.rows:
        try:
            record = parse(cells)
        except RowError as exc:
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
