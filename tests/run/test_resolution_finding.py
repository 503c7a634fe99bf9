"""The under-resolved finding reads a diffuse run's steps from the first resolved as a diffuse profile.

The rule is common practice (4 cells across 0.1 < c < 0.9 on more than 10 % of the interface); the
tables are set by hand here.
"""

import pandas as pd

from phasegauge.run._boundary_findings import resolution_finding


def _steps(cells, fractions):
    return pd.DataFrame({"time": [0.0, 1.0, 2.0], "interface_cells_across": cells,
                         "under_resolved_interface_fraction": fractions})


def test_a_sharp_first_step_of_a_short_run_is_not_judged():
    # three steps, the first a reconstructed step (2 cells across): the audit fits all three (too few
    # resolved ones to start later), but the resolution rule is the diffuse profile's
    steps = _steps([2.0, 6.7, 6.8], [1.0, 0.0, 0.0])
    assert resolution_finding(steps, {"fit_from_time": 0.0}, "diffuse") is None


def test_a_later_thin_step_is_judged():
    steps = _steps([2.0, 6.7, 3.0], [1.0, 0.0, 0.5])
    found = resolution_finding(steps, {"fit_from_time": 0.0}, "diffuse")
    assert found is not None and found.figures["fraction"] == 0.5


def test_a_sharp_run_is_not_judged():
    assert resolution_finding(_steps([2.0, 2.1, 2.0], [1.0, 1.0, 1.0]), {}, "sharp") is None
