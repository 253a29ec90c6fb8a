"""Fuzzing the readers: every input gets a clear answer, never a traceback.

Property, for the log readers, the manifest reader and the result-document reader: either
an ``OrbweighError`` with a message (the command line turns it into exit status 2), or a
result whose rows add up (used + excluded + rejected = data lines, each rejected line with
its line number and reason). Hypothesis runs derandomised (fixed examples, no database)
with modest example counts, so the suite is reproducible and stays within its time budget.
"""
import functools
import json
import math
import re
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from orbweigh.cli.main import main
from orbweigh.errors import OrbweighError
from orbweigh.measurements import read_measurements
from orbweigh.spectroscopic import read_velocities

_SETTINGS = settings(deadline=None, derandomize=True, database=None,
                     suppress_health_check=[HealthCheck.function_scoped_fixture,
                                            HealthCheck.too_slow])


def fuzz(n_examples):
    """Derandomised settings with ``n_examples`` examples."""
    return settings(_SETTINGS, max_examples=n_examples)



_LINE_END = re.compile(r"\r\n|\r|\n")   # the line ends a log has (the reader's own rule)


def _data_lines(data):
    """Independent count of a log's data lines: lines neither blank nor '#' comments, less
    the header. None when the bytes are not UTF-8 text (the reader must refuse them)."""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        return None
    lines = _LINE_END.split(text)
    lines = lines[:-1] if lines[-1] == "" else lines
    body = [t for t in lines if t.strip() and not t.lstrip().startswith("#")]
    return max(len(body) - 1, 0)


def _rows_add_up(result, data):
    n = len(result)
    used = int(result.usable.sum())
    excluded = int(result.excluded.sum())
    assert used + excluded == n
    assert n + len(result.rejected) == result.n_lines == _data_lines(data)
    n_file_lines = len(_LINE_END.split(data.decode("utf-8-sig")))
    for problem in result.rejected:
        assert 1 <= problem.line <= n_file_lines
        assert isinstance(problem.reason, str) and problem.reason.strip()
    assert len(set(result.line.tolist()) | {p.line for p in result.rejected}) == result.n_lines


def _read_or_refuse(reader, path, data):
    """The property: a clear error, or every data line accounted for."""
    try:
        result = reader(path)
    except OrbweighError as exc:
        assert str(exc).strip()
        return None
    _rows_add_up(result, data)
    return result


# ------------------------------------------------------------------------------- log cells

_NUMBERS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10 ** 30, 10 ** 30).map(str),
    st.sampled_from(["1e308", "1e400", "-1e999", "NaN", "nan", "inf", "-Infinity", "+inf",
                     "1e-320", "0", "-0", "0x10", "1_000", "٣", "1,5", "  7  ", "1e", "."]))
_EPOCHS = st.one_of(
    st.floats(1800.0, 2100.0).map(lambda v: f"{v:.3f}"),
    st.sampled_from(["JD2451545.0", "MJD51544.5", "2451545.0", "51544.5", "1e9", "JD0",
                     "MJD-1e9", "B1950.0", "J2000.0", "2000-01-01", "2000-13-45", "J",
                     "JDnan", "MJDinf", "-1e308", "JD1e308", "2024-02-30T25:00", "B1e20",
                     "J-inf", "2000.5.5", "00001999.5"]),
    _NUMBERS)
_TEXT = st.text(st.characters(blacklist_categories=("Cs",)), max_size=12)
_ODD = st.sampled_from(["", "-", "--", "na", "N/A", "null", "None", '"', '""', '"a,b"',
                        '"a\tb"', "x\u2028y", "x\x0cy", "x\x85y", "x\x0by", "x\x1cy",
                        "\ufeff", "#", " # ", "speckle", "Gaia", "micrometer", "ok", "1",
                        "a" * 140_000])
_CELL = st.one_of(_NUMBERS, _EPOCHS, _TEXT, _ODD)
_LOG_COLUMNS = (("epoch", "theta", "rho"),
                ("sigma_theta", "sigma_rho", "weight", "technique", "flag", "note", "extra"))
_RV_COLUMNS = (("epoch", "component", "rv", "sigma_rv"), ("flag", "note", "extra"))
_SEPARATORS = st.sampled_from([",", "\t", ";", " ", "   ", " \t", ", ", "|"])
_ENDS = st.sampled_from(["\n", "\r\n", "\r"])
_NOT_ENDS = st.sampled_from(["\u2028", "\u2029", "\x0c", "\x85", "\x0b", "\x1c"])


