"""The share of an interface within the widths' reach of the domain's boundary, and the bias it brings.

Outside references: the logistic profile's derivative has variance pi^2 eps^2 / 3 (the logistic
distribution's variance), so drops written with eps^2 = 4 + 6 k / pi^2 have a variance growing by
exactly 2 per step (a diffusivity of 1 for a flat interface); the distances to the wall are numpy's
arithmetic on the grid written (pyvista's image data).
"""

import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.analysis._boundary_reach import boundary_share
from phasegauge.meshgen import grid_mesh

pyvista.OFF_SCREEN = True


def _drops(folder, centre_y, n=120, radius=20.0):
    folder.mkdir()
    for k in range(4):
        grid = pyvista.ImageData(dimensions=(n + 1, n + 1, 1))
        p = grid.cell_centers().points
        eps = np.sqrt(4 + 6 * k / np.pi ** 2)
        grid.cell_data["c"] = 1 / (1 + np.exp((np.hypot(p[:, 0] - n / 2, p[:, 1] - centre_y) - radius) / eps))
        grid.field_data["TimeValue"] = np.array([float(k)])
        grid.cast_to_unstructured_grid().save(folder / f"s_{k}.vtu")
    return str(folder)


def test_a_drop_near_a_wall_is_warned_of_and_reads_low(tmp_path):
    # the same drop (radius 20 cells) in the open (40 cells from every wall) and 4 cells from a wall
    runs = {}
    for name, centre in (("open", 60.0), ("wall", 24.0)):
        runs[name] = phasegauge.measure(_drops(tmp_path / name, centre), "c", analyses=("interface",))
    share = {k: r.steps["interface_near_boundary_fraction"] for k, r in runs.items()}
    assert (share["open"] == 0).all() and (share["wall"] > 0.2).all()  # the side facing the wall
    kinds = {k: [f.kind for f in r.findings] for k, r in runs.items()}
    assert "interface_near_boundary" in kinds["wall"] and "interface_near_boundary" not in kinds["open"]
    d = {k: r.audit["D_num"] for k, r in runs.items()}
    # 1 less the curvature's bias README gives, 2 pi^2 eps^2 / (3 R^2): about 0.1 at eps = 2.5, R = 20
    assert d["open"] == pytest.approx(0.91, abs=0.03)
    assert d["wall"] < 0.95 * d["open"]  # the profile cut at the wall: the growth reads low


def test_share_of_a_straight_interface_against_its_distance_to_a_wall():
    # a straight interface x = 0.3 in the unit square: every element lies 0.3 from the wall x = 0
    mesh = grid_mesh((20, 20), kind="quad")
    centroids = np.c_[np.full(20, 0.3), (np.arange(20) + 0.5) / 20, np.zeros(20)]
    sizes = np.full(20, 0.05)
    # within 0.1 of the walls y = 0 and y = 1: the two elements at each end (y = 0.025, 0.075)
    assert boundary_share(mesh, centroids, sizes, 0.1, lateral=0.05) == pytest.approx(4 / 20)
    assert boundary_share(mesh, centroids, sizes, 0.31, lateral=0.05) == pytest.approx(1.0)
    assert np.isnan(boundary_share(mesh, centroids[:0], sizes[:0], 0.2))


def test_side_walls_along_the_normal_cut_no_profile():
    # a slab across a channel (interface x = 0.5, normal along x) between walls y = 0 and y = 0.1: the
    # walls' faces lie along the normal (their own normals across it), so none faces an element, the
    # end elements next to the walls included (numpy's geometry of the grid's boundary edges)
    mesh = grid_mesh((40, 4), bounds=[(0.0, 1.0), (0.0, 0.1)], kind="quad")
    centroids = np.c_[np.full(4, 0.5), (np.arange(4) + 0.5) / 40, np.zeros(4)]
    normals = np.tile([1.0, 0.0, 0.0], (4, 1))
    h = 0.025
    assert boundary_share(mesh, centroids, np.full(4, 0.025), 0.2, normals=normals, lateral=h) == 0.0
    assert boundary_share(mesh, centroids, np.full(4, 0.025), 0.2) == 1.0  # any face, any direction: all
    # the same elements in a box periodic along y: no boundary within reach at all
    assert boundary_share(mesh, centroids, np.full(4, 0.025), 0.2, periodic=("y",)) == 0.0
    # (the end walls x = 0 and x = 1, 0.5 away along the normal, lie beyond the reach)


