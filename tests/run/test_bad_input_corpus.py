"""Reliability, second round (issue 21): a corpus of bad inputs, each refused in one clean line or
skipped with one warning, exit status exact, outputs consistent.

Families: a bad step in a series; times that are not numbers; files the user cannot read;
headers that claim huge sizes; meshes that are wrong but read; messages that misled. The corpus is
built here in ``tmp_path`` from the small good case of ``test_reliability.py``.
"""

import json
import os

import meshio
import numpy as np
import pytest

from test_reliability import DISC, FAST, MESH, _assert_one_error_line, _cli, _good, _warning_lines
from phasegauge.meshgen import to_meshio

CASES = []  # the names of the corpus cases, counted by test_the_corpus_size


def case(name):
    CASES.append(name)
    return name


def _xdmf(folder, fields, times=None, name="ts.xdmf"):
    """A meshio XDMF time series in ``folder``; ``fields[k]`` is step k's cell field."""
    old = os.getcwd()
    os.chdir(folder)
    try:
        m = to_meshio(MESH)
        with meshio.xdmf.TimeSeriesWriter(name) as w:
            w.write_points_cells(m.points, m.cells)
            for k, values in enumerate(fields):
                w.write_data(0.1 * k if times is None else times[k], cell_data={"alpha": [values]})
    finally:
        os.chdir(old)
    return str(folder / name)


def _measure_ok(path, out, *extra):
    code, err, _ = _cli(["measure", path, "--field", "alpha", "-o", out, *FAST, *extra])
    assert code == 0, err
    return _warning_lines(err)


def _recorded(out):
    """The skipped steps as manifest.json records them, and report.html's text."""
    manifest = json.load(open(os.path.join(out, "manifest.json")))
    html = open(os.path.join(out, "report.html")).read()
    return manifest, html


# ------------------------------------------------------------------ 1. a bad step stops or corrupts the run
@pytest.mark.parametrize("short", [case("xdmf field 10 values short"), case("xdmf field 10 values long")])
def test_an_xdmf_step_with_a_field_of_the_wrong_length_is_skipped(tmp_path, short):
    wrong = DISC[:-10] if "short" in short else np.concatenate([DISC, DISC[:10]])
    path = _xdmf(tmp_path, [DISC, wrong, DISC])
    out = str(tmp_path / "out")
    err = _measure_ok(path, out)
    assert len(err) == 1 and "ts.xdmf, step 1" in err[0] and "step skipped" in err[0], err
    assert f"{len(wrong)} values for {len(DISC)} cells" in err[0]
    steps = open(os.path.join(out, "steps.csv")).read().splitlines()
    assert [ln.split(",")[0] for ln in steps[1:]] == ["0", "2"]
    manifest, html = _recorded(out)
    assert "step 1" in json.dumps(manifest) and "step 1" in html


def test_a_step_path_that_is_a_folder_is_skipped_and_the_inputs_are_still_hashed(tmp_path):
    case("listing step that is a folder")
    for k in (0, 2):
        _good(tmp_path / f"s_{k}.vtu")
    (tmp_path / "s_1.vtu").mkdir()
    listing = tmp_path / "run.steps"
    listing.write_text("0,s_0.vtu\n0.1,s_1.vtu\n0.2,s_2.vtu\n")
    out = str(tmp_path / "out")
    err = _measure_ok(str(listing), out)
    assert len(err) == 1 and "is a folder" in err[0] and "s_1.vtu, step 1" in err[0], err
    manifest, html = _recorded(out)
    hashed = [f for f in manifest["inputs"]] if "inputs" in manifest else json.dumps(manifest)
    assert "s_0.vtu" in json.dumps(hashed) and "s_1.vtu" in html


# ------------------------------------------------------------------ 3. files the user cannot read
def _loop(folder, name):
    os.symlink(name + ".other", folder / name)
    os.symlink(name, folder / (name + ".other"))


