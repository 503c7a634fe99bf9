"""Droplets on a split mesh (polyhedra read as tetrahedra) are sets of whole cells.

Outside checks: the polyhedral files are written by VTK itself (pyvista) [lib], the same cells as
the hexahedral meshes they are compared with; the analytic volume of a logistic ball,
4/3 pi (R^3 + pi^2 eps^2 R) [calc, Sommerfeld expansion]; elementary geometry for the parallelepiped
grid (each of its 12 tetrahedra about the cell centre, every face cut along its shorter diagonal,
has a twelfth of the cell's volume, so their volume-weighted mean of a cell value is that value
and their centroid the cell's; the mean of their corner means weights the corners unevenly, within
O(h^2) of the cell's corner mean, exact for a linear c); where the balls are, when they touch and
part, by construction.
"""

import numpy as np
import pytest

pytest.importorskip("pyvista")

from phasegauge.analysis.droplets import label_droplets  # noqa: E402
from phasegauge.analysis.tracking import DropletTracker  # noqa: E402
from phasegauge.io import Series  # noqa: E402
from phasegauge.meshgen import grid_mesh, to_polyhedral_grid  # noqa: E402
from phasegauge.model.mesh import Mesh  # noqa: E402

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")

N = 14
R, EPS = 0.25, 0.03
SHEAR = np.array([[1.0, 0.3, 0.1], [0.0, 1.0, 0.2], [0.0, 0.0, 1.0]])


def logistic(distance, eps=EPS):
    return 0.5 * (1.0 - np.tanh(distance / (2.0 * eps)))


def _ball_volume(r=R, eps=EPS):
    return 4 / 3 * np.pi * (r ** 3 + np.pi ** 2 * eps ** 2 * r)  # [calc, Sommerfeld]


def _read_split(hexa, path, point_data):
    """The hexahedra written by VTK as polyhedra with ``point_data``, read back: (split mesh, fields)."""
    to_polyhedral_grid(hexa, point_data=point_data).save(str(path))
    step = Series(str(path)).read(0)
    # 12 tetrahedra a cell (quad faces cut along their shorter diagonal; a face whose triangle
    # would turn a tetrahedron keeps its centre: 2 more tetrahedra a side)
    assert step.mesh.cell_parents is not None and 12 * hexa.n_cells <= step.mesh.n_cells < 24 * hexa.n_cells
    return step.mesh, step.fields.point_data


@pytest.fixture(scope="module")
def meshes(tmp_path_factory):
    folder = tmp_path_factory.mktemp("whole")
    grid = grid_mesh((N,) * 3, kind="hexahedron")
    sheared = Mesh(grid.points @ SHEAR.T, [("hexahedron", grid.blocks[0].connectivity)])
    jittered = grid_mesh((N,) * 3, kind="hexahedron", jitter=0.2, seed=3)
    out = {}
    for name, hexa in (("sheared", sheared), ("jittered", jittered)):
        out[name] = (hexa, _read_split(hexa, folder / f"{name}.vtu", {})[0], folder / f"{name}_c.vtu")
    return out


def _split_points(hexa, path, values):
    """Point values of the hexahedra's points on the split's points, as the reader extends them
    (the face and cell centres take their corners' mean)."""
    return np.asarray(_read_split(hexa, path, {"v": values})[1]["v"])


def _c_values(hexa, split, path, location, centres):
    """c of logistic balls about ``centres`` on the hexahedra and on the split: per hexahedron (each
    piece its whole cell's value), or the corner means of the point values (read back from the file)."""
    def ball(X):
        return np.max([logistic(np.linalg.norm(X - centre, axis=1) - R) for centre in centres], axis=0)

    if location == "cell":
        c = ball(hexa.cell_centroids)
        return c, c[split.cell_parents]
    c_points = ball(hexa.points)
    return hexa.point_to_cell(c_points), split.point_to_cell(_split_points(hexa, path, c_points))


COLUMNS = ["volume", "threshold_volume", "centroid_x", "centroid_y", "centroid_z", "equivalent_diameter",
           "bbox_min_x", "bbox_min_y", "bbox_min_z", "bbox_max_x", "bbox_max_y", "bbox_max_z"]


