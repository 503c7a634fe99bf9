"""The fast paths of the width integrals against the general path and a plain reference.

The integrals are exact for the piecewise-linear interpolant on the simplex split of the
cells, so every path must give the same numbers up to round-off (1e-12 relative): the grid
path (index space, regular hexahedral grids), the direct path (meshes of simplices, no split),
the split path (any mesh), and a per-simplex reference written with ``numpy.linalg`` below.
"""

import math

import numpy as np
import pytest

import phasegauge.analysis._hex_integrals as hex_module
import phasegauge.analysis._interface_width as width_module
import phasegauge.analysis._width_integrals as integrals_module
from phasegauge.analysis._hex_integrals import coned_hexahedra
from phasegauge.analysis._signed_distance import _ContourGeometry, _vertex_distances, _whole_cell_pieces
from phasegauge.analysis._width_integrals import _band_volume, _fraction_below, _fraction_of, _grid_tetrahedra
from phasegauge.analysis.interface import (METRIC_KEYS, find_interface, interface_metrics,
                                           interface_profile_table)
from phasegauge.errors import OptionError
from phasegauge.model._grouping import sort_columns
from phasegauge.model.mesh import Mesh
from phasegauge.model.simplices import split_cells
from phasegauge.meshgen import grid_mesh

RTOL = 1e-12


def _sphere(mesh, cells_across=1.5, radius=0.3):
    """Logistic profile c = 1/2 (1 + tanh((R - r) / (2 eps))) about the box centre (Olsson &
    Kreiss 2005), eps = ``cells_across`` cells of a unit box of n cells per side."""
    n = round(mesh.n_points ** (1 / mesh.dimension)) - 1
    d = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    return 0.5 * (1 + np.tanh((radius - d) / (2 * cells_across / n)))


def _same_metrics(a, b, rtol=RTOL):
    assert list(a) == list(b) == list(METRIC_KEYS)
    for key in METRIC_KEYS:
        assert a[key] == pytest.approx(b[key], rel=rtol, abs=0, nan_ok=True), key


def _stretched(mesh):
    """The same grid with its axes mapped by x -> x (1 + x) / 2: still rectilinear, uneven spacing."""
    points = mesh.points.copy()
    points[:, :mesh.dimension] = points[:, :mesh.dimension] * (1 + points[:, :mesh.dimension]) / 2
    return Mesh(points, [(b.cell_type, b.connectivity) for b in mesh.blocks])


# --------------------------------------------------------------------------- grid path

@pytest.mark.parametrize("stretch", [False, True])
@pytest.mark.parametrize("cells_across", [1.0, 2.0])
def test_grid_path_matches_the_split_path(monkeypatch, stretch, cells_across):
    mesh = grid_mesh((12, 12, 12), kind="hexahedron")
    if stretch:
        mesh = _stretched(mesh)
    assert _grid_tetrahedra(mesh) is not None
    c = _sphere(mesh, cells_across)
    fast = interface_metrics(mesh, c)
    fast_table = interface_profile_table(mesh, c)
    monkeypatch.setattr(width_module, "_grid_tetrahedra", lambda mesh: None)
    general = interface_metrics(mesh, c)
    _same_metrics(fast, general)
    assert np.allclose(fast_table.to_numpy(float), interface_profile_table(mesh, c).to_numpy(float),
                       rtol=RTOL, atol=0, equal_nan=True)


def test_grid_path_with_nan_and_cell_data(monkeypatch):
    mesh = grid_mesh((10, 10, 10), kind="hexahedron")
    c = _sphere(mesh)
    c[::23] = np.nan   # cells with a NaN corner are left out on both paths
    cells = mesh.point_to_cell(_sphere(mesh))
    fast = [interface_metrics(mesh, c), interface_metrics(mesh, cells)]
    monkeypatch.setattr(width_module, "_grid_tetrahedra", lambda mesh: None)
    for a, b in zip(fast, [interface_metrics(mesh, c), interface_metrics(mesh, cells)]):
        _same_metrics(a, b)


