"""The compare command end to end: two conventions, two meshes, one report."""

import json

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from phasegauge.cli import main
from phasegauge.errors import OptionError
from phasegauge.run.compare import RunSpec, compare_runs
from phasegauge.meshgen import delaunay_mesh, grid_mesh, to_meshio
from phasegauge.samples import circle_fraction


def _disc_runs(tmp_path, *, listings=False):
    """The same moving disc as an order parameter on triangles and a volume fraction on quads: numbered files
    that store no time, or (``listings``) 'time,path' listings of them at t = 0, 0.1, 0.2."""
    tri = delaunay_mesh(1500, seed=4)
    quad = grid_mesh((40, 40))
    for k in range(3):
        cx = 0.4 + 0.1 * k
        r_t = np.hypot(tri.points[:, 0] - cx, tri.points[:, 1] - 0.5)
        phi = np.tanh((0.2 - r_t) / 0.02)
        to_meshio(tri, point_data={"phi": phi}).write(tmp_path / f"a_{k}.vtu")
        r_q = np.hypot(quad.cell_centroids[:, 0] - cx, quad.cell_centroids[:, 1] - 0.5)
        alpha = 0.5 * (1 + np.tanh((0.2 - r_q) / 0.02))
        to_meshio(quad, cell_data={"alpha": alpha}).write(tmp_path / f"b_{k}.vtu")
    if listings:
        for run in "ab":
            (tmp_path / f"{run}.steps").write_text("".join(f"{0.1 * k:g},{run}_{k}.vtu\n" for k in range(3)))
        return str(tmp_path / "a.steps"), str(tmp_path / "b.steps")
    return str(tmp_path / "a_*.vtu"), str(tmp_path / "b_*.vtu")


def test_compare_two_conventions(tmp_path):
    a, b = _disc_runs(tmp_path)
    out = tmp_path / "cmp"
    result = compare_runs(RunSpec(a, "phi", (-1, 1), label="diffuse"), RunSpec(b, "alpha", label="sharp"), out=out)
    table = pd.read_csv(out / "comparison.csv")
    assert len(table) == 3 and list(table.columns[:4]) == ["step", "time", "step_a", "step_b"]
    # no column doubled by a join (pandas' _x/_y), and the runs named by their labels
    assert not [c for c in table.columns if c.endswith(("_x", "_y"))] and table.columns.is_unique
    assert set(table["label_a"]) == {"diffuse"} and set(table["label_b"]) == {"sharp"}
    assert {"grid_interface_size_a", "interface_size_a"} <= set(table.columns)
    # the same disc r = 0.2 in both runs: shapes agree to a fraction of the coarser cell (1/40)
    assert (table["hausdorff"] < 0.025).all() and (table["dice"] > 0.97).all()
    # both runs' phase volumes near the disc area pi r^2 (exact geometry)
    assert np.allclose(table["phase_volume_a"], np.pi * 0.04, rtol=0.03)
    assert np.allclose(table["phase_volume_b"], np.pi * 0.04, rtol=0.03)
    for name in ("report.html", "manifest.json", "overlay_0.png", "steps_diffuse.csv", "steps_sharp.csv"):
        assert (out / name).exists(), name
    manifest = json.loads((out / "manifest.json").read_text())
    assert len(manifest["inputs"]) == 6
    assert result.labels == ("diffuse", "sharp")


def test_compare_cli_reference_table(tmp_path):
    a, b = _disc_runs(tmp_path, listings=True)  # a check at a time needs the runs' times
    ref = tmp_path / "ref.csv"
    # the disc area pi r^2 = 0.125664 (exact geometry) as a user's reference value
    ref.write_text("quantity,time,value,tolerance\nphase_volume,0.0,0.125664,0.004\n")
    res = CliRunner().invoke(main, ["compare", a, b, "--field-a", "phi", "--range-a", "-1,1", "--field-b", "alpha",
                                    "--reference-table", str(ref), "-o", str(tmp_path / "o"), "--quiet"])
    assert res.exit_code == 0, res.output
    checks = pd.read_csv(tmp_path / "o" / "reference_checks.csv")
    assert list(checks["verdict"]) == ["pass"]
    res = CliRunner().invoke(main, ["compare", a, b, "--field-a", "phi", "--field-b", "alpha", "-o",
                                    str(tmp_path / "o")])
    assert res.exit_code == 2 and "--overwrite" in res.output


def test_compare_recipe_validates_and_runs(tmp_path):
    a, b = _disc_runs(tmp_path)
    recipe = tmp_path / "c.toml"
    recipe.write_text(f'[first]\npath = "{a}"\nfield = "phi"\nrange = [-1, 1]\n'
                      f'[second]\npath = "{b}"\nfield = "alpha"\n[compare]\nlevel = 0.5\n'
                      f'[output]\nfolder = "{tmp_path}/r"\n')
    res = CliRunner().invoke(main, ["run", str(recipe), "--quiet"])
    assert res.exit_code == 0, res.output
    assert (tmp_path / "r" / "comparison.csv").exists()


