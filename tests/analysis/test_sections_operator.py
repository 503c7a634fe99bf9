"""Cross sections from the per-mesh section operator: second calls checked against outside references."""

import numpy as np
import pandas as pd
import pytest
import pyvista

from phasegauge.analysis import _section_planes
from phasegauge.analysis._cross_sections import _median, cross_sections
from phasegauge.meshgen import delaunay_mesh, grid_mesh, to_meshio

pyvista.OFF_SCREEN = True


@pytest.fixture
def builds(monkeypatch):
    """Counts the section operators built (a cached one is not built again)."""
    calls = []
    build = _section_planes._build_sections

    def counting(*args, **kwargs):
        calls.append(args[1:])
        return build(*args, **kwargs)

    monkeypatch.setattr(_section_planes, "_build_sections", counting)
    return calls


def _mesh(kind, jitter=0.2):
    if kind == "delaunay3":
        return delaunay_mesh(400, dim=3, seed=7)
    if kind == "delaunay2":
        return delaunay_mesh(300, dim=2, seed=7)
    shape = {"tetra": (5, 4, 4), "hexahedron": (5, 4, 4), "mixed3": (6, 4, 4)}.get(kind, (12, 9))
    return grid_mesh(shape, kind=kind.rstrip("3"), jitter=jitter, seed=7)


def _fields(X):
    c = 0.5 + 0.4 * np.sin(3 * X[:, 1] + 1) * np.cos(2 * X[:, 2] + X[:, 0])
    u = np.zeros_like(X)
    u[:, 0] = 1.0 + X[:, 1] * (1 - X[:, 1]) - 0.3 * X[:, 2]
    u[:, 1] = 5.0  # along the planes: must not count
    return c, u


def _reference(mesh, c, u, position):
    """The profile columns from pyvista's plane slice (vtkCutter) and Gauss-Legendre quadrature.

    The slice pieces carry c and u interpolated linearly along the cut edges
    (point data) or their cell's values (cell data). Each triangle is mapped
    from the unit square by the collapsed (Duffy 1982, from memory) transform
    and integrated with 3 x 3 Gauss-Legendre points (numpy leggauss, exact to
    degree 5 per direction; the integrands have degree 4 at most after the
    map); segments with 2 points (exact to degree 3). Pieces with a non-finite
    c or u are left out of everything but the area.
    """
    on_points = c.shape[0] == mesh.n_points
    data = {"c": c, "u": u}
    grid = pyvista.from_meshio(to_meshio(mesh, point_data=data if on_points else None,
                                         cell_data=None if on_points else data))
    section = grid.slice(normal="x", origin=(position, 0.5, 0.5))
    if mesh.dimension == 3:
        section = section.triangulate()
    X = np.asarray(section.points)
    if mesh.dimension == 3:
        pieces = np.asarray(section.faces).reshape(-1, 4)[:, 1:]
    else:
        pieces = np.asarray(section.lines).reshape(-1, 3)[:, 1:]
    if on_points:
        cv, uv = section.point_data["c"][pieces], section.point_data["u"][pieces][:, :, 0]
    else:
        k = pieces.shape[1]
        cv = np.repeat(section.cell_data["c"][:, None], k, axis=1)
        uv = np.repeat(section.cell_data["u"][:, None, 0], k, axis=1)
    P = X[pieces]
    if mesh.dimension == 3:
        size = 0.5 * np.linalg.norm(np.cross(P[:, 1] - P[:, 0], P[:, 2] - P[:, 0]), axis=1)
        g, gw = np.polynomial.legendre.leggauss(3)
        g, gw = (g + 1) / 2, gw / 2  # on [0, 1]
        s, t = np.meshgrid(g, g, indexing="ij")
        w = np.outer(gw, gw) * 2 * s  # Jacobian of (s, t) -> s (1 - t), s t over the area
        bary = np.stack([1 - s, s * (1 - t), s * t], axis=-1).reshape(-1, 3)
        w = w.ravel()
    else:
        size = np.linalg.norm(P[:, 1] - P[:, 0], axis=1)
        g, gw = np.polynomial.legendre.leggauss(2)
        bary = np.stack([(1 - g) / 2, (1 + g) / 2], axis=1)
        w = gw / 2
    good = np.isfinite(cv).all(axis=1) & np.isfinite(uv).all(axis=1)
    cq, uq = np.nan_to_num(cv[good]) @ bary.T, np.nan_to_num(uv[good]) @ bary.T  # values at the points
    weights = size[good, None] * w[None, :]

    def integral(values):
        return float(np.sum(weights * values))

    area, total = float(size.sum()), float(weights.sum())
    mean = integral(cq) / total
    intensity = (integral(cq * cq) / total - mean ** 2) / (mean * (1 - mean))
    flow = integral(uq)
    mean_f = integral(uq * cq) / flow
    intensity_f = (integral(uq * cq * cq) / flow - mean_f ** 2) / (mean_f * (1 - mean_f))
    return {"area": area, "mean_area_weighted": mean, "segregation_intensity": intensity,
            "mean_flow_weighted": mean_f, "segregation_intensity_flow": intensity_f, "flow_rate": flow}


