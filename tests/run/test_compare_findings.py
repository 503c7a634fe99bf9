"""What a comparison says about itself: runs in other time units or clocks, steps that could pair and do
not, paired times that differ, a pair compared over part of the domain, and phases taken the wrong way round.

Outside references: the times as written (a millisecond is 1/1000 s; a clock offset of 0.05 as written);
the area of two equal discs' lens, 2 R^2 acos(d / 2R) - (d / 2) sqrt(4 R^2 - d^2) (Weisstein, "Circle-Circle
Intersection", MathWorld), whence Dice = lens / (pi R^2) and the mismatch 2 (pi R^2 - lens); and the
Hausdorff distance between two equal circles, their centres' distance (analytic); and, for two uncorrelated
50/50 patterns, a recount of the Dice with numpy set operations on a grid both meshes' cells tile.
"""

import json
import warnings

import numpy as np
import pandas as pd
import pytest

from phasegauge.errors import PhasegaugeWarning
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.run._compare_checks import flipped_dice, time_checks
from phasegauge.run.compare import RunSpec, compare_runs

R = 0.2


def _lens(d, r=R):
    """The overlap area of two discs of radius r whose centres lie d apart (MathWorld, above)."""
    return 2 * r**2 * np.arccos(d / (2 * r)) - 0.5 * d * np.sqrt(4 * r**2 - d**2)


def _run(folder, times, *, written=None, n=40, shift=0.0, speed=1.0, order=False, nan_right=()):
    """A disc of radius R moving along x at ``speed`` (centre 0.4 + speed t + shift, 0.5) as cell fractions
    (8 x 8 samples a cell) on n x n quads, listed with its times as ``written`` (default ``times``).
    ``order``: an order parameter, -1 in the drop and 1 outside; ``nan_right``: steps whose cells right of
    x = 0.5 are NaN (a solver blowing up)."""
    folder.mkdir()
    mesh = grid_mesh((n, n))
    offsets = ((np.arange(8) + 0.5) / 8 - 0.5) / n
    sx, sy = (o.ravel() for o in np.meshgrid(offsets, offsets))
    x = mesh.cell_centroids[:, :1] + sx
    y = mesh.cell_centroids[:, 1:2] + sy
    lines = ["time,path"]
    for k, (t, w) in enumerate(zip(times, written if written is not None else times)):
        c = (np.hypot(x - (0.4 + speed * t + shift), y - 0.5) < R).mean(axis=1)
        if k in nan_right:
            c[mesh.cell_centroids[:, 0] > 0.5] = np.nan
        to_meshio(mesh, cell_data={"c": 1 - 2 * c if order else c}).write(folder / f"s_{k}.vtu")
        lines.append(f"{w:.10g},s_{k}.vtu")
    (folder / "run.steps").write_text("\n".join(lines) + "\n")
    return str(folder / "run.steps")


def _compare(a, b, out, **kwargs):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = compare_runs(a, b, out=str(out), **kwargs)
    said = [str(w.message) for w in caught if issubclass(w.category, PhasegaugeWarning)]
    return result, said, (out / "report.html").read_text(), json.loads((out / "manifest.json").read_text())


