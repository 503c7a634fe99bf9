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
                            "phase volume drifts by up to 2 % (tolerance 0.1 % of the first step's phase volume)",
                            {"largest_drift": 0.02, "tolerance": 1e-3})


# Tolerances scaled to round-off (README, "Findings and their tolerances"): an overshoot volume
# below 1e-9 x the domain volume is round-off (float64 carries ~1e-16 per cell value); so is a
# drift below 1e-9 x domain volume / phase volume, whatever drift_tolerance says.
def test_round_off_overshoot_and_drift_are_no_findings():
    import pandas as pd

    steps = pd.DataFrame({"time": [0.0, 1.0], "domain_volume": [1.0, 1.0], "phase_volume": [0.07, 0.07],
                          "phase_volume_drift": [0.0, 3e-9], "overshoot_volume": [0.0, 1.5e-25],
                          "c_min": [0.0, -6.6e-22], "c_max": [1.0, 1.0]})
    options = MeasureOptions(field="c", drift_tolerance=1e-12)
    assert findings(steps, pd.DataFrame(), {}, options, []) == []
    steps["overshoot_volume"] = [0.0, 2e-9]
    steps["phase_volume_drift"] = [0.0, 2e-8]  # above 1e-9 / 0.07 = 1.4e-8
    kinds = [f.kind for f in findings(steps, pd.DataFrame(), {}, options, [])]
    assert kinds == ["phase_volume_drift", "indicator_overshoot"]


def test_the_resolution_rule_is_for_diffuse_interfaces_only():
    import pandas as pd

    steps = pd.DataFrame({"time": [0.0, 1.0], "under_resolved_interface_fraction": [1.0, 1.0]})
    options = MeasureOptions(field="c")
    sharp = {"interface_kind": "sharp", "cells_across": 2.2, "widening": False}
    assert findings(steps, pd.DataFrame(), sharp, options, []) == []
    diffuse = {"interface_kind": "diffuse", "cells_across": 3.0, "widening": False, "fit_from_time": 0.0}
    (flag,) = findings(steps, pd.DataFrame(), diffuse, options, [])
    assert flag.kind == "interface_under_resolved" and flag.text.startswith("diffuse interface under-resolved")


def test_the_widening_finding_carries_the_audit_verdict_and_ratio():
    import pandas as pd

    audit = {"interface_kind": "diffuse", "widening": True, "D_num": 1.37e-3, "D_num_stderr": 1.6e-4,
             "D_ratio": 13.7, "width_growth": 1.75,
             "verdict": "interface keeps widening: numerical diffusivity 0.00137 +- 0.00016 (width +175 % first to last)"}
    (flag,) = findings(pd.DataFrame({"time": [0.0]}), pd.DataFrame(), audit, MeasureOptions(field="c"), [])
    assert flag.kind == "interface_widening"
    assert flag.text == audit["verdict"] + "; 13.7 x the physical value"
    assert flag.figures["numerical_diffusivity_stderr"] == 1.6e-4
