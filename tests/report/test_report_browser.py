"""Both report pages as a browser shows them: Debian's chromium, headless.

The page is rendered with a small probe script appended to a copy of it (in the same folder, so
relative paths resolve): after the page's load event the script marks each image loaded or not
and each table fitting the 1200-pixel window or not. The DOM chromium dumps after load is then
checked for the sections each report must show, and the screenshot for being more than one colour
(read with matplotlib.image). Without chromium (`.ci/run` installs it where apt works) the tests
are skipped; tests/report/test_report_sections.py checks the same sections as parsed HTML.
"""

import base64
import io
import shutil
import subprocess
from html.parser import HTMLParser

import numpy as np
import pytest
from matplotlib import image

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.compare import RunSpec, compare_runs

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (Debian: apt-get install "
                                "chromium; .ci/run does it where apt works); test_report_sections.py checks "
                                "the parsed HTML instead")

WIDTH, HEIGHT = 1200, 3000

_PROBE = ("<script>window.addEventListener('load', function () {"
          "var w = window.innerWidth;"
          "for (var i of document.images) i.setAttribute('data-loaded', String(i.complete && i.naturalWidth > 0));"
          "for (var t of document.querySelectorAll('table'))"
          " t.setAttribute('data-fits', String(t.getBoundingClientRect().right <= w));"
          "document.body.setAttribute('data-probed', String(w));});</script>")


class _Dom(HTMLParser):
    """Headings in order, images and tables (with the probe's marks), list items under each heading."""

    def __init__(self):
        super().__init__()
        self.headings, self.images, self.tables, self.items, self.body = [], [], [], {}, {}
        self._heading = None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("h1", "h2"):
            self._heading = ""
        elif tag == "img":
            self.images.append(attrs)
        elif tag == "table":
            self.tables.append((self.headings[-1] if self.headings else "", attrs))
        elif tag == "li" and self.headings:
            self.items[self.headings[-1]] = self.items.get(self.headings[-1], 0) + 1
        elif tag == "body":
            self.body = attrs

    def handle_endtag(self, tag):
        if tag in ("h1", "h2") and self._heading is not None:
            self.headings.append(self._heading.strip())
            self._heading = None

    def handle_data(self, data):
        if self._heading is not None:
            self._heading += data


def _render(report, tmp_path):
    """The DOM after load (parsed) and the screenshot (an RGB(A) array) of ``report``."""
    probe = report.with_name("report_probe.html")
    probe.write_text(report.read_text(encoding="utf-8").replace("</body>", _PROBE + "</body>"), encoding="utf-8")
    shot = tmp_path / f"{report.parent.name}_screenshot.png"
    run = subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
                          f"--user-data-dir={tmp_path / 'profile'}", f"--window-size={WIDTH},{HEIGHT}",
                          f"--screenshot={shot}", "--dump-dom", probe.as_uri()],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr[-2000:]
    dom = _Dom()
    dom.feed(run.stdout)
    return dom, image.imread(shot)


def _not_one_colour(pixels) -> bool:
    rgb = np.asarray(pixels)[..., :3]
    return bool(np.ptp(rgb.reshape(-1, 3), axis=0).max() > 0.1 and (rgb.min(axis=-1) < 0.9).mean() > 0.01)


def _check_page(dom, shot, folder):
    assert dom.body.get("data-probed") == str(WIDTH)  # the probe ran after the page loaded
    assert shot.shape[:2] == (HEIGHT, WIDTH) and _not_one_colour(shot)
    assert dom.items.get("Findings", 0) >= 1
    assert len(dom.images) >= 3
    for img in dom.images:
        assert img.get("data-loaded") == "true", img.get("alt")
        src = img["src"]
        if src.startswith("data:image/png;base64,"):
            assert _not_one_colour(image.imread(io.BytesIO(base64.b64decode(src.partition(",")[2]))))
        else:
            assert (folder / src).is_file(), src
    assert dom.tables and all(attrs.get("data-fits") == "true" for _, attrs in dom.tables), \
        [heading for heading, attrs in dom.tables if attrs.get("data-fits") != "true"]


def _discs(folder, prefix, kind, steps=2):
    mesh = grid_mesh((12, 12), kind=kind)
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    for k in range(steps):
        c = (np.hypot(x - 0.4 - 0.05 * k, y - 0.5) < 0.2).astype(float)
        to_meshio(mesh, cell_data={"alpha": c}).write(folder / f"{prefix}_{k}.vtu")
    return str(folder / f"{prefix}_*.vtu")


def test_measure_report_in_a_browser(tmp_path):
    measure(_discs(tmp_path, "a", "quad"), "alpha", out=tmp_path / "measure")
    dom, shot = _render(tmp_path / "measure" / "report.html", tmp_path)
    assert dom.headings[:4] == ["phasegauge measure report", "Findings", "Key figures", "Plots"]
    assert {"Droplet events", "What was run"} <= set(dom.headings)
    assert {"Key figures", "What was run"} <= {heading for heading, _ in dom.tables}
    _check_page(dom, shot, tmp_path / "measure")


def test_compare_report_in_a_browser(tmp_path):
    a, b = _discs(tmp_path, "a", "quad"), _discs(tmp_path, "b", "triangle")
    compare_runs(RunSpec(a, "alpha", label="quads"), RunSpec(b, "alpha", label="triangles"),
                 out=tmp_path / "compare")
    dom, shot = _render(tmp_path / "compare" / "report.html", tmp_path)
    assert dom.headings[0].startswith("phasegauge comparison") and dom.headings[1:3] == ["Findings", "Key figures"]
    assert {"Paired steps", "Shape and metric comparison", "Plots", "Droplet statistics"} <= set(dom.headings)
    assert {"Key figures", "Droplet statistics"} <= {heading for heading, _ in dom.tables}
    _check_page(dom, shot, tmp_path / "compare")
