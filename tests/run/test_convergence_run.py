"""The convergence command: three runs of one case, measured here or read from measure folders."""

import dataclasses
import json
import os
import warnings

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from conftest import write_listing
from phasegauge import measure
from phasegauge.cli import main
from phasegauge.errors import OptionError, ResolutionWarning, SeriesWarning
from phasegauge.meshgen import grid_mesh
from phasegauge.run.convergence import grid_convergence_run
from phasegauge.run.options import MeasureOptions

CELLS = (40, 25, 16)  # h = 0.025, 0.04, 0.0625: ratios 1.6 and 1.5625 (not constant)


def _series(folder, n, times, *, depth=None, factor=1.0):
    """c = factor x^2 (1 - t/2) on cells of an n x n unit-square grid, time in a listing.

    With ``depth`` the grid is a slab of hexahedra one cell thick, ``depth`` deep (a finite-volume 2D run).

    The phase volume is the midpoint rule of the integral: exactly (1/3 - h^2/12)(1 - t/2), h = 1/n
    (midpoint-rule error of x^2 over a cell of width h is h^3/12), so p = 2 and the extrapolated
    value is (1 - t/2)/3, both analytic.
    """
    os.makedirs(folder, exist_ok=True)
    if depth is None:
        mesh = grid_mesh((n, n), kind="quad")
    else:
        mesh = grid_mesh((n, n, 1), bounds=[(0.0, 1.0), (0.0, 1.0), (0.0, depth)], kind="hexahedron")
    x = mesh.cell_centroids[:, 0]
    return write_listing(folder, ((t, f"s_{k}.vtu", mesh, {"c": factor * x ** 2 * (1 - t / 2)})
                                  for k, t in enumerate(times)))


def _three(tmp_path):
    return (_series(str(tmp_path / "fine"), CELLS[0], [0.0, 0.1, 0.2]),
            _series(str(tmp_path / "medium"), CELLS[1], [0.0, 0.05, 0.1, 0.15, 0.2]),
            _series(str(tmp_path / "coarse"), CELLS[2], [0.0, 0.2]))


