"""MeshPool: the explicit object a series (or a run) keeps its meshes in, instead of a module-level list."""

import os
import pickle

import numpy as np
import pytest

from phasegauge.errors import OptionError
from phasegauge.io import MeshPool, Series
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.model.mesh import Mesh


def _folder(tmp_path, meshes):
    """One .vtu step per mesh of ``meshes``, with a cell field."""
    for k, mesh in enumerate(meshes):
        to_meshio(mesh, cell_data={"c": np.full(mesh.n_cells, 0.1 * k)}).write(os.path.join(tmp_path, f"s_{k}.vtu"))
    return str(tmp_path)


def test_a_series_hands_out_one_mesh_while_points_and_cells_stay(tmp_path):
    mesh = grid_mesh((4, 3), kind="triangle")
    folder = _folder(tmp_path, [mesh] * 3)
    pool = MeshPool()
    with Series(folder, mesh_pool=pool) as series:
        meshes = [series.read(i).mesh for i in range(3)]
    assert meshes[0] is meshes[1] is meshes[2]
    assert list(pool) == [meshes[0]]
    assert series.mesh_pool is pool


def test_series_given_one_pool_share_the_mesh_and_its_caches(tmp_path):
    mesh = grid_mesh((3, 3), kind="quad")
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir()
    b.mkdir()
    pool = MeshPool()
    first = Series(_folder(a, [mesh]), mesh_pool=pool).read(0).mesh
    measures = first.cell_measures
    second = Series(_folder(b, [mesh]), mesh_pool=pool).read(0).mesh
    assert second is first and second.cell_measures is measures
    # without a shared pool each series builds its own
    assert Series(_folder(a, [mesh])).read(0).mesh is not first


def test_size_keeps_the_most_recent_distinct_meshes():
    a, b, c = (grid_mesh((n, 2), kind="quad") for n in (2, 3, 4))
    pool = MeshPool(size=2)
    for mesh in (a, b, a, c):
        pool.add(mesh)
    assert list(pool) == [c, a]
    assert pool.find(a.signature) is a and pool.find(b.signature) is None
    # a mesh equal in points and cells (another object) finds the kept one
    twin = Mesh(a.points, [(blk.cell_type, blk.connectivity) for blk in a.blocks])
    assert pool.match(twin) is a
    one = MeshPool()
    one.add(a)
    one.add(b)
    assert list(one) == [b]


def test_pickling_keeps_the_size_and_leaves_the_meshes():
    pool = MeshPool(size=3)
    pool.add(grid_mesh((2, 2), kind="quad"))
    copy = pickle.loads(pickle.dumps(pool))
    assert copy.size == 3 and len(copy) == 0 and len(pool) == 1


@pytest.mark.parametrize("size", [0, -1, 1.5, True])
def test_size_is_checked(size):
    with pytest.raises(OptionError, match="at least 1 mesh"):
        MeshPool(size=size)


def test_merged_points_are_a_constructor_attribute_of_the_mesh(tmp_path):
    # a file that stores every cell's corners apart: the reader merges coincident points and the
    # mesh says how (Mesh.point_merge), so point data are averaged over the copies
    import meshio

    points = np.array([[0, 0], [1, 0], [0, 1], [1, 0], [1, 1], [0, 1]], dtype=float)
    cells = [("triangle", np.array([[0, 1, 2], [3, 4, 5]]))]
    values = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 6.0])
    path = str(tmp_path / "split.vtu")
    meshio.write(path, meshio.Mesh(points, cells, point_data={"p": values}))
    with pytest.warns(Warning, match="2 duplicate points merged"):
        step = Series(path).read(0)
    assert step.mesh.n_points == 4
    assert step.mesh.point_merge.tolist() == [0, 1, 2, 1, 3, 2]
    # analytic: the merged corner (1, 0) averages 1 and 3, the corner (0, 1) averages 2 and 6
    assert sorted(step.fields.point_data["p"].tolist()) == [0.0, 2.0, 4.0, 4.0]
    assert grid_mesh((2, 2), kind="quad").point_merge is None
