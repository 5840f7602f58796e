"""The HTML report opened in a headless Chromium: the plots render, with the expected series.

The report of the invented demo substance Orbitamide (nine runs, one DFOP series) is served
by the application, saved to a file and opened in Chromium twice: once with a small probe
script that measures every plotted series with ``getBBox()`` and writes the results into
the DOM (read back with ``--dump-dom``), once to save screenshots in ``test-artifacts/``.
The test skips, saying so, when no Chromium is installed.
"""

from __future__ import annotations

import html.parser
import json
import os
import shutil
import struct
import subprocess
import warnings
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
ARTIFACTS = REPO / "test-artifacts"

pytestmark = pytest.mark.browser

_BROWSERS = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")

# measures every series path and every plot once the page has been laid out
_PROBE = """
<script>
window.addEventListener('load', function () {
  var plots = [];
  document.querySelectorAll('svg.fr-plot').forEach(function (svg) {
    var series = [];
    svg.querySelectorAll('path.series').forEach(function (p) {
      var b = p.getBBox();
      series.push({label: p.getAttribute('data-label'), w: b.width, h: b.height,
                   length: p.getTotalLength ? p.getTotalLength() : 0});
    });
    var r = svg.getBoundingClientRect();
    plots.push({id: svg.getAttribute('data-plot'), declared: +svg.getAttribute('data-series'),
                width: r.width, height: r.height, series: series});
  });
  var out = document.createElement('pre');
  out.id = 'probe-result';
  out.textContent = JSON.stringify({plots: plots, pageHeight: document.body.scrollHeight});
  document.body.appendChild(out);
});
</script>
"""


def _browser() -> str | None:
    for name in _BROWSERS:
        found = shutil.which(name)
        if found:
            return found
    return None


def _chromium(binary: str, profile: Path, *args: str) -> subprocess.CompletedProcess:
    cmd = [binary, "--headless", "--no-sandbox", "--disable-gpu",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           "--no-first-run", "--hide-scrollbars", f"--user-data-dir={profile}", *args]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=180,
                          env={**os.environ, "LANG": "C.UTF-8"})


class _ProbeReader(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.inside = False
        self.text = ""

    def handle_starttag(self, tag, attrs):
        if tag == "pre" and dict(attrs).get("id") == "probe-result":
            self.inside = True

    def handle_endtag(self, tag):
        if tag == "pre":
            self.inside = False

    def handle_data(self, data):
        if self.inside:
            self.text += data


def _png_size(path: Path) -> tuple[int, int]:
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", f"{path} is not a PNG file"
    width, height = struct.unpack(">II", data[16:24])
    return width, height


@pytest.fixture(scope="module")
def chromium() -> str:
    binary = _browser()
    if binary is None:
        pytest.skip("no headless Chromium installed (Debian: apt-get install chromium "
                    "chromium-driver); the browser test of the report is skipped")
    return binary


@pytest.fixture(scope="module")
def report_file(tmp_path_factory) -> Path:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from fastapi.testclient import TestClient

    from service.config import Settings
    from service.demo import load_demo
    from service.main import create_app
    from service.migrate import upgrade_head
    from service.security import issue_key

    folder = tmp_path_factory.mktemp("browser")
    settings = Settings(database_url=f"sqlite:///{folder / 'demo.db'}")
    upgrade_head(settings.database_url)
    load_demo(settings)
    app = create_app(settings)
    with TestClient(app) as client:
        secret = issue_key(app.state.session_factory, label="browser test", scopes="read",
                           actor="test setup")[1]
        client.headers["Authorization"] = f"Bearer {secret}"
        names = {s["name"]: s["id"] for s in client.get("/v1/substances").json()["items"]}
        r = client.get(f"/v1/substances/{names['Orbitamide (invented)']}/report",
                       params={"field_temperature_C": 12})
        assert r.status_code == 200, r.text
    page = folder / "report.html"
    page.write_text(r.text, encoding="utf-8")
    return page


def _probe(chromium: str, report_file: Path, tmp_path: Path) -> dict:
    """Open the report with the probe script; return what it measured."""
    probed = tmp_path / "probed.html"
    probed.write_text(report_file.read_text(encoding="utf-8").replace("</body>",
                                                                      _PROBE + "</body>"),
                      encoding="utf-8")
    done = _chromium(chromium, tmp_path / "profile-dom", "--dump-dom",
                     "--window-size=1280,2000", "--virtual-time-budget=10000",
                     probed.as_uri())
    assert done.returncode == 0, done.stderr[-2000:]
    reader = _ProbeReader()
    reader.feed(done.stdout)
    assert reader.text, "the probe did not run: " + done.stdout[:500]
    return json.loads(reader.text)


def test_plots_render_with_the_expected_series(chromium, report_file, tmp_path):
    result = _probe(chromium, report_file, tmp_path)
    plots = {p["id"]: p for p in result["plots"]}
    # Orbitamide (invented): 3 temperatures, 9 series runs
    assert plots["profile-measured"]["declared"] == 6
    assert sum(1 for k in plots if k.startswith("run-fit-")) == 9
    assert sum(1 for k in plots if k.startswith("run-res-")) == 9
    assert any(k.startswith("arrhenius-") for k in plots)
    for plot in plots.values():
        assert plot["width"] > 100 and plot["height"] > 100, plot["id"]
        assert len(plot["series"]) == plot["declared"], plot["id"]
        drawn = [s for s in plot["series"] if s["w"] > 0 or s["h"] > 0]
        # every series has geometry; a single point or a flat line may be thin in one axis
        assert len(drawn) == plot["declared"], (plot["id"], plot["series"])
    # the measured-temperature fits are curves, not points collapsed at a corner
    fits = [s for s in plots["profile-measured"]["series"] if s["label"].startswith("fit")]
    assert len(fits) == 3 and all(s["w"] > 300 for s in fits)


def test_screenshots_are_saved_as_artifacts(chromium, report_file, tmp_path):
    ARTIFACTS.mkdir(exist_ok=True)
    top = ARTIFACTS / "report-orbitamide-top.png"
    full = ARTIFACTS / "report-orbitamide-full.png"
    page_height = int(_probe(chromium, report_file, tmp_path)["pageHeight"])
    assert page_height > 3000  # nine run cards, five summary plots and the tables
    for target, size in ((top, "1280,2300"), (full, f"1280,{page_height}")):
        if target.exists():
            target.unlink()
        done = _chromium(chromium, tmp_path / f"profile-{target.stem}",
                         f"--screenshot={target}", f"--window-size={size}",
                         "--virtual-time-budget=5000", report_file.as_uri())
        assert done.returncode == 0, done.stderr[-2000:]
        assert target.exists(), done.stderr[-2000:]
        width, height = _png_size(target)
        assert (width, height) == tuple(int(v) for v in size.split(","))
        assert target.stat().st_size > 50_000  # a blank page compresses to a few kB
    shutil.copy(report_file, ARTIFACTS / "report-orbitamide.html")