@st.composite
def _header(draw, columns):
    """Column names: the required ones and some optional ones in random order; now and
    then one dropped, doubled or upper-cased."""
    required, optional = columns
    names = list(required) + draw(st.lists(st.sampled_from(optional), unique=True,
                                           max_size=len(optional)))
    names = draw(st.permutations(names))
    change = draw(st.integers(0, 9))
    if change == 0:
        names.pop(draw(st.integers(0, len(names) - 1)))
    elif change == 1:
        names.append(draw(st.sampled_from(names)))
    elif change == 2:
        names = [n.upper() for n in names]
    return names or ["epoch"]


@st.composite
def _logs(draw, columns=_LOG_COLUMNS, epoch=_EPOCHS, cell=_CELL):
    """Bytes of a log: a header of random columns, rows of random cells, random
    separators and line ends (some lines mixing them), comments, blank lines, a BOM."""
    names = draw(_header(columns))
    sep, end = draw(_SEPARATORS), draw(_ENDS)
    lines = [sep.join(names)]
    for _ in range(draw(st.integers(0, 12))):
        kind = draw(st.integers(0, 11))
        if kind == 0:
            lines.append(draw(st.sampled_from(["", "   ", "# a comment", "\t"])))
            continue
        n = len(names) + draw(st.integers(-3, 2)) if kind < 3 else len(names)
        cells = [draw(epoch) if names[k % len(names)].lower() == "epoch" else draw(cell)
                 for k in range(max(n, 0))]
        lines.append((draw(_SEPARATORS) if kind == 3 else sep).join(cells))
    # Now and then another line end, or a character that some tools take for one.
    text = "".join(line + draw(st.sampled_from([end] * 12 + [draw(_ENDS), draw(_NOT_ENDS)]))
                   for line in lines)
    data = text.encode("utf-8")
    if draw(st.booleans()):
        data = b"\xef\xbb\xbf" + data
    return data


_GOOD_CELLS = st.one_of(st.floats(0.0, 359.9).map(lambda v: f"{v:.2f}"),
                        st.floats(1e-6, 3600.0).map(lambda v: f"{v:.6g}"),
                        st.floats(0.001, 2.0).map(lambda v: f"{v:.4f}"),
                        st.sampled_from(["", "nan", "-", "1e-7", "1e5", "0", "speckle", "x",
                                         "1", "2"]))
_GOOD_EPOCHS = st.one_of(st.floats(1800.0, 2100.0).map(lambda v: f"{v:.3f}"),
                         st.floats(2.4e6, 2.47e6).map(lambda v: f"{v:.2f}"), _EPOCHS)


@given(data=st.binary(max_size=600))
@fuzz(120)
def test_random_bytes_are_read_or_refused(tmp_path, data):
    path = tmp_path / "log.csv"
    path.write_bytes(data)
    _read_or_refuse(read_measurements, path, data)


@given(data=_logs())
@fuzz(120)
def test_random_logs_are_read_or_refused(tmp_path, data):
    path = tmp_path / "log.csv"
    path.write_bytes(data)
    _read_or_refuse(read_measurements, path, data)


@given(data=_logs(epoch=_GOOD_EPOCHS, cell=_GOOD_CELLS))
@fuzz(80)
def test_mostly_valid_logs_add_up(tmp_path, data):
    # Cells of the right kind, so most rows are read: the accounting is tested on real
    # rows, not only on refusals.
    path = tmp_path / "log.txt"
    path.write_bytes(data)
    _read_or_refuse(read_measurements, path, data)


@given(data=_logs(columns=_RV_COLUMNS, epoch=_GOOD_EPOCHS,
                  cell=st.one_of(_GOOD_CELLS, _CELL)))
@fuzz(60)
def test_random_velocity_logs_are_read_or_refused(tmp_path, data):
    path = tmp_path / "rv.csv"
    path.write_bytes(data)
    _read_or_refuse(read_velocities, path, data)


@given(data=_logs(epoch=_GOOD_EPOCHS, cell=_GOOD_CELLS))
@fuzz(25)
def test_check_command_exits_0_or_2(tmp_path, capsys, data):
    path = tmp_path / "log.csv"
    path.write_bytes(data)
    assert main(["check", str(path)]) in (0, 2)
    err = capsys.readouterr().err
    assert "Traceback" not in err


# ------------------------------------------------------------------------------- manifests

