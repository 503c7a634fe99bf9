"""The pieces of a parallel run's step (a domain decomposition) are refused as steps of a series.

Outside references: the pieces are cut by pyvista (VTK's ``extract_subset`` and ``extract_cells``)
from one grid and written by VTK's own writer, as solvers write a piece a rank; a remeshed step of
the same domain is meshio's file of our grid generator at another resolution. The domain figures
checked are the cells' areas summed by numpy and the bounds VTK gives.
"""

import numpy as np
import pytest
import pyvista
from click.testing import CliRunner

import phasegauge
from phasegauge.cli import main
from phasegauge.errors import SeriesWarning
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.model.outline import DOMAIN_TOLERANCE, MeshOutline

pyvista.OFF_SCREEN = True


def _drop(n=40, centre=(0.5, 0.5)):
    """A 2D volume-fraction drop straddling x = 0.5 on an n x n grid of the unit square (cell data)."""
    grid = pyvista.ImageData(dimensions=(n + 1, n + 1, 1), spacing=(1 / n, 1 / n, 1))
    c = grid.cell_centers().points
    grid.cell_data["c"] = (np.hypot(c[:, 0] - centre[0], c[:, 1] - centre[1]) < 0.25).astype(float)
    return grid


def _write_pieces(folder, layout, steps=3, n=40):
    """Two pieces a step (x below and above 0.5), named as two layouts of solver output write them."""
    for k in range(steps):
        grid = _drop(n, centre=(0.5 + 0.02 * k, 0.5))
        for rank, (lo, hi) in enumerate([(0, n // 2), (n // 2, n)]):
            piece = grid.extract_subset([lo, hi, 0, n, 0, 0]).cast_to_unstructured_grid()
            if layout == "flat":
                path = folder / f"out_{k:04d}_{rank}.vtu"
            else:
                (folder / f"processor{rank}").mkdir(exist_ok=True)
                path = folder / f"processor{rank}" / f"out_{k:04d}.vtu"
            piece.save(path)


def _cli(args):
    res = CliRunner().invoke(main, [str(a) for a in args])
    assert not (res.exception is not None and not isinstance(res.exception, SystemExit)), res.exception
    return res.exit_code, [ln for ln in res.stderr.splitlines() if ln.strip()]


@pytest.mark.parametrize("layout, given, at", [("flat", "", 1), ("folders", "processor*/out_*.vtu", 3)])
def test_pieces_named_like_steps_are_refused(tmp_path, layout, given, at):
    # measured as steps, each piece was a step: half the drop's volume and a false drift (exit 0)
    (tmp_path / "run").mkdir()
    _write_pieces(tmp_path / "run", layout)
    path = tmp_path / "run" / given if given else tmp_path / "run"
    code, err = _cli(["measure", path, "--field", "c", "-o", tmp_path / "out", "-q"])
    assert code == 2 and len(err) == 1
    # the x bounds of the two pieces, as VTK gives them for the files
    lo = pyvista.read(sorted((tmp_path / "run").rglob("*.vtu"))[0]).bounds
    assert lo[0] == 0.0 and lo[1] == 0.5
    assert (f"step {at}: the domain changes between step {at - 1} and step {at} (x from [0, 0.5] to [0.5, 1]; the two "
            "lie side by side)") in err[0]
    assert "pieces of a parallel run" in err[0] and "join each step's pieces" in err[0]


def test_pieces_of_one_box_warned_of_by_their_centroids(tmp_path):
    # pieces of a graph partition may share the domain's box: two staircase halves of the square
    # (cells on and below the anti-diagonal, and above it), nearly one box and one area (within a
    # cell row), centroids near (1/3, 1/3) and (2/3, 2/3); their boxes overlap, as a moving mesh's
    # do, so this is a warning, not a refusal
    n = 40
    grid = _drop(n)
    ij = np.floor(grid.cell_centers().points[:, :2] * n).astype(int)
    lower = grid.extract_cells(np.flatnonzero(ij.sum(axis=1) <= n - 1))
    upper = grid.extract_cells(np.flatnonzero(ij.sum(axis=1) > n - 1))
    # VTK's bounds and areas: within a cell (1/40) and 5 % of each other, below the threshold
    assert np.allclose(lower.bounds[:4], upper.bounds[:4], atol=1 / n + 1e-6)
    assert abs(lower.area - upper.area) < DOMAIN_TOLERANCE * lower.area
    (tmp_path / "run").mkdir()
    lower.save(tmp_path / "run" / "s_0.vtu")
    upper.save(tmp_path / "run" / "s_1.vtu")
    with pytest.warns(SeriesWarning, match=r"the domain changes between step 0 and step 1 \(its centroid by 0\.4.*"
                                           r"a moving or deforming mesh, or pieces"):
        phasegauge.measure(str(tmp_path / "run"), "c", analyses=("conservation",))


@pytest.mark.parametrize("motion", ["piston", "frame"])
def test_a_moving_wall_or_frame_is_measured_with_a_warning(tmp_path, motion):
    # a piston's wall moving 8 % of the length an output, a frame translating 10 %: the boxes keep
    # most of each other (92 %, 90 %), so the run is measured, with the change named
    folder = tmp_path / motion
    folder.mkdir()
    for k in range(3):
        m = grid_mesh((20, 10), kind="quad")
        if motion == "piston":
            m.points[:, 0] *= 1.0 - 0.08 * k
        else:
            m.points[:, 0] += 0.1 * k
        m = type(m)(m.points, m.blocks)
        x = m.cell_centroids
        to_meshio(m, cell_data={"c": (np.hypot(x[:, 0] - x[:, 0].mean(), x[:, 1] - 0.5) < 0.2).astype(float)}
                  ).write(folder / f"s_{k}.vtu")
    with pytest.warns(SeriesWarning, match="the domain changes between step 0 and step 1 .*moving or deforming"):
        result = phasegauge.measure(str(folder), "c", analyses=("conservation",))
    assert len(result.steps) == 3


def test_same_domain_remeshed_is_a_series(tmp_path):
    # a remeshed step (coarse quads, then fine triangles, then a locally refined mix) is one domain
    folder = tmp_path / "run"
    folder.mkdir()
    meshes = [grid_mesh((8, 8), kind="quad"), grid_mesh((30, 30), kind="triangle"),
              grid_mesh((16, 16), kind="mixed", jitter=0.2, seed=3)]
    for k, m in enumerate(meshes):
        x = m.cell_centroids
        to_meshio(m, cell_data={"c": (np.hypot(x[:, 0] - 0.5, x[:, 1] - 0.5) < 0.3).astype(float)}
                  ).write(folder / f"s_{k}.vtu")
    with pytest.warns(SeriesWarning, match="the mesh changes between steps"):
        result = phasegauge.measure(str(folder), "c", analyses=("conservation",))
    assert len(result.steps) == 3


@pytest.mark.parametrize("share, changed", [(0.8 * DOMAIN_TOLERANCE, False), (1.2 * DOMAIN_TOLERANCE, True)])
def test_domain_change_threshold(share, changed):
    # a box moved along x by a share of its size (our threshold: far above a remeshed boundary's
    # facets, far below a piece); the bounds and centroids are numpy's of the points written
    a = grid_mesh((10, 10), kind="quad")
    moved = grid_mesh((10, 10), kind="quad")
    moved.points[:, 0] += share
    moved = type(moved)(moved.points, moved.blocks)
    before, after = MeshOutline.of(a), MeshOutline.of(moved)
    assert np.isclose(after.centre[0] - before.centre[0], share)
    assert (before.domain_change(after) is not None) == changed
    assert not before.side_by_side(after)  # they share most of their box
    assert before.domain_change(before) is None


def test_no_change_read_when_the_mesh_is_the_same():
    m = grid_mesh((6, 6), kind="quad")
    out = MeshOutline.of(m)
    assert np.isclose(out.measure, 1.0) and np.allclose(out.centre, 0.5)  # the unit square's
    assert out.domain_change(MeshOutline.of(m)) is None
