"""Tests of the report: figure orientation, files written, HTML/LaTeX/ECSV numbers = JSON."""
from __future__ import annotations

import base64
import json
import re
from pathlib import Path
from decimal import Decimal
from html.parser import HTMLParser

import numpy as np
import pytest
from astropy.table import Table

from orbweigh.cli.main import main
from orbweigh.elements import ELEMENT_KEYS
from orbweigh.masses import THIRD_LAW_FACTOR
from orbweigh.report import figures, posterior
from orbweigh.report import tables as tb
from orbweigh.result import load_result

from report_fixtures import write_document

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), file signature
FIGURES_WITH_DRAWS = ("orbit", "residuals", "corner_elements", "corner_masses", "mass_histogram")


# ----------------------------------------------------------------------------- helpers
def _plain(text):
    return text.replace("\u2212", "-")


def _half_unit(text):
    """Half a unit of the last digit shown in a number string: the rounding tolerance."""
    return 0.5 * 10.0 ** Decimal(_plain(text)).as_tuple().exponent + 1e-12


def _close(text, value):
    return abs(float(_plain(text)) - value) <= _half_unit(text) * (1 + 1e-9)


def _interval(text):
    """(low, high) strings of an HTML interval cell 'a to b'."""
    low, high = text.split(" to ")
    return low, high


class _Page(HTMLParser):
    """Tables (as lists of cell-text rows, keyed by their header row) and every tag's attrs."""

    def __init__(self):
        super().__init__()
        self.tables, self.tags, self._cell, self._row = [], [], None, None

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag == "table":
            self.tables.append([])
        elif tag == "tr":
            self._row = []
        elif tag in ("td", "th"):
            self._cell = ""

    def handle_endtag(self, tag):
        if tag in ("td", "th"):
            self._row.append(self._cell)
            self._cell = None
        elif tag == "tr":
            self.tables[-1].append(self._row)

    def handle_data(self, data):
        if self._cell is not None:
            self._cell += data

    def table(self, first_header):
        return next(t for t in self.tables if t[0][0] == first_header)


def _minimal_doc(residuals, **elements):
    """Face-on circular orbit (i = 0, direct) of radius 1 arcsec unless overridden."""
    values = {"P": 10.0, "T": 2000.0, "e": 0.0, "a": 1.0, "i": 0.0, "Omega": 0.0, "omega": 0.0}
    values.update(elements)
    return {"elements": {k: {"value": v, "error": 0.1} for k, v in values.items()},
            "residuals": residuals, "seed": 1}


def _row(line, theta, rho, technique, status="used"):
    return {"line": line, "epoch": 2000.0, "epoch_yr": 2000.0, "theta_deg": theta,
            "rho_arcsec": rho, "sigma_theta_deg": 1.0, "sigma_rho_arcsec": 0.01,
            "technique": technique, "theta_pred_deg": theta, "rho_pred_arcsec": rho,
            "d_theta_deg": 0.0, "d_rho_arcsec": 0.0, "status": status}


def _display(ax, gid):
    artist = next(a for a in ax.get_children() if a.get_gid() == gid)
    return ax.transData.transform(artist.get_xydata())


# ----------------------------------------------------------------------------- figures
def test_orbit_plot_north_up_east_left():
    # Convention of the trade (Aitken, The Binary Stars, 1935, ch. 3, memory): theta from
    # North through East, North up, East left.
    doc = _minimal_doc([_row(1, 90.0, 1.0, "east"), _row(2, 0.0, 1.0, "north"),
                        _row(3, 270.0, 1.0, "reversed", status="flipped")])
    ax = figures.plot_orbit(doc, n_band=0)
    ax.figure.draw_without_rendering()
    origin = _display(ax, "primary")[0]
    east = _display(ax, "measurements east used")[0] - origin
    north = _display(ax, "measurements north used")[0] - origin
    # A flipped row is logged at 270 deg and plotted after the 180 deg correction: East.
    flipped = _display(ax, "measurements reversed flipped")[0] - origin
    assert east[0] < -50 and abs(east[1]) < 1      # left of the primary, same height
    assert north[1] > 50 and abs(north[0]) < 1     # above the primary (display y is up)
    assert np.allclose(flipped, east, atol=1)
    assert abs(abs(east[0]) - north[1]) < 1        # equal aspect: 1 arcsec is 1 arcsec
    assert all(a.get_gid() != "posterior band" for a in ax.get_children())


