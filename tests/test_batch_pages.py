"""The curator's pages of a batch: each system's review page and the index.

The catalogued orbit drawn on a page is checked against two ephemerides made apart from
the page: orbweigh's published-elements path (``--elements``) and a Thiele-Innes
computation written out here.
"""
from __future__ import annotations

import dataclasses
import json
import math
import re
import shutil
import subprocess
from html.parser import HTMLParser

import numpy as np
import pytest
from astropy.table import Table

from orbweigh.batch import BatchOptions, run_batch, system_key
from orbweigh.elements import CampbellElements
from orbweigh.ephemeris import ephemeris
from orbweigh.published import parse_elements_option
from orbweigh.report import curation
from orbweigh.result import elements_from_document
from test_batch import summary_rows

TRUE = CampbellElements(12.0, 2005.3, 0.4, 0.5, 50.0, 120.0, 60.0)
# Catalogued orbits: one off by a little (Omega 2 deg), one off in every element.
DRIFT = dataclasses.replace(TRUE, node_deg=122.0)
WRONG = CampbellElements(13.2, 2004.6, 0.3, 0.46, 58.0, 112.0, 70.0)
SIGMA_THETA, SIGMA_RHO = 1.0, 0.01
EPOCHS = np.round(np.linspace(1995.0, 2024.0, 25), 4)   # as written in the logs
LAST = 2015.0      # Julian year: the catalogued orbits "used" data up to here


def _write_log(path, seed):
    """A seeded noisy log of ``TRUE``, epochs as Julian years (4 decimals)."""
    rng = np.random.default_rng(seed)
    eph = ephemeris(TRUE, EPOCHS)
    theta = np.mod(eph.theta_deg + rng.normal(0.0, SIGMA_THETA, EPOCHS.size), 360.0)
    rho = eph.rho_arcsec + rng.normal(0.0, SIGMA_RHO, EPOCHS.size)
    lines = [f"J{a:.4f},{b:.4f},{c:.5f},{SIGMA_THETA},{SIGMA_RHO},speckle,"
             for a, b, c in zip(EPOCHS, theta, rho)]
    path.write_text("epoch,theta,rho,sigma_theta,sigma_rho,technique,flag\n"
                    + "\n".join(lines) + "\n")
    return lines


def _plant_problems(path, lines):
    """File line 4: a letter O for a zero (rejected); 7: a quadrant flip; 10: rho 30 sigma
    off (outlier); 13: excluded by the flag."""
    def cells(k):
        return lines[k].split(",")
    c = cells(2)
    lines[2] = ",".join(c[:2] + ["O" + c[2][1:]] + c[3:])
    c = cells(5)
    lines[5] = ",".join(c[:1] + [f"{(float(c[1]) + 180.0) % 360.0:.4f}"] + c[2:])
    c = cells(8)
    lines[8] = ",".join(c[:2] + [f"{float(c[2]) + 30 * SIGMA_RHO:.5f}"] + c[3:])
    lines[11] += "x"
    path.write_text("epoch,theta,rho,sigma_theta,sigma_rho,technique,flag\n"
                    + "\n".join(lines) + "\n")


def _cells(el):
    return (f"{el.period_yr},J{el.periastron_yr},{el.e},{el.a_arcsec},{el.i_deg},"
            f"{el.node_deg},{el.omega_deg}")


@pytest.fixture(scope="module")
def batch(tmp_path_factory):
    root = tmp_path_factory.mktemp("pages")
    cat = root / "cat"
    (cat / "logs").mkdir(parents=True)
    for k, name in enumerate(("drifting", "contradicted", "clean")):
        _write_log(cat / "logs" / f"{name}.csv", seed=20 + k)
    _plant_problems(cat / "logs" / "planted.csv", _write_log(cat / "logs" / "planted.csv", 23))
    (cat / "manifest.csv").write_text(
        "id,log,P,T,e,a,i,Omega,omega,P_err,a_err,last_epoch\n"
        f"drifting,logs/drifting.csv,{_cells(DRIFT)},,,J{LAST}\n"
        f"contradicted,logs/contradicted.csv,{_cells(WRONG)},0.3,0.02,J{LAST}\n"
        "planted,logs/planted.csv,,,,,,,,,,\n"
        "clean,logs/clean.csv,,,,,,,,,,\n")
    out = root / "out"
    run_batch(cat / "manifest.csv", out, BatchOptions(seed=4), workers=1, progress=False)
    return root, out, summary_rows(out)