def test_runs_in_seconds_against_milliseconds_are_a_finding(tmp_path):
    # the same drop written every 0.01 s and every 0.025 s, the second's listing in ms (0, 25, ... 100): it
    # paired at t = 0 alone and read "no flags", every figure the initial state's
    seconds = [0.01 * k for k in range(11)]
    quarter = [0.025 * k for k in range(5)]
    a = _run(tmp_path / "a", seconds)
    ms = _run(tmp_path / "ms", quarter, written=[1000 * t for t in quarter])  # 1 ms = 1/1000 s
    result, said, page, manifest = _compare(RunSpec(a, "c", label="s"), RunSpec(ms, "c", label="ms"),
                                            tmp_path / "c")
    assert len(result.pairs) == 1
    finding = "the runs' time spans differ by a factor of 1000 (s t = 0 to 0.1, ms t = 0 to 100) and 1 of"
    assert any(m.startswith(finding) for m in said) and finding in page.replace("&#x27;", "'")
    assert any("different time units" in m for m in manifest["comparison_warnings"])
    assert "no flags in either run" not in page
    # converted to seconds: 0, 0.05 and 0.1 pair (0.025 and 0.075 lie 0.005 from A's outputs, beyond a
    # quarter of A's interval 0.01), and no finding on the times
    b = _run(tmp_path / "b", quarter)
    result, said, page, manifest = _compare(RunSpec(a, "c", label="s"), RunSpec(b, "c", label="sb"),
                                            tmp_path / "d")
    assert result.pairs["time_b"].round(9).tolist() == [0.0, 0.05, 0.1]
    assert manifest["comparison_warnings"] == [] and not said


def test_a_clock_offset_is_a_note_and_pairs_that_could_but_do_not_a_finding(tmp_path):
    # the second run's clock 0.05 ahead: its steps paired 0.05 s of motion apart, unnamed
    times = [0.01 * k for k in range(11)]
    a = _run(tmp_path / "a", times)
    late = _run(tmp_path / "late", times, written=[t + 0.05 for t in times])
    result, said, page, manifest = _compare(RunSpec(a, "c"), RunSpec(late, "c"), tmp_path / "c")
    assert len(result.pairs) == 6 and not said  # 0.05 to 0.1 as written: the times agree, as given
    note = "the runs start at different times (first at t = 0, second at t = 0.05, more than the time tolerance"
    assert note in page and any(n.startswith(note) for n in manifest["comparison_notes"])
    # the drop moved 0.05 between the moments each pair compares (analytic: the centres' distance)
    assert np.allclose(result.comparison["hausdorff"], 0.05, atol=1 / 40)
    # after the first, outputs 0.005 past the first run's (the same interval): one pair of 11, a finding
    shifted = _run(tmp_path / "shifted", times, written=[0.0] + [t + 0.005 for t in times[1:]])
    result, said, page, manifest = _compare(RunSpec(a, "c"), RunSpec(shifted, "c"), tmp_path / "d")
    assert len(result.pairs) == 1
    assert any(m.startswith("most steps that could pair do not: over t = 0 to 0.1, which both runs cover, the run "
                            "with fewer steps has 10 and 1 pair") for m in said)


def test_time_checks_by_themselves():
    pairs = pd.DataFrame({"time_a": [0.0, 0.1], "time_b": [0.0, 0.12]})
    found, notes = time_checks([0, 0.1, 0.2], [0, 0.12, 0.2], pairs, ("a", "b"), None)
    assert found == [] and len(notes) == 1
    assert notes[0].startswith("1 of 2 pairs join times more than 10 % of the output interval apart, the largest "
                               "0.02 (a t = 0.1 against b t = 0.12: 20 % of the interval there 0.1, the longer")
    # one run writing ten times as often over the same span: a note, no finding
    fine, coarse = np.linspace(0, 1, 101), np.linspace(0, 1, 11)
    pairs = pd.DataFrame({"time_a": coarse, "time_b": coarse})
    found, notes = time_checks(fine, coarse, pairs, ("a", "b"), None)
    assert found == [] and len(notes) == 1 and "median output intervals differ by a factor of 10" in notes[0]
    # a short run (0 to 0.15) against a long one (0 to 1), every step of the short one paired: a note; the
    # same span ratio with one pair (seconds against milliseconds): a finding
    long, short = np.round(np.arange(0, 1.0001, 0.01), 12), np.round(np.arange(0, 0.15001, 0.01), 12)
    pairs = pd.DataFrame({"time_a": short, "time_b": short})
    found, notes = time_checks(long, short, pairs, ("a", "b"), None)
    assert found == [] and notes == ["the runs' time spans differ by a factor of 6.667 (a t = 0 to 1, b t = 0 to "
                                     "0.15): the comparison covers the shorter run's span"]
    found, notes = time_checks(long, 1000 * short, pairs[:1], ("a", "b"), None)
    assert len(found) == 1 and "different time units" in found[0] and "and 1 of their steps pair" in found[0]