def test_direct_orbit_arrow_runs_counterclockwise_on_the_sky():
    # i < 90 deg is direct motion, theta increasing (Aitken 1935, ch. 3, memory); with
    # North up and East left,
    # increasing theta turns counterclockwise on the page.
    for i_deg, sense in ((30.0, 1.0), (150.0, -1.0)):
        ax = figures.plot_orbit(_minimal_doc([_row(1, 45.0, 1.0, "any")], i=i_deg), n_band=0)
        ax.figure.draw_without_rendering()
        arrow = next(t for t in ax.texts if t.get_gid() == "direction of motion")
        start, end = ax.transData.transform([arrow.xyann, arrow.xy])
        origin = _display(ax, "primary")[0]
        r, v = start - origin, end - start
        assert sense * (r[0] * v[1] - r[1] * v[0]) > 0


def test_small_orbit_is_drawn_in_mas():
    # Unit switch below 0.1 arcsec (our own rule): 0.03 arcsec plots at 30 mas.
    doc = _minimal_doc([_row(1, 90.0, 0.03, "east")], a=0.03)
    ax = figures.plot_orbit(doc, n_band=0)
    assert "[mas]" in ax.get_xlabel() and "[mas]" in ax.get_ylabel()
    point = next(a for a in ax.get_children() if a.get_gid() == "measurements east used")
    assert point.get_xydata()[0] == pytest.approx([30.0, 0.0], abs=1e-9)


def test_band_from_covariance_when_no_draws(tmp_path):
    doc = load_result(write_document(tmp_path, with_draws=False))
    ax = figures.plot_orbit(doc, n_band=25)
    band = next(a for a in ax.get_children() if a.get_gid() == "posterior band")
    assert len(band.get_segments()) == 25


def test_mass_draws_follow_the_third_law():
    # Kepler's third law in solar units (common knowledge): a = 1 au, P = 1 yr gives 1 M_sun
    # (the IAU-constant factor differs from 1 by 4e-5 for the Julian year).
    doc = {"parallax": {"value": 100.0, "error": 0.0, "unit": "mas"}}
    draws = np.tile([1.0, 2000.0, 0.1, 0.1, 60.0, 10.0, 20.0], (3, 1))
    masses = posterior.mass_draws(doc, draws, seed=3)
    assert masses["mass_msun"] == pytest.approx(1.0, abs=1e-4)
    assert masses["mass_msun"] == pytest.approx(THIRD_LAW_FACTOR, rel=1e-12)


def test_mass_histogram_marks_normal_intervals():
    # Normal distribution (any statistics text): 68.27 % within 1 sigma, 95.45 % within 2;
    # the 16-84 and 2.5-97.5 percentiles lie at -0.994/+0.994 and -1.960/+1.960 sigma.
    m = np.random.default_rng(5).normal(2.0, 0.1, 40000)
    ax = figures.plot_mass_histogram({"mass_msun": m})
    spans = {a.get_gid(): [a.get_x(), a.get_x() + a.get_width()]
             for a in ax.patches if a.get_gid()}
    assert spans["interval 68"] == pytest.approx([2.0 - 0.0994, 2.0 + 0.0994], abs=0.003)
    assert spans["interval 95"] == pytest.approx([2.0 - 0.196, 2.0 + 0.196], abs=0.004)


# ----------------------------------------------------------------------------- rounding
@pytest.mark.parametrize("value, error, expected", [
    # Two significant digits of the uncertainty (common practice, no source).
    (36.2, 0.8, ("36.20", "0.80")), (2008.4012, 0.153, ("2008.40", "0.15")),
    (12345.6, 123.0, ("12346", "123")), (0.46, 0.012, ("0.460", "0.012")),
    (1.5, None, ("1.5", "")),
])
def test_value_error_rounding(value, error, expected):
    assert tb.format_value_error(value, error) == expected


# ----------------------------------------------------------------------------- full report
@pytest.fixture(scope="module")
def report(tmp_path_factory):
    """Report of the invented pair with posterior draws, PNG figures only (speed)."""
    from orbweigh.report import write_report
    tmp = tmp_path_factory.mktemp("report")
    doc = load_result(write_document(tmp))
    written = write_report(doc, tmp / "out", formats=("png",))
    page = _Page()
    page.feed(written["report.html"].read_text(encoding="utf-8"))
    return doc, written, page


