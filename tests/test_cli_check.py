"""``orbweigh check``: the accounting of every line of a log."""
import json
import subprocess
import sys
from pathlib import Path

import pytest

from orbweigh.cli.main import main

DATA = Path(__file__).parent / "data"


def test_check_good_log_text(capsys):
    assert main(["check", str(DATA / "log_good.csv")]) == 0
    out = capsys.readouterr().out
    # log_good.csv: 12 lines = header + 2 comments + 1 blank + 8 data lines; line 8 flagged
    assert "File lines      12 = 4 header/comment/blank + 8 data lines" in out
    assert "Data lines      8 = 7 used + 1 excluded by flag + 0 rejected  (every data line is " \
           "accounted for)" in out
    assert "line 8: flag 'cloudy'" in out
    assert "Default sigmas  4 rows took the technique's default sigma: lines 3, 6, 9, 11" in out
    assert "scale besselian" in out and "rows mix epoch scales" in out
    assert "not in the vocabulary, treated as 'unknown': CCD lucky" in out
    assert "Precession      not applied" in out


def test_check_rejections_listed_with_line_and_column(capsys):
    assert main(["check", str(DATA / "log_bad_rows.csv")]) == 0
    out = capsys.readouterr().out
    assert "Data lines      12 = 2 used + 0 excluded by flag + 10 rejected" in out
    assert "line 3, column 'theta': 'abc' is not a number" in out
    assert "line 9: duplicate of line 2" in out


def test_check_json_to_stdout_adds_up(capsys):
    assert main(["check", str(DATA / "log_mas.ecsv"), "--json", "-"]) == 0
    report = json.loads(capsys.readouterr().out)
    acc = report["accounting"]
    assert (acc["data_lines"], acc["used"], acc["excluded"], acc["rejected"]) == (3, 3, 0, 0)
    assert report["units"] == {"theta": "deg", "rho": "mas", "sigma_theta": "arcmin",
                               "sigma_rho": "mas"}
    assert report["rows"][1]["rho_arcsec"] == pytest.approx(0.420)  # 420 mas
    assert report["precession"]["applied"] is True
    assert report["techniques"] == {"adaptive_optics": 1, "photographic": 1, "speckle": 1}


def test_check_options_mapping_target_and_json_file(tmp_path, capsys):
    out_json = tmp_path / "r.json"
    code = main(["check", str(DATA / "log_mapped.csv"), "--columns",
                 "epoch=date,theta=pa,rho=sep,sigma_theta=err_pa,sigma_rho=err_sep",
                 "--target-ra", "06:00:00", "--target-dec=-30:00:00", "--json", str(out_json)])
    assert code == 0
    out = capsys.readouterr().out
    assert "Ignored columns method, observer" in out
    report = json.loads(out_json.read_text())
    assert report["precession"]["target_dec_deg"] == pytest.approx(-30.0)
    # 1950 -> 2000 at alpha 90, delta -30: -0.00557 sec(-30) (-50) deg (Aitken 1935; memory)
    first = report["rows"][0]
    assert first["theta_deg"] - first["theta_input_deg"] == pytest.approx(
        0.00557 / 0.8660254 * 50.0 * 1.0, rel=0.03)


def test_check_suspicious_and_all_rejected(tmp_path, capsys):
    log = tmp_path / "s.csv"
    log.write_text("epoch,theta,rho,technique\n2000.0,100,0.5,speckle\n2000.3,281,0.5,speckle\n"
                   "2000.6,102,0.5,speckle\n")
    assert main(["check", str(log)]) == 0
    assert "line 3 [quadrant_flip]" in capsys.readouterr().out
    log.write_text("epoch,theta,rho\n2000.0,400,0.5\n")
    assert main(["check", str(log)]) == 2
    err = capsys.readouterr().err
    assert "no usable rows (1 rejected, 0 excluded by flag)" in err


@pytest.mark.parametrize("name, args, match", [
    ("log_semicolon.csv", [], "line 1: wrong delimiter"),
    ("log_bad_rows.csv", ["--strict"], "line 3, column 'theta'"),
    ("log_mapped.csv", [], "required column(s) epoch, theta, rho not found"),
    ("log_good.csv", ["--target-ra", "10"], "give both target coordinates"),
    ("log_good.csv", ["--columns", "epoch"], "--columns: cannot read 'epoch'"),
    ("missing.csv", [], "cannot read the file"),
])
def test_check_file_errors_exit_2(capsys, name, args, match):
    assert main(["check", str(DATA / name), *args]) == 2
    captured = capsys.readouterr()
    assert match in captured.err and "Traceback" not in captured.err


def test_check_subprocess_no_traceback(tmp_path):
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    proc = subprocess.run([sys.executable, "-m", "orbweigh.cli.main", "check", str(empty)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 2
    assert "the file is empty" in proc.stderr and "Traceback" not in proc.stderr
