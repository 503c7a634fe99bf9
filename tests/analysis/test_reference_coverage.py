"""What a reference check can say about a run that covers only part of the benchmark: extrema at the run's
edges and outside its span are not applicable, a time a round-off past the last output is inside it, and a
table's bands are the ones it gives."""

import numpy as np
import pandas as pd
import pytest
from conftest import BUBBLE_PEAK_VELOCITY, analytic_bubble

from phasegauge.analysis.references import (NOT_APPLICABLE, check_against_table, check_reference_table,
                                            check_rising_bubble)
from phasegauge.errors import OptionError
from phasegauge.io import read_reference_table

# the analytic rising bubble of conftest (Hysing et al. 2009 case-1 figures; an ellipse, scipy ellipe, brentq, quad)
V_MAX = BUBBLE_PEAK_VELOCITY


def _outputs(start, stop, dt=0.05):
    return np.round(np.arange(start, stop + 1e-9, dt), 10)


def test_the_whole_analytic_run_passes():
    checks = check_rising_bubble(analytic_bubble(_outputs(0.0, 3.0))).set_index("quantity")
    assert (checks["verdict"] == "pass").all(), checks
    assert (checks["note"] == "").all()
    # the refined extrema land on the analytic ones within the parabola's error at dt = 0.05 (our threshold)
    assert checks.loc["max:velocity_y", "value"] == pytest.approx(V_MAX, abs=2e-5)
    assert checks.loc["min:circularity", "value"] == pytest.approx(0.9013, abs=2e-5)


@pytest.mark.parametrize("start,stop,applicable", [
    # a restart at t = 1: the velocity peak (0.92) lies before the run, its largest velocity is its first output
    (1.0, 3.0, {"min:circularity", "time_of_min:circularity", "centroid_y"}),
    # a run that ends at 0.9: before the peak, and its circularity is still falling
    (0.0, 0.9, set()),
    # a run that ends at 1.5: the circularity minimum (1.9) is after it
    (0.0, 1.5, {"max:velocity_y", "time_of_max:velocity_y"}),
])
def test_an_extremum_the_run_does_not_hold_is_not_applicable(start, stop, applicable):
    checks = check_rising_bubble(analytic_bubble(_outputs(start, stop))).set_index("quantity")
    off = checks.index[checks["verdict"] == NOT_APPLICABLE]
    assert set(checks.index) - set(off) == applicable, checks
    assert (checks.loc[list(applicable), "verdict"] == "pass").all(), checks
    assert checks.loc[off, "value"].isna().all() and (checks.loc[off, "note"] != "").all()


def test_the_edge_and_the_band_are_named():
    late = check_rising_bubble(analytic_bubble(_outputs(1.0, 3.0))).set_index("quantity")
    assert "largest velocity_y (0.241" in late.loc["max:velocity_y", "note"]
    assert "run's first output, t = 1" in late.loc["max:velocity_y", "note"]
    # the minimum at 1.9 lies inside a run from 1.0 to 1.95, but the run does not cover its band 1.8 to 2.0
    short = check_rising_bubble(analytic_bubble(_outputs(1.0, 1.95))).set_index("quantity")
    assert short.loc["min:circularity", "verdict"] == NOT_APPLICABLE
    assert "do not cover the band of the minimum's time, 1.8 to 2" in short.loc["min:circularity", "note"]


def test_a_last_time_accumulated_in_float64_is_the_checked_time():
    times = np.concatenate([[0.0], np.cumsum(np.full(60, 0.05))])  # 60 outputs dt = 0.05 added up
    assert times[-1] < 3.0  # 2.9999999999999973
    checks = check_rising_bubble(analytic_bubble(times)).set_index("quantity")
    assert checks.loc["centroid_y", "verdict"] == "pass"
    assert checks.loc["centroid_y", "value"] == pytest.approx(1.081, abs=1e-9)  # y_c(3) of the analytic bubble
    # a time beyond the last output by more than 1e-6 of the output interval is not covered
    exact = analytic_bubble(np.arange(61) * 0.05)  # last output 3.0, median interval 0.05: reach 5e-8
    checks = check_against_table(exact, pd.DataFrame({"quantity": ["centroid_y", "centroid_y"],
                                                      "time": [3.0 + 4e-8, 3.0 + 6e-8], "value": [1.081, 1.081],
                                                      "tolerance": [0.002, 0.002]}))
    assert checks["verdict"].tolist() == ["pass", NOT_APPLICABLE]


def _table(tmp_path, text):
    path = tmp_path / "reference.csv"
    path.write_text("quantity,time,value,tolerance,low,high,source\n" + text)
    return read_reference_table(path), str(path)


def test_one_limit_is_refused_naming_the_file_and_the_row(tmp_path):
    table, path = _table(tmp_path, "centroid_y,3.0,1.081,0.002,,,\nmax:velocity_y,,0.2417,0.002,0.2420,,mine\n")
    with pytest.raises(OptionError, match="row 2 \\(max:velocity_y\\): only one of low and high given") as err:
        check_reference_table(table)
    assert path in str(err.value) and "inf or -inf" in str(err.value)


def test_a_time_on_an_extremum_is_refused(tmp_path):
    table, _ = _table(tmp_path, "max:velocity_y,0.5,0.2417,0.002,,,\n")
    with pytest.raises(OptionError, match="row 1 \\(max:velocity_y\\): a time given, but an extremum is taken"):
        check_reference_table(table)


def test_bands_as_the_table_gives_them(tmp_path):
    # the analytic run's largest velocity, refined from outputs every 0.05 (within 2e-5 of 0.2417)
    run = analytic_bubble(_outputs(0.0, 1.5))
    table, _ = _table(tmp_path, "max:velocity_y,,0.2417,,0.2420,inf,at least 0.2420\n"
                                "max:velocity_y,,0.2417,,0.2400,inf,at least 0.2400\n"
                                "max:velocity_y,,0.2417,,-inf,0.2410,at most 0.2410\n"
                                "max:velocity_y,,0.2417,0.001,0.2405,0.2410,0.2405 - 0.001 to 0.2410 + 0.001\n"
                                "max:velocity_y,,0.2417,0.0002,,,0.2417 +- 0.0002\n")
    checks = check_against_table(run, table)
    # hand-computed bands: [0.2420, inf], [0.2400, inf], [-inf, 0.2410], [0.2395, 0.2420], [0.2415, 0.2419]
    assert checks["reference_low"].tolist() == pytest.approx([0.2420, 0.2400, -np.inf, 0.2395, 0.2415])
    assert checks["reference_high"].tolist() == pytest.approx([np.inf, np.inf, 0.2410, 0.2420, 0.2419])
    assert checks["verdict"].tolist() == ["fail", "pass", "fail", "pass", "pass"]


def test_the_verdicts_read_back_from_csv(tmp_path):
    checks = check_rising_bubble(analytic_bubble(_outputs(0.0, 1.5)))
    checks.to_csv(tmp_path / "reference_checks.csv", index=False)
    back = pd.read_csv(tmp_path / "reference_checks.csv")  # pandas' default NA strings
    assert back["verdict"].tolist() == checks["verdict"].tolist()
    assert (back["verdict"] == NOT_APPLICABLE).sum() == 3