_MANIFEST_KEYS = ("id", "log", "P", "T", "e", "a", "i", "Omega", "omega", "P_err", "T_err",
                  "last_epoch", "parallax_mas", "parallax_err_mas", "q", "q_err", "rv_log",
                  "ra_deg", "dec_deg")
_MANIFEST_CELLS = st.one_of(
    _NUMBERS, _EPOCHS, _TEXT,
    st.sampled_from(["a.csv", "a.csv", "rv.csv", "./a.csv", "sub/../a.csv", "../a.csv",
                     "/etc/hostname", "a\x00b.csv", "x" * 300, "sub", "", " ", "A1",
                     "05:14:32.3", "-08d12m05s", "12.5", "0.5", "-1", '"a,b"', '"', "#x"]))


def _manifest_folder(tmp_path):
    (tmp_path / "sub").mkdir(exist_ok=True)
    (tmp_path / "a.csv").write_text("epoch,theta,rho\n2000.0,10,1\n")
    (tmp_path / "rv.csv").write_text("epoch,component,rv,sigma_rv\n2000.0,1,10,1\n")


@st.composite
def _csv_manifests(draw):
    names = ["id", "log"] + draw(st.lists(st.sampled_from(_MANIFEST_KEYS[2:]), unique=True,
                                          max_size=8))
    if draw(st.integers(0, 9)) == 0:
        names.append(draw(st.sampled_from(["colour", "ID", "id"])))
    names = draw(st.permutations(names))
    end = draw(_ENDS)
    lines = [",".join(names)]
    for _ in range(draw(st.integers(0, 6))):
        kind = draw(st.integers(0, 9))
        if kind == 0:
            lines.append(draw(st.sampled_from(["", "# comment", " ,, "])))
            continue
        n = len(names) + (draw(st.integers(-2, 2)) if kind == 1 else 0)
        lines.append(",".join(draw(_MANIFEST_CELLS) for _ in range(max(n, 1))))
    text = end.join(lines) + end
    return (b"\xef\xbb\xbf" if draw(st.integers(0, 4)) == 0 else b"") + text.encode("utf-8")


_TOML_VALUES = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(
        lambda v: "nan" if math.isnan(v) else ("inf" if v == math.inf else
                                               "-inf" if v == -math.inf else repr(v))),
    st.integers(-10 ** 20, 10 ** 20).map(str), _MANIFEST_CELLS.map(json.dumps),
    st.sampled_from(["true", "[1, 2]", "{x = 1}", "1979-05-27", "1979-05-27T07:32:00Z",
                     '"""multi\nline"""', "'literal'", "[]"]))


@st.composite
def _toml_manifests(draw):
    parts = []
    for _ in range(draw(st.integers(0, 4))):
        keys = ["id", "log"] + draw(st.lists(st.sampled_from(_MANIFEST_KEYS[2:] + ("x",)),
                                             unique=True, max_size=6))
        body = "".join(f"{k} = {draw(_TOML_VALUES)}\n" for k in keys
                       if draw(st.integers(0, 7)))
        parts.append(draw(st.sampled_from(["[[system]]\n", "[[ system ]]\n", "[system]\n",
                                           "[[system]]\n"])) + body)
    if draw(st.integers(0, 5)) == 0:
        parts.append(draw(st.sampled_from(["x = 1\n", "system = 3\n", "[[other]]\n", "= =\n",
                                           "system = [{id = 'a', log = 'a.csv'}]\n"])))
    return "\n".join(parts).encode("utf-8")


def _manifest_data_rows(data):
    """Independent count of a CSV manifest's rows: lines neither blank (no cell text) nor
    comments, less the header; None when quotes may join lines (not counted)."""
    text = data.decode("utf-8-sig", errors="replace")
    if '"' in text:
        return None
    lines = [ln for ln in _LINE_END.split(text) if ln.replace(",", "").strip()
             and not ln.lstrip().startswith("#")]
    return max(len(lines) - 1, 0)


def _manifest_read_or_refused(path, data):
    from orbweigh.manifest import read_manifest
    try:
        entries = read_manifest(path)
    except OrbweighError as exc:
        assert str(exc).strip()
        return None
    for entry in entries:
        assert entry.problem is None or (isinstance(entry.problem, str)
                                         and str(path) in entry.problem)
        if entry.problem is None:
            assert entry.id and entry.log and entry.log.startswith(str(path.parent.resolve()))
    return entries