def test_a_diffuse_and_a_sharp_run_are_told_apart(tmp_path):
    # the same disc r = 0.2: a tanh order parameter of width w = 0.05 on triangles (10-90 % thickness
    # 2 w atanh(0.8) = 0.11, analytic, several cells) and volume fractions on quads (8 x 8 samples a cell:
    # a step one to two cells across)
    tri = delaunay_mesh(1500, seed=4)
    quad = grid_mesh((40, 40))
    for k in range(3):
        r_t = np.hypot(tri.points[:, 0] - 0.5, tri.points[:, 1] - 0.5)
        to_meshio(tri, point_data={"phi": np.tanh((0.2 - r_t) / 0.05)}).write(tmp_path / f"a_{k}.vtu")
        ij = np.minimum((quad.cell_centroids[:, :2] * 40).astype(int), 39)  # the grid's cell of each
        alpha = circle_fraction(40, (0.5, 0.5), 0.2)[ij[:, 0], ij[:, 1]]
        to_meshio(quad, cell_data={"alpha": alpha}).write(tmp_path / f"b_{k}.vtu")
    out = tmp_path / "cmp"
    result = compare_runs(RunSpec(str(tmp_path / "a_*.vtu"), "phi", (-1, 1), label="pf"),
                          RunSpec(str(tmp_path / "b_*.vtu"), "alpha", label="vof"), out=out)
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["interface_kind"] == {"pf": "diffuse", "vof": "sharp"}
    # the tanh run: its 10-90 % thickness 0.11 over the triangles' cell size (sqrt of the mean area,
    # numpy on the mesh) is well above the 3.5-cell cut; the volume fractions: a step of at most 2 cells
    h = float(np.sqrt(tri.cell_measures.mean()))
    assert 2 * 0.05 * np.arctanh(0.8) / h > 4
    assert result.first.audit["cells_across"] > 3.5 > result.second.audit["cells_across"]
    report = (out / "report.html").read_text()
    assert "the interfaces are of different kinds (pf diffuse" in report
    named = report.split("the interfaces are of different kinds")[1]
    assert "interface_width" in named and "mixed_volume_fraction" in named


@pytest.mark.parametrize("labels, said", [(("case 1", "case/1"), "both name steps_case_1.csv"),
                                          (("run", "run"), "are the same")])
def test_labels_that_name_one_steps_table_are_refused(tmp_path, labels, said):
    # 'case 1' and 'case/1' both became steps_case_1.csv: the second run's table overwrote the first's, and
    # the manifest's per-label records (unpaired steps, warnings, interface kind) kept one run
    a, b = _disc_runs(tmp_path)
    with pytest.raises(OptionError, match=f"'{labels[0]}' and '{labels[1]}' {said}") as caught:
        compare_runs(RunSpec(a, "phi", (-1, 1), label=labels[0]), RunSpec(b, "alpha", label=labels[1]),
                     out=tmp_path / "o")
    assert "distinct labels" in caught.value.fix and not (tmp_path / "o").exists()  # refused before measuring
    res = CliRunner().invoke(main, ["compare", a, b, "--field-a", "phi", "--field-b", "alpha", "--label-a",
                                    labels[0], "--label-b", labels[1], "-o", str(tmp_path / "o")])
    assert res.exit_code != 0 and len(res.output.strip().splitlines()) == 1 and "distinct labels" in res.output


def _drop_written_at_two_intervals(tmp_path):
    """The same drop, r = 0.2, moving along x at speed 1: an order parameter on triangles written every
    0.01 (6 files, A) and a volume fraction on quads written every 0.025 (3 files, B), numbered files that
    store no time, and the same files in 'time,path' listings with their output times."""
    tri, quad = delaunay_mesh(1500, seed=4), grid_mesh((40, 40))
    for run, mesh, interval, n in (("a", tri, 0.01, 6), ("b", quad, 0.025, 3)):
        lines = []
        for k in range(n):
            cx = 0.4 + interval * k
            if run == "a":
                phi = np.tanh((0.2 - np.hypot(tri.points[:, 0] - cx, tri.points[:, 1] - 0.5)) / 0.02)
                to_meshio(tri, point_data={"phi": phi}).write(tmp_path / f"a_{k}.vtu")
            else:
                ij = np.minimum((quad.cell_centroids[:, :2] * 40).astype(int), 39)
                alpha = circle_fraction(40, (cx, 0.5), 0.2)[ij[:, 0], ij[:, 1]]
                to_meshio(quad, cell_data={"alpha": alpha}).write(tmp_path / f"b_{k}.vtu")
            lines.append(f"{interval * k:.4g},{run}_{k}.vtu")
        (tmp_path / f"{run}.steps").write_text("\n".join(lines) + "\n")
    return tmp_path