def _page(out, name):
    return (out / "systems" / system_key(name) / "review.html").read_text(encoding="utf-8")


def _record(out, name):
    """The saved record with its document, as the page was made from."""
    folder = out / "systems" / system_key(name)
    record = json.loads((folder / "batch.json").read_text())
    record["document"] = json.loads((folder / "result.json").read_text())
    return record


class _Cells(HTMLParser):
    """data-value of every cell, by the data-test / data-element of its row."""

    def __init__(self):
        super().__init__()
        self.rows, self._row = {}, None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "tr":
            self._row = attrs.get("data-test") or attrs.get("data-element")
            if self._row:
                self.rows[self._row] = []
        elif tag == "td" and self._row and "data-value" in attrs:
            self.rows[self._row].append(float(attrs["data-value"]))


def test_title_is_the_system_id_and_no_path(batch):
    root, out, rows = batch
    for name in ("drifting", "contradicted", "planted"):
        page = _page(out, name)
        assert re.search(r"<title>(.*?)</title>", page).group(1) == name
        assert re.search(r"<h1>(.*?)</h1>", page).group(1) == name
        assert str(root) not in page          # no machine path anywhere on the page
    assert rows["drifting"]["link"] == f"systems/{system_key('drifting')}/review.html"
    # --pages flagged (default): the clean system without a catalogued orbit has none
    assert not (out / "systems" / system_key("clean") / "review.html").exists()


@pytest.mark.parametrize("name", ["drifting", "contradicted"])
def test_verdict_numbers_on_the_page_are_the_summary_s(batch, name):
    _, out, _ = batch
    summary = {row["id"]: row for row in Table.read(out / "summary.ecsv")}[name]
    page = _page(out, name)
    assert f"<h2>{curation.VERDICT_MARKS[name]} {name}</h2>" in page
    cells = _Cells()
    cells.feed(page)
    tests = {k: v for k, v in cells.rows.items() if k.startswith("p_")}
    # statistic, dof, p, threshold of each test, equal (not rounded) to the summary's
    assert tests["p_value"] == [summary["chi2_new"], summary["dof_new"], summary["p_value"],
                                0.01]
    assert tests["p_value_inflated"] == [pytest.approx(summary["chi2_new"] / 9.0, rel=1e-15),
                                         summary["dof_new"], summary["p_value_inflated"], 0.01]
    assert tests["p_systematic"][2] == summary["p_systematic"]
    decided = re.search(r'<tr class="decisive" data-test="(\w+)"', page).group(1)
    assert decided == summary["decided_by"]
    assert tests[decided][2] == summary["p_decisive"]
    # 8 of the 25 epochs are after J2015.0: first 2015.542, last 2024.000 (the log's own
    # Julian years, written by formatting.epoch)
    assert summary["n_new"] == int(re.search(r"data-value='(\d+)' id='n-new'", page).group(1))
    new = EPOCHS[EPOCHS > LAST]
    assert summary["n_new"] == new.size == 8
    assert (f"epochs {new.min():.3f} to {new.max():.3f} (Julian year)"
            in re.search(r"id='new-epochs'>(.*?)<", page).group(1))


def _kepler(mean_anomaly, e):
    """Eccentric anomaly by Newton's iteration on E - e sin E = M."""
    E = np.array(mean_anomaly, float)
    for _ in range(50):
        E = E - (E - e * np.sin(E) - mean_anomaly) / (1.0 - e * np.cos(E))
    return E


