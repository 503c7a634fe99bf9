"""Time pairing, metric interpolation, metrics side by side and droplet statistics."""

import numpy as np
import pandas as pd
import pytest
from scipy.stats import ks_2samp

from phasegauge.analysis import compare
from phasegauge.analysis.compare import (compare_droplet_statistics, compare_metrics,
                                         interpolate_metrics, pair_times)
from phasegauge.errors import OptionError


def test_public_names_import():
    for name in compare.__all__:
        assert hasattr(compare, name), name


def test_pair_times_default_tolerance_is_a_quarter_of_the_smaller_interval():
    # A every 0.1, B every 0.25 (offset by 0.01): the tolerance 0.025 pairs 0.0, 0.5, 1.0 only; half an
    # interval (0.05) paired 0.3 with 0.26 and 0.8 with 0.76, 0.4 of an interval apart (audit 10: a drop
    # moving at 0.3 then read 0.0155 of Hausdorff distance that was its motion, not a shape difference)
    ta = np.round(np.arange(0, 1.0001, 0.1), 12)
    tb = np.array([0.01, 0.26, 0.51, 0.76, 1.01])
    pairs, ua, ub = pair_times(ta, tb)
    assert list(pairs.columns) == ["step_a", "step_b", "time_a", "time_b"]
    assert pairs[["step_a", "step_b"]].values.tolist() == [[0, 0], [5, 2], [10, 4]]
    assert ua == [1, 2, 3, 4, 6, 7, 8, 9]
    assert ub == [1, 3]
    # outputs 0.1 and 0.15 apart: only the common times 0, 0.3, 0.6 pair (0.15 - 0.1 is 0.0499999 in binary)
    pairs, _, _ = pair_times(np.round(np.arange(0, 0.61, 0.1), 12), np.round(np.arange(0, 0.61, 0.15), 12))
    assert pairs["time_a"].tolist() == pytest.approx([0.0, 0.3, 0.6])
    # outputs written at the first solver step past each 0.1, the step 0.02 in one run, 0.0154 in the other
    # (review 45: a tenth of the interval left a quarter of such steps unpaired)
    ta = np.ceil(np.arange(51) * 0.1 / 0.02 - 1e-9) * 0.02
    tb = np.ceil(np.arange(51) * 0.1 / 0.0154 - 1e-9) * 0.0154
    assert len(pair_times(ta, tb)[0]) == 51


def test_pair_times_default_tolerance_is_local_for_geometric_output_times():
    # outputs at t0 2^k (coarsening studies): one tolerance from the median interval paired t = 0.01 with
    # 0.015, 50 % later (a coarsening length L ~ t^(1/3), Lifshitz and Slyozov 1961, differs by 1.5^(1/3) - 1
    # = 14 % between them), and 8 with 10, while 1000 and 1024 (2.4 % apart) stayed unpaired
    pairs, ua, ub = pair_times([0, 0.01, 0.02, 0.04, 0.08, 0.16], [0, 0.015, 0.03, 0.06, 0.12])
    assert pairs["time_a"].tolist() == [0.0] and ua == [1, 2, 3, 4, 5] and ub == [1, 2, 3, 4]
    pairs, _, _ = pair_times([0] + [2.0**k for k in range(11)], [0, 1, 10, 100, 1000])
    # around 1024 A writes every 256 to 512, around 1000 B every 90 to 900: a quarter of the smaller
    # medians (384, 495) is 96 > 24; around 8 (intervals 2 to 16) and 10 (1 to 900) it is 1.5 < 2
    assert pairs[["time_a", "time_b"]].values.tolist() == [[0, 0], [1, 1], [1024, 1000]]
    # a steady interval: the median of every interval, as before (a quarter of 0.1 pairs 0.12 with 0.1)
    pairs, _, _ = pair_times([0, 0.1, 0.2, 0.3], [0, 0.12, 0.21, 0.30])
    assert pairs["time_b"].tolist() == [0, 0.12, 0.21, 0.30]