@pytest.mark.parametrize("location", ["cell", "point"])
def test_parallelepipeds_split_give_the_hexahedra_droplets(meshes, location):
    """Unjittered sheared grid: the whole cells are the hexahedra (measures, centroids, faces, corner
    boxes) and c per whole cell is the hexahedron's (elementary geometry, see the module notes), so
    two balls give the same labels per cell and the same table, to round-off (cell data; point data
    to O(h^2))."""
    hexa, split, path = meshes["sheared"]
    c_hex, c_split = _c_values(hexa, split, path, location, [SHEAR @ [0.3, 0.3, 0.5], SHEAR @ [0.72, 0.7, 0.5]])
    on_hex = label_droplets(hexa, c_hex)
    on_split = label_droplets(split, c_split)
    assert on_hex.count == on_split.count == 2
    assert on_split.whole_cells and not on_hex.whole_cells
    assert on_split.labels.shape == (hexa.n_cells,)  # one label per whole cell, numbered as the hexahedra
    np.testing.assert_array_equal(on_split.labels, on_hex.labels)
    if location == "cell":  # one value a whole cell: the same table to round-off
        np.testing.assert_array_equal(on_split.shared_labels, on_hex.shared_labels)
        np.testing.assert_allclose(on_split.weights, on_hex.weights, rtol=1e-12, atol=1e-18)
        tolerance = 1e-12
    else:
        # point data: the 12 tetrahedra weigh a cell's corners unevenly (a face's diagonal ends twice),
        # so c per whole cell is the corner mean only to O(h^2 c'') (the weighted corners' centroid is
        # the cell's: a linear c is exact); measured: shared labels at 3 of 2744 cells, weights 4.4e-6,
        # the table 8e-5 (relative)
        assert np.count_nonzero(on_split.shared_labels != on_hex.shared_labels) <= 0.005 * hexa.n_cells
        np.testing.assert_allclose(on_split.weights, on_hex.weights, rtol=0, atol=2e-5)
        tolerance = 3e-4
    for column in COLUMNS:
        np.testing.assert_allclose(on_split.table[column], on_hex.table[column], rtol=tolerance, atol=1e-13,
                                   err_msg=column)
    assert on_split.table["under_resolved"].tolist() == on_hex.table["under_resolved"].tolist()


def test_jittered_hexahedra_and_their_polyhedra_agree(meshes):
    """Jittered cells (bent faces): the whole cells' c is the volume-weighted mean of the pieces'
    corner means, not the hexahedron's corner mean; the droplet count is the same and the volumes
    and centres agree within 2e-3 (relative) and a hundredth of a cell."""
    hexa, split, path = meshes["jittered"]
    centre = np.array([0.5, 0.5, 0.5])
    c_hex, c_split = _c_values(hexa, split, path, "point", [centre])
    on_hex, on_split = label_droplets(hexa, c_hex).table, label_droplets(split, c_split).table
    assert len(on_hex) == len(on_split) == 1
    assert on_split["volume"].iloc[0] == pytest.approx(on_hex["volume"].iloc[0], rel=2e-3)
    for axis in "xyz":
        assert on_split[f"centroid_{axis}"].iloc[0] == pytest.approx(on_hex[f"centroid_{axis}"].iloc[0],
                                                                     abs=0.01 / N)
    # cell data (one value a polyhedron): the same cells, c dV summed over the pieces
    c_cell, c_pieces = _c_values(hexa, split, path, "cell", [centre])
    # (the hexahedra's trilinear volumes against the split's: bent faces cut along a diagonal move
    # volume between the cells on their two sides, O(jitter^2) of a cell; 1.5e-3 measured)
    assert label_droplets(split, c_pieces).table["volume"].iloc[0] == pytest.approx(
        label_droplets(hexa, c_cell).table["volume"].iloc[0], rel=3e-3)