def _thiele_innes_xy(el, t):
    """(x North, y East) [arcsec] from the Thiele-Innes constants.

    A = a(cos w cos W - sin w sin W cos i), B = a(cos w sin W + sin w cos W cos i),
    F = a(-sin w cos W - cos w sin W cos i), G = a(-sin w sin W + cos w cos W cos i);
    x = A X + F Y, y = B X + G Y with X = cos E - e, Y = sqrt(1 - e^2) sin E
    (W. D. Heintz, Double Stars, 1978, ch. 4; from memory).
    """
    w, W, i = np.radians([el.omega_deg, el.node_deg, el.i_deg])
    a, e = el.a_arcsec, el.e
    A = a * (math.cos(w) * math.cos(W) - math.sin(w) * math.sin(W) * math.cos(i))
    B = a * (math.cos(w) * math.sin(W) + math.sin(w) * math.cos(W) * math.cos(i))
    F = a * (-math.sin(w) * math.cos(W) - math.cos(w) * math.sin(W) * math.cos(i))
    G = a * (-math.sin(w) * math.sin(W) + math.cos(w) * math.cos(W) * math.cos(i))
    E = _kepler(2.0 * np.pi * (np.asarray(t) - el.periastron_yr) / el.period_yr, e)
    X, Y = np.cos(E) - e, math.sqrt(1.0 - e * e) * np.sin(E)
    return A * X + F * Y, B * X + G * Y


def _line(ax, gid):
    [line] = [ln for ln in ax.get_lines() if ln.get_gid() == gid]
    return np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)


def test_catalogued_orbit_drawn_where_two_independent_ephemerides_put_it(batch):
    _, out, _ = batch
    record = _record(out, "contradicted")
    ax = curation.plot_sky_old_and_new(record)
    published = elements_from_document(parse_elements_option(
        f"P={WRONG.period_yr} T=J{WRONG.periastron_yr} e={WRONG.e} a={WRONG.a_arcsec} "
        f"i={WRONG.i_deg} Omega={WRONG.node_deg} omega={WRONG.omega_deg}"))
    # Its predicted positions at the new epochs (East on the horizontal axis, arcsec).
    new = EPOCHS[EPOCHS > LAST]
    east, north = _line(ax, "previous orbit at new epochs")
    x, y = _thiele_innes_xy(WRONG, new)
    np.testing.assert_allclose(north, x, atol=1e-9)
    np.testing.assert_allclose(east, y, atol=1e-9)
    eph = ephemeris(published, new)
    np.testing.assert_allclose(north, eph.x_arcsec, atol=1e-9)
    np.testing.assert_allclose(east, eph.y_arcsec, atol=1e-9)
    # The dashed track passes through the independent positions at epochs over a period
    # (polyline of 721 points: chord error below 1e-4 a) and is not the new orbit.
    track_e, track_n = _line(ax, "previous orbit")
    px, py = _thiele_innes_xy(WRONG, WRONG.periastron_yr + np.linspace(0, WRONG.period_yr, 7))
    gap = np.min(np.hypot(track_n[None, :] - px[:, None], track_e[None, :] - py[:, None]),
                 axis=1)
    assert gap.max() < 1e-4 * WRONG.a_arcsec
    fit_e, fit_n = _line(ax, "orbit")      # the new fit: a curve clearly apart from it
    gap = np.min(np.hypot(fit_n[None, :] - px[:, None], fit_e[None, :] - py[:, None]), axis=1)
    assert gap.max() > 0.01


def test_residuals_against_the_catalogued_orbit_are_o_minus_c(batch):
    root, out, _ = batch
    record = _record(out, "contradicted")
    fig = curation.plot_residuals_old_and_new(record)
    ax_theta = fig.axes[0]
    t, d_theta = _line(ax_theta, "new O-C against the catalogued orbit")
    log = np.genfromtxt(root / "cat" / "logs" / "contradicted.csv", delimiter=",",
                        skip_header=1, usecols=(1,))
    new = EPOCHS > LAST
    # a point scored as a quadrant flip is compared after its 180 deg correction
    flipped = np.array([r["flipped"] for r in record["revision"]["residuals"]])[new]
    x, y = _thiele_innes_xy(WRONG, EPOCHS[new])
    expected = (log[new] + 180.0 * flipped - np.degrees(np.arctan2(y, x)) + 180.0) % 360.0 \
        - 180.0
    np.testing.assert_allclose(t, EPOCHS[new], atol=1e-4)
    np.testing.assert_allclose(d_theta, expected, atol=1e-6)
    # both columns: against the catalogued orbit and against the new fit
    assert [ax.get_title() for ax in fig.axes[:2]] == ["against the catalogued orbit",
                                                      "against the new fit"]