# meshes whose pieces carry the same linear interpolant as VTK's cut (simplices: the mesh's own;
# the rest: only cell data, constant per cell, is the same there)
@pytest.mark.parametrize("kind,point_data,nan", [
    ("delaunay3", True, False), ("delaunay3", True, True), ("tetra", True, False), ("tetra", True, True),
    ("triangle", True, False), ("triangle", True, True), ("delaunay2", True, False),
    ("delaunay3", False, False), ("tetra", False, True), ("triangle", False, True),
    ("hexahedron", False, False), ("mixed3", False, False), ("mixed", False, False), ("quad", False, True)])
def test_second_call_matches_pyvista_slice(builds, kind, point_data, nan):
    # non-simplex cells unjittered: their flat faces make VTK's section polygons and ours the same
    simplex = kind in ("delaunay3", "tetra", "triangle", "delaunay2")
    mesh = _mesh(kind, jitter=0.2 if simplex else 0.0)
    X = mesh.points if point_data else mesh.cell_centroids
    if X.shape[1] == 2:
        X = np.column_stack([X, np.zeros(len(X))])
    c, u = _fields(X)
    if nan:
        c[np.argsort(np.abs(X[:, 0] - 0.61))[[0, 3, 6]]] = np.nan  # next to the second plane
    positions = [0.23, 0.61, 0.87]
    location = "point" if point_data else "cell"
    # a first step with other values builds the operator; the second must use only its geometry
    first = cross_sections(mesh, 1 - c ** 2, positions=positions, velocity=-u, c_location=location,
                           velocity_location=location)
    table = cross_sections(mesh, c, positions=positions, velocity=u, c_location=location,
                           velocity_location=location)
    assert len(builds) == 1
    assert not np.allclose(first["mean_area_weighted"], table["mean_area_weighted"])
    if nan:  # the pieces touching a non-finite value are left out of all but the area
        whole = cross_sections(mesh, np.nan_to_num(c), positions=positions, velocity=u, c_location=location,
                               velocity_location=location)
        assert whole["mean_area_weighted"][1] != table["mean_area_weighted"][1]
        np.testing.assert_array_equal(whole["area"], table["area"])
    for row, position in zip(table.itertuples(), positions):
        ref = _reference(mesh, c, u, position)
        # round-off only (the variances lose about 4 digits to cancellation here): rtol 1e-9
        for name, value in ref.items():
            assert getattr(row, name) == pytest.approx(value, rel=1e-9), name
        assert row.mixing_index == pytest.approx(1 - np.sqrt(ref["segregation_intensity"]), rel=1e-9)


@pytest.mark.parametrize("kind,shape", [("hexahedron", (5, 4, 3)), ("wedge", (5, 4, 3)),
                                        ("pyramid", (4, 4, 3)), ("mixed", (6, 4, 3)), ("quad", (7, 6)),
                                        ("polygon", (7, 6)), ("mixed", (7, 6))])
def test_linear_fields_exact_on_a_cached_second_call(builds, kind, shape):
    # jittered: bent quad faces, so hexahedra, wedges and pyramids are split about added centres.
    # c = y and u.n = y are linear, so every split is exact. Danckwerts (1952) definitions, values
    # [calc] as in test_mixing_sections: m = 1/2, I = 1/3; flow-weighted m = 2/3, I = 1/4; flow 1/2
    mesh = grid_mesh(shape, kind=kind, jitter=0.2, seed=5)
    y = mesh.points[:, 1]
    velocity = np.zeros((mesh.n_points, 3))
    positions = [0.0, 0.37, 3 / shape[0], 1.0]
    velocity[:, 0] = 2 - y
    on_points = dict(positions=positions, c_location="point", velocity_location="point")
    cross_sections(mesh, 1 - y, velocity=velocity, **on_points)
    velocity[:, 0] = y
    table = cross_sections(mesh, y, velocity=velocity, **on_points)
    assert len(builds) == 1
    np.testing.assert_allclose(table["area"], 1.0, rtol=1e-12)
    np.testing.assert_allclose(table["mean_area_weighted"], 0.5, rtol=1e-12)
    np.testing.assert_allclose(table["segregation_intensity"], 1 / 3, rtol=1e-10)
    np.testing.assert_allclose(table["mean_flow_weighted"], 2 / 3, rtol=1e-12)
    np.testing.assert_allclose(table["segregation_intensity_flow"], 1 / 4, rtol=1e-10)
    np.testing.assert_allclose(table["flow_rate"], 0.5, rtol=1e-12)