def test_a_symbolic_link_loop_is_named_as_one(tmp_path):
    case("symlink loop given as the path")
    _loop(tmp_path, "s_1.vtu")
    _assert_one_error_line(["inspect", tmp_path / "s_1.vtu"], "s_1.vtu", "symbolic link that loops")


def test_a_symbolic_link_loop_in_a_folder_is_skipped(tmp_path):
    case("symlink loop as a step of a folder")
    folder = tmp_path / "in"
    folder.mkdir()
    for k in (0, 2, 3):
        _good(folder / f"s_{k}.vtu")
    _loop(folder, "s_1.vtu")
    err = _measure_ok(str(folder), str(tmp_path / "out"))
    assert any("s_1.vtu, step 1" in ln and "loops" in ln and "step skipped" in ln for ln in err), err


def test_a_dangling_link_says_where_it_points(tmp_path):
    case("dangling symlink")
    os.symlink("gone.vtu", tmp_path / "s.vtu")
    _assert_one_error_line(["inspect", tmp_path / "s.vtu"], "s.vtu", "gone.vtu", "does not exist")


def _unreadable_series(tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    for k in (0, 1, 2):
        _good(folder / f"s_{k}.vtu")
    return folder / "s_1.vtu"


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0,
                    reason="running as root: permission bits do not stop root from reading "
                           "(test_no_read_permission_as_the_check_sees_it covers the message)")
def test_a_step_without_read_permission_is_skipped(tmp_path):
    case("step without read permission")
    bad = _unreadable_series(tmp_path)
    bad.chmod(0)
    try:
        out = str(tmp_path / "out")
        err = _measure_ok(str(bad.parent), out)
        assert len(err) == 1 and "no read permission" in err[0] and "step skipped" in err[0], err
        assert os.path.exists(os.path.join(out, "manifest.json"))
        _assert_one_error_line(["inspect", bad], "s_1.vtu", "no read permission")
    finally:
        bad.chmod(0o644)


def test_no_read_permission_as_the_check_sees_it(tmp_path, monkeypatch):
    case("no read permission (the check's own view, also as root)")
    bad = _unreadable_series(tmp_path)
    real = os.access
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if os.fspath(p) == str(bad) else real(p, mode, **kw))
    _assert_one_error_line(["inspect", bad], "s_1.vtu", "no read permission", "chmod u+r")
    out = str(tmp_path / "out")
    err = _measure_ok(str(bad.parent), out)
    assert len(err) == 1 and "s_1.vtu, step 1" in err[0] and "no read permission" in err[0], err
    manifest, html = _recorded(out)
    assert "s_1.vtu" in html


# ------------------------------------------------------------------ 2. times that are not numbers
BAD_TIMES = {"text": ("abc", "'abc', not a finite number"), "empty": ("", "is empty"),
             "nan": ("nan", "'nan', not a finite number"), "inf": ("inf", "'inf', not a finite number")}


@pytest.mark.parametrize("kind", sorted(BAD_TIMES))
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_an_xdmf_time_that_is_not_a_number(tmp_path, kind, command):
    case(f"xdmf Time {kind} ({command})")
    value, words = BAD_TIMES[kind]
    path = _xdmf(tmp_path, [DISC, DISC, DISC])
    text = open(path).read().replace('<Time Value="0.1"', f'<Time Value="{value}"')
    open(path, "w").write(text)
    extra = ["--field", "alpha", "-o", tmp_path / "out", *FAST] if command == "measure" else []
    _assert_one_error_line([command, path, *extra], "ts.xdmf, step 1", "XDMF <Time", words)
    assert not os.path.exists(tmp_path / "out")


@pytest.mark.parametrize("kind", ["text", "nan", "inf", "empty"])
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_a_listing_time_that_is_not_a_number(tmp_path, kind, command):
    case(f"listing time {kind} ({command})")
    value, words = BAD_TIMES[kind]
    for k in (0, 1):
        _good(tmp_path / f"s_{k}.vtu")
    listing = tmp_path / "run.steps"
    listing.write_text(f"0,s_0.vtu\n{value},s_1.vtu\n")
    extra = ["--field", "alpha", "-o", tmp_path / "out", *FAST] if command == "measure" else []
    needles = ["run.steps, line 2", words] if kind in ("nan", "inf") else ["run.steps", "line 2 is not 'time,path'"]
    _assert_one_error_line([command, listing, *extra], *needles)