def test_element_table_in_sigma_is_the_comparison(batch):
    _, out, rows = batch
    record = _record(out, "contradicted")
    cells = _Cells()
    cells.feed(_page(out, "contradicted"))
    for key, e in record["comparison"]["elements"].items():
        old, new, diff, n_sigma = cells.rows[key]
        assert (old, new, n_sigma) == (e["old"], e["new"], e["n_sigma"])
    # P: catalogued 13.2 +- 0.3 against the refit near 12: more than 3 sigma apart
    assert abs(cells.rows["P"][3]) > 3
    assert max(abs(v[3]) for v in cells.rows.values() if len(v) == 4
               and not math.isnan(v[3])) == pytest.approx(
        rows["contradicted"]["max_element_change_sigma"], rel=1e-12)


def test_planted_problems_show_on_the_page(batch):
    _, out, rows = batch
    page = _page(out, "planted")
    for text in ("rejected: 1 (line 4)", "excluded by flag: 1 (line 13)",
                 "flipped: 1 (line 7)", "outliers: 1 (line 10)"):
        assert text in rows["planted"]["warnings"] and text in page
    assert "\u26a0 4 warnings" in page


class _Index(HTMLParser):
    """Header cells (data-type, has a button) and, per body row, (data-value, text) cells."""

    def __init__(self):
        super().__init__()
        self.heads, self.rows, self.scripts = [], [], []
        self._where, self._cell, self._script = None, None, False

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("thead", "tbody"):
            self._where = tag
        elif tag == "th":
            self.heads.append({"type": attrs.get("data-type"), "button": False})
        elif tag == "button" and self.heads:
            self.heads[-1]["button"] = True
        elif tag == "tr" and self._where == "tbody":
            self.rows.append([])
        elif tag == "td":
            self._cell = [attrs.get("data-value"), ""]
            self.rows[-1].append(self._cell)
        elif tag == "script":
            self._script = True
            self.scripts.append("")

    def handle_endtag(self, tag):
        if tag == "script":
            self._script = False

    def handle_data(self, data):
        if self._script:
            self.scripts[-1] += data
        elif self._cell is not None:
            self._cell[1] += data


def test_index_numbers_carry_values_and_sort_offline(batch):
    root, out, rows = batch
    text = (out / "index.html").read_text(encoding="utf-8")
    assert str(root) not in text and "<link" not in text and "src=" not in text
    index = _Index()
    index.feed(text)
    assert all(h["button"] for h in index.heads)          # every header sorts, by keyboard
    numeric = [k for k, h in enumerate(index.heads) if h["type"] == "num"]
    assert len(numeric) >= 12
    summary = Table.read(out / "summary.ecsv")
    assert [r[1][1] for r in index.rows] == list(summary["id"])
    for row, srow in zip(index.rows, summary):
        for k in numeric:
            assert row[k][0] is not None              # numeric cells all carry data-value
        # the p-value that decided, as in the summary (the full value, not the rounded)
        p_col = 5
        if np.isfinite(srow["p_decisive"]):
            assert float(row[p_col][0]) == srow["p_decisive"]
            assert row[p_col][1].startswith(f"{srow['p_decisive']:.2g}")
        else:
            assert row[p_col][0] == ""
    [script] = index.scripts
    assert "function sortBy" in script and "data-value" in script and "aria-sort" in script
    # planted bad line, flip, outlier and flagged line: visible in the index row
    planted = index.rows[list(summary["id"]).index("planted")]
    warnings = "".join(c[1] for c in planted)
    assert "\u26a0 4" in warnings
    for text in ("rejected: 1 (line 4)", "excluded by flag: 1 (line 13)",
                 "flipped: 1 (line 7)", "outliers: 1 (line 10)"):
        assert text in warnings