def test_a_short_run_written_more_often_is_no_time_units_finding():
    # a long run every 0.1 to t = 1.5 against a short one every 0.025 to 0.25: the long run has three outputs
    # within the short run's span (0, 0.1, 0.2, as written) and all three pair, yet 3 of the short run's 11
    # steps read "different time units"
    from phasegauge.analysis.compare import pair_times

    long, short = np.round(np.arange(0, 1.5001, 0.1), 12), np.round(np.arange(0, 0.25001, 0.025), 12)
    pairs = pair_times(long, short)[0]
    assert pairs["time_a"].tolist() == pytest.approx([0, 0.1, 0.2]) and pairs["time_b"].tolist() == pytest.approx(
        [0, 0.1, 0.2])
    found, notes = time_checks(long, short, pairs, ("long", "short"), None)
    assert found == [] and notes == ["the runs' time spans differ by a factor of 6 (long t = 0 to 1.5, short t = 0 "
                                     "to 0.25): the comparison covers the shorter run's span"]
    # the short run in milliseconds (0 to 250): only the long run's t = 0 lies within its span, a finding
    ms = 1000 * short
    found, notes = time_checks(long, ms, pair_times(long, ms)[0], ("long", "short"), None)
    assert len(found) == 1 and "different time units" in found[0] and "and 1 of their steps pair" in found[0]


def test_outputs_at_adaptive_solver_steps_are_no_note_on_paired_times():
    # outputs at the first adaptive solver step past each output time (every 0.02 and every 0.01): the gaps
    # (as written) are at most 0.002, under a tenth of the coarser run's interval 0.02, and raised a note at 9
    # of 11 pairs; a gap of a fifth of the interval is still named
    from phasegauge.analysis.compare import pair_times

    a = [0, 0.02161, 0.041616, 0.061031, 0.080572, 0.100108, 0.120767, 0.140817, 0.160091, 0.180098, 0.201998]
    b = [0, 0.010979, 0.020352, 0.030652, 0.041461, 0.051347, 0.061266, 0.070589, 0.08074, 0.091015, 0.100091,
         0.110833, 0.120407, 0.131319, 0.140096, 0.151019, 0.161305, 0.170341, 0.181343, 0.191308, 0.200028]
    pairs = pair_times(a, b)[0]
    gaps = (pairs["time_a"] - pairs["time_b"]).abs()
    assert len(pairs) == 11 and gaps.max() == pytest.approx(0.00197) and gaps.max() < 0.1 * 0.02
    assert time_checks(a, b, pairs, ("a", "b"), None) == ([], [])
    late = pd.DataFrame({"time_a": [0.0, 0.1, 0.2], "time_b": [0.0, 0.1, 0.22]})
    found, notes = time_checks([0, 0.1, 0.2], [0, 0.1, 0.22], late, ("a", "b"), None)
    assert found == [] and len(notes) == 1 and notes[0].startswith(
        "1 of 3 pairs join times more than 10 % of the output interval apart, the largest 0.02")


