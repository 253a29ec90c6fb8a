"""The report page in a real browser: headless Chromium at a laptop's 1366 x 768.

The residual table's O-C columns must be in view without scrolling sideways, and the page
itself must not overflow horizontally (only the residual table may scroll inside its box).
Chromium is a system package (Debian ``chromium``; CI installs it when it can); without it
the test skips and says so.
"""
from __future__ import annotations

import json
import shutil
import subprocess

import numpy as np
import pytest

from orbweigh.cli.main import main
from orbweigh.report import write_report
from orbweigh.result import load_result

from report_fixtures import write_document

WIDTH, HEIGHT = 1366, 768   # the common laptop screen of the issue
SAMPLE = "sample_measurements/measurements.csv"

#: Injected into a copy of the page (the report itself has no script): the boxes of the
#: residual table's leading headers and the page's widths, written into the DOM.
_MEASURE = """<script>
(function () {
  const table = document.getElementById('residual-table');
  const heads = Array.from(table.querySelectorAll('thead th'));
  const box = h => { const r = h.getBoundingClientRect(); return [h.textContent, r.left, r.right]; };
  const root = document.documentElement;
  const loose = Array.from(document.querySelectorAll('table, figure, p, h1, h2, nav'))
    .filter(e => !e.closest('.scroll'))
    .map(e => [e.tagName + (e.id ? '#' + e.id : ''), e.getBoundingClientRect().right]);
  const out = {heads: heads.slice(0, 6).map(box), clientWidth: root.clientWidth,
               scrollWidth: root.scrollWidth, bodyScrollWidth: document.body.scrollWidth,
               innerWidth: window.innerWidth, loose: loose};
  const pre = document.createElement('pre');
  pre.id = 'orbweigh-measure';
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
})();
</script>"""


def _chromium():
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    pytest.skip("headless Chromium is not installed (Debian package 'chromium'; .ci/run "
                "installs it when run as root with apt-get): the page-layout check cannot run")


#: The batch index's widths and the right edge of each column's header.
_MEASURE_INDEX = """<script>
(function () {
  const root = document.documentElement;
  const table = document.getElementById('systems');
  const heads = Array.from(table.tHead.rows[0].cells).map(
    h => [h.textContent, h.getBoundingClientRect().right]);
  const out = {heads: heads, clientWidth: root.clientWidth, scrollWidth: root.scrollWidth,
               bodyScrollWidth: document.body.scrollWidth, innerWidth: window.innerWidth,
               tableRight: table.getBoundingClientRect().right};
  const pre = document.createElement('pre');
  pre.id = 'orbweigh-measure';
  pre.textContent = JSON.stringify(out);
  document.body.appendChild(pre);
})();
</script>"""


def _measure(html_path, tmp_path, script=_MEASURE):
    page = html_path.read_text(encoding="utf-8")
    copy = html_path.with_name("measure.html")
    copy.write_text(page.replace("</body>", script + "</body>"), encoding="utf-8")
    run = subprocess.run(
        [_chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         f"--user-data-dir={tmp_path / 'profile'}", f"--window-size={WIDTH},{HEIGHT}",
         "--dump-dom", copy.as_uri()], capture_output=True, text=True, timeout=180)
    assert run.returncode == 0, run.stderr[-2000:]
    marker = "<pre id=\"orbweigh-measure\">"
    assert marker in run.stdout, "the measuring script did not run: " + run.stderr[-2000:]
    text = run.stdout.split(marker, 1)[1].split("</pre>", 1)[0]
    return json.loads(text.replace("&lt;", "<").replace("&gt;", ">").replace("&amp;", "&"))


@pytest.fixture(scope="module")
def sample_page(tmp_path_factory):
    """The sample pair's report (least squares, masses with a mass ratio)."""
    tmp = tmp_path_factory.mktemp("sample-page")
    status = main(["fit", SAMPLE, "--target-ra", "14h27m13.4s", "--target-dec", "+38d41m06s",
                   "--parallax", "40.68", "0.40", "--mass-ratio", "0.78", "0.03",
                   "--json", str(tmp / "result.json"), "--report", str(tmp / "report"),
                   "--quiet"])
    assert status == 0
    return tmp / "report" / "report.html"


