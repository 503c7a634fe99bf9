"""A restarted run: the solver went back to an earlier time and wrote those steps again.

The error says so (how many steps, which times) and names the step choices that measure one copy; the
choice is made before the times are checked, so ``--steps`` measures either run, in VTU series and in
an XDMF collection alike. Times that are merely out of name order are not taken for a restart.
"""

import meshio
import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.errors import SeriesError
from phasegauge.meshgen import grid_mesh

pyvista.OFF_SCREEN = True

FIRST = [round(0.1 * k, 10) for k in range(11)]  # 0 .. 1.0
AGAIN = [round(0.6 + 0.1 * k, 10) for k in range(10)]  # the restart: 0.6 .. 1.5


def _drop(t, mesh):
    centre = mesh.cell_centroids
    return 1.0 / (1.0 + np.exp((np.linalg.norm(centre - 0.5, axis=1) - 0.25) / (0.02 + 0.01 * t)))


def _vtu_series(folder, times):
    folder.mkdir()
    mesh = grid_mesh((12, 12), kind="quad")
    points = np.c_[mesh.points[:, :2], np.zeros(mesh.n_points)]
    for k, t in enumerate(times):
        grid = pyvista.from_meshio(meshio.Mesh(points, [("quad", mesh.blocks[0].connectivity)]))
        grid.cell_data["c"] = _drop(t, mesh)
        grid.field_data["TimeValue"] = np.array([t])  # the time in the file, as VTK writes it
        grid.save(folder / f"out_{k:04d}.vtu")
    return str(folder / "out_*.vtu")


def _xdmf_series(path, times):
    mesh = grid_mesh((12, 12), kind="quad")
    points = np.c_[mesh.points[:, :2], np.zeros(mesh.n_points)]
    with meshio.xdmf.TimeSeriesWriter(path) as writer:
        writer.write_points_cells(points, [("quad", mesh.blocks[0].connectivity)])
        for t in times:
            writer.write_data(t, cell_data={"c": [_drop(t, mesh)]})
    return str(path)


@pytest.mark.parametrize("kind", ["vtu", "xdmf"])
def test_a_restart_is_named_and_either_run_measured(tmp_path, kind, monkeypatch):
    monkeypatch.chdir(tmp_path)  # meshio writes the HDF5 file beside the working folder's XDMF file
    times = FIRST + AGAIN
    path = _vtu_series(tmp_path / "run", times) if kind == "vtu" else _xdmf_series("run.xdmf", times)
    with pytest.raises(SeriesError) as caught:
        phasegauge.measure(path, "c")
    text = caught.value.one_line()
    assert "times go back at step 11 (t = 0.6 after 1 at step 10)" in text
    assert "a restart wrote 5 steps again (t = 0.6 to 1)" in text
    assert "--steps :11" in text and "--steps 11:" in text
    first = phasegauge.measure(path, "c", steps=":11")
    assert first.steps["time"].tolist() == pytest.approx(FIRST)
    restart = phasegauge.measure(path, "c", steps="11:")
    assert restart.steps["time"].tolist() == pytest.approx(AGAIN)


@pytest.mark.parametrize("times", [[0.0, 0.5, 0.1, 0.2, 0.3], [0.0, 0.4, 0.5, 0.1, 0.2, 0.3]])
def test_times_out_of_name_order_are_no_restart(tmp_path, times):
    # no later time repeats an earlier one: the names are out of order (a restart is named as a maybe)
    path = _vtu_series(tmp_path / "run", times)
    with pytest.raises(SeriesError) as caught:
        phasegauge.measure(path, "c")
    text = caught.value.one_line()
    assert "times do not increase" in text and "a restart wrote" not in text and "--sort-by-time" in text


def test_a_restart_that_wrote_one_step_is_named(tmp_path):
    path = _vtu_series(tmp_path / "run", FIRST + [0.6])
    with pytest.raises(SeriesError) as caught:
        phasegauge.measure(path, "c")
    assert "a restart wrote 1 step again (t = 0.6 to 0.6)" in caught.value.one_line()


def test_one_step_written_three_times_is_one_repeated_time(tmp_path):
    path = _vtu_series(tmp_path / "run", [0.0, 0.1, 0.1, 0.1, 0.2, 0.3])
    with pytest.raises(SeriesError) as caught:
        phasegauge.measure(path, "c")
    text = caught.value.one_line()
    assert "times occur twice or more" not in text and "remove the repeated step" in text