@given(data=_csv_manifests())
@fuzz(150)
def test_random_csv_manifests_are_read_or_refused(tmp_path, data):
    _manifest_folder(tmp_path)
    path = tmp_path / "manifest.csv"
    path.write_bytes(data)
    entries = _manifest_read_or_refused(path, data)
    expected = _manifest_data_rows(data)
    if entries is not None and expected is not None:
        assert len(entries) == expected   # every row accounted for, none merged or lost


@given(data=_toml_manifests())
@fuzz(120)
def test_random_toml_manifests_are_read_or_refused(tmp_path, data):
    _manifest_folder(tmp_path)
    path = tmp_path / "manifest.toml"
    path.write_bytes(data)
    _manifest_read_or_refused(path, data)


@given(data=st.binary(max_size=400), suffix=st.sampled_from([".csv", ".toml"]))
@fuzz(80)
def test_random_bytes_manifests_are_read_or_refused(tmp_path, data, suffix):
    _manifest_folder(tmp_path)
    path = tmp_path / f"manifest{suffix}"
    path.write_bytes(data)
    _manifest_read_or_refused(path, data)


# ------------------------------------------------------------------------ result documents

_JSON_LEAVES = st.one_of(
    st.none(), st.booleans(), st.integers(-10 ** 40, 10 ** 40),
    st.floats(allow_nan=True, allow_infinity=True), _TEXT,
    st.sampled_from([0, 1, -1, 0.5, 1e308, -0.0, "0.3", "", "besselian", "jd", "x.ecsv",
                     "result_draws.ecsv", "../result_draws.ecsv", "/dev/zero"]))
_JSON_KEYS = st.one_of(_TEXT, st.sampled_from(
    ["elements", "value", "error", "P", "T", "e", "a", "i", "Omega", "omega", "scale",
     "covariance", "posterior", "draws_file", "matrix", "parameters", "mass", "warnings"]))
_JSON = st.recursive(_JSON_LEAVES, lambda inner: st.one_of(
    st.lists(inner, max_size=4), st.dictionaries(_JSON_KEYS, inner, max_size=4)),
    max_leaves=12)


@functools.lru_cache(maxsize=1)
def _base_document():
    from report_fixtures import build_document
    doc, draws = build_document(n_draws=200)
    return json.dumps(doc), draws


def _paths(node, prefix=()):
    """Every key path of a JSON document (the first two items of each list)."""
    yield prefix
    items = node.items() if isinstance(node, dict) else (
        enumerate(node[:2]) if isinstance(node, list) else ())
    for key, value in items:
        yield from _paths(value, prefix + (key,))


@st.composite
def _mutated_documents(draw):
    """A valid result document with one to three blocks, values or keys replaced by random
    JSON (wrong types in every block, non-finite numbers, deep lists) or deleted."""
    doc = json.loads(_base_document()[0])
    doc["posterior"]["draws_file"] = "result_draws.ecsv"
    for _ in range(draw(st.integers(1, 3))):
        path = draw(st.sampled_from(sorted(_paths(doc), key=lambda p: (len(p), repr(p)))[1:]))
        parent = doc
        for key in path[:-1]:
            parent = parent[key]
        if draw(st.integers(0, 4)) == 0 and isinstance(parent, dict):
            del parent[path[-1]]
        else:
            parent[path[-1]] = draw(_JSON)
    return doc


def _write_draws(tmp_path):
    from astropy.table import Table
    from orbweigh.elements import ELEMENT_KEYS
    target = tmp_path / "result_draws.ecsv"
    if not target.exists():
        Table(_base_document()[1], names=ELEMENT_KEYS).write(target, format="ascii.ecsv")


def _load_or_refuse(path):
    """load_result either refuses with a clear error or gives a document every reader of
    the elements, covariance and draws can use."""
    from orbweigh.result import element_draws, elements_from_document, load_result
    try:
        doc = load_result(path)
        elements_from_document(doc)
        draws = element_draws(doc, 20, seed=1)
    except OrbweighError as exc:
        assert str(exc).strip()
        return None
    assert draws is None or (draws.shape[1] == 7 and np.isfinite(draws).all())
    return doc


@given(doc=_JSON)
@fuzz(150)
def test_random_json_shapes_are_read_or_refused(tmp_path, doc):
    path = tmp_path / "result.json"
    path.write_text(json.dumps(doc))
    _load_or_refuse(path)
    path.write_text(json.dumps({"elements": doc}))
    _load_or_refuse(path)