def _with_time(path, value, *, binary, dtype=np.float64):
    """A step written by VTK's own writer (pyvista) with ``TimeValue`` in its field data."""
    import pyvista

    grid = pyvista.from_meshio(to_meshio(MESH, cell_data={"alpha": DISC}))
    grid.field_data["TimeValue"] = np.array([value], dtype=dtype)
    grid.save(str(path), binary=binary)
    return str(path)


@pytest.mark.parametrize("name", [case("TimeValue nan in a legacy ASCII file"),
                                  case("TimeValue inf in a binary VTU file"),
                                  case("TimeValue as text in a legacy ASCII file")])
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_a_time_in_the_field_data_that_is_not_a_number(tmp_path, name, command):
    folder = tmp_path / "in"
    folder.mkdir()
    _with_time(folder / "s_0.vtu", 0.0, binary=True)
    suffix = ".vtu" if "VTU" in name else ".vtk"
    bad = _with_time(folder / f"s_1{suffix}", np.inf if "inf" in name else np.nan, binary="binary" in name)
    if "text" in name:
        text = open(bad).read()
        assert "double\nnan" in text
        open(bad, "w").write(text.replace("double\nnan", "double\nsoon"))
    extra = ["--field", "alpha", "-o", tmp_path / "out", *FAST] if command == "measure" else []
    shown = "'soon'" if "text" in name else ("inf" if "inf" in name else "'nan'")
    _assert_one_error_line([command, folder, *extra], f"s_1{suffix}, step 1", "TimeValue", shown,
                           "not a finite number")


@pytest.mark.parametrize("suffix", [".vtu", ".vtk"])
@pytest.mark.parametrize("binary", [True, False])
def test_a_time_stored_in_single_precision_keeps_its_own_digits(tmp_path, suffix, binary):
    case(f"single-precision TimeValue ({suffix}, {'binary' if binary else 'ascii'})")
    path = _with_time(tmp_path / f"s{suffix}", 0.15, binary=binary, dtype=np.float32)
    code, err, out = _cli(["inspect", "--json", path])
    assert code == 0, err
    assert json.loads(out)["times"] == [0.15]  # not 0.150000006


def test_a_listing_with_a_byte_order_mark_is_read(tmp_path):
    case("listing with a UTF-8 byte-order mark")
    for k in (0, 1):
        _good(tmp_path / f"s_{k}.vtu")
    listing = tmp_path / "run.steps"
    listing.write_bytes(b"\xef\xbb\xbftime,path\n0,s_0.vtu\n0.5,s_1.vtu\n")
    code, err, out = _cli(["inspect", "--json", listing])
    assert code == 0, err
    assert json.loads(out)["times"] == [0.0, 0.5]


# ------------------------------------------------------------------ 4. headers that claim huge sizes
def _legacy_claim(path, *, binary, old, new):
    _good(path, binary=binary)
    data = open(path, "rb").read()
    assert old in data
    open(path, "wb").write(data.replace(old, new))
    return str(path)


def _hdf5_claim(path, *, compressed):
    """An XDMF file whose points dataset (in its HDF5 file) claims three billion points."""
    import h5py

    old = os.getcwd()
    os.chdir(path.parent)
    try:
        to_meshio(MESH, cell_data={"alpha": DISC}).write(path.name)
    finally:
        os.chdir(old)
    with h5py.File(path.with_suffix(".h5"), "a") as f:
        name = next(k for k in f if f[k].shape == (MESH.n_points, 3))
        del f[name]
        f.create_dataset(name, shape=(3_000_000_000, 3), dtype="f8", chunks=(1 << 16, 3),
                         compression="gzip" if compressed else None)
    return str(path)