@pytest.fixture(scope="module")
def posterior_page(tmp_path_factory):
    """A report with posterior tables and every figure (the invented pair's document)."""
    tmp = tmp_path_factory.mktemp("posterior-page")
    written = write_report(load_result(write_document(tmp)), tmp / "out", formats=("png",))
    return written["report.html"]


@pytest.mark.parametrize("which", ["sample_page", "posterior_page"])
def test_oc_columns_in_view_at_1366_and_no_sideways_scroll(which, request, tmp_path):
    m = _measure(request.getfixturevalue(which), tmp_path)
    assert m["innerWidth"] == WIDTH                      # the window is the laptop's
    titles = [h[0] for h in m["heads"]]
    assert titles[1:4] == ["O\u2212C \u03b8 (deg)", "O\u2212C \u03c1 (arcsec)", "status"]
    for title, left, right in m["heads"]:
        assert 0 <= left < right <= m["clientWidth"] <= WIDTH, (title, left, right)
    # No horizontal overflow of the page itself, nor of anything outside the scroll box.
    assert m["scrollWidth"] <= m["clientWidth"], m
    assert m["bodyScrollWidth"] <= m["clientWidth"], m
    wide = [(what, right) for what, right in m["loose"] if right > m["clientWidth"] + 0.5]
    assert not wide, wide


@pytest.fixture(scope="module")
def batch_index(tmp_path_factory):
    """A 12-system batch as a curator meets it: long ids (one without a space), catalogued
    orbits (contradicted ones), a log with a rejected line (warnings) and one the reader
    refuses (a long error)."""
    from synthetic import make_log, write_log_csv
    from orbweigh.batch import BatchOptions, run_batch
    tmp = tmp_path_factory.mktemp("batch-index")
    (tmp / "logs").mkdir()
    true = {"P": 12.0, "T": 2005.3, "e": 0.4, "a": 0.5, "i": 50.0, "Omega": 120.0,
            "omega": 60.0}
    epochs = np.linspace(1995.0, 2024.0, 25)
    rows = ["id,log,P,T,e,a,i,Omega,omega,last_epoch"]
    for k in range(12):
        name = ("WDS_14135+5147_AB_HIP_69483_a_catalogue_key_without_spaces" if k == 0
                else f"WDS 14135+5147 AB = HIP {69483 + k} (system {k})")
        log = write_log_csv(tmp / "logs" / f"s{k}.csv", make_log(true, epochs, 1.0, 0.01, k))
        if k == 4:           # a letter O for a zero: one rejected line, a warning
            log.write_text(log.read_text().replace(",0.", ",O.", 1))
        if k == 7:           # no rho column: the reader refuses the log, a long error
            log.write_text("epoch,theta,separation\n2000.0,10.0,0.5\n")
        old = f"{12.0 + 0.5 * k},J2005.3,0.4,0.5,50,120,60,J2015" if k % 2 else ",,,,,,,"
        rows.append(f"\"{name}\",logs/s{k}.csv,{old}")
    (tmp / "manifest.csv").write_text("\n".join(rows) + "\n")
    counts = run_batch(tmp / "manifest.csv", tmp / "out", BatchOptions(seed=3, pages="none"),
                       workers=1, progress=False)
    assert counts.n_failed == 1 and counts.n_warned >= 1 and counts.n_systems == 12
    return tmp / "out" / "index.html"


def test_batch_index_fits_a_laptop_screen(batch_index, tmp_path):
    """Long ids, warnings and the reader's error wrap inside their cells: every column,
    the error last, ends inside the 1366 px window and the page does not scroll sideways."""
    m = _measure(batch_index, tmp_path, _MEASURE_INDEX)
    assert m["innerWidth"] == WIDTH
    assert [h[0] for h in m["heads"]][-2:] == ["warnings", "error"]
    for title, right in m["heads"]:
        assert right <= m["clientWidth"], (title, right, m)
    assert m["scrollWidth"] <= m["clientWidth"], m
    assert m["bodyScrollWidth"] <= m["clientWidth"], m