def test_a_pair_compared_over_half_the_domain_is_named_and_marked(tmp_path):
    # the second run's step at t = 0.05 NaN right of x = 0.5: its pair read mismatch 0.016 and the best
    # Dice, the half-compared drop taken for the closest agreement
    times = [0.0, 0.05, 0.1]
    a = _run(tmp_path / "a", times)
    b = _run(tmp_path / "b", times, shift=0.04, nan_right=(1,))
    result, said, page, manifest = _compare(RunSpec(a, "c"), RunSpec(b, "c"), tmp_path / "c")
    table = result.comparison
    whole = table["compared_volume"] > 0.99
    lens = _lens(0.04)  # two discs 0.04 apart: Dice 0.8729, mismatch 0.0319
    assert lens / (np.pi * R**2) == pytest.approx(0.8729, abs=1e-4)
    assert np.allclose(table.loc[whole, "dice"], lens / (np.pi * R**2), atol=0.005)
    assert np.allclose(table.loc[whole, "mismatch_volume"], 2 * (np.pi * R**2 - lens), rtol=0.03)
    assert table.loc[~whole, "compared_volume"].tolist() == pytest.approx([0.5])
    finding = "1 pair(s) compared over part of the domain (t = 0.05, steps 1 and 1: 50 % left out"
    assert any(m.startswith(finding) for m in said)
    assert any(m.startswith(finding) for m in manifest["comparison_warnings"])
    assert "partial: 50 % left out" in page and page.count("<td>whole</td>") == 2


def test_phases_taken_the_wrong_way_round_are_a_finding(tmp_path):
    # an order parameter with the drop at -1 measured without --phase-a lower read Dice 0.016, no hint
    times = [0.0, 0.1]
    a = _run(tmp_path / "a", times, order=True)
    b = _run(tmp_path / "b", times, shift=0.02)
    result, said, page, manifest = _compare(RunSpec(a, "c", (-1, 1)), RunSpec(b, "c"), tmp_path / "c")
    assert (result.comparison["dice"] < 0.05).all()
    assert any(m.startswith("the runs appear to measure opposite phases at 2 of 2 pairs") and "--phase-a" in m
               for m in said)
    # with one run's phase flipped the pair reads the lens of two discs 0.02 apart (MathWorld, above)
    table = result.comparison
    flipped = flipped_dice(table["dice"], table["volume_a"], table["volume_b"], table["compared_volume"])
    assert np.allclose(flipped, _lens(0.02) / (np.pi * R**2), atol=0.01)
    # with --phase-a lower: the lens of two discs 0.02 apart (Dice 0.9364), and no such finding
    result, said, page, manifest = _compare(RunSpec(a, "c", (-1, 1), phase="lower"), RunSpec(b, "c"),
                                            tmp_path / "d")
    assert np.allclose(result.comparison["dice"], _lens(0.02) / (np.pi * R**2), atol=0.005)
    assert not [m for m in said if "opposite phases" in m]


def test_opposite_phases_of_drops_a_third_of_a_radius_apart_are_a_finding(tmp_path):
    # the drops 0.35 R apart agree only in part (Dice with the right phases: the lens of two discs 0.07 apart,
    # 0.774 [MathWorld, above]); measured the wrong way round they read Dice 0.05: still the finding, the flip
    # gaining far more than two unlike patterns would
    times = [0.0, 0.1]
    a = _run(tmp_path / "a", times, order=True)
    b = _run(tmp_path / "b", times, shift=0.35 * R)
    result, said, page, manifest = _compare(RunSpec(a, "c", (-1, 1)), RunSpec(b, "c"), tmp_path / "c")
    table = result.comparison
    flipped = flipped_dice(table["dice"], table["volume_a"], table["volume_b"], table["compared_volume"])
    assert np.allclose(flipped, _lens(0.35 * R) / (np.pi * R**2), atol=0.01) and (table["dice"] < 0.1).all()
    assert any(m.startswith("the runs appear to measure opposite phases at 2 of 2 pairs") for m in said)


def _pattern(n, seed, t):
    """A 50/50 spinodal-like pattern on n x n cells: noise smoothed over a length 0.05 + 0.1 t (periodic), its
    median taken off; the phase where it is positive."""
    from scipy.ndimage import gaussian_filter

    noise = np.random.default_rng(seed).standard_normal((n, n))
    g = gaussian_filter(noise, (0.05 + 0.1 * t) * n, mode="wrap")
    return g - np.median(g)


