"""Findings are records (kind, severity, text, figures); the flags are their texts."""

import os

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.assemble import Finding, findings
from phasegauge.run.options import MeasureOptions


def test_flags_are_the_texts_of_the_findings(tmp_path):
    # c overshoots [0, 1] (by construction, 1.2 in a quarter of the cells), one step is missing
    mesh = grid_mesh((8, 8), kind="triangle")
    x = mesh.cell_centroids[:, 0]
    lines = []
    for k in range(3):
        c = np.where(x < 0.25, 1.2, np.where(x < 0.5, 1.0, 0.0))
        name = f"s_{k}.vtu"
        if k != 1:
            to_meshio(mesh, cell_data={"alpha": c}).write(os.path.join(tmp_path, name))
        lines.append(f"{0.1 * k},{name}")
    listing = tmp_path / "run.steps"
    listing.write_text("\n".join(lines) + "\n")
    with pytest.warns(Warning):
        result = measure(str(listing), "alpha", analyses=("conservation",))
    assert result.flags == [f.text for f in result.findings]
    kinds = [f.kind for f in result.findings]
    assert "indicator_overshoot" in kinds and "steps_skipped" in kinds
    overshoot = result.findings[kinds.index("indicator_overshoot")]
    # analytic: excess 0.2 over a quarter of the unit square
    assert overshoot.figures["overshoot_volume"] == pytest.approx(0.05, rel=1e-12)
    assert overshoot.figures["c_max"] == pytest.approx(1.2)
    assert all(f.severity in ("warning", "note") for f in result.findings)


def test_a_drift_finding_words_its_figures():
    import pandas as pd

    steps = pd.DataFrame({"phase_volume_drift": [0.0, 0.004, -0.02]})
    options = MeasureOptions(field="c", drift_tolerance=1e-3)
    (drift,) = findings(steps, pd.DataFrame(), {}, options, [])
    assert drift == Finding("phase_volume_drift", "warning",
                            "phase volume drifts by up to 2 % (tolerance 0.1 %)",
                            {"largest_drift": 0.02, "tolerance": 1e-3})
