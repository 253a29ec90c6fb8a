"""Options are checked before any work, values that start with '-' are values, and a
closed standard output stops the command quietly.

A log path that does not exist ("never-read.csv") proves an option was refused before
the log was read, let alone fitted or sampled: otherwise the message would name the log.
"""
import json
import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from orbweigh.cli.main import BROKEN_PIPE_STATUS, build_parser, main

DATA = Path(__file__).parent / "data"
SIRIUS = str(DATA / "mass_sirius.json")


def _refused(capsys, argv, *phrases):
    """Run ``orbweigh argv``; assert exit 2, one message holding every phrase, no trace."""
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and err.startswith("orbweigh ")
    for phrase in phrases:
        assert phrase in err, (phrase, err)
    return err


# ---------------------------------------------------------------- ignored options refused
@pytest.mark.parametrize("extra, phrases", [
    (["--mass-ratio", "0.8", "0.1"], ["--mass-ratio splits the total mass", "give --parallax"]),
    (["--rv-amplitudes", "10", "1", "12", "1"],
     ["--rv-amplitudes splits the total mass", "would be ignored"]),
    (["--magnitudes", "5", "6", "--band", "bol", "--mass-ratio", "0.8", "0.1"],
     ["mass-luminosity relation; drop --mass-ratio"]),
    (["--parallax", "20", "1", "--magnitudes", "5", "6", "--band", "bol"],
     ["either a trigonometric parallax (--parallax) or --magnitudes", "not both"]),
    (["--magnitudes", "5", "6", "--band", "V"], ["band 'V' is not supported"]),
    (["--magnitudes", "5", "6"], ["--magnitudes needs --band"]),
    (["--parallax", "20", "-1"], ["--parallax: the error must be zero or positive"]),
    (["--parallax", "20", "1", "--mass-ratio", "0", "0.1"],
     ["--mass-ratio: the mass ratio q must be a positive number, got 0"]),
    (["--combine-parallax", "--rv", "never-read-rv.csv"],
     ["--combine-parallax weighs the trigonometric parallax"]),
    (["--fix", "e=2"], ["the fixed value of e must be an eccentricity"]),
    (["--fix", "a=nan"], ["the fixed value of a must be a finite number"]),
    (["--fix", "e=1"], ["the fixed value of e must be an eccentricity in [0, 0.995]; got 1"]),
    (["--fix", "e=-0.1"], ["the fixed value of e must be an eccentricity"]),
    (["--fix", "a=0"], ["the fixed value of a must be a positive semi-major axis"]),
    (["--fix", "P=0"], ["the fixed value of P must be a positive period"]),
    (["--fix", "P=inf"], ["the fixed value of P must be a finite number"]),
    (["--fix", "i=-1"], ["the fixed value of i must be an inclination in [0, 180] deg"]),
    (["--fix", "i=180.5"], ["the fixed value of i must be an inclination"]),
    (["--fix", "Omega=-20"], ["the fixed value of Omega must be a node in [0, 360) deg; "
                              "got -20 (the same angle: 340)"]),
    (["--fix", "Omega=360"], ["must be a node in [0, 360) deg", "(the same angle: 0)"]),
    (["--fix", "omega=400"], ["the fixed value of omega must be an angle in [0, 360) deg",
                              "(the same angle: 40)"]),
    (["--period-range", "50", "10"], ["0 < PMIN < PMAX"]),
    (["--outlier-sigma", "-1"], ["the outlier threshold must be positive"]),
])
def test_fit_refuses_mass_options_before_reading_the_log(tmp_path, capsys, extra, phrases):
    log = tmp_path / "never-read.csv"
    err = _refused(capsys, ["fit", str(log), *extra], *phrases)
    assert "never-read" not in err


@pytest.mark.parametrize("parallax", [["-5", "1"], ["0", "1"], ["nan", "1"]])
def test_fit_sample_refuses_a_bad_parallax_before_sampling(tmp_path, capsys, parallax):
    # Before: the refusal came after the sampling and left out/draws.ecsv without a result.
    out = tmp_path / "out"
    _refused(capsys, ["fit", str(tmp_path / "never-read.csv"), "--parallax", *parallax,
                      "--sample", "--out", str(out)], "--parallax: the parallax",
             "is not positive")
    assert not out.exists()


def test_mass_refuses_ratio_with_magnitudes_and_writes_nothing(tmp_path, capsys):
    out = tmp_path / "m.json"
    _refused(capsys, ["mass", SIRIUS, "--magnitudes", "5", "6", "--band", "bol",
                      "--mass-ratio", "0.5", "0.1", "--json", str(out)],
             "drop --mass-ratio")
    assert not out.exists()