def test_a_facing_wall_behind_many_nearer_side_wall_faces_is_found():
    # a slab across a narrow channel 0.1 before its end wall x = 1 (normal along x, cells of 0.0025):
    # each element's normal line meets the end wall 0.1 away, within the reach 0.2, so the whole interface
    # counts (geometry); about 80 side-wall edges lie nearer than the end wall to the elements by the walls
    # (before: only the 16 nearest faces were looked at, and the end wall was missed there)
    h = 0.0025
    mesh = grid_mesh((400, 20), bounds=[(0.0, 1.0), (0.0, 0.05)], kind="quad")
    centroids = np.c_[np.full(20, 0.9), (np.arange(20) + 0.5) * h, np.zeros(20)]
    normals = np.tile([1.0, 0.0, 0.0], (20, 1))
    assert boundary_share(mesh, centroids, np.full(20, h), 0.2, normals=normals, lateral=h) == 1.0
    # the end wall beyond the reach: nothing
    assert boundary_share(mesh, centroids, np.full(20, h), 0.09, normals=normals, lateral=h) == 0.0


def test_share_against_every_face_tested_one_by_one():
    # random elements and normals in a box of tetrahedra: the share equals the one from testing every
    # boundary face against every element with numpy (the definition, without the searches)
    from phasegauge.analysis._boundary_reach import _boundary_faces

    mesh = grid_mesh((12, 10, 8), kind="tetra")
    rng = np.random.default_rng(11)
    at = rng.uniform(0.0, 1.0, (400, 3))
    normals = rng.normal(size=(400, 3))
    normals /= np.linalg.norm(normals, axis=1)[:, None]
    sizes = rng.uniform(0.5, 1.5, 400)
    centre, face_normal = _boundary_faces(mesh)
    for reach, lateral in ((0.3, 0.1), (0.15, 0.02), (0.5, 0.05)):
        offset = centre[None, :, :] - at[:, None, :]
        square = (offset ** 2).sum(axis=2)
        along = np.einsum("ikj,ij->ik", offset, normals)
        facing = np.abs(normals @ face_normal.T) >= np.cos(np.pi / 4)
        cut = ((square < reach ** 2) & (square - along ** 2 <= lateral ** 2) & facing).any(axis=1)
        share = boundary_share(mesh, at, sizes, reach, normals=normals, lateral=lateral)
        assert share == pytest.approx(sizes[cut].sum() / sizes.sum(), abs=1e-12)
        assert 0.0 < share < 1.0
        anywhere = (square < reach ** 2).any(axis=1)
        assert boundary_share(mesh, at, sizes, reach) == pytest.approx(sizes[anywhere].sum() / sizes.sum(), abs=1e-12)


def test_box_faces_have_axis_normals_whatever_the_point_numbering():
    # a hexahedral box whose points are numbered in a shuffled order (as a mesher may number them): each
    # boundary face of the box lies in a plane x, y or z = const, so its unit normal is an axis (geometry)
    from phasegauge.analysis._boundary_reach import _boundary_faces
    from phasegauge.model.mesh import Mesh

    box = grid_mesh((4, 4, 4))
    order = np.random.default_rng(5).permutation(box.n_points)
    new = np.empty_like(order)
    new[order] = np.arange(box.n_points)
    shuffled = Mesh(box.points[order], [(b.cell_type, new[b.connectivity]) for b in box.blocks])
    centres, normals = _boundary_faces(shuffled)
    assert centres.shape[0] == 6 * 16
    assert np.allclose(np.sort(np.abs(normals), axis=1), [0.0, 0.0, 1.0])


def test_no_near_boundary_finding_for_a_sharp_interface():
    # a sharp (volume-of-fluid) interface is one to two cells by design: no profile for a wall to cut
    # (the rule README's findings table gives); a diffuse one over the threshold is warned of
    import pandas as pd

    from phasegauge.run._boundary_findings import NEAR_BOUNDARY_SHARE, boundary_reach_finding

    steps = pd.DataFrame({"time": [0.0, 1.0], "interface_near_boundary_fraction": [0.0, 2 * NEAR_BOUNDARY_SHARE]})
    assert boundary_reach_finding(steps, "sharp") is None
    assert boundary_reach_finding(steps, "diffuse").kind == "interface_near_boundary"


def test_a_reach_beyond_64_cells_is_cut_to_64():
    # a slab across a duct 6 x 6 x 200 cells, its end walls 100 cells away along the normal: a reach of
    # 1e9 (a profile smeared over the domain) is cut to 64 cells, where no wall ahead is found, as with a
    # reach of 64 cells; 40 cells from the end wall the wall is found either way (geometry)
    mesh = grid_mesh((200, 6, 6), bounds=[(0.0, 200.0), (0.0, 6.0), (0.0, 6.0)])
    y, z = np.meshgrid(np.arange(6) + 0.5, np.arange(6) + 0.5)
    for x, expected in ((100.0, 0.0), (160.0, 1.0)):
        centroids = np.c_[np.full(36, x), y.ravel(), z.ravel()]
        normals = np.tile([1.0, 0.0, 0.0], (36, 1))
        sizes = np.ones(36)
        huge = boundary_share(mesh, centroids, sizes, 1e9, normals=normals, lateral=1.0)
        assert huge == boundary_share(mesh, centroids, sizes, 64.0, normals=normals, lateral=1.0) == expected
