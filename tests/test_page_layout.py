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


def _measure(html_path, tmp_path):
    page = html_path.read_text(encoding="utf-8")
    copy = html_path.with_name("measure.html")
    copy.write_text(page.replace("</body>", _MEASURE + "</body>"), encoding="utf-8")
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