def test_two_uncorrelated_half_and_half_patterns_are_not_opposite_phases(tmp_path):
    # two resolutions of a critical quench, each pattern grown from its own noise, both measuring phi > 0: Dice
    # 0.41 and the phase volumes filling the domain read as "opposite phases", whose advice (--phase-b lower)
    # really compares opposite phases
    times, runs, tiled = [0.0, 0.1], {}, {}
    for name, n, seed in (("a", 48, 1), ("b", 40, 2)):
        (tmp_path / name).mkdir()
        mesh = grid_mesh((n, n))
        ij = np.floor(mesh.cell_centroids[:, :2] * n).astype(int)
        lines = ["time,path"]
        for k, t in enumerate(times):
            g = _pattern(n, seed, t)
            phi = np.tanh(g[ij[:, 0], ij[:, 1]] / g.std() * (0.05 + 0.1 * t) / 2 / (np.sqrt(2) * 1.5 / n))
            to_meshio(mesh, cell_data={"phi": phi}).write(tmp_path / name / f"s_{k}.vtu")
            lines.append(f"{t},s_{k}.vtu")
            tiled[name, k] = np.kron(g > 0, np.ones((240 // n, 240 // n), bool))  # 240 = lcm(48, 40)
        (tmp_path / name / "run.steps").write_text("\n".join(lines) + "\n")
        runs[name] = RunSpec(str(tmp_path / name / "run.steps"), "phi", (-1, 1))
    result, said, page, manifest = _compare(runs["a"], runs["b"], tmp_path / "c", periodic=("x", "y"))
    table = result.comparison
    flipped = flipped_dice(table["dice"], table["volume_a"], table["volume_b"], table["compared_volume"])
    for k in range(2):  # the recount with numpy set operations (our tolerances 0.03)
        a, b = tiled["a", k], tiled["b", k]
        dice = lambda p, q: 2 * np.count_nonzero(p & q) / (np.count_nonzero(p) + np.count_nonzero(q))
        assert table["dice"][k] == pytest.approx(dice(a, b), abs=0.03) and table["dice"][k] < 0.5
        assert flipped[k] == pytest.approx(min(dice(a, ~b), dice(~a, b)), abs=0.03)
        assert flipped[k] - table["dice"][k] < 0.3  # no better flipped (our threshold)
    assert not [m for m in said if "opposite phases" in m]
    assert not [m for m in manifest["comparison_warnings"] if "opposite phases" in m]


def test_paired_times_that_differ_are_shown_and_noted(tmp_path):
    # outputs at the first solver step (0.03) past each output time: 0, 0.12, 0.21, 0.30 against 0, 0.1, 0.2,
    # 0.3; the report showed the first run's time alone, so the drop's travel read as a shape difference
    a = _run(tmp_path / "a", [0.0, 0.1, 0.2, 0.3])
    b = _run(tmp_path / "b", [0.0, 0.12, 0.21, 0.30])
    result, said, page, manifest = _compare(RunSpec(a, "c"), RunSpec(b, "c"), tmp_path / "c")
    assert result.pairs["time_b"].round(9).tolist() == [0.0, 0.12, 0.21, 0.3]
    # the Hausdorff distance of each pair is the drop's travel over its gap (equal circles: the centres' distance)
    assert np.allclose(result.comparison["hausdorff"], [0, 0.02, 0.01, 0], atol=0.005)
    assert "<th>time_b</th>" in page and "<td>0.12</td>" in page
    note = "1 of 4 pairs join times more than 10 % of the output interval apart, the largest 0.02 (first t = 0.1 "
    assert note + "against second t = 0.12: 20 % of the interval there 0.1" in page.replace("&#x27;", "'")
    assert "Both interfaces at t = 0.2 (second: t = 0.21)" in page
    assert not said
