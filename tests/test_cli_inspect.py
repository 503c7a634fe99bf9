"""The command line: inspect, error lines and exit codes."""

import json
import subprocess
import sys

import numpy as np
from click.testing import CliRunner

from phasegauge.cli import main
from phasegauge.meshgen import grid_mesh, to_meshio


def _sample(tmp_path):
    m = grid_mesh((4, 3, 2), kind="tetra")
    to_meshio(m, {"phi": np.linspace(-1, 1, m.n_points)}, {"alpha": np.full(m.n_cells, np.nan)}).write(
        tmp_path / "a.vtu")
    return tmp_path / "a.vtu"


def test_inspect_json(tmp_path):
    res = CliRunner().invoke(main, ["inspect", str(_sample(tmp_path)), "--json"])
    assert res.exit_code == 0, res.output
    d = json.loads(res.output)
    for key in ("steps", "times", "points", "cells", "cell_types", "dimension", "fields"):
        assert key in d
    assert d["cells"] == 4 * 3 * 2 * 6 and d["dimension"] == 3 and d["cell_types"] == {"tetra": 144}
    phi = [f for f in d["fields"] if f["name"] == "phi"][0]
    assert phi["location"] == "point" and phi["min"] == -1 and phi["max"] == 1
    alpha = [f for f in d["fields"] if f["name"] == "alpha"][0]
    assert alpha["nonfinite"] == 144 and alpha["min"] is None


def test_inspect_text(tmp_path):
    res = CliRunner().invoke(main, ["inspect", str(_sample(tmp_path))])
    assert res.exit_code == 0
    assert "tetra 144" in res.output and "time from: step index" in res.output


def test_bad_input_one_line_exit_2(tmp_path):
    bad = tmp_path / "bad.vtu"
    bad.write_text("garbage")
    res = CliRunner().invoke(main, ["inspect", str(bad)])
    assert res.exit_code == 2
    lines = [ln for ln in res.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and "bad.vtu" in lines[0] and "Traceback" not in res.output


def test_debug_shows_traceback(tmp_path):
    res = CliRunner().invoke(main, ["--debug", "inspect", str(tmp_path / "none.vtu")])
    assert res.exit_code != 0 and res.exception is not None


def test_module_entry_point_and_help():
    from conftest import subprocess_env

    out = subprocess.run([sys.executable, "-m", "phasegauge", "--help"], capture_output=True, text=True,
                         env=subprocess_env())
    assert out.returncode == 0 and "inspect" in out.stdout


def test_inspect_help_lists_the_readme_formats():
    """Every suffix the README's PATH paragraph and step-listing paragraph name is in `inspect --help`."""
    import os
    import re

    readme = open(os.path.join(os.path.dirname(__file__), "..", "README.md"), encoding="utf-8").read()
    paragraphs = [p for p in readme.split("\n\n") if p.startswith(("`PATH` is one mesh file", "**Step listing**"))]
    suffixes = set(re.findall(r"`(\.[a-z]+)`", " ".join(paragraphs)))
    assert {".vtu", ".vtk", ".vtm", ".steps", ".list"} <= suffixes
    text = " ".join(CliRunner().invoke(main, ["inspect", "--help"]).output.split())
    assert sorted(s for s in suffixes if s not in text) == []
