"""What the user reads: epochs in the log's own scale, numbers at their error's place.

One invented pair is written twice, as a Besselian log (plain decimal years, the trade's
custom) and as a Julian one (J-prefixed); fit, ephemeris, plan, compare and report are run
on each. A Besselian log must never show a Julian epoch, and a Julian log never a
Besselian one. Every value printed with an uncertainty must stop at the uncertainty's
decimal place, and an interval's ends at its median's (the rule of orbweigh.formatting).
"""
from __future__ import annotations

import contextlib
import io
import re
from decimal import Decimal
from html.parser import HTMLParser

import numpy as np
import pytest

from orbweigh.cli.main import main
from orbweigh.reductions import from_julian_year

from report_fixtures import TableCells
from synthetic import make_log

TRUTH = {"P": 14.0, "T": 2008.3, "e": 0.45, "a": 0.65, "i": 58.0, "Omega": 40.0,
         "omega": 200.0}
# A Julian epoch as text (J2012.5), or the name of the Julian or Besselian scale.
_JULIAN = re.compile(r"\bJ\d{4}\.\d|Julian (year|yr)|julian scale", re.I)
_BESSELIAN = re.compile(r"\bB\d{4}\.\d|Besselian|besselian scale", re.I)


def _write_log(path, scale):
    log = make_log(TRUTH, np.linspace(1996.0, 2024.0, 40), 0.4, 0.004, seed=21)
    lines = ["epoch,theta,rho,sigma_theta,sigma_rho,technique"]
    for t, th, r in zip(log.epoch_yr, log.theta_deg, log.rho_arcsec):
        epoch = (f"{float(from_julian_year(t, 'besselian')):.3f}" if scale == "besselian"
                 else f"J{t:.3f}")
        lines.append(f"{epoch},{th:.2f},{r:.4f},0.4,0.004,speckle")
    path.write_text("\n".join(lines) + "\n")


class _Text(HTMLParser):
    """The visible text of a page, one string per element (no figure data)."""

    def __init__(self):
        super().__init__()
        self.parts, self._skip = [], 0

    def handle_starttag(self, tag, attrs):
        self._skip += tag in ("style", "script")

    def handle_endtag(self, tag):
        self._skip -= tag in ("style", "script")

    def handle_data(self, data):
        if not self._skip and data.strip():
            self.parts.append(data.strip())


@pytest.fixture(scope="module", params=["besselian", "julian"])
def outputs(request, tmp_path_factory):
    """{command: text printed} for one log (the report as its page's visible text)."""
    scale = request.param
    tmp = tmp_path_factory.mktemp(scale)
    _write_log(tmp / "pair.csv", scale)
    prefix = "J" if scale == "julian" else ""
    texts = {}

    def run(*argv):   # capsys is per test; this fixture serves the module
        buffer = io.StringIO()
        with contextlib.redirect_stdout(buffer), contextlib.redirect_stderr(buffer):
            status = main([str(a) for a in argv])
        assert status == 0, (argv, buffer.getvalue())
        return buffer.getvalue()

    result = tmp / "fit" / "result.json"
    texts["fit"] = run("fit", tmp / "pair.csv", "--parallax", 88.0, 1.0, "--mass-ratio", 0.8,
                       0.05, "--sample", "--walkers", 16, "--steps", 400, "--out", tmp / "fit",
                       "--report", tmp / "report")
    texts["ephemeris"] = run("ephemeris", result, "--start", f"{prefix}2030.0", "--stop",
                             f"{prefix}2032.0", "--step", 1)
    texts["plan"] = run("plan", result, "--window", f"{prefix}2030.0", f"{prefix}2040.0",
                        "--top", 2, "--draws", 200)
    texts["compare"] = run("compare", result, result, "--window", f"{prefix}2030.0",
                           f"{prefix}2040.0", "--draws", 200)
    page = _Text()
    page.feed((tmp / "report" / "report.html").read_text(encoding="utf-8"))
    texts["report"] = "\n".join(page.parts)
    texts["latex"] = (tmp / "report" / "elements.tex").read_text()
    return scale, texts, tmp / "report" / "report.html"


def test_no_output_mixes_epoch_scales(outputs):
    scale, texts, _ = outputs
    wrong, right = (_JULIAN, _BESSELIAN) if scale == "besselian" else (_BESSELIAN, _JULIAN)
    for command, text in texts.items():
        hits = [m.group(0) for m in wrong.finditer(text)]
        assert not hits, (command, hits)
    # ... and every output that shows an epoch says which scale it is in.
    for command in ("fit", "report", "latex", "compare"):
        assert right.search(texts[command]), command
    for command in ("ephemeris", "plan"):
        assert f"epochs in the {scale} scale" in texts[command]


def _places(text):
    return -Decimal(text.replace("\u2212", "-")).as_tuple().exponent


_PM = re.compile(r"(?<![\w.])(-?\u2212?\d+(?:\.\d+)?) \u00b1 (\d+(?:\.\d+)?)")
_BRACKET = re.compile(r"(-?\d+(?:\.\d+)?)\s+\[(-?\d+(?:\.\d+)?), (-?\d+(?:\.\d+)?)\]")


def test_printed_values_stop_at_their_errors_place(outputs):
    _, texts, _ = outputs
    checked = 0
    for command in ("fit", "report", "compare"):
        for m in _PM.finditer(texts[command]):
            value, error = m.groups()
            where = (command, texts[command][max(0, m.start() - 60):m.end()])
            assert _places(value) == _places(error), where
            digits = error.replace(".", "").lstrip("0")
            # Two significant digits, fewer only where the units place caps them.
            assert len(digits) == 2 or _places(error) == 0, where
            checked += 1
        # Median [low, high] in the terminal's posterior and mass tables.
        for median, low, high in _BRACKET.findall(texts[command]):
            assert _places(median) == _places(low) == _places(high), (command, median)
            checked += 1
    assert checked > 20


def test_report_tables_at_their_errors_place(outputs):
    _, _, page = outputs
    cells = TableCells()
    cells.feed(page.read_text(encoding="utf-8"))
    # Median and intervals ('a to b') of the posterior and mass tables: one decimal place.
    heads = [i for i, r in enumerate(cells.rows) if "68 % interval" in r]
    assert len(heads) >= 2                      # posterior and masses
    for i in heads:
        header = cells.rows[i]
        m, j68, j95 = (header.index(h) for h in ("median", "68 % interval", "95 % interval"))
        for row in cells.rows[i + 1:]:
            if len(row) != len(header) or " to " not in row[j68]:
                break
            ends = [*row[j68].split(" to "), *row[j95].split(" to ")]
            assert {_places(x) for x in ends} == {_places(row[m])}, row
    # The residual table: theta values at the place of the row's sigma_theta, rho at sigma_rho.
    table = next(i for i, r in enumerate(cells.rows) if r and r[0].startswith("epoch ("))
    header = cells.rows[table]
    body = [r for r in cells.rows[table + 1:] if len(r) == len(header)]
    col = {h: header.index(h) for h in header}
    for row in body:
        st, sr = row[col["\u03c3 \u03b8 (deg)"]], row[col["\u03c3 \u03c1 (arcsec)"]]
        for title in ("O\u2212C \u03b8 (deg)", "\u03b8 (deg)", "computed \u03b8 (deg)"):
            assert _places(row[col[title]]) == _places(st), (title, row)
        for title in ("O\u2212C \u03c1 (arcsec)", "\u03c1 (arcsec)", "computed \u03c1 (arcsec)"):
            assert _places(row[col[title]]) == _places(sr), (title, row)
        assert len(st.replace(".", "").lstrip("0")) == 2
