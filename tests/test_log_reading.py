"""Logs read exactly as written: delimiters, line ends, long cells, bounds, bounded reads."""
import os
import time
from pathlib import Path

import numpy as np
import pytest

from orbweigh.cli.main import main
from orbweigh.errors import LogFormatError
from orbweigh.fitting import fit_orbit
from orbweigh.measurements import PHYSICAL_BOUNDS, read_measurements, suspicious_rows

SAMPLE = os.path.join(os.path.dirname(__file__), "..", "sample_measurements", "measurements.csv")


def _write(tmp_path, text, name="log.txt", mode="w"):
    path = tmp_path / name
    if isinstance(text, bytes):
        path.write_bytes(text)
    else:
        path.write_text(text, newline="")
    return str(path)


def test_tab_log_keeps_empty_cells(tmp_path):
    text = ("epoch\ttheta\trho\tsigma_theta\tsigma_rho\tflag\tnote\n"
            "2000.0\t10\t1.0\t\t0.02\t\tfirst\n"
            "2001.0\t12\t1.1\t0.5\t0.03\t\t\n")
    ms = read_measurements(_write(tmp_path, text))
    assert len(ms) == 2 and not ms.rejected
    assert ms.sigma_rho_arcsec[0] == pytest.approx(0.02)    # not shifted into sigma_theta
    assert ms.sigma_defaulted[0] and not ms.excluded[0]     # 'first' is a note, not a flag
    assert ms.note[0] == "first"


def test_semicolon_log_is_refused_with_advice(tmp_path):
    with pytest.raises(LogFormatError, match="semicolon"):
        read_measurements(_write(tmp_path, "epoch;theta;rho\n2000.0;10;1\n"))


def test_whitespace_runs_still_separate(tmp_path):
    ms = read_measurements(_write(tmp_path, "epoch   theta  rho\n2000.0   10   1.0\n"))
    assert ms.rho_arcsec[0] == 1.0


@pytest.mark.parametrize("odd", ["\u2028", "\x0c", "\x85", "\x1c", "\u2029"])
def test_only_real_line_ends_count(tmp_path, odd):
    text = f"epoch,theta,rho,note\n2000.0,10,1,a{odd}b\n2001.0,11,1\rbad,1,1\r\n2003.0,13,1\n"
    ms = read_measurements(_write(tmp_path, text))
    assert list(ms.line) == [2, 3, 5]
    assert [p.line for p in ms.rejected] == [4]
    assert ms.n_lines == 4


def test_long_cell_is_a_row_rejection(tmp_path):
    text = ('epoch,theta,rho,note\n2000.0,10,1\n2001.0,11,1,"' + "x" * 200_000 + '"\n'
            "2002.0,12,1\n")
    ms = read_measurements(_write(tmp_path, text))
    assert list(ms.line) == [2, 4]
    assert ms.rejected[0].line == 3 and "field larger than field limit" in ms.rejected[0].reason


@pytest.mark.parametrize("epoch", ["1e9", "JD0", "MJD-1e9", "JD9e9", "MJD1e7"])
def test_day_counts_pass_the_year_window(tmp_path, epoch):
    ms = read_measurements(_write(tmp_path, f"epoch,theta,rho\n2000.0,10,1\n{epoch},11,1\n"))
    assert ms.rejected[0].line == 3 and ms.rejected[0].column == "epoch"
    assert "outside 1500-2500" in ms.rejected[0].reason


def test_plausible_day_counts_are_kept(tmp_path):
    # J2000.0 = JD 2451545.0 = MJD 51544.5 (Explanatory Supplement to the Astronomical
    # Almanac, Seidelmann 1992).
    ms = read_measurements(_write(tmp_path, "epoch,theta,rho\nJD2451545.0,10,1\nMJD51544.5,11,1\n"))
    assert ms.epoch_yr == pytest.approx([2000.0, 2000.0])


