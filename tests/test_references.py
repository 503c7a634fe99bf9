"""Checks of a run against the rising-bubble benchmark and user reference tables."""

import numpy as np
import pandas as pd
import pytest

from phasegauge.analysis import references
from phasegauge.analysis.references import (CHECK_COLUMNS, RISING_BUBBLE_CASE1, bubble_history,
                                            check_against_table, check_reference_table, check_rising_bubble)
from phasegauge.errors import InputError, OptionError
from phasegauge.io import read_reference_table


def test_public_names_import():
    for name in references.__all__:
        assert hasattr(references, name), name


def synthetic_bubble(c_min=0.9013, t_c=1.90, v_max=0.2417, t_v=0.92, y3=1.081, dt=0.05):
    """A smooth synthetic history with chosen extrema (invented shapes, not benchmark data).

    Circularity: 1 - (1 - c_min) exp(-((t - t_c) / 0.6)^2); rise velocity: a
    bump v_max exp(-((t - t_v) / 0.8)^2); centroid height linear, reaching y3 at t = 3.
    """
    t = np.arange(0.0, 3.0 + 1e-9, dt)
    circ = 1.0 - (1.0 - c_min) * np.exp(-((t - t_c) / 0.6) ** 2)
    vel = v_max * np.exp(-((t - t_v) / 0.8) ** 2)
    y = 0.5 + (y3 - 0.5) * t / 3.0
    return pd.DataFrame({"time": t, "circularity": circ, "centroid_y": y, "velocity_y": vel})


def test_rising_bubble_reference_values_are_the_recalled_ones():
    # Hysing et al. 2009, case 1, values from memory (REFERENCES.md): 0.9013 at 1.90, 0.2417 at 0.92,
    # centroid 1.081 at t = 3 with groups from 1.0799 to 1.0817
    table = RISING_BUBBLE_CASE1.set_index("quantity")
    assert table.loc["min:circularity", "value"] == 0.9013
    assert table.loc["time_of_min:circularity", "value"] == 1.90
    assert table.loc["max:velocity_y", "value"] == 0.2417
    assert table.loc["time_of_max:velocity_y", "value"] == 0.92
    assert (table.loc["centroid_y", ["time", "low", "high"]] == [3.0, 1.0799, 1.0817]).all()
    assert "from memory" in table["source"].iloc[0]


def test_rising_bubble_pass():
    checks = check_rising_bubble(synthetic_bubble())
    assert list(checks.columns) == CHECK_COLUMNS
    assert (checks["verdict"] == "pass").all(), checks
    row = checks.set_index("quantity")
    # the parabola refinement finds the extremum between outputs: a Gaussian dip sampled every 0.05
    # is off by O(dt^2) (analytic), well inside the 0.002 band
    assert row.loc["min:circularity", "value"] == pytest.approx(0.9013, abs=2e-4)
    assert row.loc["time_of_min:circularity", "value"] == pytest.approx(1.90, abs=0.01)
    assert row.loc["max:velocity_y", "time"] == pytest.approx(0.92, abs=0.01)
    assert row.loc["centroid_y", "value"] == pytest.approx(1.081, abs=1e-12)
    assert row.loc["centroid_y", "reference_low"] == pytest.approx(1.0779)
    assert row.loc["centroid_y", "reference_high"] == pytest.approx(1.0837)


@pytest.mark.parametrize("changes,off", [
    ({"c_min": 0.89}, {"min:circularity"}),
    ({"t_v": 1.2}, {"time_of_max:velocity_y"}),
    ({"v_max": 0.25}, {"max:velocity_y"}),
    ({"y3": 1.07}, {"centroid_y"}),
])
def test_rising_bubble_off(changes, off):
    checks = check_rising_bubble(synthetic_bubble(**changes))
    assert set(checks.loc[checks["verdict"] == "off", "quantity"]) == off