def test_two_snapshots_without_times_pair_without_a_warning_and_a_choice_of_steps_names_the_series(tmp_path):
    # one file each: a snapshot against a snapshot, nothing to pair in time, so no warning; two series of 6 and 3
    # numbered files with every other step chosen of the first (3 rows each): named by their series' step
    # counts (6 and 3: written at other intervals over one span), not by the rows chosen
    import warnings

    folder = _drop_written_at_two_intervals(tmp_path)
    with warnings.catch_warnings():
        warnings.filterwarnings("error", message=".*neither run stores times.*")
        one = compare_runs(RunSpec(str(folder / "a_0.vtu"), "phi", (-1, 1), label="pf"),
                           RunSpec(str(folder / "b_0.vtu"), "alpha", label="vof"), out=folder / "one")
    assert one.warnings == [] and len(one.comparison) == 1
    with pytest.warns(UserWarning, match="neither run stores times") as caught:
        compare_runs(RunSpec(str(folder / "a_*.vtu"), "phi", (-1, 1), label="pf", steps="::2"),
                     RunSpec(str(folder / "b_*.vtu"), "alpha", label="vof"), out=folder / "sub")
    said = next(str(w.message) for w in caught if "neither run" in str(w.message))
    assert "pf's series has 6 steps, vof's 3" in said
    # the same series of 6 as both runs, every other step of one: written at one interval, no such clause
    with pytest.warns(UserWarning, match="neither run stores times") as caught:
        compare_runs(RunSpec(str(folder / "a_*.vtu"), "phi", (-1, 1), label="pf"),
                     RunSpec(str(folder / "a_*.vtu"), "phi", (-1, 1), label="again", steps="::2"), out=folder / "same")
    said = next(str(w.message) for w in caught if "neither run" in str(w.message))
    assert "series has" not in said and "other intervals" not in said


def test_runs_without_times_are_said_to_pair_by_step_number(tmp_path):
    folder = _drop_written_at_two_intervals(tmp_path)
    ref = folder / "ref.csv"  # the disc area pi r^2 = 0.125664 (exact geometry), at a time and as an extreme
    ref.write_text("quantity,time,value,tolerance\nphase_volume,0.05,0.125664,0.004\n"
                   "max:phase_volume,,0.125664,0.004\n")
    with pytest.warns(UserWarning, match="neither run stores times: steps paired by number") as caught:
        numbered = compare_runs(RunSpec(str(folder / "a_*.vtu"), "phi", (-1, 1), label="pf"),
                                RunSpec(str(folder / "b_*.vtu"), "alpha", label="vof"), out=folder / "n",
                                reference_table=str(ref))
    said = next(str(w.message) for w in caught if "neither run" in str(w.message))
    assert "pf's series has 6 steps, vof's 3" in said and "give `time,path` listings with the output times" in said
    assert numbered.paired_by == "step number" and numbered.warnings == [said]
    manifest = json.loads((folder / "n" / "manifest.json").read_text())
    assert manifest["paired_by"] == "step number" and manifest["comparison_warnings"] == [said]
    report = (folder / "n" / "report.html").read_text()
    assert "neither run stores times: steps paired by number" in report and "paired by step number" in report
    # step 2 of A (t = 0.02) against step 2 of B (t = 0.05): the drop travelled 0.03 between them (analytic),
    # read as a shape difference (measured 0.0325; less half a cell of B, 1/80: our threshold)
    assert numbered.comparison["hausdorff"].iloc[2] > 0.03 - 1 / 80
    # a check at a time reads a step number as the time: not applicable; an extreme's value stands
    checks = numbered.reference_checks.set_index("quantity")
    assert checks.loc["phase_volume", "verdict"] == "not_applicable" and "stores no times" in \
        checks.loc["phase_volume", "note"]
    assert "stores no times" not in str(checks.loc["max:phase_volume", "note"])  # (its own reason: at an end)
    # with the output times given, t = 0 and t = 0.05 pair: the same drop at the same time (analytic),
    # its interfaces within a cell of run B, 1/40 (measured 0.012 and 0.011), and no note
    timed = compare_runs(RunSpec(str(folder / "a.steps"), "phi", (-1, 1), label="pf"),
                         RunSpec(str(folder / "b.steps"), "alpha", label="vof"))
    assert timed.paired_by == "time" and not timed.warnings
    assert list(timed.comparison["time"]) == [0.0, 0.05] and (timed.comparison["hausdorff"] < 1 / 40).all()
