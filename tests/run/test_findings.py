"""Findings are records (kind, severity, text, figures); the flags are their texts."""

import os

import numpy as np
import pytest

from phasegauge import measure
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run.assemble import Finding, findings
from phasegauge.run.options import MeasureOptions
from phasegauge.samples import circle_fraction


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
                            "phase volume drifts by up to -2 % (lost; tolerance 0.1 % of the first step's "
                            "phase volume)",
                            {"largest_drift": 0.02, "signed_drift": -0.02, "tolerance": 1e-3})


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
             "verdict": "interface keeps widening: numerical diffusivity 0.00137 +- 0.00016 "
                        "(width +175 % first to last)"}
    (flag,) = findings(pd.DataFrame({"time": [0.0]}), pd.DataFrame(), audit, MeasureOptions(field="c"), [])
    assert flag.kind == "interface_widening"
    assert flag.text == audit["verdict"] + "; 13.7 x the physical value"
    assert flag.figures["numerical_diffusivity_stderr"] == 1.6e-4


def _grid_values(mesh, table, n):
    """Values of an (n, n) table indexed [column along x, row along y] on the cells of an n x n unit grid."""
    ij = np.minimum((mesh.cell_centroids[:, :2] * n).astype(int), n - 1)
    return table[ij[:, 0], ij[:, 1]]


def _disc_series(folder, nan_at=None, shrink_at=None, steps=4, n=40):
    """A volume-of-fluid disc (radius 0.2; each cell's volume fraction from 8 x 8 samples) on an
    n x n square of unit side, the same every step; one NaN in a full cell at step ``nan_at``; at
    ``shrink_at``, 1 % of the full cells emptied (rounded down). Returns the phase volume written
    at step 0 in cells (numpy's sum of the fractions) and the number of full cells emptied."""
    mesh = grid_mesh((n, n), kind="quad")
    fraction = _grid_values(mesh, circle_fraction(n, (0.5, 0.5), 0.2), n)
    full = fraction == 1.0
    for k in range(steps):
        c = fraction.copy()
        inside = np.flatnonzero(full)
        if k == nan_at:
            c[inside[len(inside) // 2]] = np.nan
        if k == shrink_at:
            c[inside[:len(inside) // 100]] = 0.0
        to_meshio(mesh, cell_data={"alpha": c}).write(os.path.join(folder, f"vof_{k}.vtu"))
    return float(fraction.sum()), int(full.sum()) // 100


@pytest.mark.parametrize("nan_at", [2, 0])
def test_a_nan_cell_is_no_drift(tmp_path, nan_at):
    # the disc does not change; one full cell is NaN at one step (at the first: the reference itself)
    cells, _ = _disc_series(tmp_path, nan_at=nan_at)
    with pytest.warns(Warning):  # the NaN is named
        result = measure(str(tmp_path), "alpha", analyses=("conservation",))
    kinds = [f.kind for f in result.findings]
    assert "phase_volume_drift" not in kinds
    note = result.findings[kinds.index("phase_volume_left_out")]
    assert note.severity == "note"
    # analytic: one full cell of h^2 out of the disc's phase volume (numpy's sum of the fractions written,
    # less that cell when it is the first step's)
    reference = cells - 1 if nan_at == 0 else cells
    assert note.figures["largest_drift"] == pytest.approx(1.0 / reference, rel=1e-9)
    assert note.figures["largest_left_out"] == pytest.approx(1.0 / reference, rel=1e-9)


def test_a_drift_beyond_the_nan_cells_is_still_a_drift(tmp_path):
    cells, emptied = _disc_series(tmp_path, nan_at=1, shrink_at=3)
    with pytest.warns(Warning):
        result = measure(str(tmp_path), "alpha", analyses=("conservation",))
    drift = next(f for f in result.findings if f.kind == "phase_volume_drift")
    lost = emptied / cells  # analytic: the emptied full cells over the disc's phase volume
    assert drift.figures["largest_drift"] == pytest.approx(lost, rel=1e-9)
    # no cell is NaN at step 3 or at the first step: nothing of the loss lies in cells left out
    assert drift.figures["largest_drift_beyond_left_out"] == pytest.approx(lost, rel=1e-9)
    assert "beyond what the cells left out (non-finite values) could account for" in drift.text


def test_the_left_out_cells_explain_a_change_on_their_own_side_only():
    import pandas as pd

    # with no drift, a step's phase volume V_k and the first's V_0, each short of what its left-out
    # cells held (c in [0, 1]), differ by between -left_k and +left_0 (bounds of the integral of c)
    options = MeasureOptions(field="c", drift_tolerance=1e-3)

    def judged(volumes, left):
        v = np.asarray(volumes, dtype=float)
        steps = pd.DataFrame({"phase_volume": v, "phase_volume_drift": (v - v[0]) / v[0], "nonfinite_volume": left,
                              "domain_volume": 1.0})
        return {f.kind: f for f in findings(steps, pd.DataFrame(), {}, options, [])}

    # NaN only at the first step: its cells can make a later step read higher, never lower
    assert "phase_volume_left_out" in judged([0.25, 0.26, 0.26], [0.0125, 0, 0])
    loss = judged([0.25, 0.24, 0.24], [0.0125, 0, 0])["phase_volume_drift"]
    assert loss.figures["largest_drift_beyond_left_out"] == pytest.approx(0.04, rel=1e-12)
    # NaN at a later step: a loss up to its volume is explained, a gain is not
    assert "phase_volume_left_out" in judged([0.25, 0.24], [0, 0.0125])
    gain = judged([0.25, 0.26], [0, 0.0125])["phase_volume_drift"]
    assert gain.figures["largest_drift_beyond_left_out"] == pytest.approx(0.04, rel=1e-12)


def test_the_cell_data_width_bias_is_no_finding_on_a_sharp_interface(tmp_path):
    # a volume-of-fluid disc: one cell across, so its widths on rebuilt point values read far high
    # (0.063 (h / eps)^2, measured on cell averages of the logistic profile), by design of the method
    _disc_series(tmp_path)
    result = measure(str(tmp_path), "alpha", analyses=("interface",))
    assert result.audit["interface_kind"] == "sharp"
    assert np.nanmax(result.steps["width_cell_data_bias"]) > 0.03
    assert "width_cell_data_bias" not in [f.kind for f in result.findings]


def test_the_cell_data_width_bias_is_a_finding_on_a_diffuse_interface():
    import pandas as pd

    steps = pd.DataFrame({"width_cell_data_bias": [0.063, 0.063]})  # h = eps: +6.3 % (README's table)
    options = MeasureOptions(field="c")
    for kind, expected in (("diffuse", True), ("unknown", True), ("sharp", False)):
        found = findings(steps, pd.DataFrame(), {"interface_kind": kind}, options, [])
        assert ("width_cell_data_bias" in [f.kind for f in found]) is expected


def test_the_left_out_figure_is_taken_at_the_steps_that_changed():
    import pandas as pd

    # the 4 % gain at step 1 lies within the first step's 5 %; step 2 did not change, so its 50 %
    # left out accounts for nothing (bounds of the integral of c, as above)
    v = np.array([0.25, 0.26, 0.25])
    steps = pd.DataFrame({"phase_volume": v, "phase_volume_drift": (v - v[0]) / v[0],
                          "nonfinite_volume": [0.0125, 0.0, 0.125], "domain_volume": 1.0})
    (note,) = findings(steps, pd.DataFrame(), {}, MeasureOptions(field="c", drift_tolerance=1e-3), [])
    assert note.kind == "phase_volume_left_out"
    assert note.figures["largest_left_out"] == pytest.approx(0.05, rel=1e-12)