def test_series_inputs_give_analytic_order_and_extrapolation(tmp_path):
    fine, medium, coarse = _three(tmp_path)
    options = MeasureOptions(field="c", analyses=("conservation",))
    out = tmp_path / "conv"
    result = grid_convergence_run(fine, medium, coarse, options=options, out=out)
    table = pd.read_csv(out / "convergence.csv")
    assert list(table.columns[:12]) == ["quantity", "time", "value_fine", "value_medium", "value_coarse",
                                        "cell_size_fine", "cell_size_medium", "cell_size_coarse",
                                        "apparent_order", "extrapolated", "relative_error_fine", "gci_fine"]
    # h = (area / N)^(1/2) = 1/n on the unit square (Celik et al. 2008, eq. 1)
    assert [s.cell_size for s in result.sources] == pytest.approx([1 / n for n in CELLS], rel=1e-12)
    assert len(table) == len(result.table)
    rows = result.table[result.table["quantity"] == "phase_volume"].sort_values("time")
    assert rows["time"].tolist() == pytest.approx([0.0, 0.1, 0.2])  # the fine run's times, in every span
    t = rows["time"].to_numpy()
    for col, n in zip(("value_fine", "value_medium", "value_coarse"), CELLS):
        # midpoint rule of x^2: 1/3 - h^2/12 (interpolation in time is exact for this linear history)
        assert rows[col].to_numpy() == pytest.approx((1 / 3 - 1 / (12 * n * n)) * (1 - t / 2), rel=1e-10)
    assert rows["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    assert rows["extrapolated"].to_numpy() == pytest.approx((1 - t / 2) / 3, rel=1e-9)
    assert not rows["oscillatory"].any()
    assert (out / "convergence.png").exists() and (out / "manifest.json").exists()


def test_measure_folders_give_the_same_table_as_series(tmp_path):
    paths = _three(tmp_path)
    options = MeasureOptions(field="c", analyses=("conservation",))
    folders = []
    for k, path in enumerate(paths):
        folder = tmp_path / f"m{k}"
        measure(path, options=options, out=folder, contours=False)
        folders.append(folder)
    from_series = grid_convergence_run(*paths, options=options).table
    from_folders = grid_convergence_run(*folders).table
    a = from_series[from_series["quantity"] == "phase_volume"].reset_index(drop=True)
    b = from_folders[from_folders["quantity"] == "phase_volume"].reset_index(drop=True)
    assert np.allclose(a["gci_fine"], b["gci_fine"], rtol=1e-8)
    assert np.allclose(a["extrapolated"], b["extrapolated"], rtol=1e-8)


def test_cli_refuses_existing_folder_and_wrong_order(tmp_path):
    fine, medium, coarse = _three(tmp_path)
    out = str(tmp_path / "conv")
    runner = CliRunner()
    args = ["convergence", fine, medium, coarse, "--field", "c", "--analyses", "conservation", "-o", out, "-q"]
    assert runner.invoke(main, args).exit_code == 0
    again = runner.invoke(main, args)
    assert again.exit_code == 2 and "--overwrite" in again.output
    assert runner.invoke(main, args + ["--overwrite"]).exit_code == 0
    swapped = runner.invoke(main, ["convergence", coarse, medium, fine, "--field", "c", "-o", out + "2"])
    assert swapped.exit_code == 2 and "FINE MEDIUM COARSE" in swapped.output
    assert not os.path.exists(out + "2")
    with pytest.raises(OptionError, match="field to measure"):
        grid_convergence_run(fine, medium, coarse)


@pytest.mark.parametrize("inputs", ["series", "measure folders"])
def test_a_slab_one_cell_thick_gets_the_order_of_its_2d_mesh(tmp_path, inputs):
    # the same O(h^2) phase area (midpoint rule of x^2: (1/3 - h^2/12)(1 - t/2) per unit depth, h = 1/n) on
    # quads and on hexahedra one cell thick, 0.1 deep: measure reads the slab as 2D, so its cell size is
    # (area / N)^(1/2) = 1/n (Celik et al. 2008, eq. 1, in 2D) and p = 2 both ways; the 3D size
    # (0.1 / n^2)^(1/3) read p = 3
    options = MeasureOptions(field="c", analyses=("conservation",))
    orders = {}
    for kind, depth in (("quads", None), ("slab", 0.1)):
        paths = [_series(str(tmp_path / kind / name), n, [0.0, 0.2], depth=depth)
                 for name, n in zip(("fine", "medium", "coarse"), CELLS)]
        if inputs == "measure folders":
            folders = [tmp_path / kind / f"m{k}" for k in range(3)]
            for path, folder in zip(paths, folders):
                measure(path, options=options, out=folder, contours=False)
            result = grid_convergence_run(*folders, out=tmp_path / kind / "conv")
        else:
            result = grid_convergence_run(*paths, options=options, out=tmp_path / kind / "conv")
        assert [s.cell_size for s in result.sources] == pytest.approx([1 / n for n in CELLS], rel=1e-12)
        assert {s.dimension for s in result.sources} == {2}
        rows = result.table[result.table["quantity"] == "phase_volume"]
        orders[kind] = rows["apparent_order"].to_numpy()
    assert orders["quads"] == pytest.approx(2.0, rel=1e-6)
    assert orders["slab"] == pytest.approx(2.0, rel=1e-6)
    manifest = json.loads((tmp_path / "slab" / "conv" / "manifest.json").read_text())
    assert [m["depth"] for m in manifest["meshes"]] == pytest.approx([0.1] * 3)


def test_a_slab_measured_in_3d_keeps_its_3d_cell_size(tmp_path):
    # with keep_3d measure reads the slab as 3D, and so does the study: h = (0.1 / n^2)^(1/3)
    options = MeasureOptions(field="c", analyses=("conservation",), keep_3d=True)
    paths = [_series(str(tmp_path / name), n, [0.0, 0.2], depth=0.1)
             for name, n in zip(("fine", "medium", "coarse"), CELLS)]
    result = grid_convergence_run(*paths, options=options)
    sizes = [(0.1 / n ** 2) ** (1 / 3) for n in CELLS]
    assert [s.cell_size for s in result.sources] == pytest.approx(sizes)
    # measure folders of such runs record dimension 3 in their manifests: read as they were measured
    folders = [tmp_path / f"m{k}" for k in range(3)]
    for path, folder in zip(paths, folders):
        measure(path, options=options, out=folder, contours=False)
    result = grid_convergence_run(*folders)
    assert [s.cell_size for s in result.sources] == pytest.approx(sizes)


def test_a_run_ending_just_before_the_others_still_pairs_at_the_last_time(tmp_path):
    # the coarse run's last output at 0.2999999 instead of 0.3 (1e-6 of the 0.1 interval): the fine time 0.3
    # pairs with it (the tolerance 1e-6 of the median output interval is our threshold); times the other runs
    # do not reach are named in a warning
    options = MeasureOptions(field="c", analyses=("conservation",))
    fine = _series(str(tmp_path / "fine"), CELLS[0], [0.0, 0.1, 0.2, 0.3, 0.4])
    medium = _series(str(tmp_path / "medium"), CELLS[1], [0.0, 0.1, 0.2, 0.3])
    coarse = _series(str(tmp_path / "coarse"), CELLS[2], [0.0, 0.1, 0.2, 0.2999999])
    with pytest.warns(SeriesWarning, match=r"times 0.4 lie outside .*left out of the pairing"):
        result = grid_convergence_run(fine, medium, coarse, options=options, out=tmp_path / "conv")
    rows = result.table[result.table["quantity"] == "phase_volume"]
    assert rows["time"].tolist() == pytest.approx([0.0, 0.1, 0.2, 0.3])
    manifest = json.loads((tmp_path / "conv" / "manifest.json").read_text())
    assert any("left out of the pairing" in w for w in manifest["warnings"])


def test_diverging_values_are_flagged_and_warned_once(tmp_path):
    # the field scaled by 1.0, 1.1, 1.15 on the fine, medium and coarse mesh: the phase volume moves away
    # as the mesh is refined, e32/e21 = 0.52 below ln r32 / ln r21 = 0.95 (the p -> 0 limit of Celik et al.
    # 2008 eq. 5, by hand), so there is no positive order: divergent, with empty figures
    options = MeasureOptions(field="c", analyses=("conservation",))
    paths = [_series(str(tmp_path / name), n, [0.0, 0.2], factor=f)
             for name, n, f in zip(("fine", "medium", "coarse"), CELLS, (1.0, 1.1, 1.15))]
    with pytest.warns(ResolutionWarning, match=r"values not converging .*phase_volume at t = 0, 0.2") as record:
        result = grid_convergence_run(*paths, options=options, out=tmp_path / "conv")
    assert len([w for w in record if issubclass(w.category, ResolutionWarning)]) == 1
    rows = result.table[result.table["quantity"] == "phase_volume"]
    assert rows["divergent"].all() and rows["apparent_order"].isna().all() and rows["gci_fine"].isna().all()
    table = pd.read_csv(tmp_path / "conv" / "convergence.csv")
    assert table.columns[-1] == "divergent"
    manifest = json.loads((tmp_path / "conv" / "manifest.json").read_text())
    assert any("phase_volume" in w and "not converging" in w for w in manifest["warnings"])
    from matplotlib.text import Text

    from phasegauge.report._convergence_report import plot_convergence

    words = [t.get_text() for t in plot_convergence(result.table).findobj(Text)]
    assert any(w.startswith("divergent") and "phase_volume" in w for w in words)


def _folders(tmp_path, paths, options_of):
    """Measure each series into a folder, with the options ``options_of(k)``; return the folders."""
    folders = []
    for k, path in enumerate(paths):
        folder = tmp_path / f"m{k}"
        measure(path, options=options_of(k), out=folder, contours=False)
        folders.append(folder)
    return folders


@pytest.mark.parametrize("slip, words", [({"phase": "lower"}, "--phase: upper (fine, medium) against lower (coarse)"),
                                         ({"range": (0.0, 2.0)}, "--range: 0,1 (fine, medium) against 0,2 (coarse)")])
def test_runs_measured_with_different_options_are_refused(tmp_path, slip, words):
    # the same three runs measured alike give p = 2 (midpoint rule of x^2, analytic; see _series); the coarse
    # one measured with another phase or range read p = 17-19 and a GCI of 4e-8 to 1e-7 without a word
    paths = _three(tmp_path)
    same = dict(field="c", analyses=("conservation",))
    folders = _folders(tmp_path, paths, lambda k: MeasureOptions(**same, **(slip if k == 2 else {})))
    with pytest.raises(OptionError, match=words.replace("(", r"\(").replace(")", r"\)")) as err:
        grid_convergence_run(*folders)
    assert err.value.where == str(folders[2]) and "measure the runs with the same options" in err.value.fix
    # a series measured here with the options given, against a folder measured with others
    with pytest.raises(OptionError, match="different --" + next(iter(slip))):
        grid_convergence_run(paths[0], paths[1], folders[2], options=MeasureOptions(**same))
    # measured alike: the analytic order, and each run's options in the manifest
    alike = _folders(tmp_path / "alike", paths, lambda k: MeasureOptions(**same))
    result = grid_convergence_run(*alike, out=tmp_path / "conv")
    rows = result.table[result.table["quantity"] == "phase_volume"]
    assert rows["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    manifest = json.loads((tmp_path / "conv" / "manifest.json").read_text())
    assert [m["options"]["phase"] for m in manifest["meshes"]] == ["upper"] * 3
    assert [m["options"]["range"] for m in manifest["meshes"]] == [[0.0, 1.0]] * 3


def _numbered_series(folder, n, count):
    """The series of _series at t = 0.1 k, written as numbered files that store no time."""
    os.makedirs(folder, exist_ok=True)
    mesh = grid_mesh((n, n), kind="quad")
    x = mesh.cell_centroids[:, 0]
    from phasegauge.meshgen import to_meshio

    for k in range(count):
        to_meshio(mesh, cell_data={"c": x ** 2 * (1 - 0.1 * k / 2)}).write(os.path.join(folder, f"s_{k:04d}.vtu"))
    return folder


def test_runs_storing_no_times_are_paired_by_step_number_with_a_warning(tmp_path):
    # three runs written at one interval (t = 0.1 k) whose files store no time: step k pairs with step k, which
    # is right here, so p = 2 (midpoint rule of x^2, analytic); the warning says how the steps were paired
    options = MeasureOptions(field="c", analyses=("conservation",))
    paths = [_numbered_series(str(tmp_path / name), n, 3) for name, n in zip(("fine", "medium", "coarse"), CELLS)]
    with pytest.warns(SeriesWarning, match=r"store no times, so their steps are paired by step number .*right only "
                                           r"if every run wrote .*'time,path' listing"):
        result = grid_convergence_run(*paths, options=options, out=tmp_path / "conv")
    rows = result.table[result.table["quantity"] == "phase_volume"]
    assert rows["time"].tolist() == [0.0, 1.0, 2.0]  # step numbers
    assert rows["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    manifest = json.loads((tmp_path / "conv" / "manifest.json").read_text())
    assert [m["time_origin"] for m in manifest["meshes"]] == ["index"] * 3
    assert any("paired by step number" in w for w in manifest["warnings"])
    # step counts that differ are named
    coarse = _numbered_series(str(tmp_path / "coarse4"), CELLS[2], 4)
    with pytest.warns(SeriesWarning, match=r"step counts differ: fine 3, medium 3, coarse 4"):
        grid_convergence_run(paths[0], paths[1], coarse, options=options)


def test_runs_some_storing_times_and_some_not_are_refused(tmp_path):
    # the fine and medium runs store their times (0, 0.1, 0.2), the coarse one does not: its step numbers
    # 0, 1, 2 read as times paired the coarse run's first output with every fine time (p 11.8 and 13.5 at
    # t = 0.1 and 0.2 for an analytic 2, GCI 1e-6)
    from phasegauge.errors import InputError

    options = MeasureOptions(field="c", analyses=("conservation",))
    fine = _series(str(tmp_path / "fine"), CELLS[0], [0.0, 0.1, 0.2])
    medium = _series(str(tmp_path / "medium"), CELLS[1], [0.0, 0.1, 0.2])
    coarse = _numbered_series(str(tmp_path / "coarse"), CELLS[2], 3)
    with pytest.raises(InputError, match=r"the coarse run stores no times \(its times are step numbers\) while "
                                         r"the fine and medium runs store times") as err:
        grid_convergence_run(fine, medium, coarse, options=options)
    assert "'time,path' listing" in err.value.fix
    # a one-step (steady) run without a time pairs with every time, as before
    steady = _numbered_series(str(tmp_path / "steady"), CELLS[2], 1)
    with pytest.warns(ResolutionWarning):  # the steady coarse value is off the unsteady trend
        grid_convergence_run(fine, medium, steady, options=options)


def test_an_order_off_the_trend_and_away_from_the_formal_order_is_warned(tmp_path):
    options = MeasureOptions(field="c", analyses=("conservation",))
    paths = _three(tmp_path)
    h = np.array([1 / n for n in CELLS])
    # exact second order (midpoint rule of x^2: eps proportional to h^2): with the formal order 2 the ratio
    # (|eps32| / (r32^2 - 1)) / (r21^2 |eps21| / (r21^2 - 1)) is 1 (Roache 1998, GCI_23 = r^p GCI_12, by
    # hand: h2^2 / (r21^2 h1^2) = 1); with the formal order 1.2 it is (h3^2 - h2^2)(r21^1.2 - 1) /
    # ((r32^1.2 - 1) r21^1.2 (h2^2 - h1^2)), and p = 2 lies 0.8 from it (beyond our threshold 0.5)
    rows = lambda res: res.table[res.table["quantity"] == "phase_volume"]  # noqa: E731
    result = grid_convergence_run(*paths, options=options, formal_order=2)
    assert rows(result)["asymptotic_ratio"].to_numpy() == pytest.approx(1.0, rel=1e-6)
    r21, r32 = h[1] / h[0], h[2] / h[1]
    a, b = r21 ** 1.2, r32 ** 1.2
    by_hand = (h[2] ** 2 - h[1] ** 2) * (a - 1) / ((b - 1) * a * (h[1] ** 2 - h[0] ** 2))
    with pytest.warns(ResolutionWarning, match=r"more than 0.5 \(our threshold\) from the formal order 1.2 for "
                                               r"phase_volume at t = 0, 0.1, 0.2"):
        result = grid_convergence_run(*paths, options=options, formal_order=1.2, out=tmp_path / "conv")
    assert rows(result)["asymptotic_ratio"].to_numpy() == pytest.approx(by_hand, rel=1e-6)
    assert abs(by_hand - 1) > 0.1
    manifest = json.loads((tmp_path / "conv" / "manifest.json").read_text())
    assert manifest["formal_order"] == 1.2
    assert np.isnan(rows(grid_convergence_run(*paths, options=options))["asymptotic_ratio"]).all()
    # the coarse field scaled by 0.7: the coarse value off the trend, p far above 5 (our threshold) for an
    # analytic order of 2
    odd = [paths[0], paths[1], _series(str(tmp_path / "odd"), CELLS[2], [0.0, 0.2], factor=0.7)]
    with pytest.warns(ResolutionWarning, match=r"apparent order above 5 \(our threshold\) for phase_volume at "
                                               r"t = 0, 0.1, 0.2.* coarse 0.2.* off the trend"):
        result = grid_convergence_run(*odd, options=options)
    assert (rows(result)["apparent_order"] > 5).all()
    with pytest.warns(ResolutionWarning, match=r"apparent order above 4 \(our threshold, twice the formal order"):
        grid_convergence_run(*odd, options=options, formal_order=2)


def test_level_set_series_on_the_command_line_give_the_api_order(tmp_path):
    # a circle of radius 0.4 + 0.2 t as an exact signed distance on points of [-1, 1]^2: --level-set on the
    # command takes it as a level set, as MeasureOptions(level_set=True) does; the areas lie near pi R^2
    # (analytic) and the order is the API's. Without it the field read as an indicator was the disc phi < 0.5
    paths = []
    for name, n in zip(("fine", "medium", "coarse"), (40, 28, 20)):
        mesh = grid_mesh((n, n), bounds=[(-1.0, 1.0), (-1.0, 1.0)], kind="quad")
        r = np.hypot(mesh.points[:, 0], mesh.points[:, 1])
        folder = tmp_path / name
        folder.mkdir()
        paths.append(write_listing(str(folder), ((t, f"s_{k}.vtu", mesh, None, {"phi": r - (0.4 + 0.2 * t)})
                                                 for k, t in enumerate((0.0, 0.1)))))
    out = str(tmp_path / "conv")
    run = CliRunner().invoke(main, ["convergence", *paths, "--field", "phi", "--phase", "lower", "--level-set",
                                    "--analyses", "interface,conservation", "-o", out, "-q"])
    assert run.exit_code == 0, run.output
    table = pd.read_csv(os.path.join(out, "convergence.csv"))
    cli_rows = table[table["quantity"] == "phase_volume"].reset_index(drop=True)
    assert cli_rows["value_fine"].to_numpy() == pytest.approx(np.pi * np.array([0.4, 0.42]) ** 2, rel=5e-3)
    api = grid_convergence_run(*paths, options=MeasureOptions(field="phi", phase="lower", level_set=True,
                                                              analyses=("interface", "conservation"))).table
    api_rows = api[api["quantity"] == "phase_volume"].reset_index(drop=True)
    assert cli_rows["apparent_order"].to_numpy() == pytest.approx(api_rows["apparent_order"].to_numpy(), rel=1e-9)
    manifest = json.loads(open(os.path.join(out, "manifest.json")).read())
    assert manifest["options"]["level_set"] is True
    assert all(m["options"]["level_set"] for m in manifest["meshes"])


def test_options_given_with_measure_folders_are_refused_unless_they_are_the_folders_own(tmp_path):
    # three folders measured with the upper phase give p = 2 (midpoint rule of x^2, analytic; see _series);
    # --phase lower or --level-set typed with them used to be ignored without a word (exit 0, the upper phase's
    # figures) while the manifest recorded the typed phase
    paths = _three(tmp_path)
    same = dict(field="c", analyses=("conservation",))
    folders = [str(f) for f in _folders(tmp_path, paths, lambda k: MeasureOptions(**same))]
    runner = CliRunner()
    lower = runner.invoke(main, ["convergence", *folders, "--field", "c", "--phase", "lower", "-o",
                                 str(tmp_path / "lower"), "-q"])
    assert lower.exit_code == 2
    assert ("--phase lower was given, but the fine, medium and coarse runs (measure folders) were measured with "
            "--phase upper" in lower.output and "or leave --phase out" in lower.output)
    level_set = runner.invoke(main, ["convergence", *folders, "--level-set", "-o", str(tmp_path / "ls"), "-q"])
    assert level_set.exit_code == 2 and "--level-set was given, but" in level_set.output
    with pytest.raises(OptionError, match="--phase lower was given"):  # the API alike: options off their defaults
        grid_convergence_run(*folders, options=MeasureOptions(field="c", phase="lower"))
    # the folders' own options typed again are accepted; the manifest records what the figures were measured with
    again = runner.invoke(main, ["convergence", *folders, "--phase", "upper", "--field-location", "cell", "-o",
                                 str(tmp_path / "upper"), "-q"])
    assert again.exit_code == 0, again.output
    manifest = json.loads((tmp_path / "upper" / "manifest.json").read_text())
    assert manifest["options"]["phase"] == "upper" and manifest["options"]["analyses"] == ["conservation"]
    table = pd.read_csv(tmp_path / "upper" / "convergence.csv")
    assert table[table["quantity"] == "phase_volume"]["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)


def test_options_are_compared_as_what_they_measured(tmp_path):
    # c is written on cells only: --field-location cell reads what 'auto' reads (identical steps.csv), and
    # periodic axes y,x are the axes x,y; --keep-3d on a 2D mesh keeps nothing: all were refused as different
    # options. Measured alike: p = 2 (midpoint rule of x^2, analytic)
    paths = _three(tmp_path)
    same = dict(field="c", analyses=("conservation",))
    cell = _folders(tmp_path / "cell", paths, lambda k: MeasureOptions(**same, field_location="cell" if k == 2
                                                                       else "auto"))
    result = grid_convergence_run(*cell)
    rows = result.table[result.table["quantity"] == "phase_volume"]
    assert rows["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    assert pd.read_csv(cell[2] / "steps.csv").equals(
        pd.read_csv(_folders(tmp_path / "auto", paths[2:], lambda k: MeasureOptions(**same))[0] / "steps.csv"))
    # a series measured here with 'auto' against a folder measured with 'cell': both read the cells
    grid_convergence_run(paths[0], paths[1], cell[2], options=MeasureOptions(**same))
    axes = _folders(tmp_path / "axes", paths, lambda k: MeasureOptions(**same, periodic=("y", "x") if k == 2
                                                                       else ("x", "y")))
    grid_convergence_run(*axes)
    # --keep-3d changes nothing on a 2D mesh: accepted, p = 2; on slabs one cell thick it does: refused
    kept = _folders(tmp_path / "kept", paths, lambda k: MeasureOptions(**same, keep_3d=k == 2))
    rows = grid_convergence_run(*kept).table
    assert rows[rows["quantity"] == "phase_volume"]["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    slabs = [_series(str(tmp_path / f"slab{n}"), n, [0.0, 0.2], depth=0.01) for n in CELLS]
    thin = _folders(tmp_path / "thin", slabs, lambda k: MeasureOptions(**same, keep_3d=k == 2))
    with pytest.raises(OptionError, match=r"different --keep-3d: off \(fine, medium\) against on \(coarse\)"):
        grid_convergence_run(*thin)
    # a location truly different is still refused: the fine folder's record says its 'auto' read points
    manifest = json.loads((cell[0] / "manifest.json").read_text())
    manifest["series"]["field_read"] = "'c': point data"
    (cell[0] / "manifest.json").write_text(json.dumps(manifest))
    with pytest.raises(OptionError, match=r"different --field-location: point \(fine\) against cell \(medium, "
                                          r"coarse\)"):
        grid_convergence_run(*cell)


def _linear_series(folder, n, times, offset):
    """c = x (1 - t/2) + offset on cells of an n x n unit-square grid: the midpoint rule is exact for a linear
    field, so the phase volume is (1 - t/2)/2 + offset on every mesh (analytic), the offset standing for how a
    conserving scheme's initial field was sampled."""
    os.makedirs(folder, exist_ok=True)
    mesh = grid_mesh((n, n), kind="quad")
    x = mesh.cell_centroids[:, 0]
    return write_listing(folder, ((t, f"s_{k}.vtu", mesh, {"c": x * (1 - t / 2) + offset})
                                  for k, t in enumerate(times)))


def test_quantities_agreeing_on_the_three_meshes_are_not_warned_of_as_off_the_trend(tmp_path):
    # a conserved volume the same to 1e-8 on the three meshes read an apparent order of about 10 and was warned
    # of as "the coarse value lies off the trend ... check the coarse run"; differences within 1e-4 of the
    # quantity's scale (our threshold) are left out. A coarse value truly off the trend (1e-3 of 0.5) still is
    options = MeasureOptions(field="c", analyses=("conservation",))
    times = [0.0, 0.1, 0.2]
    offsets = (0.0, 1e-10, 1e-8)
    paths = [_linear_series(str(tmp_path / name), n, times, d)
             for name, n, d in zip(("fine", "medium", "coarse"), CELLS, offsets)]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = grid_convergence_run(*paths, options=options)
    rows = result.table[result.table["quantity"] == "phase_volume"]
    t = rows["time"].to_numpy()
    for col, d in zip(("value_fine", "value_medium", "value_coarse"), offsets):
        assert rows[col].to_numpy() == pytest.approx((1 - t / 2) / 2 + d, rel=1e-12, abs=1e-15)  # analytic
    assert (rows["apparent_order"] > 5).all()  # what the warning fired on
    assert not [w for w in caught if "off the trend" in str(w.message)]
    odd = paths[:2] + [_linear_series(str(tmp_path / "odd"), CELLS[2], times, 1e-3)]
    with pytest.warns(ResolutionWarning, match=r"apparent order above 5 \(our threshold\) for phase_volume at "
                                               r"t = 0, 0.1, 0.2.*off the trend"):
        grid_convergence_run(*odd, options=options)


@pytest.mark.parametrize("slip, words", [
    ({"mixing_target": 0.95}, "--mixing-target: 0.9 (fine, medium) against 0.95 (coarse)"),
    ({"densities": (2.0, 1.0)}, "--densities: 1,1 (fine, medium) against 2,1 (coarse)"),
    ({"time_from": 0.1}, "--time-from: not given (fine, medium) against 0.1 (coarse)")])
def test_every_option_that_changes_a_figure_is_compared(tmp_path, slip, words):
    # a coarse folder measured with another mixing target (or densities, or a later first step: the drift's
    # reference) was paired without a word: a mixing length's p of 11-15 and a GCI of 5e-6. Measured alike the
    # three runs give p = 2 (midpoint rule of x^2, analytic; see _series)
    paths = _three(tmp_path)
    same = dict(field="c", analyses=("conservation",), section_axis="x", densities=(1.0, 1.0))
    folders = _folders(tmp_path, paths, lambda k: MeasureOptions(**{**same, **(slip if k == 2 else {})}))
    with pytest.raises(OptionError, match=words.replace("(", r"\(").replace(")", r"\)")):
        grid_convergence_run(*folders)
    alike = [str(f) for f in _folders(tmp_path / "alike", paths, lambda k: MeasureOptions(**same))]
    key, value = next(iter(slip.items()))
    with pytest.raises(OptionError, match=f"--{key.replace('_', '-')} .* was given, but the fine, medium and "
                                          "coarse runs"):  # typed against the folders' own
        grid_convergence_run(*alike, options=MeasureOptions(**{**same, **slip}))
    rows = grid_convergence_run(*alike).table
    assert rows[rows["quantity"] == "phase_volume"]["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)


def test_options_that_cannot_change_a_figure_are_not_compared(tmp_path):
    # every measure option is compared but a short list, each with its reason; runs measured with another drift
    # tolerance, more analyses or a later last time are accepted (p = 2, midpoint rule of x^2, analytic), and the
    # manifest keeps each run's own options
    from phasegauge.run._convergence_options import MEASURING_OPTIONS, NOT_COMPARED_OPTIONS

    names = {f.name for f in dataclasses.fields(MeasureOptions)}
    assert set(MEASURING_OPTIONS) | set(NOT_COMPARED_OPTIONS) == names
    assert {"velocity", "mixing_target", "section_count", "inflow_mean", "densities", "model", "free_energy",
            "capillary_length", "bulk_widths", "steps", "every"} <= set(MEASURING_OPTIONS)
    paths = _three(tmp_path)
    same = dict(field="c", analyses=("conservation",))
    other = dict(drift_tolerance=0.5, analyses=("interface", "conservation"), time_to=0.2, strict=True)
    folders = _folders(tmp_path, paths, lambda k: MeasureOptions(**{**same, **(other if k == 2 else {})}))
    result = grid_convergence_run(*folders, out=tmp_path / "conv")
    rows = result.table[result.table["quantity"] == "phase_volume"]
    assert rows["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    manifest = json.loads((tmp_path / "conv" / "manifest.json").read_text())
    assert [m["options"]["drift_tolerance"] for m in manifest["meshes"]] == [1e-3, 1e-3, 0.5]
    # a run measured without sections or densities wrote none of the columns they change: accepted beside one
    # measured with them (the mass and mixing columns are then not in the table)
    columns = _folders(tmp_path / "columns", paths, lambda k: MeasureOptions(
        **same, **(dict(section_axis="x", mixing_target=0.95, densities=(2.0, 1.0)) if k == 0 else {})))
    table = grid_convergence_run(*columns).table
    assert "phase_mass" not in set(table["quantity"]) and "phase_volume" in set(table["quantity"])
    # a folder whose record says it was measured flow-weighted (--velocity U) is refused by name
    record = json.loads((folders[2] / "manifest.json").read_text())
    record["options"]["velocity"] = "U"
    (folders[2] / "manifest.json").write_text(json.dumps(record))
    with pytest.raises(OptionError, match=r"different --velocity: not given \(fine, medium\) against U \(coarse\)"):
        grid_convergence_run(*folders)


def _cube_series(folder, n, times):
    """c = x^2 (1 - t/2) on cells of an n x n x n unit-cube grid of hexahedra: the phase volume is the midpoint
    rule's (1/3 - h^2/12)(1 - t/2), h = 1/n (as _series), the cell size (1 / n^3)^(1/3) = 1/n, so p = 2."""
    os.makedirs(folder, exist_ok=True)
    mesh = grid_mesh((n, n, n), kind="hexahedron")
    x = mesh.cell_centroids[:, 0]
    return write_listing(folder, ((t, f"s_{k}.vtu", mesh, {"c": x ** 2 * (1 - t / 2)}) for k, t in enumerate(times)))


def test_keep_3d_on_a_real_3d_mesh_matches_series_measured_without_it(tmp_path):
    # a fine folder measured with --keep-3d on a 3D mesh (not one cell thick: it changes nothing there) beside
    # series given without it was refused as "different --keep-3d"; now accepted, with p = 2 (midpoint rule of
    # x^2 on cubes, analytic); on slabs one cell thick the same pair is still refused, once the series are read
    same = dict(field="c", analyses=("conservation",))
    cubes = [_cube_series(str(tmp_path / f"cube{n}"), n, [0.0, 0.2]) for n in (16, 10, 7)]
    fine = _folders(tmp_path / "kept", cubes[:1], lambda k: MeasureOptions(**same, keep_3d=True))[0]
    result = grid_convergence_run(fine, *cubes[1:], options=MeasureOptions(**same))
    assert [s.cell_size for s in result.sources] == pytest.approx([1 / 16, 1 / 10, 1 / 7], rel=1e-12)
    rows = result.table[result.table["quantity"] == "phase_volume"]
    assert rows["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    slabs = [_series(str(tmp_path / f"slab{n}"), n, [0.0, 0.2], depth=0.01) for n in CELLS]
    thin = _folders(tmp_path / "thin", slabs[:1], lambda k: MeasureOptions(**same, keep_3d=True))[0]
    with pytest.raises(OptionError, match=r"different --keep-3d: on \(fine\) against off \(medium, coarse\)"):
        grid_convergence_run(thin, *slabs[1:], options=MeasureOptions(**same))


@pytest.mark.parametrize("key", ["free_energy", "model"])
def test_a_model_given_with_the_folders_it_measured_is_their_own(tmp_path, key):
    # one MeasureOptions holding a model measured the three folders and was then handed to grid_convergence_run:
    # refused, the model typed compared as its text against the folders' record of its fields. Accepted now,
    # p = 2 (midpoint rule of x^2, analytic; see _series); another model is still refused
    from phasegauge.model.mixture_models import DoubleWellModel

    paths = _three(tmp_path)
    opts = MeasureOptions(field="c", analyses=("interface", "conservation"),
                          temperature=300.0 if key == "model" else None,
                          **{key: DoubleWellModel(lean=0.0, rich=1.0, height=1.0, kappa=0.0025)})
    folders = _folders(tmp_path, paths, lambda k: opts)
    rows = grid_convergence_run(*folders, options=opts).table
    assert rows[rows["quantity"] == "phase_volume"]["apparent_order"].to_numpy() == pytest.approx(2.0, rel=1e-6)
    other = dataclasses.replace(opts, **{key: DoubleWellModel(lean=0.0, rich=1.0, height=2.0, kappa=0.0025)})
    with pytest.raises(OptionError, match=f"--{key.replace('_', '-')} .* was given, but the fine, medium and "
                                          "coarse runs"):
        grid_convergence_run(*folders, options=other)