def test_grid_path_only_where_it_holds():
    grid = grid_mesh((4, 4, 4), kind="hexahedron")
    assert _grid_tetrahedra(grid) is not None
    # bent faces, simplices, other cell types, 2D: the general path
    for mesh in (grid_mesh((4, 4, 4), kind="hexahedron", jitter=0.2, seed=1), grid_mesh((4, 4, 4), kind="tetra"),
                 grid_mesh((4, 4, 4), kind="wedge"), grid_mesh((4, 4), kind="quad")):
        assert _grid_tetrahedra(mesh) is None
    # the same grid with each hexahedron's corners listed from another corner
    turned = grid.blocks[0].connectivity[:, [1, 2, 3, 0, 5, 6, 7, 4]]
    assert _grid_tetrahedra(Mesh(grid.points, [("hexahedron", turned)])) is None
    # points off the grid axes by more than round-off
    moved = grid.points.copy()
    moved[5, 0] += 1e-10
    assert _grid_tetrahedra(Mesh(moved, [("hexahedron", grid.blocks[0].connectivity)])) is None


# --------------------------------------------------------------------------- direct path

@pytest.mark.parametrize("kind,jitter", [("tetra", 0.0), ("tetra", 0.2), ("triangle", 0.2)])
def test_simplex_meshes_skip_the_split(monkeypatch, kind, jitter):
    shape = (10, 10, 10) if kind == "tetra" else (30, 30)
    mesh = grid_mesh(shape, kind=kind, jitter=jitter, seed=2)
    c = _sphere(mesh)
    direct = interface_metrics(mesh, c)
    monkeypatch.setattr(integrals_module, "_DIRECT_TYPES", ())
    _same_metrics(direct, interface_metrics(mesh, c))


# --------------------------------------------------------------------------- reference

def _reference(mesh, c_point, level=0.5):
    """Band width, threshold-free eps and variance simplex by simplex with numpy.linalg (the
    first implementation's arithmetic): every active cell split, every simplex integrated; the variance
    weighted by the measure times grad c . grad d."""
    clipped = np.clip(c_point, 0, 1)
    lo = np.concatenate([clipped[b.connectivity].min(axis=1) for b in mesh.blocks])
    hi = np.concatenate([clipped[b.connectivity].max(axis=1) for b in mesh.blocks])
    active = np.isfinite(lo) & np.isfinite(hi) & (hi > 1e-6) & (lo < 1 - 1e-6)
    split = split_cells(mesh, active, values=clipped, quads="centre")
    S = split.simplices
    d = mesh.dimension
    E = split.coordinates[S[:, 1:]] - split.coordinates[S[:, :1]]
    v = split.values[S]
    det = np.linalg.det(E)
    vol = np.abs(det) / math.factorial(d)
    ok = det != 0
    grad = np.zeros((S.shape[0], d))
    grad[ok] = np.linalg.solve(E[ok], (v[ok, 1:] - v[ok, :1])[..., None])[..., 0]
    gnorm = np.linalg.norm(grad, axis=1)
    k = d + 1
    band = np.sum(vol * (_fraction_below(v, 0.95) - _fraction_below(v, 0.05)))
    mixed = np.sum(vol * (v.sum(axis=1) * (1 - v).sum(axis=1) + (v * (1 - v)).sum(axis=1)) / (k * (k + 1)))
    weight = vol * gnorm
    contour = find_interface(mesh, c_point, level=level)
    eps = mixed / weight.sum()
    h = float((contour.element_sizes * mesh.cell_sizes[contour.cells]).sum() / contour.size)
    known = np.zeros(split.coordinates.shape[0], dtype=bool)
    known[S[weight > 0].ravel()] = True
    geometry = _ContourGeometry(contour)
    if coned_hexahedra(mesh) is not None or mesh.cell_parents is not None:
        geometry = _whole_cell_pieces(mesh, geometry)  # searched against one plane per crossed (whole) cell there
    dist = _vertex_distances(split, known, geometry, mesh.plane_axes, level, max(10 * eps, 4 * h))[S]
    use = (weight > 0) & np.all(np.isfinite(dist), axis=1)
    # the moments' weight is the measure times grad c . grad d, d linear on each simplex too
    grad_d = np.zeros((S.shape[0], d))
    grad_d[ok & use] = np.linalg.solve(E[ok & use], (dist[ok & use, 1:] - dist[ok & use, :1])[..., None])[..., 0]
    weight = vol * np.einsum("ij,ij->i", grad, grad_d)
    m0 = weight[use].sum()
    m1 = (weight[use] * dist[use].mean(axis=1)).sum()
    m2 = (weight[use] * ((dist[use].sum(axis=1) ** 2 + (dist[use] ** 2).sum(axis=1)) / (k * (k + 1)))).sum()
    return {"interface_width": band / contour.size, "interface_eps": eps,
            "interface_variance": m2 / m0 - (m1 / m0) ** 2}


