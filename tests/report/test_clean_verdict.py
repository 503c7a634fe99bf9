"""A run with no flag vouches only for the checks it made (report.html, stdout, manifest.json, compare).

The reference for each case is the full run of the same input, which makes the checks the partial run
left out, and flags them: so a partial run that said "interface not widening" or "phase volume within
tolerance" vouched for something false.
"""

import json
import os
import re

import numpy as np
from click.testing import CliRunner

from phasegauge import measure
from phasegauge.cli import main
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.compare import RunSpec, compare_runs

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_fields")


def _findings(out) -> str:
    """The text of the Findings section of report.html."""
    page = open(os.path.join(out, "report.html"), encoding="utf-8").read()
    section = page.split("Findings", 1)[1].split("Key figures", 1)[0]
    return re.sub(r"<[^>]+>", " ", section)


def _growing_drop(folder):
    """A tanh drop of radius 0.25 on a 64 x 64 grid whose width grows step by step, so that its phase
    volume grows too (about +0.7 % over 4 steps): pi R^2 plus a curvature term in eps^2 for a tanh
    profile about a circle."""
    mesh = grid_mesh((64, 64))
    p = mesh.points
    r = np.hypot(p[:, 0] - 0.5, p[:, 1] - 0.5)
    for k in range(4):
        eps = 0.01 * (1 + 0.3 * k)
        c = 0.5 * (1 - np.tanh((r - 0.25) / (np.sqrt(2) * eps)))
        to_meshio(mesh, point_data={"c": c}).write(folder / f"s_{k:04d}.vtu")
    return str(folder / "s_*.vtu")


def test_mixing_only_vouches_for_no_interface_check(tmp_path):
    path = os.path.join(SAMPLES, "vortex_upwind")
    full = measure(path, "c", out=tmp_path / "full", contours=False)
    # the reference: every analysis on the same series flags the widening
    assert any("widening" in f for f in full.flags)
    result = CliRunner().invoke(main, ["measure", path, "--field", "c", "--analyses", "mixing",
                                       "-o", str(tmp_path / "mix"), "--no-contours", "-q"])
    assert result.exit_code == 0, result.output
    text = _findings(tmp_path / "mix")
    for claim in ("not widening", "within tolerance", "indicator bounded", "resolved"):
        assert claim not in text and claim not in result.output
    assert "not checked: interface widening, phase-volume conservation" in text
    assert "(not in --analyses)" in result.output
    record = json.load(open(tmp_path / "mix" / "manifest.json"))
    assert not any(c["made"] for c in record["standing_checks"])
    assert {c["not_made_because"] for c in record["standing_checks"]} == {"not in --analyses"}


def test_no_conservation_vouches_for_no_phase_volume(tmp_path):
    path = _growing_drop(tmp_path)
    full = measure(path, "c", out=tmp_path / "full", contours=False)
    # the reference: with conservation the same data drifts (above the default tolerance 1e-3)
    assert any("drifts" in f for f in full.flags)
    drift = float(np.nanmax(np.abs(full.steps["phase_volume_drift"])))
    assert drift > 1e-3
    measure(path, "c", out=tmp_path / "part", contours=False, analyses=("interface", "droplets"))
    text = _findings(tmp_path / "part")
    assert "within tolerance" not in text and "indicator bounded" not in text
    assert "phase-volume conservation, indicator bounds (not in --analyses)" in text


def test_too_few_steps_do_not_judge_widening(tmp_path):
    path = os.path.join(SAMPLES, "vortex_sharp")
    part = measure(path, "c", out=tmp_path / "short", contours=False, steps="3:5")
    assert part.audit.get("n_fit", 0) == 0  # too few steps for the audit's fit
    text = _findings(tmp_path / "short")
    assert "not widening" not in text
    assert "interface widening (too few steps with a measured width" in text


def test_a_full_clean_run_still_reads_clean(tmp_path):
    # a steady diffuse drop (5 cells across 0.1 < c < 0.9), far from the walls: nothing widens, drifts,
    # overshoots or is under-resolved
    mesh = grid_mesh((96, 96))
    p = mesh.points
    r = np.hypot(p[:, 0] - 0.5, p[:, 1] - 0.5)
    c = 0.5 * (1 - np.tanh((r - 0.2) / (2 * 0.012)))
    for k in range(6):
        to_meshio(mesh, point_data={"c": c}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            tmp_path / f"d_{k}.vtu")
    result = measure(str(tmp_path / "d_*.vtu"), "c", out=tmp_path / "out", contours=False)
    assert result.flags == []
    text = _findings(tmp_path / "out")
    assert ("no flags: interface not widening, phase volume within tolerance, indicator bounded, "
            "interface and droplets resolved") in text
    assert "not checked" not in text


def test_compare_names_each_runs_checks_not_made(tmp_path):
    # two sharp discs (a 0/1 indicator, one to two cells across): neither width is judged
    mesh = grid_mesh((20, 20))
    x, y = mesh.cell_centroids[:, 0], mesh.cell_centroids[:, 1]
    for k in range(3):
        c = (np.hypot(x - 0.4 - 0.05 * k, y - 0.5) < 0.2).astype(float)
        to_meshio(mesh, cell_data={"alpha": c}, field_data={"TimeValue": np.array([0.1 * k])}).write(
            tmp_path / f"a_{k}.vtu")
    path = str(tmp_path / "a_*.vtu")
    compare_runs(RunSpec(path, "alpha", label="one"), RunSpec(path, "alpha", label="two"), out=tmp_path / "c")
    text = _findings(tmp_path / "c")
    assert "one: not checked: interface widening" in text and "two: not checked: interface widening" in text
    record = json.load(open(tmp_path / "c" / "manifest.json"))
    assert not next(c for c in record["standing_checks"]["one"] if c["check"] == "interface_widening")["made"]


def test_each_reason_a_check_was_not_made():
    import pandas as pd

    from phasegauge.report._measure_report import verdict_lines
    from phasegauge.run._checks import standing_checks
    from phasegauge.run.options import MeasureOptions

    one = pd.DataFrame({"step": [0], "time": [0.0], "phase_volume_drift": [0.0], "overshoot_volume": [0.0],
                        "droplet_count": [1]})
    checks = {c["check"]: c for c in standing_checks(one, {}, MeasureOptions(field="c"))}
    assert checks["phase_volume_drift"]["not_made_because"] == "one step only: no change to judge"
    assert checks["indicator_bounds"]["made"] and checks["droplet_resolution"]["made"]
    none = {c["check"]: c for c in standing_checks(one.assign(droplet_count=[0]), {}, MeasureOptions(field="c"))}
    assert none["droplet_resolution"]["not_made_because"] == "no droplets found"
    level_set = {c["check"]: c for c in standing_checks(one, {"interface_kind": "level set"},
                                                        MeasureOptions(field="c", level_set=True))}
    assert level_set["interface_widening"]["not_made_because"] == "a level set has no width of its own"
    said = verdict_lines(list(level_set.values()), flagged=True)
    assert said == ["not checked: interface widening, interface resolution (a level set has no width of its own); "
                    "phase-volume conservation (one step only: no change to judge); indicator bounds (a level "
                    "set's indicator is its Heaviside, bounded by construction)"]