def test_other_planes_get_their_own_operator(builds):
    def make():
        return grid_mesh((6, 5, 4), kind="mixed", jitter=0.2, seed=2)

    mesh = make()
    X = mesh.points
    c = 0.5 + 0.3 * np.sin(4 * X[:, 0] + 2 * X[:, 1] - X[:, 2])
    calls = [dict(positions=[0.2, 0.5]), dict(positions=[0.2, 0.55]), dict(positions=[0.2, 0.5], axis="y"),
             dict(count=3, axis="z"), dict(positions=[0.2, 0.5]), dict(positions=np.array([0.2, 0.5]))]
    for options in calls:
        ours = cross_sections(mesh, c, **options)
        fresh = cross_sections(make(), c, **options)  # a new mesh: nothing cached
        pd.testing.assert_frame_equal(ours, fresh, check_exact=True)
    # two meshes per call but the last two reuse the first call's planes on the kept mesh
    assert len(builds) == 2 * len(calls) - 2
    for options in calls[:4]:
        cross_sections(mesh, c, **options)
    assert len(builds) == 2 * len(calls) - 2
    # only the latest operators are kept
    for count in range(1, 8):
        cross_sections(mesh, c, count=count)
    store = mesh.memo("cross_sections", dict)
    assert len(store) == _section_planes._KEEP


def test_fields_elsewhere_extend_the_operator(builds):
    # an operator keeps only what its fields need (cut edges for point fields, cells for cell
    # fields); a field elsewhere builds it again for both, then both are served from the cache
    def make():
        return grid_mesh((6, 5, 4), kind="hexahedron", jitter=0.2, seed=2)

    mesh = make()
    c_point = 0.5 + 0.3 * np.sin(4 * mesh.points[:, 0] + 2 * mesh.points[:, 1])
    c_cell = mesh.point_to_cell(c_point)
    u_point = np.ones((mesh.n_points, 3))
    kinds = [dict(c=c_point), dict(c=c_cell), dict(c=c_point), dict(c=c_cell, velocity=u_point), dict(c=c_cell)]
    for options in kinds:
        options = dict(options, positions=[0.3, 0.6])
        c = options.pop("c")
        pd.testing.assert_frame_equal(cross_sections(mesh, c, **options), cross_sections(make(), c, **options),
                                      check_exact=True)
    assert len(builds) == len(kinds) + 2  # a fresh mesh per call, and the cell field's rebuild
    assert mesh.memo("cross_sections", dict)[(0, np.array([0.3, 0.6]).tobytes())].locations == {"point", "cell"}


def test_sections_keep_the_operator_not_the_cells_extent():
    # the cells' extent along the axis is read once to build the operator and then let go (16
    # bytes a cell); an extent kept before by other work is used, and stays kept
    from phasegauge.model.corners import cell_extent

    mesh = grid_mesh((6, 5, 4), kind="tetra")
    c = 0.5 + 0.3 * np.sin(4 * mesh.points[:, 0])
    cross_sections(mesh, c, count=3)
    assert ("cell_extent", 0) not in mesh._memo and len(mesh._memo["cross_sections"]) == 1
    kept = cell_extent(mesh, 1)
    cross_sections(mesh, c, axis="y", count=3)
    assert mesh._memo[("cell_extent", 1)] is kept
    # the extent itself: the lowest and highest corner coordinate along the axis (numpy reference)
    corners = mesh.coordinates[mesh.blocks[0].connectivity, 1]
    np.testing.assert_array_equal(kept[0], corners.min(axis=1))
    np.testing.assert_array_equal(kept[1], corners.max(axis=1))


@pytest.mark.parametrize("kind,shape,stretch", [("hexahedron", (9, 7, 6), False), ("hexahedron", (8, 6, 5), True),
                                                 ("quad", (12, 9), False), ("quad", (10, 8), True)])
