"""Cell values to points on split polyhedra: the pieces of one whole cell are one sample of the point fit.

A field linear over the whole cells (each cell's value phi at its centroid, as a solver writes it) is
reproduced at every point of the file by the unlimited fit (``level_set_points``), and the limited fit and
the mean (``Mesh.cell_to_point``) give the values the same cells read as hexahedra give. Outside checks: the
analytic linear field; the hexahedra (VTK 12) that pyvista/VTK writes beside the polyhedra (VTK 42) [lib].
"""

import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

pv = pytest.importorskip("pyvista")

from phasegauge.io import Series  # noqa: E402
from phasegauge.model.level_set import level_set_points  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "io"))
from test_split_centres_of_blocks import _honeycomb, _prisms  # noqa: E402

SLOPE, OFFSET = np.array([0.7, -1.3, 1.5]), -0.2
#: a hexahedron's faces, outward, by its VTK corner numbers
HEX_FACES = [[0, 3, 2, 1], [4, 5, 6, 7], [0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6], [3, 0, 4, 7]]


def _read(grid, path):
    grid.save(str(path))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return Series(str(path)).read(0)


def _sheared_hexahedra():
    """Hexahedra of uneven spacing sheared in x by y: parallelepipeds, their faces at constant z parallelograms
    (cut along the shorter diagonal), the rest rectangles (a tie: a face centre); points, corners, centroids."""
    x, y, z = np.cumsum([0, .1, .15, .1, .2, .12, .1]), np.cumsum([0, .2, .1, .15, .1]), np.cumsum([0, .1, .2, .15])
    nx, ny = x.size, y.size
    points = np.array([[xi + 0.3 * yj, yj, zk] for zk in z for yj in y for xi in x])
    cells = []
    for k in range(z.size - 1):
        for j in range(ny - 1):
            for i in range(nx - 1):
                p = i + nx * (j + ny * k)
                low = [p, p + 1, p + 1 + nx, p + nx]
                cells.append(low + [c + nx * ny for c in low])
    cells = np.array(cells)
    return points, cells, points[cells].mean(axis=1)  # a parallelepiped's centroid: its corners' mean


def _as_polyhedra(points, cells, broken=()):
    """The hexahedra as polyhedra (VTK 42); the ``broken`` ones with their top face as two triangles (no
    hexahedron's shape: split about their centres, and the cells beside them coned to match)."""
    stream = []
    for n, c in enumerate(cells):
        faces = [[int(c[i]) for i in face] for face in HEX_FACES]
        if n in broken:
            top = faces.pop(1)
            faces += [top[:3], [top[0], top[2], top[3]]]
        face_stream = [len(faces)] + [v for f in faces for v in [len(f)] + f]
        stream += [len(face_stream)] + face_stream
    return pv.UnstructuredGrid(np.array(stream), np.full(len(cells), 42, np.uint8), points)


def test_phi_linear_over_whole_prisms_is_reproduced_at_every_file_point(tmp_path):
    # each piece was its own sample at its own centroid with its prism's value: at the box's walls the pieces
    # of a few prisms fitted a gradient the prisms do not have, 1.3e-1 off (slope 1.5 along z, cells of 1/20)
    points, cells, centres = _honeycomb(1 / 20, 12)
    grid = _prisms(points, cells)
    grid.cell_data["phi"] = centres @ SLOPE + OFFSET  # a regular prism's centroid: its centre
    step = _read(grid, tmp_path / "prisms.vtu")
    mesh = step.mesh
    assert mesh.cell_parents is not None and mesh.n_points > len(points)
    values = level_set_points(mesh, step.fields.cell_data["phi"])
    np.testing.assert_allclose(values, mesh.points @ SLOPE + OFFSET, rtol=0, atol=1e-12)  # analytic


