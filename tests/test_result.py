"""Reading a result document back: one validation at the boundary, clear errors only."""
import json
import os
import re

import pytest

from orbweigh.cli.main import main
from orbweigh.errors import InputError, OrbweighError
from orbweigh.result import load_result, validate_document

from report_fixtures import write_document

# Meeus, Astronomical Algorithms, 2nd ed. (1998), ch. 57, Example 57.a (the elements).
MEEUS = {"P": 41.623, "T": 1934.008, "e": 0.2763, "a": 0.907, "i": 59.025,
         "Omega": 23.717, "omega": 219.907}


def _doc(**changes):
    doc = {"elements": {k: {"value": v} for k, v in MEEUS.items()}}
    for key, value in changes.items():
        if key in MEEUS:
            doc["elements"][key]["value"] = value
        else:
            doc[key] = value
    return doc


@pytest.mark.parametrize("changes, key", [
    ({"a": float("inf")}, "elements.a.value"),
    ({"P": -3.0}, "elements.P.value"),
    ({"P": 0.0}, "elements.P.value"),
    ({"e": 1.0}, "elements.e.value"),
    ({"e": -0.1}, "elements.e.value"),
    ({"i": 181.0}, "elements.i.value"),
    ({"Omega": 400.0}, "elements.Omega.value"),
    ({"T": float("nan")}, "elements.T.value"),
    ({"e": "0.3"}, "elements.e.value"),
    ({"e": True}, "elements.e.value"),
    ({"warnings": 5}, "warnings"),
    ({"warnings": [1, 2]}, "warnings"),
    ({"seed": "7"}, "seed"),
    ({"seed": 1.5}, "seed"),
    ({"mass": [1]}, "mass"),
    ({"posterior": 3}, "posterior"),
    ({"posterior": {"draws_file": 3}}, "posterior.draws_file"),
    ({"alternatives": [{"elements": {"P": 1}}]}, "alternatives[0].elements.T"),
    ({"residuals": "x"}, "residuals"),
])
def test_each_bad_key_is_named(changes, key):
    with pytest.raises(InputError, match="^" + re.escape(f"doc.json: '{key}'")):
        validate_document(_doc(**changes), "doc.json")


def test_good_document_passes_and_edges_are_accepted():
    doc = validate_document(_doc(e=0.0, i=180.0, Omega=-360.0, seed=3, warnings=["w"]), "d")
    assert doc["_path"] == "d"


def test_needs_names_the_missing_block():
    with pytest.raises(InputError, match="'covariance' is missing"):
        validate_document(_doc(), "d", needs=("elements", "covariance"))
    with pytest.raises(InputError, match="'posterior.draws_file' is missing"):
        validate_document(_doc(), "d", needs=("draws",))


def test_bare_elements_block_is_read(tmp_path, capsys):
    # ephemeris --help: "a file holding just its 'elements' block".
    path = tmp_path / "elements.json"
    path.write_text(json.dumps({k: {"value": v} for k, v in MEEUS.items()}))
    assert load_result(path)["elements"]["P"]["value"] == MEEUS["P"]
    assert main(["ephemeris", str(path), "--epochs", "1980.0"]) == 0
    row = [ln.split() for ln in capsys.readouterr().out.splitlines() if ln.startswith(" ")][-1]
    # Meeus 1998, ch. 57, Example 57.a: theta = 318.4 deg at 1980.0.
    assert float(row[1]) == pytest.approx(318.4, abs=0.05)


@pytest.mark.parametrize("content, message", [
    (b"\x00\x01\xff\xfe binary", "not a UTF-8 text file"),
    ('{"elements": {}}'.encode("utf-16"), "not a UTF-8 text file"),
    (b"[" * 100000 + b"]" * 100000, "nested too deeply"),
    (b"[1, 2]", "expected a JSON object"),
    (b'{"elements": {"P": 1,}}', "line 1: not valid JSON"),
])
def test_unreadable_documents_are_clear(tmp_path, content, message):
    path = tmp_path / "r.json"
    path.write_bytes(content)
    with pytest.raises(InputError, match=message):
        load_result(path)


def test_utf8_bom_is_read(tmp_path):
    path = tmp_path / "r.json"
    path.write_bytes(b"\xef\xbb\xbf" + json.dumps(_doc()).encode())
    assert load_result(path)["elements"]["e"]["value"] == MEEUS["e"]


def test_device_fifo_and_folder_are_refused_at_once(tmp_path):
    fifo = tmp_path / "pipe.json"
    os.mkfifo(fifo)
    for path in ("/dev/zero", fifo, tmp_path):
        with pytest.raises(InputError, match="not a regular file|is a folder"):
            load_result(path)


@pytest.mark.parametrize("draws_text, message", [
    ("P T e a i Omega omega\n1 2 0.1 1 1 1 1\n", "not a readable ECSV table"),
    ("# %ECSV 1.0\n# ---\n# datatype:\n# - {name: P, datatype: float64}\nP\n1.0\n",
     "no column 'T'"),
    (None, "cannot read the file"),
])
def test_broken_draws_file_is_a_clear_error(tmp_path, capsys, draws_text, message):
    path = write_document(tmp_path)
    draws = tmp_path / "result_draws.ecsv"
    if draws_text is None:
        draws.unlink()
    else:
        draws.write_text(draws_text)
    with pytest.raises(InputError, match=message):
        load_result(path)
    out = tmp_path / "out.json"
    # Every reader of a document refuses the same way (result.validate_document): no
    # command falls back to the covariance while another uses the draws.
    for argv in (["ephemeris", str(path), "--epochs", "2030", "--json", str(out)],
                 ["mass", str(path), "--parallax", "100", "1", "--json", str(out)],
                 ["plan", str(path), "--window", "2030", "2040", "--json", str(out)],
                 ["compare", str(path), str(path), "--json", str(out)],
                 ["report", str(path), "--out", str(tmp_path / "o")]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert message in err and "Traceback" not in err
        assert err.count("\n") == 1          # one paragraph
        assert f"{path}: its posterior draws file" in err and str(draws) in err
        assert "remove the 'posterior' block" in err
        assert not out.exists() and not (tmp_path / "o").exists()


def test_commands_refuse_bad_documents_with_exit_2(tmp_path, capsys):
    path = write_document(tmp_path)
    doc = json.loads(path.read_text())
    doc["warnings"], doc["seed"] = 5, "x"
    path.write_text(json.dumps(doc))
    out = tmp_path / "report"
    assert main(["report", str(path), "--out", str(out)]) == 2
    assert "'warnings' must be a list of strings" in capsys.readouterr().err
    assert not out.exists()       # refused before anything is written
    doc["warnings"], doc["seed"] = [], 1
    doc["elements"]["a"]["value"] = float("inf")
    path.write_text(json.dumps(doc))
    for argv in (["ephemeris", str(path), "--epochs", "2030"],
                 ["mass", str(path), "--parallax", "100", "1"],
                 ["plan", str(path), "--window", "2027", "2030"]):
        assert main(argv) == 2
        assert "'elements.a.value' must be finite" in capsys.readouterr().err


def test_errors_are_orbweigh_errors():
    assert issubclass(InputError, OrbweighError)