@pytest.mark.parametrize("name", ["sheared", "jittered"])
def test_ball_volume_on_polyhedra(meshes, name):
    """Logistic ball: the droplet volume is 4/3 pi (R^3 + pi^2 eps^2 R) within the tolerance of the
    hexahedral sphere test (5e-3) [calc, Sommerfeld]; the pieces' c dV is kept per whole cell."""
    hexa, split, path = meshes[name]
    c = _c_values(hexa, split, path, "point", [hexa.points.mean(axis=0)])[1]
    found = label_droplets(split, c)
    row = found.table.iloc[0]
    assert found.count == 1
    assert row["volume"] == pytest.approx(_ball_volume(), rel=5e-3)
    # the whole cells' c dV is the pieces' c dV, summed
    np.testing.assert_allclose(found.weights.sum(), np.sum(c * split.cell_measures), rtol=1e-12)


def test_ball_across_the_periodic_boundary_on_polyhedra(meshes):
    """A ball centred on the x boundary of a periodic box: one droplet, not spanning, its volume that
    of the same ball in the middle (translation invariance) and its centroid on the boundary; the
    hexahedra give the same."""
    hexa, split, path = meshes["jittered"]

    def c_about(x0, X):
        d = X - np.array([x0, 0.5, 0.5])
        d[:, 0] = (d[:, 0] + 0.5) % 1.0 - 0.5
        return logistic(np.linalg.norm(d, axis=1) - R)

    c_mid = split.point_to_cell(_split_points(hexa, path, c_about(0.5, hexa.points)))
    c_edge = split.point_to_cell(_split_points(hexa, path, c_about(0.0, hexa.points)))
    middle = label_droplets(split, c_mid).table.iloc[0]
    assert label_droplets(split, c_edge).count == 2
    result = label_droplets(split, c_edge, periodic=("x",))
    assert result.count == 1
    row = result.table.iloc[0]
    assert not row["spanning"]
    # jittered cells: the ball about x = 0 meets other cells than about x = 0.5 (the discretisations
    # differ by about 2e-3), each within the analytic tolerance of the hexahedral sphere test
    assert row["volume"] == pytest.approx(middle["volume"], rel=5e-3)
    assert row["volume"] == pytest.approx(_ball_volume(), rel=5e-3)
    assert min(row["centroid_x"], 1 - row["centroid_x"]) == pytest.approx(0.0, abs=0.01 / N)
    on_hex = label_droplets(hexa, hexa.point_to_cell(c_about(0.0, hexa.points)), periodic=("x",)).table
    assert len(on_hex) == 1 and not on_hex["spanning"].iloc[0]
    assert on_hex["volume"].iloc[0] == pytest.approx(row["volume"], rel=2e-3)


def test_velocity_and_contour_per_whole_cell(meshes):
    """A velocity given per piece is averaged per whole cell (a uniform one stays itself), and the
    contour's elements count through their pieces' whole cells (the sphericity of the hexahedra's
    own contour, the same elements)."""
    hexa, split, path = meshes["sheared"]
    c_hex, c_split = _c_values(hexa, split, path, "cell", [SHEAR @ [0.5, 0.5, 0.5]])
    u = np.tile([0.25, -0.5, 1.0], (split.n_cells, 1))
    cells = np.flatnonzero(c_split > 0.5)[:40]  # pieces of whole cells of the droplet
    sizes = np.ones(cells.size)
    found = label_droplets(split, c_split, velocity=u, interface_cells=cells, interface_sizes=sizes)
    row = found.table.iloc[0]
    np.testing.assert_allclose([row["velocity_x"], row["velocity_y"], row["velocity_z"]], [0.25, -0.5, 1.0],
                               rtol=1e-12)
    on_hex = label_droplets(hexa, c_hex, interface_cells=split.cell_parents[cells], interface_sizes=sizes)
    assert row["sphericity"] == pytest.approx(on_hex.table["sphericity"].iloc[0], rel=1e-12)


