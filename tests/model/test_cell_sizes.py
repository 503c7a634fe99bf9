"""A cell's size is the side of the square or cube that its kind's count of such cells fills.

Outside checks: elementary geometry (a square cut into 2 triangles, a cube into 6 Kuhn tetrahedra or
2 wedges, the regular tetrahedron's and the square pyramid's volumes a^3 / (6 sqrt 2) and
a^3 / (3 sqrt 2)); VTK's own cell volumes (pyvista ``compute_cell_sizes``) [lib]; the logistic
profile's 10-90 % width, 2 ln 9 eps = 4.394 eps (Olsson & Kreiss 2005; REFERENCES.md [calc]).
"""

import numpy as np
import pytest

from conftest import write_listing
from phasegauge import measure
from phasegauge.analysis.interface import interface_metrics
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.model.mesh import Mesh

N = 8
H = 1.0 / N


@pytest.mark.parametrize("kind", ["triangle", "quad"])
def test_a_square_grid_split_or_not_has_cells_of_its_spacing(kind):
    mesh = grid_mesh((N, N), ((0, 1), (0, 1)), kind=kind)
    np.testing.assert_allclose(mesh.cell_sizes, H, rtol=1e-12)


@pytest.mark.parametrize("kind", ["tetra", "wedge", "hexahedron"])
def test_a_cube_grid_split_or_not_has_cells_of_its_spacing(kind):
    mesh = grid_mesh((N, N, N), ((0, 1),) * 3, kind=kind)
    np.testing.assert_allclose(mesh.cell_sizes, H, rtol=1e-12)
    pv = pytest.importorskip("pyvista")
    volumes = np.abs(pv.from_meshio(to_meshio(mesh)).compute_cell_sizes()["Volume"])  # VTK [lib]
    count = {"tetra": 6, "wedge": 2, "hexahedron": 1}[kind]
    np.testing.assert_allclose(mesh.cell_sizes, (count * volumes) ** (1 / 3), rtol=1e-12)


def test_pyramids_about_a_cube_centre_are_of_the_size_of_three_filling_it():
    # six pyramids of height h / 2 about the centre; three of them fill a cube of side 2 ** (-1/3) h
    mesh = grid_mesh((N, N, N), ((0, 1),) * 3, kind="pyramid")
    np.testing.assert_allclose(mesh.cell_sizes, 2 ** (-1 / 3) * H, rtol=1e-12)


def test_a_regular_tetrahedron_and_pyramid_of_one_edge_have_one_size():
    a = 0.3
    tet = np.array([[0, 0, 0], [a, 0, 0], [a / 2, a * np.sqrt(3) / 2, 0],
                    [a / 2, a * np.sqrt(3) / 6, a * np.sqrt(2 / 3)]])
    pyramid = np.array([[0, 0, 0], [a, 0, 0], [a, a, 0], [0, a, 0], [a / 2, a / 2, a / np.sqrt(2)]])
    for points, kind, volume in ((tet, "tetra", a ** 3 / (6 * np.sqrt(2))),
                                 (pyramid, "pyramid", a ** 3 / (3 * np.sqrt(2)))):
        mesh = Mesh(points, [(kind, np.arange(len(points))[None, :])])
        assert mesh.cell_measures[0] == pytest.approx(volume, rel=1e-12)
        assert mesh.cell_sizes[0] == pytest.approx(2 ** (-1 / 6) * a, rel=1e-12)


def test_a_mixed_mesh_takes_each_kind_its_own_count():
    mesh = grid_mesh((N, N, N), ((0, 1),) * 3, kind="mixed")
    sizes = {kind: np.unique(np.round(mesh.cell_sizes[mesh.cell_types == kind] / H, 12)).tolist()
             for kind in mesh.cell_type_counts}
    assert sizes == {"hexahedron": [1.0], "wedge": [1.0], "pyramid": [round(2 ** (-1 / 3), 12)]}


def _plane(points, eps):
    return 0.5 * (1 + np.tanh((points[:, 0] - 0.47) / (2 * eps)))


