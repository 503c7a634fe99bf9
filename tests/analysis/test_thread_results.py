"""Work on several threads gives what one thread gives, bit for bit: the section operator, a new
mesh's geometry and faces, the split plan, the widths' distance searches; and the threaded profile
matches pyvista's plane slice; the sorts shared among threads match numpy's (the outside reference of
tests/analysis/test_sections_operator.py)."""

import dataclasses

import numpy as np
import pytest
import pyvista

from phasegauge.analysis._cross_sections import cross_sections
from phasegauge.analysis._section_planes import _build_sections
from phasegauge.meshgen import delaunay_mesh, grid_mesh, to_meshio
from phasegauge.model._threads import ordered_map

pyvista.OFF_SCREEN = True


def _arrays(sections):
    """Every array of an operator, flattened to bytes in field order."""
    out = []
    for f in dataclasses.fields(sections):
        value = getattr(sections, f.name)
        parts = value if isinstance(value, tuple) else (value,)
        for part in parts:
            if isinstance(part, np.ndarray):
                out.append((f.name, part.dtype.str, part.shape, part.tobytes()))
    return out


def _mesh_of(kind):
    if kind == "quad":
        return grid_mesh((13, 9), kind="quad", jitter=0.3, seed=3)
    # jitter 0.3 bends the quad faces: hexahedra and wedges split about added centres
    return grid_mesh((7, 5, 4), kind=kind, jitter=0.3, seed=3)