@pytest.mark.parametrize("kind,jitter", [("hexahedron", 0.0), ("hexahedron", 0.2), ("tetra", 0.2),
                                         ("wedge", 0.2), ("pyramid", 0.0), ("mixed", 0.2),
                                         ("triangle", 0.2), ("quad", 0.2), ("polygon", 0.0)])
def test_integrals_match_a_per_simplex_reference(monkeypatch, kind, jitter):
    # (hexahedra coned by the split: over its tetrahedra in every cell here, not the trilinear
    # quadrature of the cells no band edge crosses, which test_hex_integrals.py checks)
    monkeypatch.setattr(hex_module, "_QUADRATURE", False)
    dim = 2 if kind in ("triangle", "quad", "polygon") else 3
    mesh = grid_mesh((24, 24) if dim == 2 else (8, 8, 8), kind=kind, jitter=jitter, seed=3)
    c = _sphere(mesh, 1.0)
    got = interface_metrics(mesh, c)
    for key, value in _reference(mesh, c).items():
        assert got[key] == pytest.approx(value, rel=RTOL), key


# --------------------------------------------------------------------------- band volume

@pytest.mark.parametrize("corners", [3, 4])
def test_band_volume_matches_the_simplex_formula(corners):
    # vertex values on the band edges, tied, inside, outside and across: each simplex's share of
    # 0.05 < c < 0.95 is F(0.95) - F(0.05) with F the B-spline distribution of a linear field
    rng = np.random.default_rng(4)
    n = 4000
    grid = np.array([0.0, 0.05, 0.05, 0.3, 0.5, 0.95, 0.95, 1.0])
    values = [np.where(rng.random(n) < 0.5, rng.choice(grid, n), rng.random(n)) for _ in range(corners)]
    measures = rng.random(n)
    stacked = np.stack(values, axis=1)
    expected = np.sum(measures * (_fraction_below(stacked, 0.95) - _fraction_below(stacked, 0.05)))
    assert _band_volume(measures, values) == pytest.approx(expected, rel=RTOL)
    ordered = sort_columns(values)
    assert np.array_equal(np.stack(ordered, axis=1), np.sort(stacked, axis=1))
    for t in (0.05, 0.3, 0.95):
        assert np.array_equal(_fraction_of(ordered, t), _fraction_below(stacked, t))


# --------------------------------------------------------------------------- shared extremes

def test_contour_extremes_are_handed_over_explicitly():
    # the corner extremes find_interface computed are passed to interface_metrics (no hidden state):
    # the same metrics as when interface_metrics computes them itself; extremes that do not fit the
    # mesh are refused
    mesh = grid_mesh((8, 8, 8), kind="tetra")
    c = _sphere(mesh)
    contour, extremes = find_interface(mesh, c, return_extremes=True)
    assert extremes.low.shape == extremes.high.shape == (mesh.n_cells,)
    _same_metrics(interface_metrics(mesh, c, contour=contour, extremes=extremes),
                  interface_metrics(mesh, c.copy(), contour=contour))
    assert find_interface(mesh, c, return_extremes=False).n_elements == contour.n_elements
    with pytest.raises(OptionError, match="extremes must be the per-cell corner minima"):
        interface_metrics(mesh, c, contour=contour, extremes=(extremes.low[1:], extremes.high[1:]))
    # the grid path computes none
    grid = grid_mesh((8, 8, 8), kind="hexahedron")
    assert find_interface(grid, _sphere(grid), return_extremes=True)[1] is None