@pytest.fixture(scope="module")
def cli_report(tmp_path_factory):
    """Report through the command line, without draws, in SVG and PDF."""
    tmp = tmp_path_factory.mktemp("cli")
    path = write_document(tmp, with_draws=False)
    status = main(["report", str(path), "--out", str(tmp / "out"), "--formats", "svg,pdf"])
    return status, tmp / "out"


def test_all_files_written(report):
    _, written, _ = report
    expected = {f"{name}.png" for name in FIGURES_WITH_DRAWS}
    expected |= {"report.html", "elements.tex", "residuals.ecsv"}
    assert set(written) == expected
    assert all(p.stat().st_size > 0 for p in written.values())


def test_html_is_self_contained_and_embeds_every_figure(report):
    _, written, page = report
    images = [attrs["src"] for tag, attrs in page.tags if tag == "img"]
    assert len(images) == len(FIGURES_WITH_DRAWS)
    embedded = {base64.b64decode(src.split(",", 1)[1]) for src in images}
    assert embedded == {written[f"{n}.png"].read_bytes() for n in FIGURES_WITH_DRAWS}
    for tag, attrs in page.tags:  # nothing fetched from anywhere
        assert tag not in ("link", "script", "iframe")
        for key in ("src", "href"):
            assert not attrs.get(key, "data:").split(":")[0] in ("http", "https", "file")


def test_html_elements_and_thiele_innes_equal_json(report):
    doc, _, page = report
    rows = {r[1]: r for r in page.table("element")[1:]}
    symbols = dict(zip(ELEMENT_KEYS, ("P", "T", "e", "a", "i", "\u03a9", "\u03c9")))
    for key, symbol in symbols.items():
        _, _, value, error, _ = rows[symbol]
        assert _close(value, doc["elements"][key]["value"])
        assert _close(error, doc["elements"][key]["error"])
        assert len(error.replace(".", "").lstrip("0")) == 2   # 2 significant digits
    ti = {r[0]: r for r in page.table("constant")[1:]}
    for key in "ABFG":
        assert _close(ti[key][1], doc["thiele_innes"][key]["value"])
        assert _close(ti[key][2], doc["thiele_innes"][key]["error"])


def test_html_masses_budget_and_counts_equal_json(report):
    doc, _, page = report
    rows = {r[0]: r for r in page.table("mass")[1:]}
    assert set(rows) == {"total", "primary", "secondary"}
    assert page.table("mass")[0] == ["mass", "median", "68 % interval", "95 % interval",
                                     "linear estimate (\u00b1 1\u03c3)", "unit"]
    for name, row in rows.items():
        entry = doc["mass"][name]
        assert _close(row[1], entry["value"])
        for text, key in zip((*_interval(row[2]), *_interval(row[3])),
                             ("low", "high", "low95", "high95")):
            assert _close(text, entry[key])
        value, error = row[4].split(" \u00b1 ")
        assert _close(value, entry["linear"]["value"])
        assert _close(error, entry["linear"]["error"])
        assert row[5] == "M\u2609"
    budget = {r[0].strip("\u2003 "): float(_plain(r[1]).rstrip(" %")) / 100
              for r in page.table("source")[1:]}
    b = doc["mass"]["budget"]
    # The orbit's share is the sum of its a, P and covariance terms (d ln M = 3 d ln a -
    # 2 d ln P - 3 d ln plx; common practice, no source); percentages to 0.1 %.
    expected = {"orbit (a and P)": b["a"] + b["P"] + b["a_P_covariance"],
                "parallax": b["parallax"], "a": b["a"], "P": b["P"],
                "a\u2013P covariance": b["a_P_covariance"]}
    assert budget == pytest.approx(expected, abs=5.1e-4)
    labels = {"n_input": "lines in the log", "n_used": "fitted",
              "n_flipped": "corrected for a 180\u00b0 flip",
              "n_outliers": "left out as outliers", "n_excluded": "excluded by the log",
              "n_rejected": "rejected (unreadable)"}
    counts = {r[0]: int(r[1]) for r in page.table("measurements")[1:]}
    assert counts == {labels[k]: doc["statistics"][k] for k in labels}
    assert counts["rejected (unreadable)"] == 2
    plx = page.table("parallax")[1]
    value, error = plx[1].split(" \u00b1 ")
    assert _close(value, doc["parallax"]["value"]) and _close(error, doc["parallax"]["error"])
    assert plx[-1] == "used for the masses"