HUGE_CLAIMS = {
    # name: (builder, words the one line must hold)
    "legacy binary POINTS": (lambda p: _legacy_claim(p, binary=True, old=b"POINTS 81 ", new=b"POINTS 3000000000 "),
                             ["3,000,000,000 points", "72,000,000,000 bytes", "but the file has only"]),
    "legacy ASCII POINTS": (lambda p: _legacy_claim(p, binary=False, old=b"POINTS 81 ", new=b"POINTS 3000000000 "),
                            ["3,000,000,000 points", "but the file has only"]),
    "legacy CELL_TYPES": (lambda p: _legacy_claim(p, binary=True, old=b"CELL_TYPES 128",
                                                  new=b"CELL_TYPES 2000000000"),
                          ["2,000,000,000 cell types", "but the file has only"]),
    "legacy CELLS": (lambda p: _legacy_claim(p, binary=True, old=b"CELLS 129", new=b"CELLS 2000000000"),
                     ["2,000,000,000 cells", "but the file has only"]),
    "HDF5 dataset stored short": (lambda p: _hdf5_claim(p, compressed=False),
                                  ["HDF5 dataset", "9,000,000,000 values", "but stores only"]),
    "HDF5 dataset compressed, beyond memory": (lambda p: _hdf5_claim(p, compressed=True),
                                               ["HDF5 dataset", "9,000,000,000 values", "of memory",
                                                "this machine has"]),
}


@pytest.mark.parametrize("name", sorted(HUGE_CLAIMS))
def test_a_header_that_claims_a_huge_size_is_refused_with_the_numbers(tmp_path, name):
    case(f"huge claim: {name}")
    build, words = HUGE_CLAIMS[name]
    path = build(tmp_path / ("s.xdmf" if "HDF5" in name else "s.vtk"))
    _assert_one_error_line(["inspect", path], "s.", *words)


def test_a_huge_claim_is_refused_without_allocating(tmp_path):
    """The refusal reads headers only: the process's peak memory stays under 200 MB.

    Measured in a subprocess with ``resource.getrusage``, or on Linux its ``VmHWM`` (which, unlike
    ``ru_maxrss``, does not carry the pytest process's own peak across ``exec``).
    """
    case("huge claims refused within 200 MB (subprocess peak memory)")
    paths = [HUGE_CLAIMS[n][0](tmp_path / f"c{k}{'.xdmf' if 'HDF5' in n else '.vtk'}")
             for k, n in enumerate(sorted(HUGE_CLAIMS))]
    code = ("import resource, sys\n"
            "from click.testing import CliRunner\n"
            "from phasegauge.cli import main\n"
            "codes = [CliRunner().invoke(main, ['inspect', p]).exit_code for p in sys.argv[1:]]\n"
            "peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"  # KiB on Linux
            "try:\n"  # Linux keeps ru_maxrss across exec (the test process's own peak): VmHWM starts afresh
            "    status = open('/proc/self/status').read().split('VmHWM:')[1]\n"
            "    peak = int(status.split()[0])\n"
            "except (OSError, IndexError):\n"
            "    pass\n"
            "print(codes, peak)\n")
    import subprocess
    import sys

    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path))
    done = subprocess.run([sys.executable, "-c", code, *paths], capture_output=True, text=True, env=env,
                          check=True)
    codes, peak = done.stdout.rsplit("]", 1)
    assert codes.strip("[ ").split(", ") == ["2"] * len(paths), done.stdout
    assert int(peak) < 200 * 1024, f"peak memory {int(peak) / 1024:.0f} MB"


# ------------------------------------------------------------------ 5. meshes wrong but read without a word
_TRI = to_meshio(MESH).cells[0].data
_PTS = to_meshio(MESH).points


def _with_cells(path, cells, values):
    meshio.Mesh(_PTS, [("triangle", cells)], cell_data={"alpha": [values]}).write(path)
    return str(path)


def _crowded_edge():
    """One more triangle on an inner edge two triangles already share (its third corner another point)."""
    edges = {}
    for t in _TRI:
        for i in range(3):
            edges.setdefault(tuple(sorted((t[i], t[(i + 1) % 3]))), []).append(set(t))
    (a, b), cells = next((e, c) for e, c in edges.items() if len(c) == 2)
    other = next(p for p in range(len(_PTS)) if not any(p in c for c in cells))
    return np.vstack([_TRI, [[a, b, other]]])


