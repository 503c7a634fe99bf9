"""A field whose point values on opposite boundaries match to round-off looks periodic.

Outside check: a field built periodic from sin and cos (2 pi periodic to round-off, numpy's
own evaluation) against fields that are not (c = x; a drop with a uniform matrix around it).
"""

import warnings

import numpy as np
import pytest

from phasegauge.analysis.droplets import looks_periodic
from phasegauge.meshgen import grid_mesh

# hexahedra written as polyhedra, split as polyhedra of other shapes are (conftest)
pytestmark = pytest.mark.usefixtures("every_polyhedron_split")


def test_periodic_field_is_told_apart_from_bounded_ones():
    mesh = grid_mesh((32, 24))
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    periodic = 0.5 + 0.4 * np.cos(2 * np.pi * x) * np.cos(2 * np.pi * y)
    assert looks_periodic(mesh, periodic) == ["x", "y"]
    assert looks_periodic(mesh, periodic, periodic=("x",)) == ["y"]
    assert looks_periodic(mesh, 0.8 * x + 0.1 * y) == []
    drop = 0.5 * (1 + np.tanh((0.2 - np.hypot(x - 0.5, y - 0.5)) / 0.02))  # matrix on every boundary
    assert looks_periodic(mesh, drop) == []
    only_x = 0.5 + 0.4 * np.cos(2 * np.pi * x) * y
    assert looks_periodic(mesh, only_x) == ["x"]


def test_measure_without_periodic_warns_once(tmp_path):
    from phasegauge import measure
    from phasegauge.meshgen import to_meshio

    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((40, 40))
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    for k in range(3):  # a drop across the corner, periodic in x and y
        c = 0.5 * (1 + np.tanh((0.15 - np.hypot(np.sin(np.pi * (x - 0.0)), np.sin(np.pi * y))) / 0.03))
        to_meshio(mesh, point_data={"c": c}).write(str(folder / f"s_{k}.vtu"))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        measure(str(folder), field="c")
    texts = [str(w.message) for w in caught if "looks periodic" in str(w.message)]
    assert len(texts) == 1 and "--periodic x,y" in texts[0]


def test_layered_field_is_not_taken_for_periodic():
    # a flat free surface in a tank: c depends on y only, so the two x walls match
    mesh = grid_mesh((32, 32))
    y = mesh.points[:, 1]
    layered = 0.5 * (1 + np.tanh((0.4 - y) / 0.03))
    assert looks_periodic(mesh, layered) == []


def _moved(mesh, points):
    from phasegauge.model.mesh import Mesh

    return Mesh(points, [(b.cell_type, b.connectivity) for b in mesh.blocks])


def _periodic_in_plane(u, v):
    return 0.5 + 0.4 * np.cos(2 * np.pi * u) * np.cos(2 * np.pi * v)


def test_mesh_in_the_xz_plane_is_checked_along_x_and_z():
    # regression: the axes checked were range(dimension) (x, y), so the z axis of an x-z mesh was never looked at
    flat = grid_mesh((32, 24))
    points = np.zeros_like(flat.points)
    points[:, 0], points[:, 2] = flat.points[:, 0], flat.points[:, 1]
    mesh = _moved(flat, points)
    assert mesh.plane_axes == (0, 2)
    assert looks_periodic(mesh, _periodic_in_plane(points[:, 0], points[:, 2])) == ["x", "z"]


def test_boundary_coordinates_off_by_round_off_are_still_checked():
    # regression: the next plane inside was found by exact equality of coordinates, so boundary points
    # scattered by 1e-12 were taken for the plane inside and the axis was passed over
    flat = grid_mesh((32, 24))
    rng = np.random.default_rng(3)
    points = flat.points + rng.uniform(-1e-12, 1e-12, flat.points.shape) * np.array([1, 1, 0])
    mesh = _moved(flat, points)
    assert looks_periodic(mesh, _periodic_in_plane(flat.points[:, 0], flat.points[:, 1])) == ["x", "y"]


def test_mesh_one_cell_thick_is_not_periodic_across_its_thickness():
    # a 3D mesh one cell thick measured as 3D: its two faces hold the same values by construction
    mesh = grid_mesh((32, 24, 1), bounds=[(0, 1), (0, 1), (0, 0.05)])
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    assert looks_periodic(mesh, 0.5 + 0.4 * np.cos(2 * np.pi * x) * y) == ["x"]