def test_sorted_by_time_the_repeated_times_are_counted(tmp_path):
    path = _vtu_series(tmp_path / "run", FIRST + AGAIN)
    with pytest.raises(SeriesError) as caught:
        phasegauge.measure(path, "c", sort_by_time=True)
    assert "5 times occur twice or more (a restart writes steps again)" in caught.value.one_line()
    # a time window that leaves the repeated times out measures the rest
    early = phasegauge.measure(path, "c", sort_by_time=True, time_to=0.5)
    assert early.steps["time"].tolist() == pytest.approx(FIRST[:6])


def test_times_stored_in_some_files_only_are_refused(tmp_path):
    # files 0-2 store their times, 3-5 do not (meshio's writer drops them): seconds and step numbers
    # would be one time axis
    path = _vtu_series(tmp_path / "run", [0.0, 0.1, 0.2, 0.3, 0.4, 0.5])
    mesh = grid_mesh((12, 12), kind="quad")
    points = np.c_[mesh.points[:, :2], np.zeros(mesh.n_points)]
    for k in range(3, 6):
        meshio.Mesh(points, [("quad", mesh.blocks[0].connectivity)],
                    cell_data={"c": [_drop(0.1 * k, mesh)]}).write(tmp_path / "run" / f"out_{k:04d}.vtu")
    with pytest.raises(SeriesError) as caught:
        phasegauge.measure(path, "c")
    text = caught.value.one_line()
    assert "some steps store their times and others do not (step 3 is the first that does not)" in text
    assert len(phasegauge.measure(path, "c", steps=":3").steps) == 3


def test_the_steps_that_store_their_times_measure_with_a_ratio(tmp_path):
    # file 0 (an initial condition written by another tool) stores no time; measured from step 1 on,
    # every step has its own time: the audit's diffusivity is per time, with its ratio
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((40, 40), kind="quad")
    points = np.c_[mesh.points[:, :2], np.zeros(mesh.n_points)]
    r = np.linalg.norm(mesh.cell_centroids - 0.5, axis=1)
    for k in range(8):
        c = 1.0 / (1.0 + np.exp((r - 0.25) / (0.04 + 0.005 * k)))  # a diffuse drop, about 7 cells across
        grid = pyvista.from_meshio(meshio.Mesh(points, [("quad", mesh.blocks[0].connectivity)]))
        grid.cell_data["c"] = c
        if k:
            grid.field_data["TimeValue"] = np.array([0.1 * k])
        grid.save(folder / f"out_{k:04d}.vtu")
    path = str(folder / "out_*.vtu")
    with pytest.raises(SeriesError, match="step 0 is the first that does not"):
        phasegauge.measure(path, "c")
    result = phasegauge.measure(path, "c", steps="1:", diffusivity=1e-3, out=str(tmp_path / "out"))
    assert result.audit["interface_kind"] == "diffuse"
    assert "per step" not in result.audit["verdict"] and np.isfinite(result.audit["D_ratio"])
    import json

    # the manifest names where the measured steps' times came from (not the left-out step 0's)
    manifest = json.loads((tmp_path / "out" / "manifest.json").read_text())
    assert manifest["series"]["time_origin"] == "file"