@pytest.mark.parametrize("pair", [("quad", "triangle"), ("hexahedron", "tetra")])
def test_one_diffuse_plane_reads_as_many_cells_across_on_a_grid_split_or_not(pair):
    # the logistic's 10-90 % width is 4.394 eps: 2.2 cells at eps = h / 2 (the width over the cells,
    # of both meshes); on simplices it read 1.41 (triangles) and 1.82 (tetrahedra) times as many
    eps = 0.5 * H
    shape = (2 * N, 2 * N) if pair[0] == "quad" else (2 * N,) * 3
    bounds = ((0, 1),) * len(shape)
    read = []
    for kind in pair:
        mesh = grid_mesh(shape, bounds, kind=kind)
        figures = interface_metrics(mesh, _plane(mesh.coordinates, eps / 2))
        read.append((figures["interface_width_cells"], figures["interface_cells_across"]))
    (width_a, across_a), (width_b, across_b) = read
    assert width_b == pytest.approx(width_a, rel=0.03)
    assert across_b == pytest.approx(across_a, rel=0.1)
    assert across_a == pytest.approx(2 * np.log(9) * (eps / 2) / (H / 2), rel=0.1)  # [calc]


def _vof_ball(mesh, radius=0.3, sub=6):
    """Volume fractions of a ball in each cell, by sub-sampling its bounding box (sub^3 points a cell)."""
    pts = mesh.coordinates
    rows = mesh.blocks[0].connectivity
    lo, hi = pts[rows].min(axis=1), pts[rows].max(axis=1)
    inside = np.zeros(mesh.n_cells)
    count = np.zeros(mesh.n_cells)
    steps = (np.arange(sub) + 0.5) / sub
    corners = pts[rows]
    for u in steps:
        for v in steps:
            for w in steps:
                at = lo + (hi - lo) * np.array([u, v, w])
                if mesh.cell_type_counts.get("tetra"):  # keep the samples that lie in the tetrahedron
                    a, b, c, d = (corners[:, k] for k in range(4))
                    m = np.stack([b - a, c - a, d - a], axis=2)
                    bary = np.linalg.solve(m, (at - a)[..., None])[..., 0]
                    kept = (bary >= 0).all(axis=1) & (bary.sum(axis=1) <= 1)
                else:
                    kept = np.ones(mesh.n_cells, dtype=bool)
                count += kept
                inside += kept & (np.linalg.norm(at - 0.5, axis=1) < radius)
    return inside / np.maximum(count, 1)


def test_a_volume_of_fluid_ball_reads_sharp_on_tetrahedra_as_on_hexahedra(tmp_path):
    # one volume-of-fluid ball (cell fractions) on a grid of hexahedra and on its Kuhn tetrahedra:
    # about two cells across on both; on tetrahedra it read 3.7, over the 3.5 of a diffuse run
    across = {}
    for kind in ("hexahedron", "tetra"):
        mesh = grid_mesh((16, 16, 16), ((0, 1),) * 3, kind=kind)
        alpha = _vof_ball(mesh)
        folder = tmp_path / kind
        folder.mkdir()
        listing = write_listing(str(folder), [(0.1 * k, f"b_{k}.vtu", mesh, {"alpha": alpha}) for k in range(3)])
        result = measure(listing, "alpha", analyses=("interface",))
        assert result.audit["interface_kind"] == "sharp", kind
        across[kind] = result.audit["cells_across"]
    assert across["tetra"] == pytest.approx(across["hexahedron"], rel=0.25)


def test_tetrahedra_kept_whole_beside_a_split_cell_keep_their_count():
    # one cube's six tetrahedra marked as the pieces of one cell (as a reader marks a polyhedron it
    # splits), the rest whole: the pieces take the cube's side from their whole volume, the whole
    # tetrahedra theirs from six of them (regression: one split cell took the count from them all)
    grid = grid_mesh((N, N, N), ((0, 1),) * 3, kind="tetra")
    rows = grid.blocks[0].connectivity
    first = np.flatnonzero(np.isin(np.arange(len(rows)) % (N ** 3), [0]))  # the six of cube 0
    rest = np.setdiff1d(np.arange(len(rows)), first)
    mesh = Mesh(grid.points, [("tetra", rows[rest]), ("tetra", rows[first])],
                pieces=[None, np.zeros(first.size, dtype=np.int64)])
    assert first.size == 6 and mesh.n_whole_cells == rest.size + 1
    np.testing.assert_allclose(mesh.cell_sizes, H, rtol=1e-12)
