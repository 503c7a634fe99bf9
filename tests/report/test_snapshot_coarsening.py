"""3D interface snapshots: a large surface is drawn coarsened by vertex clustering, without holes."""

import numpy as np
import pytest

from phasegauge.report._plots_interface import coarsened_surface, plot_interface_snapshots


def _sphere(radius=0.3, n=80):
    # reference surface: scikit-image's marching cubes of a sphere's distance field
    from skimage.measure import marching_cubes

    axis = np.linspace(0.0, 1.0, n)
    x, y, z = np.meshgrid(axis, axis, axis, indexing="ij")
    field = np.sqrt((x - 0.5) ** 2 + (y - 0.5) ** 2 + (z - 0.5) ** 2)
    verts, faces, _, _ = marching_cubes(field, radius, spacing=(axis[1],) * 3)
    return verts, faces


def _area(points, tris):
    a, b, c = (points[tris[:, k]] for k in range(3))
    return 0.5 * np.linalg.norm(np.cross(b - a, c - a), axis=1).sum()


def test_coarsened_sphere_keeps_its_area_and_extent():
    points, tris = _sphere()
    assert len(tris) > 20000
    small_points, small_tris = coarsened_surface(points, tris, 3000, bounds=((0, 0, 0), (1, 1, 1)))
    assert 500 < len(small_tris) <= 3000
    # analytic: the sphere's area 4 pi r^2; clustering flattens it a little (a few per cent)
    assert _area(small_points, small_tris) == pytest.approx(4 * np.pi * 0.3 ** 2, rel=0.05)
    # the silhouette: the extent stays within 0.02 of the sphere's [0.2, 0.8]; the clustering grid ends at
    # 27 cells per side here (54, 43, 34, 27), so this is tighter than one cell (1/27 of the box)
    assert np.allclose(small_points.min(axis=0), 0.2, atol=0.02)
    assert np.allclose(small_points.max(axis=0), 0.8, atol=0.02)
    # closed: every edge of the coarse surface is shared by two triangles (or an even number)
    edges = np.sort(np.concatenate([small_tris[:, [0, 1]], small_tris[:, [1, 2]], small_tris[:, [2, 0]]]), axis=1)
    _, counts = np.unique(edges, axis=0, return_counts=True)
    assert np.mean(counts % 2 == 0) > 0.99


def test_small_surfaces_are_drawn_as_they_are():
    points, tris = _sphere(n=20)
    same_points, same_tris = coarsened_surface(points, tris, len(tris), bounds=((0, 0, 0), (1, 1, 1)))
    assert same_points is not None and np.array_equal(same_tris, tris) and np.array_equal(same_points, points)


def test_snapshot_panels_draw_at_most_the_asked_triangles():
    points, tris = _sphere()
    figure = plot_interface_snapshots({0: (points, tris), 1: (points, tris)}, bounds=((0, 0, 0), (1, 1, 1)),
                                      max_triangles=2000)
    from matplotlib.collections import PolyCollection

    for ax in figure.axes:
        drawn = sum(len(c.get_paths()) for c in ax.collections if isinstance(c, PolyCollection))
        assert 0 < drawn <= 2000


def test_clustering_helpers_agree_with_numpy_unique():
    # reference: numpy's sort-based unique, which the counting and packing replace
    from phasegauge.report._plots_interface import _ranks, _unique_rows

    rng = np.random.default_rng(7)
    for size in (50, 10 ** 6):  # counting over the possible values, and the sort for a sparse range
        key = rng.integers(0, size, 3000)
        which, count = _ranks(key, size)
        values, inverse = np.unique(key, return_inverse=True)
        assert count == values.size and np.array_equal(which, inverse.reshape(-1))
    tris = np.sort(rng.integers(0, 40, (5000, 3)), axis=1)
    assert np.array_equal(_unique_rows(tris, 40), np.unique(tris, axis=0))
    assert _unique_rows(tris[:0], 40).shape == (0, 3)