def _crowded_count(cells):
    """Edges of more than two triangles, counted plainly (a loop over the cells, as a check)."""
    from collections import Counter

    count = Counter(tuple(sorted((t[i], t[(i + 1) % 3]))) for t in cells for i in range(3))
    return sum(1 for n in count.values() if n > 2)


WRONG_MESHES = {
    # name: (cells, values, words the one line must hold); refused: overlapping cells count their phase twice
    "duplicate cells": (np.vstack([_TRI, _TRI[:10]]), np.r_[DISC, DISC[:10]],
                        ["10 cells repeat the corners of another cell", "count twice"]),
    "duplicate cells, corners reversed": (np.vstack([_TRI, _TRI[:7, ::-1]]), np.r_[DISC, DISC[:7]],
                                          ["7 cells repeat the corners", "count twice"]),
    "an edge of three triangles": (_crowded_edge(), np.r_[DISC, 0.5],
                                   [f"{_crowded_count(_crowded_edge())} edge", "shared by more than two cells",
                                    "cells overlap"]),
    "a triangle over others, sharing no edge": (np.vstack([_TRI, [[0, 2, 20]]]), np.r_[DISC, 0.5],
                                                ["boundary edges lie inside other cells", "cells overlap"]),
}


@pytest.mark.parametrize("name", sorted(WRONG_MESHES))
@pytest.mark.parametrize("command", ["measure", "inspect"])
def test_cells_that_cover_space_twice_are_refused_with_the_count(tmp_path, name, command):
    case(f"{name} ({command})")
    cells, values, words = WRONG_MESHES[name]
    path = _with_cells(tmp_path / "s.vtu", cells, values)
    if command == "measure":
        _assert_one_error_line(["measure", path, "--field", "alpha", "-o", tmp_path / "out", *FAST],
                               "s.vtu, step 0", *words)
        return
    code, err, _ = _cli(["inspect", path])  # inspect describes the mesh and says measure refuses it
    assert code == 0, err
    lines = [ln for ln in _warning_lines(err) if "measure refuses this mesh" in ln]
    assert len(lines) == 1 and all(w in lines[0] for w in words), err


def test_a_good_tetrahedron_mesh_has_no_overlap():
    """The checks find nothing on conforming meshes (a false alarm would refuse good runs)."""
    from phasegauge.meshgen import delaunay_mesh, grid_mesh
    from phasegauge.model._overlaps import cell_overlaps

    for mesh in (grid_mesh((4, 4, 4), kind="tetra"), delaunay_mesh(300, dimension=3, seed=1)
                 if "dimension" in delaunay_mesh.__code__.co_varnames else grid_mesh((3, 3, 3), kind="tetra"),
                 MESH, grid_mesh((5, 4), kind="quad")):
        assert cell_overlaps(mesh) == {"duplicate_cells": 0, "crowded_faces": 0, "covered_boundary_faces": 0}


def test_a_tetrahedron_inside_a_mesh_is_refused():
    case("an extra tetrahedron inside a tetrahedron mesh")
    from phasegauge.meshgen import grid_mesh
    from phasegauge.model.mesh import Mesh
    from phasegauge.model._overlaps import cell_overlaps

    base = grid_mesh((3, 3, 3), kind="tetra")
    tets = base.blocks[0].connectivity
    extra = np.vstack([tets, [[0, 5, 21, 63]]])  # corners spread across the grid: lies over other cells
    found = cell_overlaps(Mesh(base.points, [("tetra", extra)]))
    assert found["crowded_faces"] + found["covered_boundary_faces"] > 0, found


