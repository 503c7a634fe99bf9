"""Reliability: every bad input is refused in one clear line, bad steps are skipped or (strict) refused.

The corpus of bad inputs is generated here, in ``tmp_path``, from one small good case
(a disc of phase on a triangle mesh, written by meshio). Each case goes through the command
line and must give exactly one line on stderr that names the file, the step and the fix, exit
status 2 and no traceback (issue 10; DESIGN.md "Errors"). Cases a long series can go on past
are skipped with one warning line each, recorded in report.html and manifest.json.
"""

import json
import os
import shutil
import subprocess
import sys

import meshio
import numpy as np
import pytest
from click.testing import CliRunner

from phasegauge.cli import main
from phasegauge.meshgen import grid_mesh, to_meshio

COMPARE_WORKS = True

MESH = grid_mesh((8, 8), kind="triangle")
_X = MESH.cell_centroids
DISC = 0.5 * (1 + np.tanh((0.25 - np.hypot(_X[:, 0] - 0.5, _X[:, 1] - 0.5)) / 0.05))
FAST = ["--analyses", "conservation", "--no-contours", "-q"]


# ------------------------------------------------------------------ corpus builders
def _good(path, cell=None, point=None, **kw):
    to_meshio(MESH, point_data=point, cell_data={"alpha": DISC} if cell is None and point is None else cell
              ).write(path, **kw)
    return str(path)