def test_pair_times_one_to_one_and_series_labels():
    a = pd.Series([0.0, 1.0, 1.015, 2.0], index=[10, 11, 12, 13])
    b = pd.Series([0.0, 1.01, 3.0], index=[5, 6, 7])
    pairs, ua, ub = pair_times(a, b, tolerance=0.05)
    # steps 11 (1.0) and 12 (1.015) both lie near 1.01: only the mutual nearest (12) pairs
    assert pairs[["step_a", "step_b"]].values.tolist() == [[10, 5], [12, 6]]
    assert ua == [11, 13] and ub == [7]


def test_pair_times_exact_when_single_steps():
    pairs, ua, ub = pair_times([1.0], [1.0])
    assert len(pairs) == 1 and ua == [] and ub == []
    pairs, ua, ub = pair_times([1.0], [1.1])
    assert len(pairs) == 0 and ua == [0] and ub == [0]


def test_pair_times_rejects_bad_input():
    with pytest.raises(OptionError, match="tolerance must be a non-negative"):
        pair_times([0, 1], [0, 1], tolerance=-1)
    with pytest.raises(OptionError, match="times of run A must be finite"):
        pair_times([0, np.nan], [0, 1])


def _steps(times, volume_rate=1.0, width=0.02):
    t = np.asarray(times, dtype=float)
    return pd.DataFrame({"step": np.arange(t.size), "time": t, "phase_volume": 1.0 + volume_rate * t,
                         "interface_width": np.full(t.size, width), "droplet_count": np.ones(t.size, int),
                         "label": ["x"] * t.size})


def test_interpolate_metrics_exact_for_linear_histories_and_nan_outside():
    steps = _steps([0.0, 0.5, 1.0, 2.0], volume_rate=2.0)
    out = interpolate_metrics(steps, [-0.1, 0.25, 1.0, 1.5, 2.5])
    # linear interpolation reproduces a linear history exactly (analytic)
    np.testing.assert_allclose(out["phase_volume"].to_numpy()[1:4], 1 + 2 * np.array([0.25, 1.0, 1.5]))
    assert np.isnan(out["phase_volume"].iloc[0]) and np.isnan(out["phase_volume"].iloc[-1])
    assert "label" not in out.columns and "step" not in out.columns


def test_interpolate_metrics_nan_neighbour_gives_nan():
    steps = _steps([0.0, 1.0, 2.0])
    steps.loc[1, "interface_width"] = np.nan
    out = interpolate_metrics(steps, [0.5, 1.5, 0.0, 2.0], columns=["interface_width"])
    assert np.isnan(out["interface_width"].iloc[0]) and np.isnan(out["interface_width"].iloc[1])
    assert out["interface_width"].iloc[2] == 0.02 and out["interface_width"].iloc[3] == 0.02


def test_compare_metrics_pairs_and_differences():
    a = _steps([0.0, 0.1, 0.2, 0.3], volume_rate=1.0, width=0.03)
    b = _steps([0.0, 0.2, 0.4], volume_rate=0.5, width=0.02)
    b["only_b"] = 1.0
    out = compare_metrics(a, b)
    assert out["step_a"].tolist() == [0, 2] and out["step_b"].tolist() == [0, 1]
    assert {"phase_volume_a", "phase_volume_b", "phase_volume_diff", "phase_volume_rel_diff",
            "interface_width_rel_diff", "droplet_count_diff"} <= set(out.columns)
    np.testing.assert_allclose(out["phase_volume_diff"], [0.0, 0.2 - 0.1])
    np.testing.assert_allclose(out["interface_width_rel_diff"], [0.5, 0.5])
    assert out.attrs["skipped_columns"] == ["only_b"]


