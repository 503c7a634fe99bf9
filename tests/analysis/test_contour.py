"""Contours of the indicator: exact geometry, reference libraries, NaN, orientation."""

import numpy as np
import pytest
from scipy.special import ellipe

from phasegauge.errors import OptionError
from phasegauge.meshgen import delaunay_mesh, grid_mesh
from phasegauge.analysis.interface import Contour, find_interface

R = 0.3
CENTRE = np.array([0.51, 0.49, 0.5])


def _disc(mesh, a=R, b=R):
    """Smooth field with the ellipse (x/a)^2 + (y/b)^2 = 1 as its 0.5 level set."""
    x, y = (mesh.coordinates[:, :2] - CENTRE[:2]).T
    return 0.5 + 2.0 * (1.0 - (x / a) ** 2 - (y / b) ** 2) * a * b


def _ball(mesh):
    d2 = ((mesh.coordinates - CENTRE) ** 2).sum(axis=1)
    return 0.5 + 2.0 * (R ** 2 - d2)


def _order(sizes, errors):
    """Least-squares slope of log|error| against log(cell size)."""
    return np.polyfit(np.log(sizes), np.log(np.abs(errors)), 1)[0]


# circle perimeter 2 pi r (exact geometry); a concave field interpolated linearly puts the
# contour inside the circle, so the length is underestimated (negative bias)
@pytest.mark.parametrize("kind", ["quad", "triangle", "mixed", "polygon"])
@pytest.mark.parametrize("jitter", [0.0, 0.25])
def test_circle_length_converges_at_second_order(kind, jitter):
    ns = (16, 32, 64)
    errors = [find_interface(grid_mesh((n, n), kind=kind, jitter=jitter, seed=n), _disc(
        grid_mesh((n, n), kind=kind, jitter=jitter, seed=n))).size - 2 * np.pi * R for n in ns]
    assert abs(errors[-1]) < 2e-3 * 2 * np.pi * R
    assert 1.7 < _order([1 / n for n in ns], errors) < 2.5
    if jitter == 0.0:
        assert all(e < 0 for e in errors)


# ellipse a=0.3, b=0.2: perimeter 4 a E(m), m = 1 - b^2/a^2 = 1.586544 (REFERENCES.md [calc],
# scipy.special.ellipe)
@pytest.mark.parametrize("kind", ["quad", "triangle"])
def test_ellipse_perimeter_converges(kind):
    exact = 4 * 0.3 * ellipe(1 - 0.2 ** 2 / 0.3 ** 2)
    assert exact == pytest.approx(1.586544, abs=1e-6)
    ns = (16, 32, 64)
    errors = []
    for n in ns:
        m = grid_mesh((n, n), kind=kind)
        errors.append(find_interface(m, _disc(m, 0.3, 0.2)).size - exact)
    assert abs(errors[-1]) < 2e-3 * exact
    assert 1.7 < _order([1 / n for n in ns], errors) < 2.5


# circle on unstructured Delaunay meshes: random points are not nested, so the observed order
# scatters; the error still falls roughly with h^2 (exact geometry)
def test_circle_length_on_delaunay_meshes():
    ns = (400, 1600, 6400)
    errors = []
    for n in ns:
        m = delaunay_mesh(n, seed=3)
        errors.append(find_interface(m, _disc(m)).size - 2 * np.pi * R)
    assert abs(errors[-1]) < 3e-3 * 2 * np.pi * R
    assert _order([n ** -0.5 for n in ns], errors) > 1.4


# sphere area 4 pi r^2 (exact geometry), negative bias as for scikit-image's ellipsoid test
@pytest.mark.parametrize("kind,method", [("hexahedron", "grid"), ("hexahedron", "cells"),
                                         ("tetra", "auto"), ("wedge", "auto"), ("pyramid", "auto"),
                                         ("mixed", "auto")])
def test_sphere_area_converges_at_second_order(kind, method):
    ns = (6, 12, 24)
    errors = []
    for n in ns:
        m = grid_mesh((n, n, n), kind=kind)
        errors.append(find_interface(m, _ball(m), method=method).size - 4 * np.pi * R ** 2)
    assert abs(errors[-1]) < 1.5e-2 * 4 * np.pi * R ** 2
    assert 1.6 < _order([1 / n for n in ns], errors) < 2.6
    assert all(e < 0 for e in errors)


def test_sphere_area_on_delaunay_tetrahedra():
    m = delaunay_mesh(5000, dim=3, seed=2)
    area = find_interface(m, _ball(m)).size
    # about 17 points per side: -2.6 % (negative bias, as on grids)
    assert area == pytest.approx(4 * np.pi * R ** 2, rel=4e-2)


# scikit-image measure.find_contours (marching squares) on the same point array: the same
# edge crossings, so the lengths agree to round-off away from saddles
def test_length_matches_scikit_image_find_contours():
    from skimage import measure

    n = 40
    m = grid_mesh((n, n), kind="quad")
    c = _disc(m, 0.3, 0.2)
    array = m.regular_grid.points_to_array(c)
    length = sum(np.linalg.norm(np.diff(line, axis=0), axis=1).sum()
                 for line in measure.find_contours(array, 0.5)) / n
    ours = find_interface(m, c, method="cells")
    assert ours.size == pytest.approx(length, rel=1e-3)
    assert find_interface(m, c, method="grid").size == pytest.approx(length, rel=1e-12)


