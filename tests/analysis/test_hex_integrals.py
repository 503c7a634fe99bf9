"""Width integrals on coned hexahedra, cell by cell, against the full split and an analytic profile.

The cell-by-cell path (:mod:`phasegauge.analysis._hex_integrals`) forms the same 12 to 24
tetrahedra per cell as the conforming split (:func:`phasegauge.model.simplices.split_cells`), so it must
give the split's integrals up to round-off (1e-12 relative); on a planar logistic profile every
estimator returns 5.889 eps (Olsson & Kreiss 2005).
"""

import math

import numpy as np
import pytest

import phasegauge.analysis._hex_integrals as hex_module
import phasegauge.analysis._interface_width as width_module
from phasegauge.analysis._hex_integrals import _HexBand, coned_hexahedra
from phasegauge.analysis._width_integrals import _SplitBand
from phasegauge.analysis.interface import METRIC_KEYS, interface_metrics, interface_profile_table
from phasegauge.meshgen import grid_mesh
from phasegauge.model.corners import corner_extremes

from conftest import check_sphere_widths
from phasegauge.model.mesh import Mesh

RTOL = 1e-12
# logistic profile c = 1/2 (1 + tanh(n / (2 eps))) (Olsson & Kreiss 2005): band volume per area
# over 0.05 < c < 0.95 is 2 eps ln 19 = 5.889 eps (REFERENCES.md [calc])
BAND = 2 * math.log(19.0)


def _sphere(mesh, cells_across=1.0, radius=0.3, n=None):
    """Logistic profile about the box centre, eps = ``cells_across`` cells of n per side."""
    n = n or round(mesh.n_points ** (1 / 3)) - 1
    d = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    return 0.5 * (1 + np.tanh((radius - d) / (2 * cells_across / n)))


def _rotated_corners(mesh, every=2):
    """The same grid with every ``every``-th cell listing its corners turned a quarter about z:
    its faces are flat, but it cuts some of them along the other diagonal than its neighbours,
    so the split gives those faces a centre and cones the cells (some with all six faces
    centred, some with a few)."""
    conn = mesh.blocks[0].connectivity.copy()
    turn = np.array([1, 2, 3, 0, 5, 6, 7, 4])
    conn[::every] = conn[::every][:, turn]
    return Mesh(mesh.points, [("hexahedron", conn)])


def _split_path(monkeypatch):
    monkeypatch.setattr(width_module, "coned_hexahedra", lambda mesh: None)


def _collapsed():
    """Jittered hexahedra, every fifth with one corner repeated (a wedge written as a hexahedron, as
    solvers write them): flat tetrahedra, so c varies on some of those cells' tetrahedra only."""
    mesh = grid_mesh((10, 10, 10), kind="hexahedron", jitter=0.2, seed=5)
    conn = mesh.blocks[0].connectivity.copy()
    conn[::5, 5] = conn[::5, 4]
    return Mesh(mesh.points, [("hexahedron", conn)])


def _meshes():
    return {"jittered": grid_mesh((10, 10, 10), kind="hexahedron", jitter=0.2, seed=5),
            "collapsed": _collapsed(),
            "turned": _rotated_corners(grid_mesh((10, 10, 10), kind="hexahedron")),
            "turned_some": _rotated_corners(grid_mesh((10, 10, 10), kind="hexahedron"), every=7)}