def _two_balls(X, gap, r1=1.08 * R):
    """Two balls of radius R and ``r1`` along x about (0.7, 0.35, 0.35), ``gap`` apart at their
    surfaces (negative: overlapping). Unequal, so that which one a merged droplet continues is
    decided by its size (not by round-off: two meshes' volumes of equal balls differ at O(h^2))."""
    x0 = 0.7 - R - gap / 2
    x1 = 0.7 + r1 + gap / 2
    return np.maximum(logistic(np.linalg.norm(X - [x0, 0.35, 0.35], axis=1) - R),
                      logistic(np.linalg.norm(X - [x1, 0.35, 0.35], axis=1) - r1))


def test_merge_and_breakup_tracked_on_polyhedra(tmp_path):
    """Two balls apart, then overlapping (one droplet), then apart again: a coalescence and a breakup
    on the polyhedral series, as on its hexahedra, through a whole run (``measure``)."""
    from phasegauge.run.measure import measure

    hexa = grid_mesh((2 * N, N, N), kind="hexahedron", bounds=[(0, 1.4), (0, 0.7), (0, 0.7)], jitter=0.1, seed=2)
    gaps = (0.2, -0.1, 0.2)
    events = {}
    for kind in ("polyhedra", "hexahedra"):
        folder = tmp_path / kind
        folder.mkdir()
        for k, gap in enumerate(gaps):
            c = _two_balls(hexa.points, gap)
            grid = to_polyhedral_grid(hexa, point_data={"c": c})
            if kind == "hexahedra":
                import pyvista as pv

                grid = pv.UnstructuredGrid({pv.CellType.HEXAHEDRON: hexa.blocks[0].connectivity}, hexa.points)
                grid.point_data["c"] = c
            grid.save(str(folder / f"step_{k:03d}.vtu"))
        run = measure(str(folder), "c")
        assert run.steps["droplet_count"].tolist() == [2, 1, 2]
        events[kind] = run.events
    for kind in events:
        assert events[kind]["kind"].tolist() == ["coalescence", "breakup"]
    for column in ("before", "after"):
        assert events["polyhedra"][column].tolist() == events["hexahedra"][column].tolist()
    np.testing.assert_allclose(events["polyhedra"]["volume_after"], events["hexahedra"]["volume_after"], rtol=5e-3)


def test_tracking_reads_whole_cell_labels_and_piece_labels_alike(meshes):
    """The tracker takes a step's labels per whole cell (as label_droplets gives them on a split mesh)
    or per piece (an earlier run's cached steps): a ball that moves one cell keeps its track both ways."""
    hexa, split, path = meshes["sheared"]
    steps = [_c_values(hexa, split, path, "cell", [SHEAR @ [0.45 + k / N, 0.5, 0.5]])[1] for k in range(2)]
    for pieces_first in (False, True):
        tracker = DropletTracker()
        for k, c in enumerate(steps):
            found = label_droplets(split, c)
            if pieces_first and k == 0:  # the same labels per piece
                labels = found.labels[split.cell_parents]
                weights = c * split.cell_measures
                tracker.add(k, float(k), split, labels, found.table, weights=weights, whole_cells=False)
            else:
                tracker.add(k, float(k), split, found)
        droplets, events = tracker.result()
        assert droplets["track"].tolist() == [0, 0] and len(events) == 0


def test_point_connectivity_joins_whole_cells_at_a_corner(meshes):
    """Two blocks of cells touching along an edge only: two droplets through faces, one through points,
    on the polyhedra as on their hexahedra (the face and cell centres of the split join no cells that
    do not share a face)."""
    hexa, split, _ = meshes["sheared"]
    ijk = np.stack(np.unravel_index(np.arange(hexa.n_cells), (N, N, N), order="F"), axis=1)
    inside = (np.all((ijk[:, :2] >= 3) & (ijk[:, :2] < 6), axis=1)
              | np.all((ijk[:, :2] >= 6) & (ijk[:, :2] < 9), axis=1)) & (ijk[:, 2] >= 4) & (ijk[:, 2] < 8)
    c = inside.astype(float)
    for connectivity, count in (("face", 2), ("point", 1)):
        on_hex = label_droplets(hexa, c, connectivity=connectivity)
        on_split = label_droplets(split, c[split.cell_parents], connectivity=connectivity)
        assert on_hex.count == on_split.count == count
        np.testing.assert_array_equal(on_split.labels, on_hex.labels)