# scikit-image measure.marching_cubes + mesh_surface_area on the same point array; marching
# cubes and our tetrahedral split triangulate each cube differently: agree to O(h^2)
def test_area_matches_scikit_image_marching_cubes():
    from skimage import measure

    n = 20
    m = grid_mesh((n, n, n), kind="hexahedron")
    c = _ball(m)
    verts, faces, _, _ = measure.marching_cubes(m.regular_grid.points_to_array(c), 0.5,
                                                spacing=(1 / n,) * 3)
    reference = measure.mesh_surface_area(verts, faces)
    # scikit-image keeps float32 vertices: agreement to 1e-6
    assert find_interface(m, c, method="grid").size == pytest.approx(reference, rel=1e-6)
    assert find_interface(m, c, method="cells").size == pytest.approx(reference, rel=5e-3)


def _pyvista_grid(mesh, c):
    import pyvista

    from phasegauge.meshgen import to_meshio

    pyvista.OFF_SCREEN = True
    grid = pyvista.from_meshio(to_meshio(mesh, point_data={"c": c}))
    return grid


# pyvista's contour filter (VTK) on the same point data: on triangles and tetrahedra it cuts the
# same linear simplices, so lengths / areas agree to round-off
@pytest.mark.parametrize("kind", ["triangle", "tetra"])
def test_size_matches_pyvista_contour_on_simplices(kind):
    dim = 2 if kind == "triangle" else 3
    m = grid_mesh((24,) * dim, kind=kind, jitter=0.2)
    c = _disc(m) if dim == 2 else _ball(m)
    iso = _pyvista_grid(m, c).contour([0.5], scalars="c")
    sizes = iso.compute_cell_sizes(length=dim == 2, area=dim == 3, volume=False)
    reference = float(np.abs(sizes.cell_data["Length" if dim == 2 else "Area"]).sum())
    assert find_interface(m, c).size == pytest.approx(reference, rel=1e-9)


# pyvista's contour on hexahedra, wedges, pyramids: VTK uses its own per-type tables, so the
# surfaces differ at O(h^2)
@pytest.mark.parametrize("kind", ["hexahedron", "wedge", "pyramid", "mixed"])
def test_area_close_to_pyvista_contour_on_other_cells(kind):
    m = grid_mesh((16, 16, 16), kind=kind)
    c = _ball(m)
    iso = _pyvista_grid(m, c).contour([0.5], scalars="c")
    reference = float(np.abs(iso.compute_cell_sizes(length=False, area=True, volume=False)
                             .cell_data["Area"]).sum())
    assert find_interface(m, c, method="cells").size == pytest.approx(reference, rel=1e-2)


def _enclosed(contour):
    """Area (2D, shoelace) or volume (3D, divergence theorem) enclosed by an oriented contour."""
    p = contour.points[contour.elements]
    if contour.dimension == 2:
        a, b = contour.plane_axes
        return 0.5 * np.sum(p[:, 0, a] * p[:, 1, b] - p[:, 1, a] * p[:, 0, b])
    return np.sum(np.einsum("ij,ij->i", p[:, 0], np.cross(p[:, 1], p[:, 2]))) / 6.0


# orientation: phase on the left (2D) / normals out of the phase (3D), so the enclosed area and
# volume come out positive and close to pi r^2 and 4/3 pi r^3 (exact geometry)
@pytest.mark.parametrize("kind,method", [("quad", "grid"), ("quad", "cells"), ("triangle", "auto"),
                                         ("polygon", "auto"), ("hexahedron", "grid"),
                                         ("hexahedron", "cells"), ("tetra", "auto"),
                                         ("wedge", "auto"), ("pyramid", "auto")])
def test_orientation_encloses_the_phase(kind, method):
    dim = 2 if kind in ("quad", "triangle", "polygon") else 3
    m = grid_mesh((32,) * dim if dim == 2 else (12,) * 3, kind=kind)
    c = _disc(m) if dim == 2 else _ball(m)
    enclosed = _enclosed(find_interface(m, c, method=method))
    exact = np.pi * R ** 2 if dim == 2 else 4 / 3 * np.pi * R ** 3
    # the contour lies inside the circle / sphere (negative bias): 1.2 % at 32 cells per side in
    # 2D, 5.7 % at 12 in 3D
    assert enclosed == pytest.approx(exact, rel=2e-2 if dim == 2 else 7e-2)
    assert enclosed < exact