def test_compare_takes_one_run_of_a_restart_by_its_steps(tmp_path):
    # the restarted series against a clean one of the same times: refused whole, the same drop step
    # for step with --steps-a :11 (one copy of each time; the drops are equal, so Dice is 1)
    from click.testing import CliRunner

    from phasegauge.cli import main
    from phasegauge.run.compare import RunSpec, compare_runs

    restarted = _vtu_series(tmp_path / "run", FIRST + AGAIN)
    clean = _vtu_series(tmp_path / "clean", FIRST)
    with pytest.raises(SeriesError, match="a restart wrote 5 steps again"):
        compare_runs(RunSpec(restarted, "c"), RunSpec(clean, "c"))
    result = compare_runs(RunSpec(restarted, "c", steps=":11"), RunSpec(clean, "c"))
    assert list(result.pairs["time_a"]) == FIRST and list(result.pairs["step_a"]) == list(range(11))
    assert (result.comparison["dice"] > 1 - 1e-12).all()
    run = CliRunner().invoke(main, ["compare", restarted, clean, "--field-a", "c", "--field-b", "c",
                                    "--steps-a", "11:", "-o", str(tmp_path / "c"), "-q"])
    assert run.exit_code == 0, run.output  # the second run: t = 0.6 to 1.5, paired where the clean one has them
    import pandas as pd

    pairs = pd.read_csv(tmp_path / "c" / "pairs.csv")
    assert list(pairs["time_a"]) == AGAIN[:5] and list(pairs["step_a"]) == list(range(11, 16))
    with pytest.raises(phasegauge.errors.OptionError):
        RunSpec(restarted, "c", steps="a:b")
    recipe = tmp_path / "c.toml"
    recipe.write_text(f'[first]\npath = "{restarted}"\nfield = "c"\nsteps = ":11"\n[second]\npath = "{clean}"\n'
                      f'field = "c"\n[output]\nfolder = "{tmp_path / "r"}"\n')
    run = CliRunner().invoke(main, ["run", str(recipe), "-q"])
    assert run.exit_code == 0, run.output
    assert list(pd.read_csv(tmp_path / "r" / "pairs.csv")["step_a"]) == list(range(11))
    recipe.write_text(recipe.read_text().replace('":11"', '"x"'))
    run = CliRunner().invoke(main, ["run", str(recipe), "-q"])
    assert run.exit_code != 0 and "[first] steps" in run.output


def test_compare_checks_each_runs_steps_before_measuring_and_pairs_only_those(tmp_path, monkeypatch):
    from phasegauge.errors import OptionError
    from phasegauge.run import _compare_steps
    from phasegauge.run.compare import RunSpec, compare_runs

    restarted = _vtu_series(tmp_path / "run", FIRST + AGAIN)
    clean = _vtu_series(tmp_path / "clean", FIRST)
    import phasegauge.run.measure as measure_module

    measured = []

    original = measure_module.measure
    monkeypatch.setattr(measure_module, "measure", lambda *a, **k: measured.append(a[0]) or original(*a, **k))
    # a choice that leaves no step, or a restart left in the second run: refused before the first is measured
    with pytest.raises(OptionError, match="widen --steps-b"):
        compare_runs(RunSpec(clean, "c"), RunSpec(restarted, "c", steps="100:"))
    with pytest.raises(SeriesError, match="compare: --steps-a, --steps-b"):
        compare_runs(RunSpec(clean, "c"), RunSpec(restarted, "c"))
    assert measured == []
    # the sampling plan pairs only the chosen steps: the restart's copy of t = 0.6 .. 1.0
    plan = _compare_steps.plan_sampling(phasegauge.io.Series(restarted), phasegauge.io.Series(clean),
                                        chosen=(list(range(11, 21)), None))
    assert plan.steps == (tuple(range(11, 16)), tuple(range(6, 11)))


def test_compare_refuses_step_choices_that_share_no_time(tmp_path):
    from phasegauge.errors import OptionError
    from phasegauge.run.compare import RunSpec, compare_runs

    clean = _vtu_series(tmp_path / "clean", FIRST)
    with pytest.raises(OptionError, match=r"share no time \(the first's t = 0 to 0.2, the second's 0.8 to 1\)"):
        compare_runs(RunSpec(clean, "c", steps=":3"), RunSpec(clean, "c", steps="8:"))


def test_compare_manifest_names_where_each_runs_times_come_from(tmp_path):
    # the first run's times stored in its files, the second's from a listing over the same files (its
    # times win over the stored ones, which are not read): the compare manifest named neither run's
    # origin before (review 42)
    import json

    from phasegauge.run.compare import RunSpec, compare_runs

    first = _vtu_series(tmp_path / "run", FIRST)
    names = sorted(p.name for p in (tmp_path / "run").glob("out_*.vtu"))
    listing = tmp_path / "run" / "clean.steps"
    listing.write_text("time,path\n" + "".join(f"{t},{n}\n" for t, n in zip(FIRST, names)))
    out = tmp_path / "c"
    compare_runs(RunSpec(first, "c", label="stored"), RunSpec(str(listing), "c", label="listed"), out=str(out))
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["time_origin"] == {"stored": "file", "listed": "listing"}
    assert "times from stored: file, listed: listing" in (out / "report.html").read_text()