# --------------------------------------------------------------------- bounded counts
_PLAN = ["plan", "never-read.json", "--window", "2030", "2040"]


@pytest.mark.parametrize("argv, phrases", [
    (["mass", SIRIUS, "--parallax", "379", "1.6", "--draws", "1000000000"],
     ["--draws 1000000000 is outside 2..200,000"]),
    (["ephemeris", SIRIUS, "--epochs", "2030", "--draws", "20000"],
     ["--draws 20000 is outside 2..10,000"]),
    (["compare", SIRIUS, SIRIUS, "--draws", "100000"], ["--draws 100000 is outside 2..10,000"]),
    (["plan", SIRIUS, "--window", "2030", "2040", "--draws", "0"], ["outside 2..10,000"]),
    (["fit", "never-read.csv", "--sample", "--out", "o", "--walkers", "5000"],
     ["--walkers 5000 is outside 14..1,000"]),
    (["fit", "never-read.csv", "--sample", "--out", "o", "--steps", "200000"],
     ["--walkers 16 x --steps 200000 = 3,200,000 evaluations, more than 2,000,000"]),
    (["fit", "never-read.csv", "--seed", "-1"], ["--seed -1: a seed is a whole number from 0"]),
    (["mass", SIRIUS, "--parallax", "379", "1.6", "--seed", "-3"], ["--seed -3"]),
    (["ephemeris", SIRIUS, "--start", "2000", "--stop", "2400", "--step", "1e-6"],
     ["gives 400,000,001 epochs, more than 100,000", "use a larger --step"]),
    (["ephemeris", SIRIUS, "--start", "2000", "--stop", "2400", "--step", "1e-300"],
     ["gives 4e+302 epochs"]),
    (["ephemeris", SIRIUS, "--start", "2000", "--stop", "2100", "--step", "0.002",
      "--draws", "5000"], ["250,005,000 predictions for the bands, more than 100,000,000"]),
    (["plan", SIRIUS, "--window", "2030", "2400", "--step", "1e-4"],
     ["more than 100,000"]),
    # plan's physical values: finite and in range, refused before the document is read
    ([*_PLAN, "--aperture-mm", "inf"],
     ["--aperture-mm inf is outside 1..100,000", "give a value in that range"]),
    ([*_PLAN, "--aperture-mm", "nan"], ["--aperture-mm nan is outside 1..100,000"]),
    ([*_PLAN, "--aperture-mm", "-300"], ["--aperture-mm -300.0 is outside 1..100,000"]),
    ([*_PLAN, "--aperture-mm", "0"], ["--aperture-mm 0.0 is outside"]),
    ([*_PLAN, "--sigma-mas", "inf"], ["--sigma-mas inf is outside 0.001..100,000"]),
    ([*_PLAN, "--sigma-mas", "-1"], ["--sigma-mas -1.0 is outside"]),
    ([*_PLAN, "--min-separation", "inf"], ["--min-separation inf is outside 0..1,000"]),
    ([*_PLAN, "--min-separation", "nan"], ["--min-separation nan is outside 0..1,000"]),
    (["batch", "never-read.csv", "--out", "b", "--workers", "0"],
     ["--workers 0 is outside 1..64"]),
    (["batch", "never-read.csv", "--out", "b", "--workers", "100000"],
     ["--workers 100000 is outside 1..64"]),
])
def test_counts_are_bounded_with_the_limit_in_the_message(tmp_path, capsys, monkeypatch,
                                                          argv, phrases):
    monkeypatch.chdir(tmp_path)
    _refused(capsys, argv, *phrases)
    assert list(tmp_path.iterdir()) == []   # nothing written, no output folder made


@pytest.mark.parametrize("command, text", [
    ("mass", "2 to 200,000"), ("ephemeris", "2 to 10,000"), ("plan", "2 to 10,000"),
    ("compare", "2 to 10,000"), ("fit", "14 to 1,000"), ("batch", "1 to 64"),
    ("plan", "[mm], 1 to 100,000"), ("plan", "[mas], 0.001 to 100,000"),
    ("plan", "[yr], 0 to 1,000"),
])
def test_limits_are_documented_in_help(command, text):
    help_text = build_parser(command)._subparsers._group_actions[0].choices[command]
    assert text in " ".join(help_text.format_help().split())


# ------------------------------------------------------- values that start with '-'
def _log(tmp_path):
    path = tmp_path / "pair.csv"
    path.write_text("epoch,theta,rho\n2001.0,10.0,0.5\n2003.0,20.0,0.6\n2005.5,35.0,0.7\n",
                    encoding="utf-8")
    return path