@pytest.mark.parametrize("kind", ["quad", "triangle", "hexahedron", "tetra", "wedge", "pyramid"])
def test_elements_lie_in_their_cells(kind):
    dim = 2 if kind in ("quad", "triangle") else 3
    m = grid_mesh((10,) * dim, kind=kind)
    contour = find_interface(m, _disc(m) if dim == 2 else _ball(m))
    axes = list(m.plane_axes)
    centroids = contour.centroids[:, axes]
    lo = np.full((m.n_cells, dim), np.inf)
    hi = np.full((m.n_cells, dim), -np.inf)
    for block, start in zip(m.blocks, m.block_offsets[:-1]):
        pts = m.coordinates[block.connectivity]
        lo[start:start + len(block)] = pts.min(axis=1)
        hi[start:start + len(block)] = pts.max(axis=1)
    assert np.all(centroids >= lo[contour.cells] - 1e-12)
    assert np.all(centroids <= hi[contour.cells] + 1e-12)


def test_point_data_in_a_plane_other_than_xy():
    m2 = grid_mesh((20, 20), kind="triangle")
    pts = np.zeros((m2.n_points, 3))
    pts[:, 0] = 3.0
    pts[:, 1:] = m2.coordinates
    from phasegauge.model.mesh import Mesh

    m = Mesh(pts, [("triangle", m2.blocks[0].connectivity)])
    contour = find_interface(m, _disc(m2))
    assert contour.plane_axes == (1, 2)
    assert np.allclose(contour.points[:, 0], 3.0)
    assert contour.size == pytest.approx(find_interface(m2, _disc(m2)).size, rel=1e-12)


def test_nan_cells_are_skipped():
    m = grid_mesh((32, 32), kind="quad")
    c = _disc(m)
    full = find_interface(m, c)
    x = m.coordinates[:, 0]
    c_nan = np.where(x > 0.8, np.nan, c)  # cells reaching past x = 0.8 go: arc x > 0.78 lost
    part = find_interface(m, c_nan)
    lost = 2 * np.arccos((0.78125 - CENTRE[0]) / R) * R
    assert part.size == pytest.approx(full.size - lost, rel=2e-2)
    bad = np.any(np.isnan(c_nan[m.blocks[0].connectivity]), axis=1)
    assert not np.any(bad[part.cells])


def test_no_crossing_gives_an_empty_contour():
    for m in (grid_mesh((4, 4)), grid_mesh((3, 3, 3)), grid_mesh((3, 3, 3), kind="tetra")):
        contour = find_interface(m, np.zeros(m.n_points))
        assert contour.n_elements == 0 and contour.size == 0.0
        assert contour.elements.shape[1] == m.dimension


def test_contour_cells_and_sizes_shapes():
    m = grid_mesh((12, 12, 12), kind="tetra")
    contour = find_interface(m, _ball(m))
    assert isinstance(contour, Contour)
    assert contour.points.shape[1] == 3
    assert contour.cells.shape == (contour.n_elements,)
    assert contour.element_sizes.shape == (contour.n_elements,)
    assert np.all(contour.element_sizes > 0)


@pytest.mark.parametrize("kwargs,match", [({"level": "half"}, "level must be a number"),
                                          ({"level": np.nan}, "level must be finite"),
                                          ({"method": "fast"}, "method must be")])
def test_bad_options(kwargs, match):
    m = grid_mesh((4, 4))
    with pytest.raises(OptionError, match=match):
        find_interface(m, np.zeros(m.n_points), **kwargs)


def test_bad_shapes_and_grid_method():
    m = grid_mesh((4, 4), kind="triangle")
    with pytest.raises(OptionError, match="point values must have shape"):
        find_interface(m, np.zeros(m.n_cells))
    with pytest.raises(OptionError, match="needs a regular grid"):
        find_interface(m, np.zeros(m.n_points), method="grid")
    q = grid_mesh((4, 4))
    with pytest.raises(OptionError, match="cannot skip NaN"):
        find_interface(q, np.full(q.n_points, np.nan), method="grid")


@pytest.mark.parametrize("k", [3, 4])
def test_lone_first_table_is_a_stable_argsort_of_each_pattern(k):
    # the marching step orders a cut simplex's corners by one look-up per above-the-level
    # pattern; each row must be what numpy's stable argsort of "not above" gives (reference: numpy)
    from phasegauge.analysis._contour import _lone_first

    table = _lone_first(k)
    for pattern in range(1 << k):
        above = np.array([(pattern >> j) & 1 for j in range(k)], dtype=bool)
        assert np.array_equal(table[pattern], np.argsort(~above, kind="stable"))


def test_element_sizes_are_kept_and_read_only():
    # computed once per contour and shared by its readers, so none may change them in place
    m = grid_mesh((6, 6, 6), kind="hexahedron", jitter=0.2, seed=2)
    x = m.coordinates
    c = 0.5 + 2.0 * (0.09 - ((x - 0.5) ** 2).sum(axis=1))
    contour = find_interface(m, c)
    sizes = contour.element_sizes
    assert sizes is contour.element_sizes
    with pytest.raises(ValueError):
        sizes[0] = 1.0
    # the triangle areas, as |cross| / 2 of their corners (reference: numpy's cross product)
    p = contour.points[contour.elements]
    expected = 0.5 * np.linalg.norm(np.cross(p[:, 1] - p[:, 0], p[:, 2] - p[:, 0]), axis=1)
    assert np.array_equal(sizes, expected)