def test_xdmf_cells_of_whole_floats_warn_and_fractions_are_refused(tmp_path):
    case("XDMF cells stored as floats (whole numbers: warned)")
    case("XDMF cells stored as floats (fractions: refused)")
    path = tmp_path / "s.xdmf"
    meshio.Mesh(_PTS, [("triangle", _TRI)], cell_data={"alpha": [DISC]}).write(path, data_format="XML")
    text = open(path).read()
    start = text.find(">", text.find("<DataItem", text.find("<Topology"))) + 1
    end = text.find("</DataItem>", start)
    as_floats = " ".join(f"{float(v):.1f}" for v in text[start:end].split())
    open(path, "w").write((text[:start] + as_floats + text[end:]).replace('DataType="Int"', 'DataType="Float"'))
    err = _measure_ok(str(path), str(tmp_path / "out"))
    assert any("128 triangle cells are stored as floating-point numbers" in ln for ln in err), err
    open(path, "w").write((text[:start] + as_floats.replace("1.0", "1.5", 1) + text[end:]).replace(
        'DataType="Int"', 'DataType="Float"'))
    _assert_one_error_line(["inspect", path], "s.xdmf", "1 triangle cells have corner point numbers that are not whole")


def test_points_with_two_coordinates_under_3d_cells_are_refused(tmp_path):
    case("2 coordinates for tetrahedra (XDMF XY geometry)")
    from phasegauge.meshgen import grid_mesh

    tets = to_meshio(grid_mesh((2, 2, 2), kind="tetra"))
    path = tmp_path / "s.xdmf"
    meshio.Mesh(tets.points[:, :2], tets.cells).write(path, data_format="XML")
    _assert_one_error_line(["inspect", path], "s.xdmf", "the points have 2 coordinates but the cells are 3D (tetra)")


def test_xdmf_cell_data_longer_than_the_cells_is_refused(tmp_path):
    case("XDMF cell data longer than the cells (one file)")
    path = _xdmf(tmp_path, [np.concatenate([DISC, DISC[:10]])])
    code, err, _ = _cli(["measure", path, "--field", "alpha", "-o", tmp_path / "out", *FAST])
    assert code == 2 and "138 values for 128 cells" in err[-1], err


@pytest.mark.parametrize("extra", [3, -3])
def test_vtu_cell_data_of_the_wrong_length_is_refused(tmp_path, extra):
    case(f"VTU cell data {abs(extra)} values {'longer' if extra > 0 else 'shorter'} than the cells")
    path = tmp_path / "s.vtu"
    meshio.Mesh(_PTS, [("triangle", _TRI)], cell_data={"alpha": [DISC]}).write(path, binary=False)
    text = open(path).read()
    start = text.find(">", text.find('Name="alpha"')) + 1
    end = text.find("</DataArray>", start)
    values = text[start:end].split()
    values = values + ["0.5"] * extra if extra > 0 else values[:extra]
    open(path, "w").write(text[:start] + "\n" + " ".join(values) + "\n" + text[end:])
    _assert_one_error_line(["inspect", path], "s.vtu", f"cell field 'alpha' has {128 + extra} values for 128 cells")


def test_a_negative_corner_number_is_named_as_negative(tmp_path):
    case("negative cell index")
    cells = _TRI.copy()
    cells[3, 1] = -5
    path = tmp_path / "s.vtu"
    meshio.Mesh(_PTS, [("triangle", cells)], cell_data={"alpha": [DISC]}).write(path)
    _assert_one_error_line(["inspect", path], "s.vtu", "1 negative corner point number (the lowest -5)")


# ------------------------------------------------------------------ 6. messages that misled
def _sphere_patch(path):
    """A closed surface of triangles in 3D, as a boundary patch, written by VTK's own writer."""
    import pyvista

    surface = pyvista.Sphere(theta_resolution=8, phi_resolution=8)
    surface.cell_data["alpha"] = np.ones(surface.n_cells)
    if str(path).endswith(".vtu"):
        meshio.Mesh(surface.points, [("triangle", surface.faces.reshape(-1, 4)[:, 1:])],
                    cell_data={"alpha": [np.ones(surface.n_cells)]}).write(path)
    else:
        surface.save(str(path), binary=not str(path).endswith("_ascii.vtk"))
    return str(path)