@given(doc=_mutated_documents())
@fuzz(150)
def test_mutated_documents_are_read_or_refused(tmp_path, doc):
    _write_draws(tmp_path)
    path = tmp_path / "result.json"
    path.write_text(json.dumps(doc))   # NaN and Infinity are written as such
    _load_or_refuse(path)


@given(doc=_mutated_documents(),
       argv=st.sampled_from([["ephemeris", "{doc}", "--epochs", "2030,2031", "--draws", "30"],
                             ["mass", "{doc}", "--parallax", "100", "1", "--draws", "100"],
                             ["plan", "{doc}", "--window", "2030", "2035", "--draws", "30"],
                             ["compare", "{doc}", "{doc}", "--draws", "30"]]))
@fuzz(40)
def test_commands_on_mutated_documents_exit_0_or_2(tmp_path, capsys, doc, argv):
    _write_draws(tmp_path)
    path = tmp_path / "result.json"
    path.write_text(json.dumps(doc))
    assert main([a.format(doc=path) for a in argv]) in (0, 2)
    assert "Traceback" not in capsys.readouterr().err


def _report_parts(doc):
    """Everything of a report but the figures' drawing: the tables, the HTML page and the
    arrays the figures plot (fast enough to fuzz; drawing is not)."""
    from orbweigh.report import figures
    from orbweigh.report.html import render_html
    from orbweigh.report.posterior import mass_draws, posterior_draws
    from orbweigh.report.tables import elements_latex, residuals_table
    seed = int(doc.get("seed") or 0)
    figures.measurement_rows(doc)
    draws = posterior_draws(doc, seed)
    if draws is not None:
        mass_draws(doc, draws, seed)
    elements_latex(doc)
    residuals_table(doc)
    assert "<html" in render_html(doc, {}, seed, "test")


@given(doc=_mutated_documents())
@fuzz(80)
def test_report_of_mutated_documents_is_written_or_refused(tmp_path, doc):
    # Every block the report reads is checked where the document is read: a document
    # load_result accepts never breaks the report's tables or page.
    _write_draws(tmp_path)
    path = tmp_path / "result.json"
    path.write_text(json.dumps(doc))
    doc = _load_or_refuse(path)
    if doc is not None:
        _report_parts(doc)


@given(data=st.one_of(st.binary(max_size=300),
                      _JSON.map(lambda d: json.dumps(d).encode("utf-16")),
                      st.integers(1, 200_000).map(lambda n: b"[" * n + b"]" * n),
                      st.integers(1, 200_000).map(lambda n: b'{"a":' * n + b"1" + b"}" * n)))
@fuzz(60)
def test_random_bytes_documents_are_read_or_refused(tmp_path, data):
    path = tmp_path / "result.json"
    path.write_bytes(data)
    _load_or_refuse(path)


# ------------------------------------------------------------------- the command itself

_CLI_CASES = {
    "binary log": (["check", "{f}"], b"\x00\xff\xfe" * 50),
    "semicolon log": (["fit", "{f}"], b"epoch;theta;rho\n2000.0;10;1\n"),
    "UTF-16 result": (["ephemeris", "{f}", "--epochs", "2030"],
                      json.dumps({"elements": {"P": 1}}).encode("utf-16")),
    "deeply nested result": (["report", "{f}", "--out", "{d}/out"], b"[" * 100_000),
    "NaN elements": (["mass", "{f}", "--parallax", "10", "1"],
                     b'{"P": NaN, "T": 2000, "e": 0.1, "a": 1, "i": 1, "Omega": 1, "omega": 1}'),
    "manifest of bytes": (["batch", "{f}", "--out", "{d}/batch"], b"\xff\x00id,log\n"),
}