def test_html_posterior_table_and_convergence(report):
    doc, _, page = report
    table = next(t for t in page.tables if t[0][:3] == ["element", "symbol", "median"])
    summary = doc["posterior"]["summary"]
    for row, key in zip(table[1:], ELEMENT_KEYS):
        s = summary[key]
        assert _close(row[2], s["median"])
        for text, k in zip((*_interval(row[3]), *_interval(row[4])),
                           ("low", "high", "low95", "high95")):
            assert _close(text, s[k]), (key, k, text)
    assert table[2][5] == "Besselian year"
    html = report[1]["report.html"].read_text(encoding="utf-8")
    sentence = html.split("<p class='convergence'>")[1].split("</p>")[0]
    post = doc["posterior"]
    for fact in (f"{post['walkers']} walkers", f"{post['steps']} steps",
                 f"Seed {post['seed']}."):
        assert fact in sentence
    for name, tau in post["autocorr_time"].items():
        assert f"{name.replace('_', ' ')} {tau:.0f}" in sentence
    text = " ".join(c for t in page.tables for r in t for c in r) + sentence
    for identifier in ("summary.", "autocorr_time", "sigma_rho_arcsec", "solMass", "low95",
                       "n_input", "_deg"):   # headers and cells are words, not keys
        assert identifier not in text


def test_html_residual_table_equals_json(report):
    doc, _, page = report
    table = page.table("epoch (Besselian year)")
    header, body = table[0], table[1:]
    assert header[:6] == ["epoch (Besselian year)", "O\u2212C \u03b8 (deg)",
                          "O\u2212C \u03c1 (arcsec)", "status", "(O\u2212C)/\u03c3 \u03b8",
                          "(O\u2212C)/\u03c3 \u03c1"]
    assert len(body) == len(doc["residuals"])
    keys = {"epoch (Besselian year)": "epoch", "O\u2212C \u03b8 (deg)": "d_theta_deg",
            "O\u2212C \u03c1 (arcsec)": "d_rho_arcsec", "\u03b8 (deg)": "theta_deg",
            "\u03c1 (arcsec)": "rho_arcsec", "\u03c3 \u03b8 (deg)": "sigma_theta_deg",
            "\u03c3 \u03c1 (arcsec)": "sigma_rho_arcsec", "computed \u03b8 (deg)": "theta_pred_deg",
            "computed \u03c1 (arcsec)": "rho_pred_arcsec", "log line": "line",
            "status": "status", "technique": "technique_text", "reason": "reason", "note": "note"}
    for cells, row in zip(body, doc["residuals"]):
        for title, key in keys.items():
            text, value = cells[header.index(title)], row.get(key)
            if isinstance(value, float):
                assert _close(text, value), (key, text, value)
            else:
                assert text == ("" if value is None else str(value))
        if row.get("sigma_theta_deg"):
            ratio = row["d_theta_deg"] / row["sigma_theta_deg"]
            assert _close(cells[4], ratio) or (cells[4] == "0.0" and abs(ratio) < 0.05)
    statuses = [r[header.index("status")] for r in body]
    assert statuses.count("rejected") == 2 and statuses.count("outlier") == 1


def test_html_warnings_method_seed_and_version(report):
    doc, _, page = report
    html = report[1]["report.html"].read_text(encoding="utf-8")
    for warning in doc["warnings"] + doc["notes"]:
        assert warning.replace("'", "&#x27;") in html
    assert html.index("class='warnings'") < html.index("id='elements'")   # warnings first
    symbols = {"Omega": "\u03a9", "omega": "\u03c9"}
    priors = {r[0]: r[1] for r in page.table("parameter")[1:]}
    assert priors == {symbols.get(k, k): v for k, v in doc["posterior"]["priors"].items()}
    assert f"fit seed {doc['seed']}" in html and f"orbweigh {doc['version']}" in html
    options = {r[0]: r[1] for r in page.table("option")[1:]}
    assert options["outliers beyond"] == f"{doc['options']['outlier_sigma']:g} \u03c3"
    assert "period search range" in options


def _latex_cells(tex):
    """{symbol or quantity: value cell} of the table's data rows."""
    rows = [[c.strip() for c in line.strip().removesuffix("\\\\").split("&")]
            for line in tex.splitlines() if " & " in line]
    return {(r[0] or r[1]): r[2] for r in rows[1:]}