# -(8 + 12/60 + 5/3600) deg = -8.2013889 deg, by hand.
@pytest.mark.parametrize("dec, expected", [("-08d12m05s", -8.2013889), ("-08:12:05", -8.2013889),
                                           ("-8.2", -8.2), ("-0.5", -0.5)])
def test_southern_declination_as_a_separate_argument(tmp_path, capsys, dec, expected):
    log = _log(tmp_path)
    assert main(["check", str(log), "--target-ra", "05:14:32.3", "--target-dec", dec,
                 "--json", "-"]) == 0
    text = capsys.readouterr().out
    assert json.loads(text)  # the whole report, as JSON
    dec_deg = float(text.split('"target_dec_deg":')[1].split(",")[0])
    assert dec_deg == pytest.approx(expected, abs=1e-7)


def test_southern_declination_through_the_installed_command(tmp_path):
    log = _log(tmp_path)
    run = subprocess.run([sys.executable, "-m", "orbweigh.cli.main", "check", str(log),
                          "--target-ra", "05h14m32.3s", "--target-dec", "-08d12m05s"],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    assert "expected one argument" not in run.stderr
    assert "Dec -8.20139 deg" in run.stdout      # -(8 + 12/60 + 5/3600), by hand


def test_negative_numbers_in_any_notation_are_values():
    args = build_parser("mass").parse_args(
        ["mass", "r.json", "--magnitudes", "-1.5e0", "-.25", "--band", "V",
         "--bolometric-corrections", "-2e-1", "-0.3"])
    assert args.magnitudes == [-1.5, -0.25] and args.bolometric_corrections == [-0.2, -0.3]
    args = build_parser("fit").parse_args(["fit", "x.csv", "--fix", "omega=-5",
                                           "--target-dec", "-08:12:05", "--target-ra", "1"])
    assert args.fix == ["omega=-5"] and args.target_dec == "-08:12:05"


def test_a_misspelt_option_is_still_an_error(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["check", "x.csv", "--target-decl", "-8"])
    assert stop.value.code == 2
    assert "unrecognized arguments: --target-decl" in capsys.readouterr().err


# ------------------------------------------------------------------ closed pipe
def test_closed_standard_output_stops_quietly(tmp_path):
    log = _log(tmp_path)
    child = subprocess.Popen([sys.executable, "-m", "orbweigh.cli.main", "check", str(log)],
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    child.stdout.close()      # the reader goes away before the command writes
    with child.stderr:
        err = child.stderr.read().decode()
    assert child.wait(timeout=120) == BROKEN_PIPE_STATUS == 128 + signal.SIGPIPE
    assert err == ""


def test_head_of_a_pipe_gets_its_line_and_no_error(tmp_path):
    log = tmp_path / "long.csv"
    rows = "".join(f"{1900 + 0.01 * k:.2f},{k % 360},0.{k % 9 + 1}\n" for k in range(5000))
    log.write_text("epoch,theta,rho\n" + rows, encoding="utf-8")
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)}
    shell = subprocess.run(
        ["bash", "-c", f'"{sys.executable}" -m orbweigh.cli.main check "{log}" --json - '
                       "| head -1"], capture_output=True, text=True, timeout=120, env=env)
    assert shell.stdout == "{\n"
    assert "Broken pipe" not in shell.stderr and "Traceback" not in shell.stderr


def test_too_few_usable_rows_name_the_lines_left_out(tmp_path, capsys):
    # Two usable measurements, one rejected (a letter O for a zero), one excluded by its
    # flag: the refusal says which lines were left out and why; so does the velocity log's.
    log = tmp_path / "short.csv"
    log.write_text("epoch,theta,rho,flag\n2000.0,10,0.5,\n2001.0,20,0.5,\n"
                   "2002.0,30,O.5,\n2003.0,40,0.5,x\n")
    _refused(capsys, ["fit", str(log)], "2 usable measurements", "Left out: 1 line rejected "
             "(line 4, column 'rho': 'O.5' is not a number", "1 excluded by its flag (line 5)")
    rv = tmp_path / "rv.csv"
    rv.write_text("epoch,component,rv,sigma_rv\n2010.5,1,abc,0.5\n2011.5,2,3.0,0.5\n")
    sample = Path(__file__).parents[1] / "sample_measurements" / "measurements.csv"
    _refused(capsys, ["fit", str(sample), "--rv", str(rv), "--quiet"],
             "1 usable radial velocity;", "1 line rejected (line 2, column 'rv'")