@pytest.mark.parametrize("name", [case("boundary patch .vtp"), case("boundary patch legacy POLYDATA"),
                                  case("boundary patch legacy POLYDATA ASCII"),
                                  case("boundary patch as triangles in 3D (.vtu)")])
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_a_boundary_patch_is_named_a_surface(tmp_path, name, command):
    suffix = {"vtp": ".vtp", "ASCII": "_ascii.vtk", "POLYDATA": ".vtk", "vtu": ".vtu"}
    end = next(v for k, v in suffix.items() if k in name)
    path = _sphere_patch(tmp_path / f"patch{end}")
    extra = ["--field", "alpha", "-o", tmp_path / "out", *FAST] if command == "measure" else []
    line = _assert_one_error_line([command, path, *extra], "patch", "surface", "boundary patch", "volume")
    assert "ends early" not in line and "solver may have stopped" not in line


def test_a_folder_of_boundary_patches_is_named_so(tmp_path):
    case("folder of surface files only")
    for k in (0, 1):
        _sphere_patch(tmp_path / f"wall_{k}.vtp")
    _assert_one_error_line(["inspect", tmp_path], "only surface files", "boundary patches", "volume")


def _numbered_with_times(folder, numbers, times):
    folder.mkdir()
    for n, t in zip(numbers, times):
        _with_time(folder / f"run_{n}.vtu", t, binary=True)
    return str(folder)


def test_file_numbers_of_solver_time_steps_raise_no_gap_warning(tmp_path):
    case("file numbers are time-step indices (0, 13, 26, 55, ...), times steady")
    numbers = [0, 13, 26, 55, 70, 91]  # solver time-step indices, adaptive time step
    folder = _numbered_with_times(tmp_path / "in", numbers, [0.1 * k for k in range(len(numbers))])
    err = _measure_ok(folder, str(tmp_path / "out"))
    assert not any("jump" in ln for ln in err), err


def test_a_gap_in_the_times_themselves_warns(tmp_path):
    case("stored times with a missing output (0, 0.1, 0.2, 0.4, 0.5)")
    folder = _numbered_with_times(tmp_path / "in", [0, 13, 26, 55, 70], [0.0, 0.1, 0.2, 0.4, 0.5])
    err = _measure_ok(folder, str(tmp_path / "out"))
    assert sum("the step times jump (0.2 to 0.4)" in ln and "output interval 0.1" in ln for ln in err) == 1, err


def test_time_gaps_rule():
    from phasegauge.io._series_gaps import time_gaps

    assert time_gaps([0, 0.1, 0.2, 0.3])[0] == []
    assert time_gaps([0, 0.1, 0.2, 0.4, 0.5])[0] == [(0.2, 0.4)]
    assert time_gaps(np.float32([0, 0.1, 0.2, 0.3, 0.4]).astype(float))[0] == []  # rounding is no gap


@pytest.mark.parametrize("length", [case("path of 5 MB") and 5_000_000, case("file name of 300 kB") and 300_000])
def test_an_error_line_stays_a_few_hundred_characters(tmp_path, length):
    path = "/tmp/" + ("a/" * (length // 2) if length > 1_000_000 else "b" * length) + "x.vtu"
    line = _assert_one_error_line(["inspect", path], "x.vtu", "characters long", " ... ")
    assert len(line) < 800, len(line)


def test_a_long_warning_line_is_cut_too():
    from phasegauge.errors import MeshWarning, SeriesError, collapse_warnings

    long = "/data/" + "deep/" * 100_000 + "s.vtu, step 3"
    assert len(SeriesError("bad " * 1000, where=long, fix="do " * 1000).one_line()) < 800
    assert len(MeshWarning("odd " * 1000, where=long).one_line()) < 800
    (_, text), = collapse_warnings([(MeshWarning, "odd " * 1000, long)])
    assert len(text) < 800 and text.endswith("...") is False


def test_the_corpus_size():
    """The corpus counts its cases (issue 21's closing note gives the number)."""
    assert len(set(CASES)) == len(CASES) >= 7