def test_latex_table_equals_json(report):
    doc, written, _ = report
    tex = written["elements.tex"].read_text()
    assert r"\toprule" not in tex and r"\usepackage" not in tex   # no package needed
    assert r"\caption{Orbital elements of invented\_pair" in tex
    cells = _latex_cells(tex)
    for key in ELEMENT_KEYS:
        value, error = re.fullmatch(r"\$(-?[\d.]+) \\pm ([\d.]+)\$",
                                    cells[tb.ELEMENT_NAMES[key][1]]).groups()
        assert _close(value, doc["elements"][key]["value"])
        assert _close(error, doc["elements"][key]["error"])
        assert len(value.split(".")[-1]) == len(error.split(".")[-1])  # error's decimal place
    assert "Besselian year" in tex
    for key in "ABFG":
        assert _close(cells[f"${key}$"].split()[0].strip("$"), doc["thiele_innes"][key]["value"])
    median, up, down = re.fullmatch(r"\$([\d.]+)\^\{\+([\d.]+)\}_\{-([\d.]+)\}\$",
                                    cells[r"$\mathcal{M}_1+\mathcal{M}_2$"]).groups()
    entry = doc["mass"]["total"]
    assert _close(median, entry["value"]) and _close(up, entry["high"] - entry["value"])
    assert _close(down, entry["value"] - entry["low"])
    assert "(used for the masses)" in tex


def _pdflatex_or_skip():
    import shutil
    exe = shutil.which("pdflatex")
    if exe is None:
        pytest.skip("pdflatex is not installed (Debian: apt-get install texlive-latex-base); "
                    "the LaTeX tables cannot be compiled here")
    return exe


