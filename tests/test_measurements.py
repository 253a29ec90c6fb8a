"""Reading and validating measurement logs."""
import re
from pathlib import Path

import numpy as np
import pytest

from orbweigh.errors import InputError, LogFormatError
from orbweigh.measurements import (MeasurementSet, read_measurements, suspicious_rows,
                                   technique_class)
from orbweigh.reductions import approx_theta_correction_deg, parse_epoch
from orbweigh.tables import parse_column_mapping, read_table

DATA = Path(__file__).parent / "data"
J2000_JD = 2451545.0  # IAU 1976 definition of J2000.0 (memory)


def write(tmp_path, text, name="log.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def problems_by_line(ms):
    return {p.line: p for p in ms.rejected}


# ------------------------------------------------------------------------------ good logs

def test_good_csv_every_line_accounted():
    ms = read_measurements(DATA / "log_good.csv")
    # the file: 2 comment lines, 1 blank, header on line 2, data on lines 3-4, 6, 8-12
    assert list(ms.line) == [3, 4, 6, 8, 9, 10, 11, 12]
    assert ms.n_lines == 8 and ms.rejected == []
    assert list(ms.excluded) == [False, False, False, True, False, False, False, False]
    assert list(ms.flag)[3:6] == ["cloudy", "0", "no"]
    assert ms.note[0] == "first measure, 6-inch refractor"  # quoted comma kept


def test_good_csv_epochs_and_scale_note():
    ms = read_measurements(DATA / "log_good.csv")
    assert ms.epoch_scale == "besselian"  # the first row is a plain decimal year
    assert "rows mix epoch scales" in ms.meta["epoch_scale_note"]
    assert ms.epoch_yr[0] == pytest.approx(parse_epoch("B1845.31")[0], abs=1e-12)
    # JD 2455197.5 -> 2000 + (JD - 2451545) / 365.25 Julian years (definition)
    assert ms.epoch_yr[5] == pytest.approx(2000.0 + (2455197.5 - J2000_JD) / 365.25, abs=1e-9)
    assert list(ms.epoch_text[[4, 6]]) == ["J1988.25", "2016-07-01"]


def test_good_csv_techniques_defaults_and_weight():
    ms = read_measurements(DATA / "log_good.csv")
    assert list(ms.technique) == ["micrometer", "micrometer", "photographic", "photographic",
                                  "speckle", "adaptive_optics", "space", "unknown"]
    assert ms.technique_input[7] == "CCD lucky"  # as written, kept
    assert list(ms.sigma_defaulted) == [True, False, True, False, True, False, True, False]
    # micrometer: 1-2 deg and 0.1-0.2 arcsec (common practice, no source): 1.5 deg, 0.15"
    assert (ms.sigma_theta_deg[0], ms.sigma_rho_arcsec[0]) == (1.5, 0.15)
    # photographic row: sigma_rho given (0.03"), sigma_theta isotropic = sigma_rho / rho
    assert ms.sigma_theta_deg[2] == pytest.approx(np.degrees(0.03 / 1.10), rel=1e-12)
    # speckle default "a few mas" (common practice, no source): 0.005", isotropic theta
    assert ms.sigma_rho_arcsec[4] == 0.005
    assert ms.sigma_theta_deg[4] == pytest.approx(np.degrees(0.005 / 0.52), rel=1e-12)
    # weight 2 on the photographic row: effective sigma = sigma / sqrt(2)
    assert ms.weight[2] == 2.0
    assert ms.sigma_rho_eff_arcsec[2] == pytest.approx(0.03 / np.sqrt(2.0), rel=1e-12)
    assert ms.theta_deg == pytest.approx(ms.theta_input_deg)  # no coordinates: no precession
    assert ms.meta["precession"]["applied"] is False


@pytest.mark.parametrize("text, expected", [("Visual", "micrometer"), ("AO", "adaptive_optics"),
                                            ("Hipparcos", "space"), ("gaia", "space"),
                                            ("interferometric", "speckle"),
                                            ("adaptive-optics", "adaptive_optics"),
                                            ("", "unknown"), ("CCD", "unknown")])
def test_technique_aliases(text, expected):
    assert technique_class(text) == expected


def test_whitespace_log_with_quotes_missing_markers_and_short_rows():
    ms = read_measurements(DATA / "log_whitespace.txt")
    assert ms.meta["format"] == "whitespace"
    assert list(ms.line) == [3, 4, 5]
    assert list(ms.note) == ["seeing poor", "", "two nights"]
    assert ms.sigma_defaulted[1] and not ms.sigma_defaulted[2]
    # photographic default 0.03" (common practice, no source), isotropic theta
    assert ms.sigma_rho_arcsec[1] == 0.03
    assert ms.sigma_theta_deg[1] == pytest.approx(np.degrees(0.03 / 2.00))
    # MJD 58849.0 = JD 2458849.5 (MJD = JD - 2400000.5, definition)
    assert ms.epoch_yr[2] == pytest.approx(2000.0 + (2458849.5 - J2000_JD) / 365.25, abs=1e-9)


def test_ecsv_units_meta_coordinates_and_precession():
    ms = read_measurements(DATA / "log_mas.ecsv")
    assert ms.meta["format"] == "ecsv"
    assert ms.rho_arcsec == pytest.approx([0.500, 0.420, 0.380])  # 1 mas = 0.001 arcsec
    assert ms.sigma_rho_arcsec == pytest.approx([0.020, 0.005, 0.002])
    assert ms.sigma_theta_deg == pytest.approx([0.1, 0.05, 0.02])  # 1 arcmin = 1/60 deg
    p = ms.meta["precession"]
    assert p["applied"]  # 06:00:00 = 90 deg, +40:00:00 = 40 deg (arithmetic)
    assert (p["target_ra_deg"], p["target_dec_deg"]) == pytest.approx((90.0, 40.0), abs=1e-12)
    assert list(ms.theta_input_deg) == [30.0, 45.0, 60.0]
    # classic linear correction (Aitken 1935; memory) to a few per cent of itself
    approx = approx_theta_correction_deg(ms.epoch_yr, 90.0, 40.0)
    assert ms.theta_deg - ms.theta_input_deg == pytest.approx(approx, rel=0.03, abs=1e-6)


def test_ecsv_in_radians_and_target_from_arguments(tmp_path):
    from astropy.table import Table
    import astropy.units as u
    t = Table({"epoch": ["1900.0", "2000.0"], "theta": [0.5, 1.0] * u.rad,
               "rho": [1.0, 0.9] * u.arcsec})
    t.meta["target_ra_deg"] = 10.0  # overridden by the arguments
    t.meta["target_dec_deg"] = 10.0
    path = tmp_path / "rad.ecsv"
    t.write(path, format="ascii.ecsv")
    ms = read_measurements(path, target_ra_deg="06:00:00", target_dec_deg=0.0)
    assert ms.theta_input_deg == pytest.approx(np.degrees([0.5, 1.0]))
    assert ms.meta["precession"]["source"] == "arguments"
    change = ms.theta_deg[0] - ms.theta_input_deg[0]
    assert change == pytest.approx(approx_theta_correction_deg(ms.epoch_yr[0], 90.0, 0.0),
                                   rel=0.03)


def test_space_rows_not_precessed(tmp_path):
    path = write(tmp_path, "epoch,theta,rho,technique\n1900.0,10,1,visual\n"
                           "1991.25,20,1,hipparcos\n")
    ms = read_measurements(path, target_ra_deg=90.0, target_dec_deg=0.0)
    assert ms.theta_deg[1] == 20.0
    assert ms.theta_deg[0] - 10.0 == pytest.approx(
        approx_theta_correction_deg(ms.epoch_yr[0], 90.0, 0.0), rel=0.03)
    assert ms.meta["precession"]["rows_space_not_precessed"] == 1


def test_column_mapping():
    assert parse_column_mapping("epoch=date, theta=pa,rho=sep") == {
        "epoch": "date", "theta": "pa", "rho": "sep"}
    ms = read_measurements(DATA / "log_mapped.csv",
                           columns=parse_column_mapping("epoch=date,theta=pa,rho=sep,"
                                                        "sigma_theta=err_pa,sigma_rho=err_sep,"
                                                        "technique=method"))
    assert list(ms.theta_deg) == [10.0, 20.0] and list(ms.sigma_rho_arcsec) == [0.05, 0.05]
    assert ms.meta["ignored_columns"] == ["observer"]


def test_column_mapping_errors(tmp_path):
    with pytest.raises(InputError, match="cannot read 'theta'; expected pairs canonical="):
        parse_column_mapping("epoch=date,theta")
    with pytest.raises(InputError, match="--columns names colour, which the log does not use"):
        read_measurements(DATA / "log_mapped.csv", columns={"colour": "x"})
    with pytest.raises(LogFormatError, match="maps 'epoch' to 'when', but the header has no"):
        read_measurements(DATA / "log_mapped.csv", columns={"epoch": "when"})


def test_read_table_is_generic(tmp_path):
    path = write(tmp_path, "# rv log\ntime,rv,err\n2000.0,12.5,0.3\n\n2001.0,-3.1\n")
    table = read_table(path, required=("time", "rv"), optional=("err",))
    assert [line for line, _ in table.rows] == [3, 5]
    assert table.rows[1][1] == {"time": "2001.0", "rv": "-3.1", "err": ""}  # short row padded


# ------------------------------------------------------------------------- row problems

def test_each_row_problem_names_line_and_column():
    ms = read_measurements(DATA / "log_bad_rows.csv")
    assert list(ms.line) == [2, 13]
    assert ms.n_lines == 12 and len(ms) + len(ms.rejected) == ms.n_lines
    p = problems_by_line(ms)
    expected = {
        3: ("theta", "'abc' is not a number; expected a position angle in"),
        4: ("theta", r"'360.0' is outside \[0, 360\) deg"),
        5: ("rho", "'0.0' is not > 0"),
        6: ("sigma_theta", "'-1.0' is negative"),
        7: ("sigma_rho", "'0' is zero, which would give the row infinite weight"),
        8: ("epoch", "cannot read '19O6.0' as an epoch"),
        9: (None, "duplicate of line 2"),
        10: ("weight", "'0' is zero; expected a weight > 0"),
        11: (None, "found 7 value.s., but the header .line 1. names 6 columns"),
        12: ("theta", "the value is missing"),
    }
    assert sorted(p) == sorted(expected)
    for line, (column, pattern) in expected.items():
        assert p[line].column == column
        assert re.search(pattern, p[line].reason), (line, p[line].reason)


def test_strict_raises_first_problem():
    with pytest.raises(LogFormatError, match=r"log_bad_rows.csv, line 3, column 'theta': 'abc'"):
        read_measurements(DATA / "log_bad_rows.csv", strict=True)


def test_column_named_as_user_wrote_it(tmp_path):
    path = write(tmp_path, "date,pa,sep\n1950.0,400,1.0\n1951.0,10,1.0\n")
    ms = read_measurements(path, columns={"epoch": "date", "theta": "pa", "rho": "sep"})
    assert ms.rejected[0].line == 2 and ms.rejected[0].column == "pa"


def test_flagged_excluded_but_kept(tmp_path):
    path = write(tmp_path, "epoch,theta,rho,flag\n1950,1,1,\n1951,2,1,x\n1952,3,1,OK\n"
                           "1953,4,1,False\n1954,5,1,1\n")
    ms = read_measurements(path)
    assert list(ms.excluded) == [False, True, False, False, True]
    assert list(ms.usable) == [True, False, True, True, False]


# ------------------------------------------------------------------------ file problems

@pytest.mark.parametrize("text, match", [
    ("", "the file is empty"),
    ("# only a comment\n\n", "the file is empty"),
    ("epoch,theta,rho\n# nothing\n", r"line 1: no data rows after the header \(line 1\)"),
    ("date,pa,rho\n1900,1,1\n", r"line 1: required column\(s\) epoch, theta not found; the "
                                "header has: date, pa, rho.*--columns epoch=date,theta=pa"),
    ("# epoch,theta,rho\n1900.0,100.0,1.0\n", "line 2: this line looks like data, not a header"),
    ("epoch,theta,rho\n1900.0\t100.0\t1.0\n1901.0\t101.0\t1.0\n",
     r"line 2: no data line matches the header \(wrong delimiter\?\).*seems to use tab"),
    ("epoch,Theta,THETA,rho\n1,2,3,4\n", "names column.s. theta twice"),
])
def test_file_level_errors(tmp_path, text, match):
    with pytest.raises(LogFormatError, match=match):
        read_measurements(write(tmp_path, text))


def test_wrong_delimiter_named():
    with pytest.raises(LogFormatError, match=r"log_semicolon.csv, line 1: wrong delimiter: "
                                             r".*separated by semicolon ';'"):
        read_measurements(DATA / "log_semicolon.csv")


def test_unreadable_files(tmp_path):
    with pytest.raises(LogFormatError, match="cannot read the file"):
        read_measurements(tmp_path / "missing.csv")
    binary = tmp_path / "x.csv"
    binary.write_bytes(b"epoch,theta\n\xff\xfe\x00")
    with pytest.raises(LogFormatError, match="not a UTF-8 text file"):
        read_measurements(binary)


def test_ecsv_problems(tmp_path):
    with pytest.raises(LogFormatError, match="ends in .ecsv but the first line is not"):
        read_measurements(write(tmp_path, "epoch theta rho\n1 2 3\n", "x.ecsv"))
    bad_unit = (DATA / "log_mas.ecsv").read_text().replace("unit: mas, datatype: float64}\n# - "
                                                           "{name: sigma_theta", "unit: s, "
                                                           "datatype: float64}\n# - {name: "
                                                           "sigma_theta")
    with pytest.raises(LogFormatError, match="column 'rho': the ECSV header gives unit 's'"):
        read_measurements(write(tmp_path, bad_unit, "y.ecsv"))


def test_target_needs_both_coordinates():
    with pytest.raises(InputError, match="give both target coordinates"):
        read_measurements(DATA / "log_good.csv", target_ra_deg=10.0)


# ----------------------------------------------------------------------- suspicious points

def test_suspicious_rules():
    ms = MeasurementSet.from_arrays(
        epoch_yr=[2000.0, 2000.3, 2000.6, 2005.0, 2005.0, 2010.0],
        theta_deg=[100.0, 281.0, 102.0, 120.0, 130.0, 140.0],
        rho_arcsec=[0.5, 0.5, 0.5, 0.6, 0.6, 0.7],
        sigma_theta_deg=[1.0, 1.0, 1.0, 1.0, 1.0, 0.01],
        sigma_rho_arcsec=[0.005, 0.005, 0.005, 0.005, 0.005, 0.0001],
        technique="speckle")
    found = {(s.line, s.rule) for s in suspicious_rows(ms)}
    # line 2 is 179 deg from both neighbours; 5 is 10 deg (> 3 x 1.41 deg) from line 4 at the
    # same epoch; 6 has 0.1 mas, below a tenth of speckle's few mas (common practice)
    assert found == {(2, "quadrant_flip"), (5, "discordant_same_epoch"), (6, "small_sigma")}
    ms.excluded[1] = True  # a flagged row is not judged, nor used to judge others
    assert (2, "quadrant_flip") not in {(s.line, s.rule) for s in suspicious_rows(ms)}


def _pairwise_discordant(ms, window=0.001, k=3.0):
    """Independent brute force of the same-epoch rule: {line: set of earlier lines it
    disagrees with}, comparing every pair of usable rows (quadratic; small inputs only)."""
    out = {}
    order = np.argsort(ms.epoch_yr, kind="stable")
    s_th, s_rho = ms.sigma_theta_eff_deg, ms.sigma_rho_eff_arcsec
    for a, j in enumerate(order):
        for i in order[:a]:
            if ms.epoch_yr[j] - ms.epoch_yr[i] > window:
                continue
            d_th = abs((ms.theta_deg[i] - ms.theta_deg[j] + 180.0) % 360.0 - 180.0)
            if (d_th > k * np.hypot(s_th[i], s_th[j])
                    or abs(ms.rho_arcsec[i] - ms.rho_arcsec[j]) > k * np.hypot(s_rho[i], s_rho[j])):
                out.setdefault(int(ms.line[j]), set()).add(int(ms.line[i]))
    return out


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_same_epoch_rule_matches_pairwise_comparison(seed):
    # Groups of rows at a few epochs (one straddling theta = 0/360) with one sigma per
    # group: comparing with the earlier rows' extreme edges then finds exactly the rows
    # the all-pairs comparison finds, and names a row it really disagrees with.
    rng = np.random.default_rng(seed)
    epochs, theta, rho, s_th, s_rho = [], [], [], [], []
    for centre, t0 in ((359.5, 2000.0), (120.0, 2000.0004), (45.0, 2003.0), (200.0, 2010.0)):
        n, sig = int(rng.integers(5, 40)), float(rng.uniform(0.2, 1.0))
        epochs += list(t0 + rng.uniform(0.0, 0.0008, n))
        theta += list(np.mod(centre + rng.normal(0.0, 2.0 * sig, n), 360.0))
        rho += list(1.0 + rng.normal(0.0, 0.01, n))
        s_th += [sig] * n
        s_rho += [0.01] * n
    ms = MeasurementSet.from_arrays(epochs, theta, rho, s_th, s_rho)
    expected = _pairwise_discordant(ms)
    found = [s for s in suspicious_rows(ms) if s.rule == "discordant_same_epoch"]
    assert {s.line for s in found} == set(expected)
    assert expected  # the draw does hold discordant rows
    for s in found:
        named = int(re.search(r"same epoch as line (\d+)", s.message).group(1))
        assert named in expected[s.line]


def test_same_epoch_rule_names_only_real_disagreements():
    # Mixed sigmas: whatever row the rule names, the pair is discordant by the rule's
    # own definition (it may miss a pair hidden behind a wide-sigma edge row, by design).
    rng = np.random.default_rng(7)
    n = 200
    ms = MeasurementSet.from_arrays(2000.0 + rng.uniform(0.0, 0.002, n),
                                    rng.normal(50.0, 3.0, n), 1.0 + rng.normal(0.0, 0.02, n),
                                    rng.uniform(0.1, 3.0, n), rng.uniform(0.002, 0.05, n))
    expected = _pairwise_discordant(ms)
    found = [s for s in suspicious_rows(ms) if s.rule == "discordant_same_epoch"]
    assert len(found) > 0.5 * len(expected)
    for s in found:
        named = int(re.search(r"same epoch as line (\d+)", s.message).group(1))
        assert named in expected[s.line]