@pytest.mark.parametrize("every", [True, False], ids=["every-polyhedron-split", "two-coned-among-hexahedra"])
def test_hexahedra_read_as_polyhedra_fit_as_the_hexahedra(tmp_path, request, every):
    # each piece its own sample: the unlimited fit 2.6e-1 off phi at the walls, the limited fit 1.2e-1 and the
    # mean 1.1e-2 off the hexahedra's (every polyhedron split; two coned: 3.0e-1, 1.0e-1, 2.0e-2)
    if every:  # each one split about its centre (and its rectangles' centres), as polyhedra of other shapes
        request.getfixturevalue("every_polyhedron_split")
    points, cells, centroids = _sheared_hexahedra()
    hexahedra = pv.UnstructuredGrid(np.hstack([np.full((len(cells), 1), 8), cells]).ravel(),
                                    np.full(len(cells), 12, np.uint8), points)
    polyhedra = _as_polyhedra(points, cells, broken=() if every else (20, 50))
    phi = centroids @ SLOPE + OFFSET
    with_nan = phi.copy()
    with_nan[[3, 40, 41]] = np.nan
    for grid in (hexahedra, polyhedra):
        grid.cell_data["phi"], grid.cell_data["gaps"] = phi, with_nan
    whole, split = _read(hexahedra, tmp_path / "hexahedra.vtu"), _read(polyhedra, tmp_path / "polyhedra.vtu")
    assert whole.mesh.cell_parents is None and split.mesh.cell_parents is not None
    n = len(points)
    np.testing.assert_allclose(split.mesh.points[:n], whole.mesh.points, rtol=0, atol=1e-15)
    assert split.mesh.n_whole_cells == len(cells) and split.mesh.n_points > n
    exact = points @ SLOPE + OFFSET  # analytic
    np.testing.assert_allclose(level_set_points(split.mesh, split.fields.cell_data["phi"])[:n], exact,
                               rtol=0, atol=1e-12)
    np.testing.assert_allclose(level_set_points(whole.mesh, whole.fields.cell_data["phi"]), exact,
                               rtol=0, atol=1e-12)
    if every:  # the added centres too: a face centre between two cells of unequal size took their measure-weighted
        # mean (5.45e-2 off); weighted by inverse distance to their centroids it lies on their line: exact (analytic)
        np.testing.assert_allclose(level_set_points(split.mesh, split.fields.cell_data["phi"]),
                                   split.mesh.points @ SLOPE + OFFSET, rtol=0, atol=1e-12)
    for name in ("phi", "gaps"):
        for method in ("linear", "mean"):
            got = split.mesh.cell_to_point(split.fields.cell_data[name], method=method)[:n]
            twin = whole.mesh.cell_to_point(whole.fields.cell_data[name], method=method)
            np.testing.assert_allclose(got, twin, rtol=0, atol=1e-12)
    # interior points: exact (analytic), as on the hexahedra
    inner = np.all((points > points.min(axis=0) + 1e-9) & (points < points.max(axis=0) - 1e-9), axis=1)
    inner &= (points[:, 0] > 0.3 * points[:, 1] + 1e-9) & (points[:, 0] < 0.3 * points[:, 1] + 0.77 - 1e-9)
    got = split.mesh.cell_to_point(split.fields.cell_data["phi"])[:n]
    assert inner.sum() > 10
    np.testing.assert_allclose(got[inner], exact[inner], rtol=0, atol=1e-12)


def test_whole_values_are_the_pieces_measure_weighted_means(tmp_path):
    points, cells, _ = _sheared_hexahedra()
    mesh = _read(_as_polyhedra(points, cells, broken=(20, 50)), tmp_path / "polyhedra.vtu").mesh
    from phasegauge.model._whole_points import whole_points, whole_values

    view = whole_points(mesh)
    values = np.random.default_rng(0).random((mesh.n_cells, 2))
    values[np.flatnonzero(mesh.cell_parents == 50)[0], 1] = np.nan
    got = whole_values(view, values)
    for cell in range(view.n_cells):
        own = mesh.cell_parents == cell
        expected = np.average(values[own], axis=0, weights=mesh.cell_measures[own])  # numpy's weighted mean
        np.testing.assert_allclose(got[cell], expected, rtol=1e-14, atol=0)
    for cell in np.flatnonzero(np.bincount(mesh.cell_parents) == 1):  # hexahedra kept whole: their own values
        np.testing.assert_array_equal(got[cell], values[mesh.cell_parents == cell][0])
    assert np.isnan(got[50, 1]) and np.isfinite(got[50, 0]) and np.isfinite(got[20]).all()
    # the whole cells' centroids: the hexahedra's, their corners' mean (a parallelepiped's)
    np.testing.assert_allclose(view.cell_centroids, points[cells].mean(axis=1), rtol=0, atol=1e-15)