@pytest.mark.parametrize("cells, column", [
    ("1e-11,1e-11,1", "sigma_theta"), ("0.1,1e-7,1", "sigma_rho"), ("0.1,0.01,1e20", "weight"),
    ("0.1,0.01,1e-9", "weight"), ("0.1,1e4,1", "sigma_rho"), ("200,0.01,1", "sigma_theta"),
])
def test_values_outside_physical_bounds_are_rejected_by_row(tmp_path, cells, column):
    text = f"epoch,theta,rho,sigma_theta,sigma_rho,weight\n2000.0,10,1,{cells}\n2001.0,10,1,1,1,1\n"
    ms = read_measurements(_write(tmp_path, text))
    assert ms.rejected[0].line == 2 and ms.rejected[0].column == column
    assert "outside" in ms.rejected[0].reason


def test_huge_rho_is_rejected(tmp_path):
    ms = read_measurements(_write(tmp_path, "epoch,theta,rho\n2000.0,10,1e40\n2001.0,10,1\n"))
    assert ms.rejected[0].column == "rho"


@pytest.mark.parametrize("edge", ["low", "high"])
def test_fit_survives_the_accepted_edges(tmp_path, edge):
    """A row at the extreme accepted sigma and weight must not break the fit."""
    lines = Path(SAMPLE).read_text().splitlines()
    header = lines[0].split(",")
    row = lines[1].split(",")
    lo, hi = PHYSICAL_BOUNDS["sigma_theta"][0], PHYSICAL_BOUNDS["weight"][1]
    values = {"sigma_theta": lo, "sigma_rho": PHYSICAL_BOUNDS["sigma_rho"][0], "weight": hi} \
        if edge == "low" else {"sigma_theta": 180.0, "sigma_rho": 3600.0,
                               "weight": PHYSICAL_BOUNDS["weight"][0]}
    extra = [c for c in values if c not in header]
    header += extra
    cells = dict(zip(header, row + [""] * (len(header) - len(row))))
    cells.update({k: repr(v) for k, v in values.items()})
    lines[0], lines[1] = ",".join(header), ",".join(cells[h] for h in header)
    path = _write(tmp_path, "\n".join(lines) + "\n", name="edge.csv")
    ms = read_measurements(path)
    assert not ms.rejected
    solution = fit_orbit(ms)
    assert np.isfinite(solution.elements.period_yr)


def test_device_and_fifo_logs_are_refused_at_once(tmp_path, capsys):
    fifo = tmp_path / "log.csv"
    os.mkfifo(fifo)
    for path in ("/dev/zero", str(fifo), str(tmp_path)):
        start = time.monotonic()
        with pytest.raises(LogFormatError, match="not a regular file|is a folder"):
            read_measurements(path)
        assert time.monotonic() - start < 5
        assert main(["check", path]) == 2
        assert "Traceback" not in capsys.readouterr().err


def test_oversized_log_is_refused(tmp_path, monkeypatch):
    import orbweigh.tables as t
    monkeypatch.setattr(t, "MAX_LOG_BYTES", 100)
    with pytest.raises(LogFormatError, match="larger than"):
        read_measurements(_write(tmp_path, "epoch,theta,rho\n" + "2000.0,10,1\n" * 20))


def test_many_rows_at_one_epoch_are_checked_cheaply(tmp_path):
    # 3,000 rows at one epoch: the old pairwise comparison built 4.5 million pairs.
    n = 3000
    rows = "".join(f"2000.0,{10 + (k % 2) * 5 + k * 1e-6:.6f},1.0,0.1,0.001,,row{k}\n" for k in range(n))
    path = _write(tmp_path, "epoch,theta,rho,sigma_theta,sigma_rho,flag,note\n" + rows,
                  name="same.csv")
    ms = read_measurements(path, strict=False)
    found = suspicious_rows(ms)
    discordant = [s for s in found if s.rule == "discordant_same_epoch"]
    # Every row from the second on differs by 5 deg (> 3 sigma) from some earlier row.
    assert len(discordant) == n - 1
    assert discordant[0].line == 3 and "same epoch as line 2" in discordant[0].message