def test_compare_metrics_interpolate_and_zero_reference():
    a = _steps([0.0, 0.1, 0.3, 0.5])
    b = _steps([0.0, 0.2, 0.4])
    b["interface_width"] = 0.0
    out = compare_metrics(a, b, method="interpolate", columns=["phase_volume", "interface_width"])
    np.testing.assert_allclose(out["phase_volume_b"].to_numpy()[:3], 1 + np.array([0.0, 0.1, 0.3]))
    assert np.isnan(out["phase_volume_b"].iloc[3])  # 0.5 lies after B's last output
    assert np.all(np.isnan(out["interface_width_rel_diff"]))  # B = 0: no relative difference


def test_compare_metrics_rejects_bad_input():
    a = _steps([0.0, 0.1])
    with pytest.raises(OptionError, match="no 'time' column"):
        compare_metrics(a.drop(columns="time"), a)
    with pytest.raises(OptionError, match="not numeric columns of both"):
        compare_metrics(a, a, columns=["label"])
    with pytest.raises(OptionError, match="method must be"):
        compare_metrics(a, a, method="nearest")


def test_compare_droplet_statistics_against_scipy_ks():
    rng = np.random.default_rng(3)
    da = rng.uniform(0.01, 0.05, 30)
    db = rng.uniform(0.02, 0.06, 20)
    drop_a = pd.DataFrame({"step": 4, "time": 1.0, "volume": np.pi * da ** 2 / 4, "equivalent_diameter": da,
                           "under_resolved": da < 0.015})
    drop_b = pd.DataFrame({"step": 2, "time": 1.0, "volume": np.pi * db ** 2 / 4, "equivalent_diameter": db})
    pairs = pd.DataFrame({"step_a": [4, 5], "step_b": [2, 3], "time_a": [1.0, 2.0], "time_b": [1.0, 2.0]})
    out = compare_droplet_statistics(drop_a, drop_b, pairs)
    row = out.iloc[0]
    ks = ks_2samp(da, db)  # reference library: scipy.stats.ks_2samp
    assert row["size_ks_statistic"] == pytest.approx(ks.statistic)
    assert row["size_ks_pvalue"] == pytest.approx(ks.pvalue)
    assert row["droplet_count_a"] == 30 and row["droplet_count_b"] == 20 and row["droplet_count_diff"] == 10
    assert row["median_equivalent_diameter_a"] == pytest.approx(np.median(da))
    assert row["total_droplet_volume_b"] == pytest.approx(np.sum(np.pi * db ** 2 / 4))
    assert out.iloc[1]["droplet_count_a"] == 0 and np.isnan(out.iloc[1]["size_ks_statistic"])
    resolved = compare_droplet_statistics(drop_a, drop_b, pairs, resolved_only=True)
    assert resolved.iloc[0]["droplet_count_a"] == int(np.sum(da >= 0.015))


def test_one_droplet_samples_get_no_size_test():
    """scipy.stats.ks_2samp gives statistic 1 and p-value 1 for one value against one, whatever the
    sizes: such a row is NaN with a note."""
    one_a = pd.DataFrame({"step": [0], "time": [0.0], "volume": [1.0], "equivalent_diameter": [1.0]})
    one_b = pd.DataFrame({"step": [0], "time": [0.0], "volume": [8.0], "equivalent_diameter": [2.0]})
    assert tuple(ks_2samp([1.0], [2.0])) == (1.0, 1.0)  # what the table must not report
    pairs = pd.DataFrame({"step_a": [0], "step_b": [0], "time_a": [0.0], "time_b": [0.0]})
    row = compare_droplet_statistics(one_a, one_b, pairs).iloc[0]
    assert np.isnan(row["size_ks_statistic"]) and np.isnan(row["size_ks_pvalue"])
    assert row["size_ks_note"] == "fewer than 2 droplets in run A and B: no size test"
    assert list(compare_droplet_statistics(one_a, one_b, pairs).columns[:2]) == ["step", "time"]


def test_compare_droplet_statistics_needs_columns():
    with pytest.raises(OptionError, match="lacks columns"):
        compare_droplet_statistics(pd.DataFrame({"step": [0]}), pd.DataFrame({"step": [0]}),
                                   pd.DataFrame({"step_a": [0], "step_b": [0], "time_a": [0], "time_b": [0]}))
