"""The sections both report pages show, read with the standard library's HTML parser.

The page is checked as parsed HTML, which needs no browser: headings in order, the "what was run"
table and the files footer. test_report_browser.py renders both pages in headless chromium (after
layout, with a screenshot) where chromium is installed; this test covers machines without it.
"""

from html.parser import HTMLParser

import numpy as np

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.compare import RunSpec, compare_runs


class _Sections(HTMLParser):
    """Headings (h1, h2), the text under each and the key-value rows of its tables."""

    def __init__(self):
        super().__init__()
        self.headings, self.text, self.rows = [], {}, {}
        self._tag, self._row = None, None

    def handle_starttag(self, tag, attrs):
        self._tag = tag
        if tag == "tr":
            self._row = []

    def handle_endtag(self, tag):
        if tag == "tr" and self._row is not None and self.headings:
            self.rows.setdefault(self.headings[-1], []).append(self._row)
            self._row = None

    def handle_data(self, data):
        if self._tag in ("h1", "h2") and data.strip():
            self.headings.append(data.strip())
            self._tag = None
        elif self.headings:
            self.text[self.headings[-1]] = self.text.get(self.headings[-1], "") + data
            if self._row is not None and self._tag == "td":
                self._row.append(data)


def _parse(path):
    parser = _Sections()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser


def _discs(folder, prefix, kind, steps=3):
    mesh = grid_mesh((20, 20), kind=kind)
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    for k in range(steps):
        c = (np.hypot(x - 0.4 - 0.05 * k, y - 0.5) < 0.2).astype(float)
        to_meshio(mesh, cell_data={"alpha": c}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            folder / f"{prefix}_{k}.vtu")
    return str(folder / f"{prefix}_*.vtu")


def test_measure_report_sections(tmp_path):
    series = _discs(tmp_path, "a", "quad")
    measure(series, "alpha", out=tmp_path / "all")
    page = _parse(tmp_path / "all" / "report.html")
    assert page.headings[:4] == ["phasegauge measure report", "Findings", "Key figures", "Plots"]
    assert {"Droplet events", "What was run"} <= set(page.headings)
    ran = {row[0] for row in page.rows["What was run"] if row}
    assert {"droplet adjacency", "interface level", "analyses"} <= ran
    assert "droplets.csv" in page.text["What was run"] and "contours/" in page.text["What was run"]


def test_report_names_only_what_ran_and_was_written(tmp_path):
    series = _discs(tmp_path, "a", "quad")
    measure(series, "alpha", out=tmp_path / "one", analyses=("conservation",), contours=False)
    page = _parse(tmp_path / "one" / "report.html")
    assert "Droplet events" not in page.headings
    ran = {row[0] for row in page.rows["What was run"] if row}
    assert not {"droplet adjacency", "periodic axes", "interface level"} & ran
    footer = page.text["What was run"]
    assert "steps.csv" in footer and "droplets.csv" not in footer and "contours/" not in footer


def test_compare_report_sections(tmp_path):
    a, b = _discs(tmp_path, "a", "quad"), _discs(tmp_path, "b", "triangle")
    compare_runs(RunSpec(a, "alpha", label="quads"), RunSpec(b, "alpha", label="triangles"), out=tmp_path / "c")
    page = _parse(tmp_path / "c" / "report.html")
    assert page.headings[0].startswith("phasegauge comparison")
    assert page.headings[1:3] == ["Findings", "Key figures"]  # first, as in the measure report
    assert {"Paired steps", "Shape and metric comparison", "Plots"} <= set(page.headings)
    import json

    record = json.loads((tmp_path / "c" / "manifest.json").read_text())
    assert set(record["options"]) == {"quads", "triangles"} and record["options"]["quads"]["field"] == "alpha"
    assert record["skipped_steps"] == {"quads": [], "triangles": []} and set(record["warnings"]) == {"quads",
                                                                                                     "triangles"}