@pytest.mark.parametrize("name", ["jittered", "turned", "turned_some", "collapsed"])
@pytest.mark.parametrize("cells_across", [1.0, 2.5])
def test_cell_path_matches_the_full_split(monkeypatch, name, cells_across):
    mesh = _meshes()[name]
    coned = coned_hexahedra(mesh)
    rows, codes = coned[0]
    if name == "jittered":  # every inner face bent: every cell coned, each face cut along its shorter
        # diagonal (no two diagonals of a jittered face tie: no face centre)
        assert rows.size == mesh.n_cells and not (codes & 63).any()
    elif name in ("turned", "collapsed"):  # turned: every face between a turned cell and another is
        # cut two ways (a square: its diagonals tie, it keeps a centre); collapsed: bent faces everywhere,
        # some beside a repeated corner bent so far that a diagonal's triangle would turn a tetrahedron
        # (they keep a centre too)
        assert rows.size == mesh.n_cells
        assert (codes & 63).any()
    else:  # some cells coned, the others cut by the table (the split handles those)
        assert 0 < rows.size < mesh.n_cells
    assert len(np.unique(codes)) > 1  # faces on the boundary or cut alike: two tetrahedra each
    c = _sphere(mesh, cells_across)
    work = width_module.PreparedWidths(mesh, c, 0.5)
    assert isinstance(work.integrals, _HexBand)
    pieces = interface_metrics(mesh, c)
    # the distances against the contour's own triangles (the path searches one plane per crossed
    # cell instead: tested against the analytic distance below), so that the integrals and the
    # moments are compared with the split's alone
    for module in (hex_module, width_module):  # (formed with the contour, and where the distances are searched)
        monkeypatch.setattr(module, "_whole_cell_pieces", lambda mesh, geometry: geometry)
    triangles = interface_metrics(mesh, c)
    assert triangles["interface_width"] == pieces["interface_width"]  # the band volume reads no distance
    # the second moment reads them: the pieces' planes within O(h^2 / R) of the triangles'
    assert triangles["width_second_moment"] == pytest.approx(pieces["width_second_moment"], rel=0.02)
    # the cells no band edge crosses also over the split's tetrahedra (the path takes their trilinear
    # map instead: tested against the split on affine cells and the analytic widths below)
    monkeypatch.setattr(hex_module, "_QUADRATURE", False)
    fast = interface_metrics(mesh, c)
    fast_table = interface_profile_table(mesh, c)
    _split_path(monkeypatch)
    assert isinstance(width_module.PreparedWidths(mesh, c, 0.5).integrals, _SplitBand)
    slow = interface_metrics(mesh, c)
    assert list(fast) == list(slow) == list(METRIC_KEYS)
    for key in METRIC_KEYS:
        assert fast[key] == pytest.approx(slow[key], rel=RTOL, abs=0, nan_ok=True), key
    # the same points with known distances feed the local fits
    slow_table = interface_profile_table(mesh, c)
    assert np.array_equal(fast_table["n_samples"].to_numpy(), slow_table["n_samples"].to_numpy())
    np.testing.assert_allclose(fast_table["width"].to_numpy(), slow_table["width"].to_numpy(), rtol=1e-9)


def test_cell_path_integrals_match_the_split_one_by_one(monkeypatch):
    # the raw integrals, band volume, int c (1 - c), int |grad c| and the moments, each against the
    # split's (the 12 tetrahedra per cell are the split's own)
    monkeypatch.setattr(hex_module, "_QUADRATURE", False)
    mesh = _meshes()["jittered"]
    c = np.clip(_sphere(mesh, 1.5), 0.0, 1.0)
    low, high = corner_extremes(mesh, c)
    active = (high > 1e-6) & (low < 1 - 1e-6)
    fast = _HexBand(mesh, c, active, coned_hexahedra(mesh), low, high)
    slow = _SplitBand(mesh, c, active)
    assert fast.count == slow.count
    for name in ("band", "mixed", "total_gradient"):
        assert getattr(fast, name) == pytest.approx(getattr(slow, name), rel=RTOL), name
    # moments of a distance-like field known everywhere: the split takes centres as corner means
    # (radial, as the distance to the drop: a field along one axis, weighted by grad c . grad d, cancels to
    # round-off over the sphere in m0)
    dist = np.linalg.norm(mesh.coordinates - 0.5, axis=1) - 0.3
    slow_dist = slow.split.centre_means(dist)
    np.testing.assert_allclose(fast.moments(dist), slow.moments(slow_dist), rtol=RTOL)