@pytest.mark.skipif(shutil.which("chromium") is None, reason="needs headless chromium")
def test_sort_script_in_a_browser(batch, tmp_path):
    """Click the chi2/dof header twice in headless Chromium: ascending, then descending,
    the systems without a value last both times, in their summary order."""
    _, out, rows = batch
    probe = ("<script>var t=document.getElementById('systems'),h=t.tHead.rows[0].cells,"
             "o=[];function ids(){return Array.prototype.map.call(t.tBodies[0].rows,"
             "function(r){return r.cells[1].textContent}).join(',')}"
             "h[4].querySelector('button').click();o.push(ids());"
             "h[4].querySelector('button').click();o.push(ids()+' '+h[4].getAttribute("
             "'aria-sort'));document.title='SORTED:'+o.join('|');</script></body>")
    page = tmp_path / "index.html"
    page.write_text((out / "index.html").read_text().replace("</body>", probe))
    dom = subprocess.run(["chromium", "--headless", "--no-sandbox", "--dump-dom",
                          page.as_uri()], capture_output=True, text=True, timeout=120).stdout
    ascending, descending = re.search(r"<title>SORTED:(.*?)</title>", dom).group(1).split("|")
    chi2 = {k: float(v["reduced_chi2_new"]) for k, v in rows.items()}
    tested = sorted((k for k in chi2 if np.isfinite(chi2[k])), key=chi2.get)
    untested = [k for k in rows if not np.isfinite(chi2[k])]   # kept in summary order
    assert ascending.split(",")[:len(tested)] == tested
    assert descending == ",".join(tested[::-1] + untested) + " descending"


def test_page_of_a_system_whose_refit_failed(batch):
    """A failed refit keeps the verdict, its tests and the residuals against the
    catalogued orbit: the page shows them, and the failure, without the new-fit parts."""
    from orbweigh.report.review import review_page
    _, out, rows = batch
    record = _record(out, "contradicted")
    record.update(document=None, comparison=None, status="failed",
                  error="fit: the search found no orbit")
    page = review_page(record, [("batch.json", "batch record")])
    assert "fit: the search found no orbit" in page and "id='fig-residuals'" in page
    assert "id='fig-sky'" not in page and "data-element=" not in page
    assert f"<h2>{curation.VERDICT_MARKS['contradicted']} contradicted</h2>" in page
    fig = curation.plot_residuals_old_and_new(record)
    assert [ax.get_title() for ax in fig.axes] == ["against the catalogued orbit", ""]


def test_failed_systems_name_their_log_as_the_manifest_wrote_it(tmp_path):
    """A log the reader refuses (no 'rho' column) and one too short to fit: the error on
    the review page, in index.html, summary.csv and batch.json names 'logs/...' as the
    manifest wrote it, with line, column, what was expected and the fix, and the
    catalogue's absolute folder appears in none of them."""
    cat = tmp_path / "catalogue"
    (cat / "logs").mkdir(parents=True)
    (cat / "logs" / "no_rho.csv").write_text("epoch,theta,sep\n2000.0,10.0,0.5\n")
    (cat / "logs" / "short.csv").write_text(
        "epoch,theta,rho,sigma_theta,sigma_rho\n2000.0,10.0,0.5,1,0.01\n2001.0,12.0,0.5,1,0.01\n")
    (cat / "manifest.csv").write_text("id,log\nno rho,logs/no_rho.csv\nshort,./logs/short.csv\n")
    out = tmp_path / "out"
    run_batch(cat / "manifest.csv", out, BatchOptions(seed=1), workers=1, progress=False)
    rows = summary_rows(out)
    reader = ("log: logs/no_rho.csv, line 1: required column(s) rho not found; the header "
              "has: epoch, theta, sep. Rename the header or map your names with --columns")
    assert rows["no rho"]["error"].startswith(reader)
    assert rows["short"]["error"].startswith("fit: ./logs/short.csv: ")
    texts = {"index": (out / "index.html").read_text(encoding="utf-8"),
             "summary": (out / "summary.csv").read_text(encoding="utf-8")}
    for name in ("no rho", "short"):
        folder = out / "systems" / system_key(name)
        texts[name] = (folder / "review.html").read_text(encoding="utf-8")
        texts[name + " record"] = (folder / "batch.json").read_text(encoding="utf-8")
    assert reader in texts["no rho"] and reader in texts["index"]
    for where, text in texts.items():
        assert str(cat) not in text and str(tmp_path) not in text, where