def _compile(tmp_path, name, body):
    import subprocess
    exe = _pdflatex_or_skip()
    (tmp_path / f"{name}.tex").write_text(body)
    (tmp_path / "main.tex").write_text("\\documentclass{article}\n\\begin{document}\n"
                                       f"\\input{{{name}}}\n\\end{{document}}\n")
    run = subprocess.run([exe, "-interaction=nonstopmode", "-halt-on-error", "main.tex"],
                         cwd=tmp_path, capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stdout[-2000:]
    assert (tmp_path / "main.pdf").stat().st_size > 0


def test_elements_tex_compiles_in_a_plain_article(report, tmp_path):
    _, written, _ = report
    _compile(tmp_path, "elements", written["elements.tex"].read_text())


def test_summary_table_of_many_systems_compiles(report, tmp_path):
    doc, _, _ = report
    other = {**doc, "elements": {**doc["elements"], "T": {**doc["elements"]["T"],
                                                         "scale": "julian"}}}
    tex = tb.elements_table_latex([doc, other], names=["ADS 1", "pair_2"])
    rows = [line for line in tex.splitlines() if line.startswith(("ADS 1", r"pair\_2"))]
    assert len(rows) == 2 and "B$2008.40" in rows[0] and "J$2008.40" in rows[1]
    _compile(tmp_path, "summary", tex)


def test_residuals_ecsv_round_trips_with_units(report):
    doc, written, _ = report
    table = Table.read(written["residuals.ecsv"], format="ascii.ecsv")
    assert str(table["theta_deg"].unit) == "deg" and str(table["rho_arcsec"].unit) == "arcsec"
    assert str(table["epoch"].unit) == "yr" and table.meta["epoch_scale"] == "besselian"
    for out, row in zip(table, doc["residuals"]):
        assert out["line"] == row["line"] and out["status"] == row["status"]
        if row["status"] == "rejected":
            assert np.ma.is_masked(out["theta_deg"]) and np.ma.is_masked(out["epoch_text"])
            continue
        assert out["epoch_text"] == row["epoch_text"]
        for key in ("epoch", "theta_deg", "rho_arcsec", "d_theta_deg", "d_rho_arcsec"):
            assert out[key] == row[key]   # unrounded: ECSV keeps full precision


def test_cli_writes_svg_and_pdf_without_draws(cli_report):
    status, out = cli_report
    assert status == 0
    for name in ("orbit", "residuals"):
        assert (out / f"{name}.pdf").read_bytes()[:5] == b"%PDF-"   # PDF 1.7 (ISO 32000-1) header
        assert b"<svg" in (out / f"{name}.svg").read_bytes()[:1000]
    assert not (out / "corner_elements.svg").exists() and not list(out.glob("*.png"))
    html = (out / "report.html").read_text(encoding="utf-8")
    assert html.count("data:image/png;base64,") == 2
    png = base64.b64decode(html.split("data:image/png;base64,")[1].split("'")[0])
    assert png[:8] == PNG_MAGIC


@pytest.mark.parametrize("args, message", [
    (["missing.json"], "cannot read the file"),
    (["bad.json"], "not valid JSON"),
    (["good.json", "--formats", "png,gif"], "unknown figure format"),
    (["good.json", "--formats", " , "], "at least one of png, svg, pdf"),
])
def test_cli_bad_input_exits_2_without_traceback(tmp_path, capsys, args, message):
    (tmp_path / "bad.json").write_text('{"elements": {"P": 1,}')
    (tmp_path / "good.json").write_text(json.dumps(_minimal_doc([])))
    argv = ["report", str(tmp_path / args[0]), "--out", str(tmp_path / "out"), *args[1:]]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err
    assert not (tmp_path / "out" / "report.html").exists()


def test_unprecessed_long_log_is_labelled_and_warned():
    # The sample log spans 1882 onwards (over a century) and is read without coordinates.
    from orbweigh.fitting import FitOptions, fit_orbit
    from orbweigh.measurements import read_measurements
    sample = Path(__file__).parent.parent / "sample_measurements" / "measurements.csv"
    doc = fit_orbit(read_measurements(sample), FitOptions(seed=1)).to_document()
    assert doc["precession"]["applied"] is False
    assert any("not precessed" in w for w in doc["warnings"])
    assert "equinox of date, not precessed" in tb.residuals_table(doc)["theta_deg"].description


def test_html_dynamical_parallax_in_words(tmp_path):
    # The invented pair weighed by a dynamical parallax (Eker et al. 2018 relation through
    # the masses module): the page states the magnitudes with their errors, the relation's
    # scatter, and the parallax's median and intervals; no key of the block is dumped.
    from orbweigh.masses import mass_blocks
    from orbweigh.report.html import render_html
    from report_fixtures import build_document

    doc, draws = build_document()
    blocks = mass_blocks(draws[:, 0], draws[:, 3], magnitudes=(4.9, 0.03, 5.8, 0.04),
                         band="bol", seed=3)
    doc.update(mass=blocks["mass"], parallax=blocks["parallax"])
    page = _Page()
    html = render_html(doc, {}, 3, "test")
    page.feed(html)
    row = page.table("parallax")[1]
    plx = doc["parallax"]
    assert row[0] == "dynamical \u03d6" and row[-1] == "used for the masses"
    assert _close(row[1], plx["value"])
    for text, key in zip((*_interval(row[2]), *_interval(row[3])),
                         ("low", "high", "low95", "high95")):
        assert _close(text, plx[key])
    assert "magnitudes 4.900 \u00b1 0.030 and 5.800 \u00b1 0.040 (bol band" in html
    assert "<details><summary>Iteration at the best (P, a)" in html
    for key in ("relation_scatter", "magnitude_errors", "last_change_mas", "at_best"):
        assert key not in html


def test_report_of_a_sampled_circular_orbit(tmp_path, capsys):
    # fit --fix e=0 --sample holds e and omega in every draw; the report must still draw
    # its corner plot (of the five free elements) and name T the epoch of node passage.
    from synthetic import make_log, write_log_csv

    truth = dict(P=12.4, T=2016.2, e=0.0, a=0.41, i=71.0, Omega=33.0, omega=0.0)
    epochs = np.sort(np.random.default_rng(21).uniform(2005.0, 2026.0, 28))
    log = write_log_csv(tmp_path / "circ.csv", make_log(truth, epochs, 0.8, 0.004, seed=21))
    assert main(["fit", str(log), "--fix", "e=0", "--sample", "--steps", "300", "--quiet",
                 "--out", str(tmp_path / "fit")]) == 0
    assert main(["report", str(tmp_path / "fit" / "result.json"),
                 "--out", str(tmp_path / "rep")]) == 0
    capsys.readouterr()
    html = (tmp_path / "rep" / "report.html").read_text()
    assert "Epoch of node passage" in html
    assert (tmp_path / "rep" / "corner_elements.png").stat().st_size > 0
    # the posterior table names T as the elements table does and shows no interval for
    # the held e and omega
    table = html.split("id='posterior-table'")[1].split("</table>")[0]
    rows = re.findall(r"<tr>(.*?)</tr>", table, re.S)
    cells = [re.findall(r"<td[^>]*>(.*?)</td>", r) for r in rows]
    named = {c[0]: c for c in cells if c}
    assert "Epoch of node passage" in named and "Epoch of periastron" not in named
    for name in ("Eccentricity", "Argument of periastron"):
        assert named[name][3] == "held fixed" and named[name][4] == ""