def test_quadrature_on_affine_cells_matches_the_split():
    # cubes turned a quarter (flat faces, coned by the split) and sheared into parallelepipeds:
    # on affine cells with c and the distance linear, the trilinear map's gradient is exact and
    # the corner-and-centre rule is exact for c (1 - c) and d^2 (quadratic), so the cells no band
    # edge crosses must give the split's integrals to round-off (the split is exact for linear c)
    mesh = _rotated_corners(grid_mesh((6, 6, 6), kind="hexahedron"))
    shear = np.array([[1.0, 0.3, 0.1], [0.0, 0.9, -0.2], [0.0, 0.0, 1.1]])
    mesh = Mesh(mesh.points @ shear.T, [("hexahedron", mesh.blocks[0].connectivity)])
    x = mesh.coordinates
    inside = 0.3 + 0.2 * x[:, 0] + 0.1 * x[:, 1] - 0.15 * x[:, 2]
    above = 0.96 + 0.01 * x[:, 0] + 0.005 * x[:, 2]
    assert 0.05 < inside.min() and inside.max() < 0.95 and 0.95 < above.min() and above.max() < 1
    active = np.ones(mesh.n_cells, dtype=bool)
    for c in (inside, above):
        low, high = corner_extremes(mesh, c)
        fast = _HexBand(mesh, c, active, coned_hexahedra(mesh), low, high)
        assert fast.cells.smooth_chunks and not fast.cells.chunks  # every cell by the quadrature
        slow = _SplitBand(mesh, c, active)
        for name in ("band", "mixed", "total_gradient"):
            assert getattr(fast, name) == pytest.approx(getattr(slow, name), rel=RTOL, abs=1e-15), name
        dist = x[:, 0] - 0.4 * x[:, 1] + 0.2
        np.testing.assert_allclose(fast.moments(dist), slow.moments(slow.split.centre_means(dist)), rtol=RTOL)
    # and against calculus on the sheared unit cube (volume det S): c = 0.3 + g.x inside the band
    # everywhere, so int |grad c| = |g| det S, the band volume det S, and with c = a + b.xi over the
    # unit cube (b = S^T g), int c (1 - c) = det S (m - m^2 - sum(b^2) / 12), m = a + sum(b) / 2
    # (the mean and the variance of a uniform variable, 1/2 and 1/12)
    low, high = corner_extremes(mesh, inside)
    fast = _HexBand(mesh, inside, active, coned_hexahedra(mesh), low, high)
    g, volume = np.array([0.2, 0.1, -0.15]), np.linalg.det(shear)
    b = shear.T @ g
    mean = 0.3 + b.sum() / 2
    assert fast.total_gradient == pytest.approx(np.linalg.norm(g) * volume, rel=1e-12)
    assert fast.band == pytest.approx(volume, rel=1e-12)
    assert fast.mixed == pytest.approx(volume * (mean - mean ** 2 - (b ** 2).sum() / 12), rel=1e-12)


@pytest.mark.parametrize("cells_across", [4, 8])
def test_planar_logistic_profile_on_jittered_hexahedra(cells_across):
    # every estimator returns the 5-95 % thickness 5.889 eps of the logistic profile (Olsson &
    # Kreiss 2005); tolerances as for the other cell types (test_interface_width.py): the
    # piecewise-linear interpolant adds about h^2 / 6 to the variance of dc/dn, and the jittered
    # cells add their spread of sizes
    nx = 40 if cells_across == 4 else 64
    h = 1.0 / nx
    mesh = grid_mesh((nx, 4, 4), [(0, 1), (0, 4 * h), (0, 4 * h)], kind="hexahedron", jitter=0.2, seed=7)
    assert coned_hexahedra(mesh) is not None
    width = cells_across * h
    eps = width / BAND
    c = 0.5 * (1 + np.tanh((mesh.coordinates[:, 0] - 0.5037) / (2 * eps)))
    r = interface_metrics(mesh, c)
    high = 0.08 if cells_across == 4 else 0.03
    for key in ("interface_width", "width_threshold_free", "width_second_moment", "width_profile_median"):
        assert -0.02 < r[key] / width - 1 < high, key
    # dc/dn is a logistic density of variance pi^2 eps^2 / 3 (REFERENCES.md [calc])
    assert 0.96 < r["interface_variance"] / (np.pi ** 2 * eps ** 2 / 3) < (1 + high) ** 2