def test_rising_bubble_run_ending_early_is_not_applicable():
    bubble = synthetic_bubble()
    checks = check_rising_bubble(bubble[bubble["time"] < 2.5])
    assert checks.set_index("quantity").loc["centroid_y", "verdict"] == "n/a"


def test_rising_bubble_needs_columns():
    with pytest.raises(OptionError, match="lacks columns \\['velocity_y'\\]"):
        check_rising_bubble(synthetic_bubble().drop(columns="velocity_y"))


def test_extremum_refinement_is_exact_for_a_parabola():
    # analytic: a parabola sampled at any three points is reproduced exactly
    t = np.array([0.0, 0.3, 0.7, 1.0, 1.6])
    run = pd.DataFrame({"time": t, "x": 2.0 + 3.0 * (t - 0.61) ** 2})
    ref = pd.DataFrame({"quantity": ["min:x", "time_of_min:x"], "value": [2.0, 0.61], "tolerance": [1e-9, 1e-9]})
    checks = check_against_table(run, ref)
    assert (checks["verdict"] == "pass").all(), checks


def test_user_reference_csv(tmp_path):
    path = tmp_path / "reference.csv"
    path.write_text("quantity,time,value,tolerance,low,high,source\n"
                    "phase_volume,0.5,1.5,0.01,,,mass conservation\n"
                    "max:phase_volume,,2.0,0.0,,,\n"
                    "interface_width,0.25,0.03,,0.025,0.035,\n"
                    "interface_width,9.0,0.03,0.01,,,\n")
    run = pd.DataFrame({"time": [0.0, 0.5, 1.0], "phase_volume": [1.0, 1.5, 2.0],
                        "interface_width": [0.02, 0.03, 0.04]})
    checks = check_against_table(run, read_reference_table(path))
    assert checks["verdict"].tolist() == ["pass", "pass", "pass", "n/a"]
    assert checks["value"].iloc[2] == pytest.approx(0.025)  # linear interpolation at t = 0.25
    assert checks["source"].iloc[0] == "mass conservation"
    run["phase_volume"] = [1.0, 1.52, 2.1]
    assert check_against_table(run, read_reference_table(path))["verdict"].tolist()[:2] == ["off", "off"]


def test_reference_table_errors(tmp_path):
    run = pd.DataFrame({"time": [0.0, 1.0], "x": [1.0, 2.0]})
    with pytest.raises(OptionError, match="lacks columns \\['value'\\]"):
        check_reference_table(pd.DataFrame({"quantity": ["x"]}))
    with pytest.raises(OptionError, match="need a time"):
        check_reference_table(pd.DataFrame({"quantity": ["x"], "value": [1.0], "tolerance": [0.1]}))
    with pytest.raises(OptionError, match="neither a tolerance nor low and high"):
        check_reference_table(pd.DataFrame({"quantity": ["max:x"], "value": [1.0]}))
    with pytest.raises(OptionError, match="needs column 'y'"):
        check_against_table(run, pd.DataFrame({"quantity": ["max:y"], "value": [1.0], "tolerance": [0.1]}))
    with pytest.raises(OptionError, match="unknown reference quantity 'mean:x'"):
        check_against_table(run, pd.DataFrame({"quantity": ["mean:x"], "value": [1.0], "tolerance": [0.1]}))
    with pytest.raises(InputError, match="cannot read the reference table"):
        read_reference_table(tmp_path / "missing.csv")


def test_bubble_history_takes_the_largest_droplet():
    droplets = pd.DataFrame({"step": [0, 0, 1], "time": [0.0, 0.0, 0.1], "volume": [0.2, 0.01, 0.19],
                             "circularity": [1.0, 0.5, 0.99], "centroid_y": [0.5, 1.5, 0.51],
                             "velocity_y": [0.0, 0.3, 0.05]})
    hist = bubble_history(droplets)
    assert hist["circularity"].tolist() == [1.0, 0.99] and hist["velocity_y"].tolist() == [0.0, 0.05]
    assert np.isnan(bubble_history(droplets.drop(columns="velocity_y"))["velocity_y"]).all()