@pytest.mark.parametrize("kind", ["hexahedron", "mixed", "tetra", "quad"])
def test_operator_is_the_same_on_any_number_of_threads(kind):
    mesh = _mesh_of(kind)
    lo, hi = mesh.bounds[:, 0]
    positions = lo + (np.arange(9) + 0.5) * (hi - lo) / 9
    positions[3] = np.sort(mesh.coordinates[:, 0])[mesh.n_points // 2]  # through a mesh point
    lower = np.zeros(positions.size, dtype=bool)
    locations = frozenset({"point", "cell"})
    one = _build_sections(mesh, 0, positions, lower, locations, threads=1)
    for threads in (2, 3, 8):
        fresh = _mesh_of(kind)  # nothing cached yet: the threads start from what the build makes
        many = _build_sections(fresh, 0, positions, lower, locations, threads=threads)
        assert _arrays(many) == _arrays(one)


def test_threaded_profile_matches_pyvista_slice():
    # pyvista's vtkCutter slice integrated by integrate_data: the section's area and the mean of c
    mesh = delaunay_mesh(400, dim=3, seed=11)
    X = mesh.coordinates
    c = 0.5 + 0.4 * np.sin(3 * X[:, 1] + 1) * np.cos(2 * X[:, 2] + X[:, 0])
    positions = [0.2, 0.35, 0.5, 0.65, 0.8]
    profile = cross_sections(mesh, c, axis="x", positions=positions, threads=3)
    grid = pyvista.from_meshio(to_meshio(mesh, point_data={"c": c}))
    for row, p in zip(profile.itertuples(), positions):
        cut = grid.slice(normal="x", origin=(p, 0.5, 0.5)).integrate_data()
        area = float(cut.cell_data["Area"][0])
        assert row.area == pytest.approx(area, rel=1e-10)
        assert row.mean_area_weighted == pytest.approx(float(cut.point_data["c"][0]) / area, rel=1e-9)


def test_ordered_map_keeps_order_and_raises_the_first_error():
    assert list(ordered_map(lambda x: x * x, range(20), threads=4)) == [x * x for x in range(20)]

    def fails(x):
        if x == 3:
            raise ValueError("three")
        return x

    with pytest.raises(ValueError, match="three"):
        list(ordered_map(fails, range(8), threads=3))


def test_prepared_mesh_has_the_same_geometry_and_faces():
    # the geometry and the face topology made side by side on two threads, against one thread
    from phasegauge.model._threads import prepare_mesh

    one, two = (grid_mesh((9, 7, 6), kind="mixed", jitter=0.3, seed=5) for _ in range(2))
    prepare_mesh(two, threads=2)
    assert "_geometry" in two.__dict__ and "_face_topology" in two.__dict__
    np.testing.assert_array_equal(one.signed_measures, two.signed_measures)
    np.testing.assert_array_equal(one.cell_centroids, two.cell_centroids)
    np.testing.assert_array_equal(one.face_pairs, two.face_pairs)
    for a, b in zip(one.boundary_faces, two.boundary_faces):
        np.testing.assert_array_equal(a, b)
    # the split plan, its per-cell part made beside the faces, against the plan made afterwards
    from phasegauge.model.simplices import _split_plan

    assert "simplex_split_plan" in two.__dict__.get("_memo", {})
    for a, b in zip(_split_plan(one), _split_plan(two)):
        assert (a is None) == (b is None)
        if a is not None:
            for name in ("coned", "centred", "along13"):
                np.testing.assert_array_equal(getattr(a, name), getattr(b, name))


@pytest.mark.parametrize("threads", [2, 3, 4, 8])
def test_sorts_shared_among_threads_match_numpy(threads, monkeypatch):
    # outside reference: numpy's own np.sort and np.unique on the same values
    from phasegauge.model import _grouping

    monkeypatch.setattr(_grouping, "THREADED_SORT", 10)
    rng = np.random.default_rng(threads)
    values = rng.integers(0, 50, 1001)  # many ties
    np.testing.assert_array_equal(_grouping.sort_in_place(values.copy(), threads=threads), np.sort(values))
    np.testing.assert_array_equal(_grouping.unique_ints(values, threads=threads), np.unique(values))
    key = rng.integers(0, 1 << 20, 777)
    order, ordered = _grouping._sort_order(key.copy(), 20, threads=threads)
    np.testing.assert_array_equal(order, np.argsort(key, kind="stable"))  # ties by position
    np.testing.assert_array_equal(ordered, np.sort(key))


def _same_faces(one, other):
    """Two face groupings (``face_topology``) alike: pairs, boundary, face numbers and counts."""
    np.testing.assert_array_equal(one["pairs"], other["pairs"])
    for a, b in zip(one["boundary"], other["boundary"]):
        np.testing.assert_array_equal(a, b)
    for a, b in zip(one["numbers"], other["numbers"]):
        assert (a is None) == (b is None)
        if a is not None:
            np.testing.assert_array_equal(a, b)
    assert one["count"] == other["count"] and one["crowded"] == other["crowded"]


@pytest.mark.parametrize("kind", ["hexahedron", "mixed", "tetra"])
def test_faces_grouped_on_threads_are_those_of_one_thread(kind, monkeypatch):
    # every sort of the grouping shared among threads: the same pairs, boundary and face numbers
    from phasegauge.model import _grouping
    from phasegauge.model._faces import face_topology

    monkeypatch.setattr(_grouping, "THREADED_SORT", 16)
    mesh = grid_mesh((9, 7, 6), kind=kind, jitter=0.3, seed=5)
    _same_faces(face_topology(mesh), face_topology(mesh, threads=3))


def test_faces_grouped_by_offsets_from_the_first_corner_are_grouped_as_before(monkeypatch):
    # the face rows' later corners as offsets from the first keep the lexicographic order, so the
    # grouping is the plain one, on a renumbered mixed mesh (triangles padded with -1 beside quads)
    from phasegauge.model import _faces
    from phasegauge.model.mesh import Mesh

    mesh = grid_mesh((7, 6, 5), kind="mixed", jitter=0.3, seed=4)
    rng = np.random.default_rng(4)
    new = rng.permutation(mesh.n_points)
    blocks = [(b.cell_type, new[b.connectivity][rng.permutation(len(b))]) for b in mesh.blocks]
    points = np.empty_like(mesh.points)
    points[new] = mesh.points
    renumbered = Mesh(points, blocks)
    shifted = _faces.face_topology(renumbered)
    monkeypatch.setattr(_faces, "_shift_later_columns", lambda columns, sign: None)
    _same_faces(shifted, _faces.face_topology(renumbered))


@pytest.mark.parametrize("kind", ["hexahedron", "mixed"])
def test_split_plan_is_the_same_on_any_number_of_threads(kind, monkeypatch):
    # chunks of a few cells, so that the threads share faces across chunks
    from phasegauge.model import simplices

    monkeypatch.setattr(simplices, "_CHUNK", 7)
    plans = []
    for threads in (1, 2, 3):
        mesh = grid_mesh((8, 6, 5), kind=kind, jitter=0.3, seed=9)
        plans.append(simplices._split_plan(mesh, threads=threads))
    assert any(p is not None and p.coned.any() for p in plans[0])  # some cells split about centres
    for plan in plans[1:]:
        for a, b in zip(plans[0], plan):
            assert (a is None) == (b is None)
            if a is not None:
                np.testing.assert_array_equal(a.coned, b.coned)
                np.testing.assert_array_equal(a.centred, b.centred)
                np.testing.assert_array_equal(a.along13, b.along13)


@pytest.mark.parametrize("kind", ["hexahedron", "tetra", "grid", "polyhedron"])
def test_widths_and_distances_are_the_same_on_any_number_of_threads(kind, tmp_path, monkeypatch):
    # the signed-distance searches (scipy's cKDTree.query with workers) on 1 and 3 threads; the
    # widths themselves are checked against the analytic sphere in test_hex_integrals.py and
    # test_polyhedral_distances.py
    from phasegauge.analysis.interface import interface_metrics
    from phasegauge.io import Series
    from phasegauge.meshgen import to_polyhedral_grid

    n = 14
    mesh = grid_mesh((n, n, n), kind="hexahedron" if kind in ("polyhedron", "grid") else kind,
                     jitter=0.0 if kind == "grid" else 0.2, seed=4)

    def profile(X):
        return 0.5 * (1 + np.tanh((0.3 - np.linalg.norm(X - 0.5, axis=1)) / (2 * 0.03)))

    if kind == "polyhedron":  # hexahedra written as polyhedra, split as polyhedra of other shapes are
        from phasegauge.io import _polyhedra

        monkeypatch.setattr(_polyhedra, "_ordinary_cells", lambda points, made, **_: None)  # (conftest's, for one test)
        path = str(tmp_path / "poly.vtu")
        to_polyhedral_grid(mesh, point_data={"c": profile(mesh.points)}).save(path)
        mesh = Series(path).read(0).mesh
    c = profile(mesh.coordinates)
    one, d_one = interface_metrics(mesh, c, return_distances=True, threads=1)
    three, d_three = interface_metrics(mesh, c, return_distances=True, threads=3)
    assert one.keys() == three.keys()
    for key in one:
        assert one[key] == three[key] or (np.isnan(one[key]) and np.isnan(three[key])), key
    np.testing.assert_array_equal(d_one.point, d_three.point)
    assert np.isfinite(d_one.point).sum() > 100  # distances were searched