@pytest.mark.parametrize("cells_across, n", [(4, 32), (8, 48)])
def test_sphere_on_jittered_hexahedra_distances_and_widths(cells_across, n):
    # a logistic drop of radius R (Olsson & Kreiss 2005): the distance to the interface is
    # |r - R| (a sphere), and the band volume per area over 0.05 < c < 0.95 is
    # w (1 + w^2 / (12 R^2)) (REFERENCES.md [calc]: the shell R +- w/2 over the sphere's area).
    # The distances are searched against one plane per crossed cell (the piece's area-weighted
    # plane, `_cell_pieces`, half-size at least 0.45 of its cell's size): within O(h^2 / R) of the
    # contour's own triangles. Measured errors of the distances, root mean square and largest:
    # 0.022 h and 0.095 h at 4 cells across, 0.016 h and 0.12 h at 8 (pieces without the least
    # half-size 0.022 h and 0.17 h, 0.016 h and 0.13 h; on the triangles themselves 0.030 h and
    # 0.21 h, 0.023 h and 0.15 h); the same tolerances pass either way.
    radius = 0.3
    h = 1.0 / n
    mesh = grid_mesh((n, n, n), kind="hexahedron", jitter=0.2, seed=3)
    width = cells_across * h
    eps = width / BAND
    r_point = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    c = 0.5 * (1 + np.tanh((radius - r_point) / (2 * eps)))
    r, measured = interface_metrics(mesh, c, return_distances=True)
    check_sphere_widths(r, measured, mesh.coordinates, c, radius=radius, h=h, cells_across=cells_across, eps=eps,
                        rms=0.04, largest=0.25)


def test_renumbering_points_and_cells_leaves_the_contour_and_widths_alone():
    # the shorter diagonal of a bent face is chosen on the face's coordinates, never on point or
    # cell numbers: the same mesh with its points and cells shuffled gives the same contour area and
    # widths (to round-off: sums in another order). Against the sphere's area 4 pi R^2 too (the
    # contour's chords cut it short by O(h^2): -1.14 % at 16 cells a side, -1.27 % with face centres)
    from phasegauge.analysis.interface import find_interface

    mesh = grid_mesh((16, 16, 16), kind="hexahedron", jitter=0.2, seed=3)
    rng = np.random.default_rng(8)
    perm = rng.permutation(mesh.n_points)  # new point i is old point perm[i]
    new_number = np.empty_like(perm)
    new_number[perm] = np.arange(mesh.n_points)
    cells = rng.permutation(mesh.n_cells)
    shuffled = Mesh(mesh.points[perm], [("hexahedron", new_number[mesh.blocks[0].connectivity[cells]])])
    c = _sphere(mesh, 2.0)
    results = []
    for m, values in ((mesh, c), (shuffled, c[perm])):
        area = float(find_interface(m, values).element_sizes.sum())
        results.append((area, interface_metrics(m, values)))
    (area, one), (area_shuffled, two) = results
    assert area_shuffled == pytest.approx(area, rel=1e-12)
    assert area == pytest.approx(4 * math.pi * 0.3 ** 2, rel=0.02)
    for key in ("interface_size", "interface_width", "width_threshold_free", "width_second_moment",
                "interface_variance"):
        assert two[key] == pytest.approx(one[key], rel=1e-12), key


@pytest.mark.parametrize("jitter", [0.2, 0.3])
def test_band_cells_add_the_volume_of_their_tetrahedra(jitter):
    # a field inside the band everywhere: every cell by the quadrature, each adding its split
    # volume (the trilinear volume corrected face by face for the diagonal that cuts it), so the
    # band volume is the split's sum of tetrahedra (and the unit cube's volume, exact geometry);
    # at jitter 0.3 some faces keep a centre (no correction there)
    mesh = grid_mesh((8, 8, 8), kind="hexahedron", jitter=jitter, seed=11)
    x = mesh.coordinates
    c = 0.3 + 0.2 * x[:, 0] + 0.1 * x[:, 1] - 0.15 * x[:, 2]
    active = np.ones(mesh.n_cells, dtype=bool)
    low, high = corner_extremes(mesh, c)
    coned = coned_hexahedra(mesh)
    assert ((coned[0][1] & 63) > 0).any() == (jitter == 0.3)
    fast = _HexBand(mesh, c, active, coned, low, high)
    assert fast.cells.smooth_chunks and not fast.cells.chunks
    slow = _SplitBand(mesh, c, active)
    assert fast.band == pytest.approx(slow.band, rel=RTOL)
    assert fast.band == pytest.approx(1.0, rel=RTOL)
    assert not np.isclose(mesh.cell_measures, np.bincount(slow.split.owner, slow.split.measures), rtol=1e-6).all()