def test_polyhedral_mesh_one_cell_thick_is_not_periodic_across_its_thickness(tmp_path):
    # the same slab as VTK polyhedra (split about face and cell centres, which lie between the two
    # faces): the analytic answer is the hexahedral one, x only
    import warnings

    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    hexes = grid_mesh((16, 12, 1), bounds=[(0, 1), (0, 1), (0, 0.05)])
    path = str(tmp_path / "slab_0.vtu")
    to_polyhedral_grid(hexes).cast_to_unstructured_grid().save(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mesh = Series(path).read(0).mesh
    assert mesh.cell_parents is not None
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    assert looks_periodic(mesh, 0.5 + 0.4 * np.cos(2 * np.pi * x) * y) == ["x"]


@pytest.mark.parametrize("layers", [1, 2, 3])
def test_split_cells_spanning_both_planes_checked_as_every_cell_is(tmp_path, layers):
    # the probe of a few whole cells answers as the check of every cell: a hexahedron spans both
    # planes of its axis only when the mesh is one cell thick along it (elementary geometry)
    from phasegauge.analysis._periodic_look import _every_cell_spans
    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    hexes = grid_mesh((4, 3, layers), bounds=[(0, 1), (0, 1), (0, 0.05 * layers)])
    path = str(tmp_path / "slab_0.vtu")
    to_polyhedral_grid(hexes).cast_to_unstructured_grid().save(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mesh = Series(path).read(0).mesh
    z = mesh.points[:, 2]
    low, high = np.flatnonzero(np.isclose(z, 0.0)), np.flatnonzero(np.isclose(z, 0.05 * layers))
    assert _every_cell_spans(mesh, low, high) == (layers == 1)


def test_a_cell_off_the_probed_ones_that_does_not_span_is_found(tmp_path):
    # the probed whole cells span both planes but another cell does not (its corners taken off the
    # low plane's list): the check of every cell answers False, as counting per whole cell does
    from phasegauge.analysis._periodic_look import _every_cell_spans
    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    path = str(tmp_path / "slab_0.vtu")
    to_polyhedral_grid(grid_mesh((4, 3, 1), bounds=[(0, 1), (0, 1), (0, 0.05)])).cast_to_unstructured_grid().save(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mesh = Series(path).read(0).mesh
    z = mesh.points[:, 2]
    low, high = np.flatnonzero(np.isclose(z, 0.0)), np.flatnonzero(np.isclose(z, 0.05))
    parents = np.asarray(mesh.cell_parents)
    conn = np.concatenate([block.connectivity.ravel() for block in mesh.blocks])  # the split: tetrahedra only
    corners = conn.reshape(parents.size, -1)

    def points_of(cell):
        return np.unique(corners[parents == cell])

    probes = {int(parents[0]), int(parents[parents.size // 2]), int(parents[-1])}
    for target in sorted(set(parents.tolist()) - probes):
        kept = np.setdiff1d(low, points_of(target))
        if all(np.intersect1d(points_of(p), kept).size for p in probes):
            break
    spans = [np.intersect1d(points_of(cell), kept).size > 0 and np.intersect1d(points_of(cell), high).size > 0
             for cell in np.unique(parents)]
    assert not all(spans) and sum(spans) == len(spans) - 1
    assert _every_cell_spans(mesh, kept, high) is False
    assert _every_cell_spans(mesh, low, high) is True


def test_a_drop_centred_in_a_closed_box_is_no_sign():
    # mirrored about the box's middle, its tail matches on opposite walls and varies along them by more
    # than 1e-3; but no droplet reaches a wall, so nothing would be counted twice (the audit's sphere)
    mesh = grid_mesh((24, 24, 24), kind="hexahedron")
    r = np.linalg.norm(mesh.points - 0.5, axis=1)
    drop = 1.0 / (1.0 + np.exp((r - 0.3) / 0.06))
    assert np.ptp(drop[mesh.points[:, 0] == 0.0]) > 1e-3
    assert looks_periodic(mesh, drop, level=0.5) == []
    x, y = mesh.points[:, 0], mesh.points[:, 1]
    corners = 0.5 + 0.4 * np.cos(2 * np.pi * x) * np.cos(2 * np.pi * y)  # drops across the walls
    assert looks_periodic(mesh, corners, level=0.5) == ["x", "y"]