@pytest.mark.parametrize("case", sorted(_CLI_CASES))
def test_command_line_refuses_with_exit_2_and_no_traceback(tmp_path, case):
    argv, data = _CLI_CASES[case]
    path = tmp_path / "input.csv"
    path.write_bytes(data)
    argv = [a.format(f=path, d=tmp_path) for a in argv]
    done = subprocess.run([sys.executable, "-m", "orbweigh.cli.main", *argv],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 2, done.stderr
    assert "Traceback" not in done.stderr
    assert str(path) in done.stderr and "error:" in done.stderr


# ---------------------------------------------- regressions: bugs the fuzzing found, kept

@pytest.mark.parametrize("path, value, key", [
    (("elements", "P", "unit"), ["yr"], "elements.P.unit"),
    (("thiele_innes", "A"), 0.3, "thiele_innes.A"),
    (("thiele_innes", "A", "value"), {"x": 1}, "thiele_innes.A.value"),
    (("mass", "total", "linear"), {"error": 0.1}, "mass.total.linear.value"),
    (("mass", "total", "unit"), {"a": 1}, "mass.total.unit"),
    (("mass", "budget", "a"), {"b": 2}, "mass.budget.a"),
    (("mass", "draws"), None, "mass.draws"),
    (("parallax", "unit"), "bananas", "parallax.unit"),
    (("parallax", "unit"), None, "parallax.unit"),
    (("posterior", "summary", "P"), "x", "posterior.summary.P"),
    (("posterior", "summary", "P", "median"), [1], "posterior.summary.P.median"),
    (("posterior", "summary", "T", "scale"), "lunar", "posterior.summary.T.scale"),
    (("posterior", "autocorr_time", "e"), {"x": 1}, "posterior.autocorr_time.e"),
    (("posterior", "autocorr_time", "e"), None, "posterior.autocorr_time.e"),
    (("posterior", "steps"), None, "posterior.steps"),
    (("posterior", "sigma_scale"), None, "posterior.sigma_scale"),
    (("residuals", 0, "theta_deg"), {"v": 1}, "residuals[0].theta_deg"),
    (("residuals", 0, "epoch"), "x", "residuals[0].epoch"),
    (("statistics", "epoch_last"), None, None),   # deleted below: epoch_first alone
    (("options", "period_range_yr"), [1, 2, 3], "options.period_range_yr"),
])
def test_blocks_the_report_reads_are_checked_where_read(tmp_path, path, value, key):
    # Found by test_report_of_mutated_documents_is_written_or_refused: each of these was
    # accepted by load_result and then raised TypeError, KeyError or ValueError in the
    # report (page, LaTeX or ECSV table, parallax draws).
    from orbweigh.errors import InputError
    from orbweigh.result import load_result
    _write_draws(tmp_path)
    doc = json.loads(_base_document()[0])
    doc["posterior"]["draws_file"] = "result_draws.ecsv"
    parent = doc
    for step in path[:-1]:
        parent = parent[step]
    if key is None:
        del parent[path[-1]]
        key = "statistics.epoch_first"
    else:
        parent[path[-1]] = value
    target = tmp_path / "result.json"
    target.write_text(json.dumps(doc))
    with pytest.raises(InputError, match=re.escape(f"'{key}'")):
        load_result(target)


def test_bare_number_elements_serve_every_reader(tmp_path):
    # Found by the same test: elements written as bare numbers passed validation but the
    # report's tables expected objects; they are now read as {"value": number}.
    from orbweigh.result import load_result
    doc = json.loads(_base_document()[0])
    del doc["posterior"]
    doc["elements"] = {k: v["value"] for k, v in doc["elements"].items()}
    target = tmp_path / "result.json"
    target.write_text(json.dumps(doc))
    loaded = load_result(target)
    assert loaded["elements"]["P"] == {"value": doc["elements"]["P"]}
    _report_parts(loaded)


def test_manifest_path_with_nul_byte_is_a_row_problem(tmp_path):
    # Found by test_random_csv_manifests_are_read_or_refused: a NUL byte in a file name made
    # Path.resolve raise ValueError (a traceback) instead of failing that one system.
    from orbweigh.manifest import read_manifest
    _manifest_folder(tmp_path)
    path = tmp_path / "manifest.csv"
    path.write_bytes(b"id,log\nbad,a\x00b.csv\ngood,a.csv\n")
    bad, good = read_manifest(path)
    assert bad.line == 2 and "column 'log'" in bad.problem and "not a usable file name" in bad.problem
    assert good.problem is None and good.log == str((tmp_path / "a.csv").resolve())


@pytest.mark.parametrize("odd", ["\x1e", "\x1c", "\x1d", "\u2028", "\x0c", "\x85", "\x0b"])
def test_manifest_line_numbers_count_only_real_line_ends(tmp_path, odd):
    # Found by the same test: str.splitlines() also broke lines at these characters, so a
    # note holding one split its row in two and shifted every later line number.
    from orbweigh.manifest import read_manifest
    _manifest_folder(tmp_path)
    path = tmp_path / "manifest.csv"
    path.write_text(f"id,log,last_epoch\nA{odd}B,a.csv,\nC,a.csv,x\n", newline="")
    first, second = read_manifest(path)
    assert (first.id, first.line, first.problem) == (f"A{odd}B", 2, None)
    assert second.line == 3 and second.problem.startswith(f"{path}, line 3, column 'last_epoch'")