def test_layers_of_a_grid_are_cut_once_and_repeated_exactly(monkeypatch, kind, shape, stretch):
    # on a structured layer every cell meets the plane alike: its pieces are cut in one cell and
    # repeated; the operator and the tables must be the general path's, bit for bit (planes
    # inside layers, through grid points, and at both ends)
    from phasegauge.model.mesh import Mesh

    mesh = grid_mesh(shape, kind=kind)
    if stretch:  # unequal spacing along the in-plane axes
        points = mesh.points.copy()
        points[:, 1] = points[:, 1] ** 2
        points[:, 2 if kind == "hexahedron" else 0] = np.sin(points[:, 2 if kind == "hexahedron" else 0] + 1)
        mesh = Mesh(points, [(b.cell_type, b.connectivity) for b in mesh.blocks])
    c = 0.5 + 0.4 * np.sin(3 * mesh.points[:, 0] + 2 * mesh.points[:, 1] - mesh.points[:, 2])
    c_cell = mesh.point_to_cell(c)
    taken = []
    layer = _section_planes._layer_pieces
    monkeypatch.setattr(_section_planes, "_layer_pieces", lambda *a: taken.append(layer(*a)) or taken[-1])
    lo, hi = mesh.bounds[:, 0]
    positions = [lo, lo + 0.37 * (hi - lo), float(np.unique(mesh.points[:, 0])[2]), lo + 0.81 * (hi - lo), hi]
    kept = [cross_sections(mesh, values, positions=positions) for values in (c, c_cell)]
    assert any(t is not None for t in taken)
    monkeypatch.setattr(_section_planes, "_layer_pieces", lambda *a: None)
    general = grid_mesh(shape, kind=kind) if not stretch else Mesh(mesh.points, [(b.cell_type, b.connectivity)
                                                                                for b in mesh.blocks])
    for values, table in zip((c, c_cell), kept):
        pd.testing.assert_frame_equal(table, cross_sections(general, values, positions=positions), check_exact=True)
    ours = mesh.memo("cross_sections", dict)
    theirs = general.memo("cross_sections", dict)
    for key, operator in ours.items():
        for name in ("measures", "corners", "parent", "start", "end", "weight"):  # plane by plane
            mine, other = getattr(operator, name), getattr(theirs[key], name)
            assert (mine is None) == (other is None) and len(mine or ()) == len(other or ())
            for a, b in zip(mine or (), other or ()):
                np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("n", [11, 70000, 70001])
def test_median_is_numpy_median(n):
    # the fast selection returns exactly numpy.median, ties and sorted inputs included
    rng = np.random.default_rng(n)
    for values in (rng.random(n), np.round(rng.random(n), 1), np.zeros(n), np.sort(rng.normal(size=n)),
                   np.where(rng.random(n) < 0.7, 1.0, rng.random(n)), np.tile(rng.random(64), n // 64 + 1)[:n]):
        assert _median(values) == np.median(values)


@pytest.mark.parametrize("k", [3, 4])
def test_section_corners_in_the_order_of_a_stable_argsort(k):
    # the corner ranks place each simplex's corners as numpy's stable argsort orders them, ties
    # (shared offsets from the plane) kept in corner order, the nodes moving along
    rng = np.random.default_rng(k)
    s = rng.choice([-1.0, -0.5, 0.0, 0.25, 0.5], size=(3000, k))
    nodes = rng.integers(0, 10 ** 6, (3000, k))
    order = np.argsort(s, axis=1, kind="stable")
    columns = [s[:, j] for j in range(k)]
    rank = _section_planes._corner_ranks(columns)
    assert np.array_equal(_section_planes._placed(rank, columns), np.take_along_axis(s, order, axis=1))
    slots = _section_planes._placed(rank, [np.full(s.shape[0], j) for j in range(k)])
    assert np.array_equal(slots, order)  # the corner each came from: the stable argsort itself
    assert np.array_equal(_section_planes._placed(rank, [nodes[:, j] for j in range(k)]),
                          np.take_along_axis(nodes, order, axis=1))


@pytest.mark.parametrize("n, distinct", [(1, 1), (5000, 900), (30000, 29000), (30000, 3)])
def test_cut_edges_numbered_as_numpy_unique_orders_first_uses(n, distinct):
    # the cut edges (pairs of nodes) numbered in the order of their first use, and the place of each
    # first use, against numpy's unique (return_index: first occurrences) re-ranked by those places
    rng = np.random.default_rng(n + distinct)
    pairs = rng.integers(0, 10 ** 6, (distinct, 2))
    used = pairs[rng.integers(0, distinct, n)]
    used[:distinct] = pairs[rng.permutation(distinct)][:n]  # every edge used (when n allows)
    start, end = used[:, 0].reshape(-1, 1), used[:, 1].reshape(-1, 1)
    cut, first = _section_planes._cut_edges(start, end)
    _, first_np, inverse = np.unique(used, axis=0, return_index=True, return_inverse=True)
    rank = np.empty(first_np.size, dtype=np.int64)
    rank[np.argsort(first_np)] = np.arange(first_np.size)
    assert np.array_equal(first, np.sort(first_np))
    assert np.array_equal(cut, rank[inverse.ravel()])