def _truncated(path, **kw):
    _good(path, **kw)
    data = open(path, "rb").read()
    with open(path, "wb") as f:
        f.write(data[: len(data) // 2])
    return str(path)


def _folder(tmp_path, name, count=4, bad=None, make_bad=None):
    folder = tmp_path / name
    folder.mkdir()
    for k in range(count):
        path = folder / f"s_{k}.vtu"
        if k == bad:
            make_bad(path)
        else:
            _good(path)
    return str(folder)


def _xdmf_series(folder, steps=3):
    """A meshio XDMF time series (ts.xdmf + ts.h5) in ``folder``."""
    old = os.getcwd()
    os.chdir(folder)  # meshio's TimeSeriesWriter puts the HDF5 file in the working folder
    try:
        m = to_meshio(MESH)
        with meshio.xdmf.TimeSeriesWriter("ts.xdmf") as w:
            w.write_points_cells(m.points, m.cells)
            for k in range(steps):
                w.write_data(0.1 * k, cell_data={"alpha": [DISC]})
    finally:
        os.chdir(old)
    return str(folder / "ts.xdmf")


def _write_listing(folder, lines):
    path = folder / "run.steps"
    path.write_text("".join(f"{t},{f}\n" for t, f in lines))
    return str(path)


# ------------------------------------------------------------------ running the command line
def _cli(args):
    """Run the command line in this process: (exit status, stderr lines, stdout)."""
    res = CliRunner().invoke(main, [str(a) for a in args])
    if res.exception is not None and not isinstance(res.exception, SystemExit):
        raise AssertionError(f"exception escaped the command line: {res.exception!r}")
    return res.exit_code, [ln for ln in res.stderr.splitlines() if ln.strip()], res.stdout


def _assert_one_error_line(args, *needles):
    code, err, out = _cli(args)
    assert code == 2, (code, err)
    assert len(err) == 1, err
    line = err[0]
    assert line.startswith("phasegauge: error: "), line
    assert "Traceback" not in line + out
    assert "; " in line, f"no fix in: {line}"  # where: what; fix
    for needle in needles:
        assert needle in line, f"{needle!r} not in: {line}"
    return line


def _warning_lines(err):
    assert all(ln.startswith("phasegauge: warning: ") for ln in err), err
    return err


# ------------------------------------------------------------------ unreadable files: exit 2, one line
CORRUPT_FILES = {
    # name: (builder, words the one line must hold)
    "empty.vtu": (lambda p: open(p, "wb").close(), ["the file is empty"]),
    "binary.vtu": (lambda p: _truncated(p, binary=True), ["truncated"]),
    "ascii.vtu": (lambda p: _truncated(p, binary=False), ["truncated"]),
    "binary.vtk": (lambda p: _truncated(p, binary=True), ["ends early or is damaged"]),
    "ascii.vtk": (lambda p: _truncated(p, binary=False), ["ends early or is damaged"]),
    "text.vtu": (lambda p: open(p, "w").write("solver log: step 3 done\n"),
                 ["not a VTK XML file", "solver log"]),
    "text.vtk": (lambda p: open(p, "w").write("solver log: step 3 done\n"), ["not a legacy VTK file"]),
    "legacy.vtu": (lambda p: (_good(str(p) + ".vtk"), os.replace(str(p) + ".vtk", p)), ["rename it to .vtk"]),
}


@pytest.mark.parametrize("name", sorted(CORRUPT_FILES))
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_unreadable_file_one_line(tmp_path, name, command):
    build, words = CORRUPT_FILES[name]
    path = tmp_path / name
    build(path)
    args = ["inspect", path] if command == "inspect" else ["measure", path, "-f", "alpha", "-o", tmp_path / "o"]
    _assert_one_error_line(args, f"{name}, step 0", *words)
    # a run that failed before any step was done leaves no output folder behind
    assert not (tmp_path / "o").exists()


def test_text_that_is_not_a_listing(tmp_path):
    notes = tmp_path / "notes.txt"
    notes.write_text("this run diverged, see log\n")
    _assert_one_error_line(["inspect", notes], "notes.txt", "line 1 is not 'time,path'")


def test_missing_path(tmp_path):
    _assert_one_error_line(["measure", tmp_path / "run_0001.vtu", "-f", "alpha", "-o", tmp_path / "o"],
                           "run_0001.vtu", "file not found", "check the path")


# ------------------------------------------------------------------ XDMF + HDF5
def test_xdmf_missing_hdf5(tmp_path):
    xdmf = _xdmf_series(tmp_path)
    os.remove(tmp_path / "ts.h5")
    _assert_one_error_line(["inspect", xdmf], "ts.xdmf, step 0", "'ts.h5' that ts.xdmf names is missing",
                           "put ts.h5 back")
    line = _assert_one_error_line(["measure", xdmf, "-f", "alpha", "-o", tmp_path / "o"],
                                  "ts.xdmf, step 0", "is missing")
    assert "all 3 failed" in line


def test_xdmf_truncated_hdf5(tmp_path):
    xdmf = _xdmf_series(tmp_path)
    data = (tmp_path / "ts.h5").read_bytes()
    (tmp_path / "ts.h5").write_bytes(data[: len(data) // 2])
    _assert_one_error_line(["measure", xdmf, "-f", "alpha", "-o", tmp_path / "o"],
                           "ts.xdmf, step 0", "'ts.h5' is truncated", f"{len(data) // 2} of {len(data)} bytes")


def test_xdmf_with_one_hdf5_file_per_step_skips_the_missing_one(tmp_path):
    import h5py

    grids = []
    for i in range(3):
        with h5py.File(tmp_path / f"d{i}.h5", "w") as f:
            f["p"] = MESH.points
            f["c"] = MESH.blocks[0].connectivity
            f["alpha"] = DISC
        grids.append(f"""<Grid Name="g{i}" GridType="Uniform"><Time Value="{0.5 * i}"/>
<Topology TopologyType="Triangle" NumberOfElements="{MESH.n_cells}"><DataItem Dimensions="{MESH.n_cells} 3"
 NumberType="Int" Precision="8" Format="HDF">d{i}.h5:/c</DataItem></Topology>
<Geometry GeometryType="XYZ"><DataItem Dimensions="{MESH.n_points} 3" NumberType="Float" Precision="8"
 Format="HDF">d{i}.h5:/p</DataItem></Geometry>
<Attribute Name="alpha" AttributeType="Scalar" Center="Cell"><DataItem Dimensions="{MESH.n_cells}"
 NumberType="Float" Precision="8" Format="HDF">d{i}.h5:/alpha</DataItem></Attribute></Grid>""")
    (tmp_path / "run.xdmf").write_text(
        '<?xml version="1.0"?><Xdmf Version="3.0"><Domain><Grid Name="TimeSeries" GridType="Collection" '
        'CollectionType="Temporal">' + "".join(grids) + "</Grid></Domain></Xdmf>")
    os.remove(tmp_path / "d1.h5")
    code, err, _ = _cli(["measure", tmp_path / "run.xdmf", "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert "run.xdmf, step 1: step skipped: the HDF5 file 'd1.h5' that run.xdmf names is missing" in line
    import pandas as pd

    assert list(pd.read_csv(tmp_path / "o" / "steps.csv")["time"]) == [0.0, 1.0]


def test_single_xdmf_missing_hdf5(tmp_path):
    to_meshio(MESH, cell_data={"alpha": DISC}).write(tmp_path / "one.xdmf")
    os.remove(tmp_path / "one.h5")
    _assert_one_error_line(["inspect", tmp_path / "one.xdmf"], "one.xdmf, step 0", "'one.h5'", "missing")


def test_truncated_xdmf_text(tmp_path):
    xdmf = _xdmf_series(tmp_path)
    text = open(xdmf).read()
    open(xdmf, "w").write(text[: len(text) // 2])
    _assert_one_error_line(["inspect", xdmf], "ts.xdmf", "not a readable XDMF file")


# ------------------------------------------------------------------ fields
def test_missing_field(tmp_path):
    path = _good(tmp_path / "a.vtu")
    _assert_one_error_line(["measure", path, "-f", "phi", "-o", tmp_path / "o"],
                           "a.vtu, step 0", "field 'phi' not found; fields there: alpha", "--field")


def test_missing_field_stops_a_long_series_at_once(tmp_path):
    # the first step is analysed before any other: a wrong name is one line, not a warning per step
    folder = _folder(tmp_path, "run", count=5)
    line = _assert_one_error_line(["measure", folder, "-f", "phi", "-o", tmp_path / "o", "-j", "2"],
                                  "s_0.vtu, step 0", "field 'phi' not found")
    assert "failed" not in line


def test_vector_field_where_a_scalar_is_needed(tmp_path):
    path = _good(tmp_path / "v.vtu", cell={"alpha": np.stack([DISC] * 3, axis=1)})
    _assert_one_error_line(["measure", path, "-f", "alpha", "-o", tmp_path / "o"],
                           "v.vtu, step 0", "3 components where a scalar is needed", "'alpha[0]'")
    # one component of it is accepted
    code, err, _ = _cli(["measure", path, "-f", "alpha[0]", "-o", tmp_path / "o2"] + FAST)
    assert code == 0 and err == []


def test_all_nan_field(tmp_path):
    path = _good(tmp_path / "n.vtu", cell={"alpha": np.full(MESH.n_cells, np.nan)})
    _assert_one_error_line(["measure", path, "-f", "alpha", "-o", tmp_path / "o"],
                           "n.vtu, step 0", "no finite values", "diverged")


@pytest.mark.parametrize("location", ["cell", "point"])
def test_partly_nan_and_inf_field_warns_and_is_recorded(tmp_path, location):
    n = MESH.n_cells if location == "cell" else MESH.n_points
    values = DISC.copy() if location == "cell" else MESH.cell_to_point(DISC)
    values[:5] = np.nan
    values[5:8] = np.inf
    path = _good(tmp_path / "p.vtu", **{location: {"alpha": values}})
    code, err, _ = _cli(["measure", path, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    assert _warning_lines(err) == ["phasegauge: warning: p.vtu, step 0: field 'alpha' has 8 NaN or Inf values; "
                                   "they are left out of every integral"]
    manifest = json.loads((tmp_path / "o" / "manifest.json").read_text())
    assert any("8 NaN or Inf" in w for w in manifest["warnings"])
    assert any("8 NaN or Inf" in f for f in manifest["flags"])
    assert "8 NaN or Inf" in (tmp_path / "o" / "report.html").read_text()
    assert n > 8


def test_range_that_does_not_fit_warns(tmp_path):
    # an order parameter in [-1, 1] mapped with the default range 0,1
    path = _good(tmp_path / "phi.vtu", cell={"phi": 2 * DISC - 1})
    code, err, _ = _cli(["measure", path, "-f", "phi", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert "phi.vtu, step 0" in line and "but the range is [0, 1]" in line and "--range -1,1" in line
    assert "--range -1,1" in (tmp_path / "o" / "report.html").read_text()
    code, err, _ = _cli(["measure", path, "-f", "phi", "--range", "-1,1", "-o", tmp_path / "o2"] + FAST)
    assert code == 0 and err == []


# ------------------------------------------------------------------ meshes
def _raw(path, points, triangles, cell=None):
    meshio.Mesh(points, [("triangle", triangles)], cell_data={"alpha": [DISC if cell is None else cell]}).write(path)
    return str(path)


def test_inverted_cells_warn_and_keep_the_volume(tmp_path):
    tri = MESH.blocks[0].connectivity.copy()
    tri[:3] = tri[:3, ::-1]
    path = _raw(tmp_path / "inv.vtu", MESH.points, tri)
    code, err, _ = _cli(["measure", path, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    assert _warning_lines(err) == ["phasegauge: warning: inv.vtu, step 0: 3 cells are inverted (corners in the "
                                   "opposite order to the rest); the magnitude of their area is used"]
    good = _good(tmp_path / "good.vtu")
    _cli(["measure", good, "-f", "alpha", "-o", tmp_path / "ref"] + FAST)
    assert (tmp_path / "o" / "steps.csv").read_text() == (tmp_path / "ref" / "steps.csv").read_text()


def test_zero_volume_cell_warns(tmp_path):
    tri = MESH.blocks[0].connectivity.copy()
    tri[0] = [tri[0, 0], tri[0, 1], tri[0, 1]]
    path = _raw(tmp_path / "flat.vtu", MESH.points, tri)
    code, err, _ = _cli(["measure", path, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert "flat.vtu, step 0: 1 cell has zero area" in line


def test_mesh_without_area_is_refused(tmp_path):
    path = _raw(tmp_path / "collapsed.vtu", np.zeros_like(MESH.points), MESH.blocks[0].connectivity)
    _assert_one_error_line(["measure", path, "-f", "alpha", "-o", tmp_path / "o"],
                           "collapsed.vtu, step 0", "the cells have no area")


def test_duplicate_points_are_merged(tmp_path):
    # every triangle stores its own three corners (as some solvers write): neighbours share no point
    tri = MESH.blocks[0].connectivity
    soup = MESH.points[tri].reshape(-1, 3)
    path = _raw(tmp_path / "soup.vtu", soup, np.arange(soup.shape[0]).reshape(-1, 3))
    code, err, out = _cli(["measure", path, "-f", "alpha", "-o", tmp_path / "o", "-q", "--no-contours"])
    assert code == 0
    # every cell its own corners, no point field to disagree: a layout, said as an info line, not a warning
    assert _warning_lines(err) == []
    assert f"their own copies of their corners: {soup.shape[0] - MESH.n_points} copies merged" in out
    good = _good(tmp_path / "good.vtu")
    _cli(["measure", good, "-f", "alpha", "-o", tmp_path / "ref", "-q", "--no-contours"])
    import pandas as pd

    got, ref = pd.read_csv(tmp_path / "o" / "steps.csv"), pd.read_csv(tmp_path / "ref" / "steps.csv")
    # merged, the mesh is the shared-corner mesh: one droplet and the same interface, not one droplet per cell
    assert got["droplet_count"][0] == 1
    for column in ("phase_volume", "interface_size", "droplet_count", "segregation_intensity"):
        assert got[column][0] == pytest.approx(ref[column][0], rel=1e-12), column


def test_duplicate_points_average_point_data(tmp_path):
    from phasegauge.io import Series

    tri = MESH.blocks[0].connectivity
    soup = MESH.points[tri].reshape(-1, 3)
    phi = np.repeat(np.arange(len(tri), dtype=float), 3)  # each copy of a point carries its cell's number
    meshio.Mesh(soup, [("triangle", np.arange(soup.shape[0]).reshape(-1, 3))],
                point_data={"phi": phi}).write(tmp_path / "soup.vtu")
    with pytest.warns(Warning, match="duplicate points merged"):
        step = Series(tmp_path / "soup.vtu").read(0)
    assert step.mesh.n_points == MESH.n_points
    # each merged point holds the mean of the numbers of the cells around it
    expected = np.bincount(tri.ravel(), weights=np.repeat(np.arange(len(tri)), 3), minlength=MESH.n_points) \
        / np.bincount(tri.ravel(), minlength=MESH.n_points)
    pts = step.mesh.points
    lookup = {tuple(p): i for i, p in enumerate(MESH.points)}
    order = np.array([lookup[tuple(p)] for p in pts])
    assert np.allclose(step.fields.point_data["phi"], expected[order])
    # the merged mesh is built once and reused by the next step of the same layout
    shutil.copy(tmp_path / "soup.vtu", tmp_path / "soup_2.vtu")
    os.rename(tmp_path / "soup.vtu", tmp_path / "soup_1.vtu")
    with pytest.warns(Warning, match="duplicate points merged"):
        series = Series(tmp_path)
        first, second = series.read(0), series.read(1)
    assert first.mesh is second.mesh
    assert np.array_equal(second.fields.point_data["phi"], step.fields.point_data["phi"])


def test_unused_duplicate_points_are_harmless(tmp_path):
    points = np.vstack([MESH.points, MESH.points[:10]])
    path = _raw(tmp_path / "dup.vtu", points, MESH.blocks[0].connectivity)
    code, err, _ = _cli(["measure", path, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0 and "10 duplicate points merged" in " ".join(err)


# ------------------------------------------------------------------ series
@pytest.mark.parametrize("bad", [0, 2])
def test_long_series_skips_a_truncated_step_and_records_it(tmp_path, bad):
    folder = _folder(tmp_path, "run", count=5, bad=bad, make_bad=lambda p: _truncated(p, binary=True))
    out = tmp_path / "o"
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", out] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert f"s_{bad}.vtu, step {bad}: step skipped:" in line and "truncated" in line
    manifest = json.loads((out / "manifest.json").read_text())
    assert len(manifest["skipped_steps"]) == 1 and f"s_{bad}.vtu, step {bad}" in manifest["skipped_steps"][0]
    assert "Skipped steps" in (out / "report.html").read_text()
    import pandas as pd

    assert list(pd.read_csv(out / "steps.csv")["step"]) == [k for k in range(5) if k != bad]
    # strict: the same step stops the run
    _assert_one_error_line(["measure", folder, "-f", "alpha", "-o", tmp_path / "strict", "--strict"] + FAST,
                           f"s_{bad}.vtu, step {bad}", "truncated")
    # inspect describes the other steps and names the bad one
    code, err, out_text = _cli(["inspect", folder])
    assert code == 0 and f"unreadable  1 step(s): s_{bad}.vtu, step {bad}" in out_text
    (line,) = _warning_lines(err)
    assert f"s_{bad}.vtu, step {bad}" in line


def test_failure_inside_names_the_step_exit_1(tmp_path, monkeypatch):
    import phasegauge.run.step as pipeline

    folder = _folder(tmp_path, "run", count=3)
    real = pipeline.analyse_step

    def broken(step, options, **kw):
        if step.index == 1:
            return 1 / 0
        return real(step, options, **kw)

    monkeypatch.setattr(pipeline, "analyse_step", broken)
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 1 and len(err) == 1
    assert err[0].startswith("phasegauge: error: s_1.vtu, step 1: ZeroDivisionError: division by zero")
    assert "rerun with --debug" in err[0]
    res = CliRunner().invoke(main, ["--debug", "measure", folder, "-f", "alpha", "-o", str(tmp_path / "d")] + FAST)
    # --debug lets the error through, with the original failure as its cause (the traceback to report)
    causes, exc = [], res.exception
    while exc is not None:
        causes.append(type(exc))
        exc = exc.__cause__
    assert ZeroDivisionError in causes


def test_many_bad_steps_give_one_warning_line(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    for k in range(6):
        _good(folder / f"s_{k}.vtu", cell={"alpha": DISC if k < 2 else np.full(MESH.n_cells, np.nan)})
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert "s_2.vtu, step 2: step skipped: field 'alpha' has no finite values" in line
    assert line.endswith("(and 3 more steps)")
    manifest = json.loads((tmp_path / "o" / "manifest.json").read_text())
    assert len(manifest["skipped_steps"]) == 4


def test_listing_naming_a_missing_file(tmp_path):
    for k in range(3):
        _good(tmp_path / f"s_{k}.vtu")
    listing = _write_listing(tmp_path, [(0.0, "s_0.vtu"), (0.1, "s_1.vtu"), (0.2, "gone.vtu"), (0.3, "s_2.vtu")])
    code, err, _ = _cli(["measure", listing, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert "gone.vtu, step 2: step skipped: the step's file is missing (named in run.steps)" in line
    assert "remove its line from the listing" in line
    _assert_one_error_line(["measure", listing, "-f", "alpha", "-o", tmp_path / "s", "--strict"],
                           "gone.vtu, step 2", "missing")
    code, err, out = _cli(["inspect", listing])
    assert code == 0 and "unreadable  1 step(s): gone.vtu, step 2" in out
    (line,) = _warning_lines(err)
    assert "gone.vtu, step 2" in line


def test_listing_whose_files_are_all_missing(tmp_path):
    listing = _write_listing(tmp_path, [(0.0, "a.vtu"), (0.1, "b.vtu")])
    _assert_one_error_line(["measure", listing, "-f", "alpha", "-o", tmp_path / "o"],
                           "run.steps", "none of the 2 files the listing names exists",
                           "relative to the listing's folder")


def test_numbered_folder_with_a_gap_warns(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    for k in (0, 1, 2, 4, 5):
        _good(folder / f"out_{k:04d}.vtu")
    out = tmp_path / "o"
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", out] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert "the file numbers jump (2 to 4)" in line and "give a 'time,path' listing" in line
    manifest = json.loads((out / "manifest.json").read_text())
    assert any("jump (2 to 4)" in f for f in manifest["flags"])
    code, err, _ = _cli(["inspect", folder])
    assert code == 0 and len(err) == 1 and "jump (2 to 4)" in err[0]


def test_numbering_gaps_rule():
    from phasegauge.io._series_gaps import numbering_gaps

    names = lambda nums: [f"run_{n}.vtu" for n in nums]  # noqa: E731
    assert numbering_gaps(names([0, 1, 2, 3])) == []
    assert numbering_gaps(names([0, 10, 20, 40, 50])) == [(20, 40)]
    # an output interval that changes reads as one gap, at the change
    assert numbering_gaps(names([0, 10, 20, 40, 60, 80])) == [(20, 40), (40, 60), (60, 80)][:3]
    assert numbering_gaps(names([0, 5, 10]) + ["other_1.vtu", "other_9.vtu"]) == []


def test_times_that_do_not_increase(tmp_path):
    for k in range(3):
        _good(tmp_path / f"s_{k}.vtu")
    listing = _write_listing(tmp_path, [(0.0, "s_0.vtu"), (0.2, "s_1.vtu"), (0.1, "s_2.vtu")])
    _assert_one_error_line(["measure", listing, "-f", "alpha", "-o", tmp_path / "o"],
                           "s_2.vtu, step 2", "times do not increase", "0.1 after 0.2",
                           "correct the times in run.steps")
    code, err, _ = _cli(["inspect", listing])
    assert code == 0 and len(err) == 1 and "times do not increase" in err[0]


def test_mesh_that_changes(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    _good(folder / "s_0.vtu")
    fine = grid_mesh((12, 12), kind="quad")
    c = fine.cell_centroids
    to_meshio(fine, cell_data={"alpha": 0.5 * (1 + np.tanh((0.25 - np.hypot(c[:, 0] - 0.5, c[:, 1] - 0.5)) / 0.05))}
              ).write(folder / "s_1.vtu")
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    (line,) = _warning_lines(err)
    assert "the mesh changes between steps (at step 1; 2 meshes)" in line
    code, _, out = _cli(["inspect", folder])
    assert code == 0 and "mesh changes between steps" in out


def test_series_that_changes_dimension(tmp_path):
    folder = tmp_path / "run"
    folder.mkdir()
    for k, m in enumerate([MESH, grid_mesh((3, 3, 3)), MESH]):
        to_meshio(m, cell_data={"alpha": (m.cell_centroids[:, 0] > 0.5).astype(float)}).write(folder / f"s_{k}.vtu")
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0
    assert any("s_1.vtu, step 1: step skipped: the mesh is 3D but at step 0 it is 2D" in ln for ln in err)
    _assert_one_error_line(["measure", folder, "-f", "alpha", "-o", tmp_path / "s", "--strict"] + FAST,
                           "s_1.vtu, step 1", "the mesh is 3D")


def test_unreadable_step_with_time_in_the_file(tmp_path):
    # VTK's own writers store the time as field data; a truncated file's time cannot be known
    import pyvista as pv

    folder = tmp_path / "run"
    folder.mkdir()
    _good(tmp_path / "base.vtu")
    grid = pv.read(tmp_path / "base.vtu")
    for k in range(3):
        grid.field_data["TimeValue"] = np.array([0.5 * k])
        grid.save(folder / f"s_{k}.vtu")
    data = (folder / "s_1.vtu").read_bytes()
    (folder / "s_1.vtu").write_bytes(data[: len(data) // 2])
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    assert code == 0 and len(err) == 1 and "s_1.vtu, step 1: step skipped" in err[0]
    import pandas as pd

    assert list(pd.read_csv(tmp_path / "o" / "steps.csv")["time"]) == [0.0, 1.0]
    code, _, out = _cli(["inspect", folder, "--json"])
    assert code == 0 and json.loads(out)["times"] == [0.0, None, 1.0]


# ------------------------------------------------------------------ output folders
def test_output_under_a_regular_file(tmp_path):
    # tests run as root, where chmod does not stop writing: a path whose parent is a file cannot be a folder
    path = _good(tmp_path / "a.vtu")
    blocker = tmp_path / "results"
    blocker.write_text("not a folder")
    _assert_one_error_line(["measure", path, "-f", "alpha", "-o", blocker / "out"], "results/out",
                           "cannot be written", "choose an output folder")
    _assert_one_error_line(["measure", path, "-f", "alpha", "-o", blocker], "results", "exists and is not a folder")
    _assert_one_error_line(["samples", blocker / "s", "--only", "vortex_upwind"], "results/s", "cannot be created")
    if COMPARE_WORKS:
        _assert_one_error_line(["compare", path, path, "--field-a", "alpha", "--field-b", "alpha", "-o",
                                blocker / "c"], "results/c", "cannot be written")
    assert blocker.read_text() == "not a folder"


def test_existing_output_is_refused_in_one_line(tmp_path):
    path = _good(tmp_path / "a.vtu")
    assert _cli(["measure", path, "-f", "alpha", "-o", tmp_path / "o"] + FAST)[0] == 0
    _assert_one_error_line(["measure", path, "-f", "alpha", "-o", tmp_path / "o"] + FAST,
                           "output folder exists", "--overwrite")


def test_warnings_from_other_libraries_only_with_debug(tmp_path):
    import warnings

    @main.command("warn-test")
    def warn_test():
        warnings.warn("invalid value encountered in divide", RuntimeWarning)

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("always")
            code, err, _ = _cli(["warn-test"])
            assert code == 0 and err == []
            code, err, _ = _cli(["--debug", "warn-test"])
            assert code == 0 and len(err) == 1 and "RuntimeWarning: invalid value" in err[0]
    finally:
        main.commands.pop("warn-test")


# ------------------------------------------------------------------ a real process
def _run(args, cwd=None):
    from conftest import subprocess_env

    return subprocess.run([sys.executable, "-m", "phasegauge"] + [str(a) for a in args], capture_output=True,
                          text=True, env=subprocess_env(), cwd=cwd, timeout=300)


def test_subprocess_error_and_warning_lines(tmp_path):
    empty = tmp_path / "empty.vtu"
    empty.write_bytes(b"")
    proc = _run(["inspect", empty])
    assert proc.returncode == 2 and proc.stderr.splitlines() == [
        "phasegauge: error: empty.vtu, step 0: the file is empty; the solver may have been stopped while writing; "
        "rewrite or remove the step"]
    folder = _folder(tmp_path, "run", count=3, bad=1, make_bad=lambda p: _truncated(p, binary=False))
    proc = _run(["measure", folder, "-f", "alpha", "-o", tmp_path / "o"] + FAST)
    lines = proc.stderr.splitlines()
    assert proc.returncode == 0 and len(lines) == 1 and lines[0].startswith("phasegauge: warning: s_1.vtu, step 1")
    assert "Traceback" not in proc.stderr


# ------------------------------------------------------------------ regions and options that cannot be right
REGION_CASES = {
    # name: (extra arguments, words the one line must hold); the mesh is the unit square
    "box outside the mesh": (["--box", "5,6,5,6"], ["s_0.vtu, step 0", "the box lies outside the mesh along x"]),
    "sections outside the mesh": (["--section-axis", "x", "--section-positions", "5,6"],
                                  ["s_0.vtu, step 0", "section positions 5, 6 lie outside the mesh"]),
    "positions without an axis": (["--section-positions", "0.5"], ["without a section axis"]),
    "negative snapshots": (["--snapshots", "-1"], ["snapshots must be a whole number of 0 or more"]),
}


@pytest.mark.parametrize("name", sorted(REGION_CASES))
def test_regions_and_options_that_cannot_be_right_are_refused(tmp_path, name):
    """A region outside the mesh gave blank columns with exit 0; now one line and exit 2, nothing written."""
    extra, needles = REGION_CASES[name]
    folder = _folder(tmp_path, "in", count=2)
    _assert_one_error_line(["measure", folder, "-f", "alpha", "-o", tmp_path / "o", *extra], *needles)
    assert not (tmp_path / "o").exists()


def test_output_folder_that_mixes_with_the_input_is_refused_before_any_write(tmp_path):
    """An output inside a folder series would be read as steps next time; an input inside the output
    would be removed by --overwrite. Both are refused before anything is written."""
    folder = _folder(tmp_path, "in", count=2)
    _assert_one_error_line(["measure", folder, "-f", "alpha", "-o", tmp_path / "in" / "o"],
                           "the output folder is inside the input folder")
    assert sorted(os.listdir(folder)) == ["s_0.vtu", "s_1.vtu"]
    (tmp_path / "o").mkdir()
    step = _good(tmp_path / "o" / "one.vtu")
    _assert_one_error_line(["measure", step, "-f", "alpha", "-o", tmp_path / "o", "--overwrite"],
                           "the output folder holds the input file one.vtu")
    assert os.path.exists(step)


def test_recipe_values_of_the_wrong_form_are_refused_with_the_recipe_key(tmp_path):
    """A flat number where the box wants pairs ended as "'int' object is not iterable" (exit 1)."""
    recipe = tmp_path / "r.toml"
    recipe.write_text(f'[input]\npath = "{_good(tmp_path / "a.vtu")}"\nfield = "alpha"\n'
                      '[mixing]\nbox = [5, 6]\n[output]\nfolder = "o"\n')
    _assert_one_error_line(["run", recipe], "[mixing] box has a value of the wrong form", "box = [[xmin, xmax]")
    recipe.write_text(f'[input]\npath = "{tmp_path / "a.vtu"}"\nfield = "alpha"\n'
                      '[mixing]\nsection_positions = [0.5]\n[output]\nfolder = "o"\n')
    _assert_one_error_line(["run", recipe], "[mixing] section_positions are given without section_axis")


# ------------------------------------------------------------------ series that change under the run
def test_a_resume_refuses_a_step_whose_file_changed_and_says_when_nothing_is_left(tmp_path):
    """The cache keys each step by its file's SHA-256 (hashlib); another key for a cached step means
    the file changed since the interrupted run: refused, not silently mixed."""
    folder = _folder(tmp_path, "in", count=3)
    out = tmp_path / "o"
    code, err, _ = _cli(["measure", folder, "-f", "alpha", "-o", out, "--quiet", "--keep-cache"])
    assert code == 0, err
    code, err, stdout = _cli(["measure", folder, "-f", "alpha", "-o", out, "--resume", "--keep-cache"])
    assert code == 0, err
    assert "every step was finished before, nothing was computed again" in stdout
    _good(os.path.join(folder, "s_1.vtu"), cell={"alpha": 0.5 * DISC})
    _assert_one_error_line(["measure", folder, "-f", "alpha", "-o", out, "--resume", "--quiet"],
                           "s_1.vtu", "changed since the run that is being resumed read it", "--overwrite")


def test_a_file_that_changes_while_the_run_reads_it_is_refused(tmp_path, monkeypatch):
    """A solver still writing the series: a step file rewritten during the run (size and mtime, os.stat)."""
    import phasegauge.run.executors as executors

    folder = _folder(tmp_path, "in", count=3)
    real = executors.run_steps

    def run_then_touch(*args, **kwargs):
        results = real(*args, **kwargs)
        _good(os.path.join(folder, "s_2.vtu"), cell={"alpha": 0.25 * DISC})
        os.utime(os.path.join(folder, "s_2.vtu"), ns=(1, 1))
        return results

    monkeypatch.setattr(executors, "run_steps", run_then_touch)
    _assert_one_error_line(["measure", folder, "-f", "alpha", "-o", tmp_path / "o", "--quiet"],
                           "1 input file changed while the run read it (s_2.vtu)")


def test_cells_crossed_by_their_corner_order_are_named(tmp_path):
    # every quad listed (0, 1, 3, 2): a bowtie whose two halves cancel, so no cell has area
    points = np.array([[x, y, 0.0] for y in range(4) for x in range(4)], dtype=float)
    quads = np.array([[4 * j + i, 4 * j + i + 1, 4 * j + i + 5, 4 * j + i + 4] for j in range(3) for i in range(3)])
    crossed = quads[:, [0, 1, 3, 2]]
    path = tmp_path / "crossed.vtu"
    meshio.Mesh(points, [("quad", crossed)], cell_data={"alpha": [np.full(9, 0.5)]}).write(path)
    line = _assert_one_error_line(["measure", str(path), "-f", "alpha", "-o", tmp_path / "o"],
                                  "crossed.vtu, step 0", "the cells have no area")
    assert "in an order that crosses" in line and "list each cell's corners in order" in line


def test_points_on_one_line_are_a_collapsed_mesh(tmp_path):
    # every point on the line y = x: no corner order gives a cell any area
    points = np.array([[t, t, 0.0] for t in np.linspace(0, 1, 16)], dtype=float)
    quads = np.array([[k, k + 1, k + 5, k + 4] for k in range(9)])
    path = tmp_path / "line.vtu"
    meshio.Mesh(points, [("quad", quads)], cell_data={"alpha": [np.full(9, 0.5)]}).write(path)
    line = _assert_one_error_line(["measure", str(path), "-f", "alpha", "-o", tmp_path / "o"],
                                  "line.vtu, step 0", "the cells have no area")
    assert "the points coincide" in line and "order that crosses" not in line


def test_a_nan_point_of_a_2d_mesh_is_named(tmp_path):
    # the plane check reads the bounds, which a NaN point makes NaN: the finite check comes first
    points = np.array([[x, y, 0.0] for y in range(4) for x in range(4)], dtype=float)
    points[6, 0] = np.nan
    quads = np.array([[4 * j + i, 4 * j + i + 1, 4 * j + i + 5, 4 * j + i + 4] for j in range(3) for i in range(3)])
    path = tmp_path / "nan.vtu"
    meshio.Mesh(points, [("quad", quads)], cell_data={"alpha": [np.full(9, 0.5)]}).write(path)
    _assert_one_error_line(["measure", str(path), "-f", "alpha", "-o", tmp_path / "o"],
                           "nan.vtu, step 0", "NaN or Inf coordinates")
