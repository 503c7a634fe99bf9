"""XDMF steps written as spatial collections of pieces (one Uniform grid a process), read as one mesh a step.

The files are written here by hand (the XML as text, the numbers in HDF5 with h5py), laid out as the XDMF
specification lays out a spatial collection (XDMF Model and Format,
https://www.xdmf.org/index.php/XDMF_Model_and_Format: Grid GridType="Collection" CollectionType="Spatial"
inside the CollectionType="Temporal" one), the box cut into
pieces along x with the seam's points written in both pieces, as a parallel run writes them. Outside checks:
VTK's own XDMF reader (pyvista.read) reads the same file to the pieces' cells; the same mesh and fields written
as one Uniform grid a step by meshio's XDMF time-series writer read to the same tables; the joined mesh's
volume and the integral of c over it are pyvista's (vtkCellSizeFilter, vtkIntegrateAttributes) on the
mesh built by numpy.
"""

import contextlib
import pathlib
import re
import warnings

import h5py
import meshio
import numpy as np
import pytest
import pyvista

import phasegauge
from phasegauge.errors import (BlocksLeftOutNote, FieldNotFoundError, MeshWarning, UnreadableFileError,
                               UnsupportedMeshError)

pyvista.OFF_SCREEN = True

SHAPE_3D = (20, 10, 10)  # hexahedra along x, y, z
SHAPE_2D = (20, 10)  # quadrilaterals along x, y
H = 0.05  # cell size
TIMES = (0.0, 0.25, 0.5)


def _box(shape, x_cells):
    """Points and cells (hexahedra or quadrilaterals) of the cells i in ``x_cells`` (a range) of the box of
    ``shape`` cells of side H, the points' coordinates i H for the global i: a seam's points alike in both pieces."""
    first, last = x_cells[0], x_cells[-1] + 1
    axes = [np.arange(first, last + 1) * H] + [np.arange(n + 1) * H for n in shape[1:]]
    grid = np.meshgrid(*axes, indexing="ij")
    points = np.stack([g.ravel() for g in grid], axis=1)
    if len(shape) == 2:
        points = np.c_[points, np.zeros(len(points))]
    dims = [last - first] + list(shape[1:])
    index = np.arange(np.prod([d + 1 for d in dims])).reshape([d + 1 for d in dims])
    if len(shape) == 3:
        a = index
        cells = np.stack([a[:-1, :-1, :-1], a[1:, :-1, :-1], a[1:, 1:, :-1], a[:-1, 1:, :-1],
                          a[:-1, :-1, 1:], a[1:, :-1, 1:], a[1:, 1:, 1:], a[:-1, 1:, 1:]], axis=-1).reshape(-1, 8)
    else:
        a = index
        cells = np.stack([a[:-1, :-1], a[1:, :-1], a[1:, 1:], a[:-1, 1:]], axis=-1).reshape(-1, 4)
    return points, cells


def _fields(points, cells, time):
    """c on the points (a drop centred on the first seam, shrinking with time), and the cells' x on the cells."""
    centre = np.array([0.35, 0.25, 0.25 if np.ptp(points[:, 2]) else 0.0])
    radius = 0.2 - 0.1 * time
    c = 0.5 * (1.0 - np.tanh((np.linalg.norm(points - centre, axis=1) - radius) / (2 * H)))
    return {"c": c}, {"x_cell": points[cells].mean(axis=1)[:, 0]}


def _cuts(shape, n_pieces):
    edges = np.linspace(0, shape[0], n_pieces + 1).round().astype(int)
    return [range(a, b) for a, b in zip(edges[:-1], edges[1:])]


def _item(h5, name, array, h5_name):
    h5.create_dataset(name, data=array)
    kind = "Int" if array.dtype.kind in "iu" else "Float"
    dims = " ".join(str(d) for d in array.shape)
    return (f'<DataItem Dimensions="{dims}" NumberType="{kind}" Precision="{array.dtype.itemsize}" '
            f'Format="HDF">{h5_name}:/{name}</DataItem>')


def write_pieces(path, shape, n_pieces, *, time_on="collection", piece_times=None, lacking=None, patch=False,
                 empty=False):
    """A temporal collection of spatial collections, one Uniform piece a process, written by hand (h5py and
    the XML as text). ``time_on``: 'collection' (the step's Time on the spatial collection) or 'pieces' (on
    each piece); ``piece_times``: each piece's time offsets; ``lacking``: (piece, field) a piece does not
    write; ``patch``: a boundary patch of quadrilaterals (the x = 0 wall) as one more piece; ``empty``: a first
    piece of 0 points and 0 cells (a process that owns no cells), without fields."""
    h5_name = path.with_suffix(".h5").name
    topology = "Hexahedron" if len(shape) == 3 else "Quadrilateral"
    steps = []
    with h5py.File(path.with_suffix(".h5"), "w") as h5:
        for s, time in enumerate(TIMES):
            pieces = []
            if empty:
                pieces.append(f'<Grid Name="idle" GridType="Uniform">'
                              f'<Topology TopologyType="{topology}" NumberOfElements="0">'
                              f'{_item(h5, f"s{s}/idle/cells", np.zeros((0, 2 ** len(shape)), int), h5_name)}'
                              f'</Topology><Geometry GeometryType="XYZ">'
                              f'{_item(h5, f"s{s}/idle/points", np.zeros((0, 3)), h5_name)}</Geometry></Grid>\n')
            for p, cut in enumerate(_cuts(shape, n_pieces)):
                points, cells = _box(shape, cut)
                point_data, cell_data = _fields(points, cells, time)
                stamp = ""
                if time_on == "pieces":
                    stamp = f'<Time Value="{time + (piece_times[p] if piece_times else 0.0)!r}"/>'
                attributes = "".join(
                    f'<Attribute Name="{name}" AttributeType="Scalar" Center="{center}">'
                    f'{_item(h5, f"s{s}/p{p}/{name}", values, h5_name)}</Attribute>'
                    for center, data in (("Node", point_data), ("Cell", cell_data))
                    for name, values in data.items() if lacking != (p, name))
                pieces.append(f'<Grid Name="p{p}" GridType="Uniform">{stamp}'
                              f'<Topology TopologyType="{topology}" NumberOfElements="{len(cells)}">'
                              f'{_item(h5, f"s{s}/p{p}/cells", cells, h5_name)}</Topology>'
                              f'<Geometry GeometryType="XYZ">{_item(h5, f"s{s}/p{p}/points", points, h5_name)}'
                              f'</Geometry>{attributes}</Grid>\n')
            if patch:  # the wall x = 0 as quadrilaterals on the 3D points (a boundary patch, no volume)
                ny, nz = shape[1:]
                y, z = np.meshgrid(np.arange(ny + 1) * H, np.arange(nz + 1) * H, indexing="ij")
                wall = np.c_[np.zeros(y.size), y.ravel(), z.ravel()]
                a = np.arange(wall.shape[0]).reshape(ny + 1, nz + 1)
                quads = np.stack([a[:-1, :-1], a[1:, :-1], a[1:, 1:], a[:-1, 1:]], axis=-1).reshape(-1, 4)
                pieces.append(f'<Grid Name="inlet" GridType="Uniform">'
                              f'<Topology TopologyType="Quadrilateral" NumberOfElements="{len(quads)}">'
                              f'{_item(h5, f"s{s}/inlet/cells", quads, h5_name)}</Topology>'
                              f'<Geometry GeometryType="XYZ">{_item(h5, f"s{s}/inlet/points", wall, h5_name)}'
                              f'</Geometry><Attribute Name="c" AttributeType="Scalar" Center="Node">'
                              f'{_item(h5, f"s{s}/inlet/c", np.ones(len(wall)), h5_name)}</Attribute></Grid>\n')
            stamp = f'<Time Value="{time!r}"/>' if time_on == "collection" else ""
            steps.append(f'<Grid Name="step{s}" GridType="Collection" CollectionType="Spatial">{stamp}\n'
                         + "".join(pieces) + "</Grid>\n")
    path.write_text('<?xml version="1.0"?>\n<Xdmf Version="3.0"><Domain>\n'
                    '<Grid Name="run" GridType="Collection" CollectionType="Temporal">\n'
                    + "".join(steps) + "</Grid>\n</Domain></Xdmf>\n")
    return str(path)


def write_uniform(path, shape):
    """The same mesh and fields as one Uniform grid a step, by meshio's XDMF time-series writer."""
    points, cells = _box(shape, range(shape[0]))
    kind = "hexahedron" if len(shape) == 3 else "quad"
    with contextlib.chdir(path.parent), meshio.xdmf.TimeSeriesWriter(path.name) as writer:  # (its HDF5 file: here)
        writer.write_points_cells(points, [(kind, cells)])
        for time in TIMES:
            point_data, cell_data = _fields(points, cells, time)
            writer.write_data(time, point_data=point_data, cell_data={k: [v] for k, v in cell_data.items()})
    return str(path)


def _measured(path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = phasegauge.measure(path, "c", analyses=("conservation", "droplets"))
    return result, [str(w.message) for w in caught]


def _mesh(path, step=0):
    with phasegauge.open_series(path) as series:
        read = series.read(step)
        return read.mesh, read.fields, series.steps


@pytest.mark.parametrize("n_pieces, time_on", [(2, "collection"), (3, "pieces"), (4, "collection")])
def test_pieces_read_as_the_same_mesh_written_whole(tmp_path, n_pieces, time_on):
    pieces = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, n_pieces, time_on=time_on)
    whole = write_uniform(tmp_path / "whole.xdmf", SHAPE_3D)
    # VTK's own XDMF reader reads the file: its pieces hold the box's cells, the seams' points once in each
    blocks = [b for b in pyvista.read(pieces).recursive_iterator() if b is not None]
    assert len(blocks) == n_pieces and sum(b.n_cells for b in blocks) == np.prod(SHAPE_3D)
    n_points_whole = np.prod([n + 1 for n in SHAPE_3D])
    assert sum(b.n_points for b in blocks) == n_points_whole + (n_pieces - 1) * 11 * 11  # the seams twice
    result, said = _measured(pieces)
    expected, _ = _measured(whole)
    assert not [w for w in said if "duplicate points" in w]  # the seams are the join, not duplicates
    assert list(result.steps.columns) == list(expected.steps.columns)
    assert np.array_equal(result.steps["time"], TIMES)
    for column in expected.steps.columns:  # the same tables, to the rounding of the sums' order (our threshold)
        assert np.allclose(result.steps[column], expected.steps[column], rtol=1e-12, atol=1e-15), column
    assert (result.steps["droplet_count"] == 1).all()  # the drop across a seam is one drop
    for step in range(len(TIMES)):
        mesh, fields, steps = _mesh(pieces, step)
        whole_mesh, whole_fields, _ = _mesh(whole, step)
        assert (mesh.n_cells, mesh.n_points) == (whole_mesh.n_cells, whole_mesh.n_points) == (2000, 2541)
        assert steps[step].time == TIMES[step] and steps[step].time_origin == "xdmf"
        # pyvista on the joined mesh built by numpy: the box's volume, and the integral of the trilinear c
        # (on a box-shaped cell the mean of the corners times the volume, as the joined mesh's cells take it)
        volume, integral = _integrals(TIMES[step])
        assert float(mesh.cell_measures.sum()) == pytest.approx(volume, rel=1e-12)
        assert float(mesh.cell_measures.sum()) == pytest.approx(1.0 * 0.5 * 0.5, rel=1e-12)  # analytic: the box
        assert set(fields.point_data) == {"c"} and set(fields.cell_data) == {"x_cell"}
        c_cells = mesh.point_to_cell(fields.point_data["c"])
        assert float(c_cells @ mesh.cell_measures) == pytest.approx(integral, rel=1e-12)
        # and pyvista on the joined mesh as read (its points after the seams' merge, its hexahedra, its c)
        assert {block.cell_type for block in mesh.blocks} == {"hexahedron"}  # a block a piece
        hexahedra = np.concatenate([block.connectivity for block in mesh.blocks])
        joined = pyvista.UnstructuredGrid({pyvista.CellType.HEXAHEDRON: hexahedra}, mesh.points)
        joined.point_data["c"] = fields.point_data["c"]
        on_joined = joined.integrate_data()
        assert float(on_joined["Volume"][0]) == pytest.approx(volume, rel=1e-12)
        assert float(on_joined.point_data["c"][0]) == pytest.approx(integral, rel=1e-12)
        assert joined.n_points == joined.clean().n_points  # no point twice: the seams joined
        assert result.steps["phase_volume"].iloc[step] == pytest.approx(integral, rel=1e-12)
        order = np.lexsort(mesh.points.T[::-1])
        whole_order = np.lexsort(whole_mesh.points.T[::-1])
        assert np.array_equal(mesh.points[order], whole_mesh.points[whole_order])
        assert np.array_equal(fields.point_data["c"][order], whole_fields.point_data["c"][whole_order])
        assert np.array_equal(np.sort(fields.cell_data["x_cell"]), np.sort(whole_fields.cell_data["x_cell"]))


def _integrals(time):
    """pyvista's (vtkIntegrateAttributes) volume of the whole box and integral of the trilinear c over it."""
    points, cells = _box(SHAPE_3D, range(SHAPE_3D[0]))
    grid = pyvista.UnstructuredGrid({pyvista.CellType.HEXAHEDRON: cells}, points)
    grid.point_data["c"] = _fields(points, cells, time)[0]["c"]
    integrated = grid.integrate_data()
    return float(integrated["Volume"][0]), float(integrated.point_data["c"][0])


def test_pieces_of_a_2d_mesh_read_as_the_mesh_written_whole(tmp_path):
    pieces = write_pieces(tmp_path / "pieces.xdmf", SHAPE_2D, 2, time_on="pieces")
    whole = write_uniform(tmp_path / "whole.xdmf", SHAPE_2D)
    result, said = _measured(pieces)
    expected, _ = _measured(whole)
    for column in expected.steps.columns:
        assert np.allclose(result.steps[column], expected.steps[column], rtol=1e-12, atol=1e-15), column
    mesh, _, _ = _mesh(pieces)
    assert (mesh.dimension, mesh.n_cells, mesh.n_points) == (2, 200, 21 * 11)
    assert float(mesh.cell_measures.sum()) == pytest.approx(1.0 * 0.5, rel=1e-12)  # analytic: the rectangle


def test_a_piece_without_a_field_reads_the_others_and_names_it(tmp_path):
    path = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 3, lacking=(1, "x_cell"))
    mesh, fields, _ = _mesh(path)
    assert mesh.n_cells == 2000 and set(fields.point_data) == {"c"} and not fields.cell_data
    result, _ = _measured(path)  # c is held by every piece: measured as the whole mesh's
    assert result.steps["phase_volume"].iloc[0] == pytest.approx(_integrals(TIMES[0])[1], rel=1e-12)
    with pytest.raises(FieldNotFoundError, match=r"x_cell.*piece p1 of the step's spatial collection holds no "
                                                  r"'x_cell' on cells.*write the field in every piece"):
        phasegauge.measure(path, "x_cell", analyses=("conservation",), range=(0, 1))


def test_a_piece_of_no_cells_is_left_out(tmp_path):
    path = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2, empty=True)
    mesh, fields, _ = _mesh(path)  # its lack of fields does not leave c out
    assert (mesh.n_cells, mesh.n_points) == (2000, 2541)
    assert set(fields.point_data) == {"c"} and set(fields.cell_data) == {"x_cell"}


def test_pieces_of_other_times_are_named(tmp_path):
    path = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2, time_on="pieces", piece_times=(0.0, 0.01))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        _, _, steps = _mesh(path)
    said = [str(w.message) for w in caught if isinstance(w.message, MeshWarning)]
    assert len(said) == len(TIMES)  # one a step
    assert "step 0: the pieces of the step's spatial collection store other times (p1 0.01) than its first " \
           "piece's (p0), 0.0, which is used; write one time, in the spatial collection's <Time Value=...>" in said[0]
    assert [s.time for s in steps] == list(TIMES)  # the first piece's


def test_a_boundary_patch_among_the_pieces_is_left_out_and_named(tmp_path):
    path = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2, patch=True)
    with pytest.warns(BlocksLeftOutNote, match=r"spatial collection pieces left out: inlet \(boundary patches "
                                               r"written as cells of lower dimension than the volume's; the volume "
                                               r"pieces are read\)"):
        mesh, fields, _ = _mesh(path)
    assert (mesh.n_cells, mesh.n_points) == (2000, 2541)  # the wall's c = 1 is not averaged into the volume's
    points, cells = _box(SHAPE_3D, range(SHAPE_3D[0]))
    order = np.lexsort(mesh.points.T[::-1])
    expected = _fields(points, cells, TIMES[0])[0]["c"][np.lexsort(points.T[::-1])]
    assert np.array_equal(fields.point_data["c"][order], expected)
    result, _ = _measured(path)
    assert "spatial collection pieces left out: inlet (boundary patches: the volume pieces are read)" in result.reading
    assert result.steps["phase_volume"].iloc[0] == pytest.approx(_integrals(TIMES[0])[1], rel=1e-12)


def test_a_plain_file_of_one_spatial_collection_is_one_step(tmp_path):
    series = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2)
    text = open(series).read()
    first = text.index('<Grid Name="step0"')
    step = text[first:text.index('<Grid Name="step1"')]
    plain = tmp_path / "plain.xdmf"
    plain.write_text(f'<?xml version="1.0"?>\n<Xdmf Version="3.0"><Domain>\n{step}</Domain></Xdmf>\n')
    mesh, fields, steps = _mesh(str(plain))
    assert len(steps) == 1 and steps[0].time == 0.0
    assert (mesh.n_cells, mesh.n_points) == (2000, 2541)
    assert set(fields.point_data) == {"c"} and set(fields.cell_data) == {"x_cell"}


def test_pieces_nested_deeper_are_refused_by_name(tmp_path):
    path = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2)
    text = open(path).read().replace('<Grid Name="p1" GridType="Uniform">',
                                     '<Grid Name="more" GridType="Collection" CollectionType="Spatial">'
                                     '<Grid Name="p1" GridType="Uniform">', 1)
    text = text.replace("</Grid>\n</Grid>\n<Grid Name=\"step1\"", "</Grid>\n</Grid>\n</Grid>\n<Grid Name=\"step1\"", 1)
    nested = tmp_path / "nested.xdmf"
    nested.write_text(text)
    with pytest.raises(UnsupportedMeshError, match="holds a Spatial collection: pieces nested deeper.*write each "
                                                   "step as one Uniform grid, or as one spatial collection"):
        phasegauge.measure(str(nested), "c", analyses=("conservation",))


def test_a_piece_that_cannot_be_read_is_named(tmp_path):
    path = write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2)
    with open(path) as handle:
        text = handle.read().replace("s1/p1/points", "s1/p1/nowhere")  # step 1's piece p1 names no dataset
    with open(path, "w") as handle:
        handle.write(text)
    with phasegauge.open_series(path) as series:
        assert series.read(0).mesh.n_cells == 2000
        with pytest.raises(UnreadableFileError, match=r"pieces.xdmf, step 1: cannot read piece p1 of the step's "
                                                      r"spatial collection .*nowhere"):
            series.read(1)


def _tetrahedra(shape=(8, 4, 4)):
    """A box of hexahedra each cut into 6 tetrahedra about its diagonal (Kuhn's cut: the tetrahedra of the
    corner walks 0 -> 7 that step one axis at a time), points and cells."""
    points, hexahedra = _box(shape, range(shape[0]))
    # corner k of _box's hexahedron at offset (dx, dy, dz): 0 (0,0,0), 1 (1,0,0), 2 (1,1,0), 3 (0,1,0),
    # 4 (0,0,1), 5 (1,0,1), 6 (1,1,1), 7 (0,1,1)
    walks = [(0, 1, 2, 6), (0, 1, 5, 6), (0, 3, 2, 6), (0, 3, 7, 6), (0, 4, 5, 6), (0, 4, 7, 6)]
    tetrahedra = np.concatenate([hexahedra[:, list(w)] for w in walks])
    a, b, c, d = (points[tetrahedra[:, k]] for k in range(4))
    inverted = np.einsum("ij,ij->i", np.cross(b - a, c - a), d - a) < 0  # half the walks turn the other way
    tetrahedra[inverted] = tetrahedra[inverted][:, [0, 2, 1, 3]]
    return points, tetrahedra


def test_tetrahedra_cut_by_a_jagged_partition_read_as_written_whole(tmp_path):
    # the pieces of a graph partition: cells by centroid, the cut not a plane, each piece its own points
    points, tetrahedra = _tetrahedra()
    centres = points[tetrahedra].mean(axis=1)
    part = (centres[:, 0] + 0.3 * centres[:, 1] > 0.25).astype(int) + (centres[:, 2] > 0.1)
    h5_name = "tets.h5"
    grids = []
    with h5py.File(tmp_path / h5_name, "w") as h5:
        for p in range(3):
            own = tetrahedra[part == p]
            used, local = np.unique(own, return_inverse=True)
            c = _fields(points[used], local.reshape(own.shape), 0.0)[0]["c"]
            grids.append(f'<Grid Name="rank{p}" GridType="Uniform"><Topology TopologyType="Tetrahedron" '
                         f'NumberOfElements="{len(own)}">{_item(h5, f"p{p}/cells", local.reshape(own.shape), h5_name)}'
                         f'</Topology><Geometry GeometryType="XYZ">{_item(h5, f"p{p}/points", points[used], h5_name)}'
                         f'</Geometry><Attribute Name="c" AttributeType="Scalar" Center="Node">'
                         f'{_item(h5, f"p{p}/c", c, h5_name)}</Attribute></Grid>\n')
    path = tmp_path / "tets.xdmf"
    path.write_text('<?xml version="1.0"?>\n<Xdmf Version="3.0"><Domain>\n<Grid Name="step" GridType="Collection" '
                    'CollectionType="Spatial"><Time Value="0.0"/>\n' + "".join(grids) + "</Grid></Domain></Xdmf>\n")
    whole = tmp_path / "whole.xdmf"
    meshio.write(whole, meshio.Mesh(points, [("tetra", tetrahedra)],
                                    point_data={"c": _fields(points, tetrahedra, 0.0)[0]["c"]}))
    mesh, fields, _ = _mesh(str(path))
    whole_mesh, _, _ = _mesh(str(whole))
    assert (mesh.n_cells, mesh.n_points) == (whole_mesh.n_cells, whole_mesh.n_points) == (6 * 128, 9 * 5 * 5)
    result, said = _measured(str(path))
    expected, _ = _measured(str(whole))
    assert not [w for w in said if "duplicate points" in w or "inverted" in w]
    for column in ("phase_volume", "domain_volume", "droplet_count", "c_min", "c_max"):  # our threshold: 1e-12
        assert np.allclose(result.steps[column], expected.steps[column], rtol=1e-12, atol=1e-15), column
    # pyvista on the joined mesh as read: the box's volume and the integral of the linear c on each tetrahedron
    cells = np.concatenate([block.connectivity for block in mesh.blocks])
    joined = pyvista.UnstructuredGrid({pyvista.CellType.TETRA: cells}, mesh.points)
    joined.point_data["c"] = fields.point_data["c"]
    integrated = joined.integrate_data()
    assert float(integrated["Volume"][0]) == pytest.approx(8 * H * 4 * H * 4 * H, rel=1e-12)  # analytic: the box
    assert result.steps["phase_volume"].iloc[0] == pytest.approx(float(integrated.point_data["c"][0]), rel=1e-12)


REUSE_FORMS = ("include", "reference", "item_attribute", "element_attribute", "element_xml", "chain")


def _reusing(path, form):
    """The file of write_pieces with steps 1 and 2 taking each piece's Topology and Geometry from step 0's piece
    of that name, as a static mesh written once (XDMF Model and Format: "DataItem ... Reference", and any
    element may be a reference): by an xi:include of them (the XPointer form of meshio's series writer), by
    DataItems given as Reference="XML" paths ('reference') or with the path in the attribute
    ('item_attribute'), by the Topology and Geometry themselves referring ('element_attribute': the path in the
    attribute; 'element_xml': Reference="XML" and the path as text), or by step 2's DataItems referring to
    step 1's, which refer to step 0's ('chain')."""
    text = path.read_text().replace('<Xdmf Version="3.0">',
                                    '<Xdmf Version="3.0" xmlns:xi="http://www.w3.org/2001/XInclude">')
    steps = text.split('<Grid Name="step')

    def at(piece, part, quote='"'):
        return f"/Xdmf/Domain/Grid/Grid[@Name={quote}step0{quote}]/Grid[@Name={quote}{piece}{quote}]/{part}"

    for k in range(2, len(steps)):
        if form == "include":
            steps[k] = re.sub(r'(<Grid Name="(p\d)" GridType="Uniform">)<Topology.*?</Geometry>',
                              lambda m: f'{m.group(1)}<xi:include xpointer="xpointer(//Grid[@Name=&quot;'
                                        f'step0&quot;]/Grid[@Name=&quot;{m.group(2)}&quot;]/*[self::Topology or '
                                        f'self::Geometry])"/>', steps[k])
            continue
        for part in ("Topology", "Geometry"):
            if form in ("element_attribute", "element_xml"):
                written = r'(<Grid Name="(p\d)" GridType="Uniform">.*?)<%s[^>]*>.*?</%s>' % (part, part)
                steps[k] = re.sub(written, lambda m: m.group(1) + (
                    f"<{part} Reference=\"{at(m.group(2), part, chr(39))}\"/>" if form == "element_attribute"
                    else f'<{part} Reference="XML">{at(m.group(2), part)}</{part}>'), steps[k])
                continue
            written = r'(<Grid Name="(p\d)" GridType="Uniform">.*?<%s[^>]*>)<DataItem[^<]*</DataItem>' % part
            steps[k] = re.sub(written, lambda m: m.group(1) + (
                f"<DataItem Reference=\"{at(m.group(2), part, chr(39))}/DataItem\"/>" if form == "item_attribute"
                else f'<DataItem Reference="XML">{at(m.group(2), part)}/DataItem</DataItem>'), steps[k])
        if form == "chain" and k == 3:
            steps[k] = steps[k].replace('Grid[@Name="step0"]', 'Grid[@Name="step1"]')
    path.write_text('<Grid Name="step'.join(steps))
    return str(path)


@pytest.mark.parametrize("form", REUSE_FORMS)
def test_pieces_taking_the_first_steps_mesh_read_as_written_whole(tmp_path, form):
    # every step after the first was skipped as "every piece of the spatial collection holds no cells" (include)
    # or failed to read (every Reference form, as damaged HDF5: 1 step measured, exit 0); the same reuse in a
    # Uniform series read fine. Reference: the same mesh and fields as one Uniform grid a step by meshio's
    # time-series writer
    path = _reusing(pathlib.Path(write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2)), form)
    text = open(path).read()
    assert ("xi:include" in text) == (form == "include")
    assert text.count("Reference=") == (0 if form == "include" else 8)  # 2 steps, 2 pieces, 2 parts
    whole, _ = _measured(write_uniform(tmp_path / "whole.xdmf", SHAPE_3D))
    result, said = _measured(path)
    assert not said
    assert result.steps["time"].tolist() == list(TIMES)
    for column in whole.steps.columns:  # our threshold: equal to round-off
        np.testing.assert_allclose(result.steps[column], whole.steps[column], rtol=1e-12, atol=1e-15)
    mesh, fields, _ = _mesh(path, step=2)
    assert (mesh.n_cells, mesh.n_points) == (2000, 2541) and set(fields.point_data) == {"c"}


def test_references_that_come_back_are_named(tmp_path):
    # step 1's DataItems refer to step 2's and step 2's to step 1's: no element holds the numbers
    path = pathlib.Path(_reusing(pathlib.Path(write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2)), "chain"))
    steps = path.read_text().split('<Grid Name="step')
    steps[2] = steps[2].replace('Grid[@Name="step0"]', 'Grid[@Name="step2"]')
    path.write_text('<Grid Name="step'.join(steps))
    with phasegauge.open_series(str(path)) as series:
        assert series.read(0).mesh.n_cells == 2000
        with pytest.raises(UnsupportedMeshError, match=r"pieces.xdmf, step 1, piece p0: the DataItem Reference "
                                                       r"'/Xdmf/Domain/.*' leads back to an element it started "
                                                       r"from \(a cycle\)"):
            series.read(1)


@pytest.mark.parametrize("form", ["element_attribute", "element_xml", "item_attribute"])
def test_a_uniform_series_taking_one_mesh_by_reference_reads_as_written_whole(tmp_path, form):
    # a Uniform grid a step whose Topology and Geometry refer to the Domain's (XDMF Model and Format: any
    # element may be a reference) was refused ("cannot read the step's data"). Reference: the same mesh and
    # fields written by meshio's time-series writer
    path = tmp_path / "shared.xdmf"
    points, cells = _box(SHAPE_3D, range(SHAPE_3D[0]))
    with h5py.File(path.with_suffix(".h5"), "w") as h5:
        mesh = (f'<Topology TopologyType="Hexahedron" NumberOfElements="{len(cells)}">'
                f'{_item(h5, "cells", cells, "shared.h5")}</Topology>'
                f'<Geometry GeometryType="XYZ">{_item(h5, "points", points, "shared.h5")}</Geometry>')

        def taken(part):
            if form == "element_attribute":
                return f'<{part} Reference="/Xdmf/Domain/{part}[1]"/>'
            if form == "element_xml":
                return f'<{part} Reference="XML">/Xdmf/Domain/{part}[1]</{part}>'
            kind = 'TopologyType="Hexahedron"' if part == "Topology" else 'GeometryType="XYZ"'
            return f'<{part} {kind}><DataItem Reference="/Xdmf/Domain/{part}[1]/DataItem"/></{part}>'

        grids = "".join(
            f'<Grid Name="s{k}" GridType="Uniform"><Time Value="{t!r}"/>{taken("Topology")}{taken("Geometry")}'
            + "".join(f'<Attribute Name="{name}" Center="{center}">{_item(h5, f"{name}{k}", values, "shared.h5")}'
                      f'</Attribute>' for center, data in zip(("Node", "Cell"), _fields(points, cells, t))
                      for name, values in data.items()) + "</Grid>"
            for k, t in enumerate(TIMES))
    path.write_text(f'<?xml version="1.0"?><Xdmf Version="3.0"><Domain>{mesh}<Grid Name="run" GridType="Collection" '
                    f'CollectionType="Temporal">{grids}</Grid></Domain></Xdmf>')
    whole, _ = _measured(write_uniform(tmp_path / "whole.xdmf", SHAPE_3D))
    result, said = _measured(str(path))
    assert not said and result.steps["time"].tolist() == list(TIMES)
    for column in whole.steps.columns:  # our threshold: equal to round-off
        np.testing.assert_allclose(result.steps[column], whole.steps[column], rtol=1e-12, atol=1e-15)


def test_a_piece_taking_its_mesh_from_nowhere_is_named(tmp_path):
    path = pathlib.Path(_reusing(pathlib.Path(write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2)), "include"))
    path.write_text(path.read_text().replace("Name=&quot;p1&quot;]/*", "Name=&quot;q1&quot;]/*"))
    with phasegauge.open_series(str(path)) as series:
        assert series.read(0).mesh.n_cells == 2000
        with pytest.raises(UnsupportedMeshError, match=r"pieces.xdmf, step 1, piece p1: the xi:include xpointer "
                                                       r"'//Grid\[@Name=\"step0\"\]/Grid\[@Name=\"q1\"\]' finds "
                                                       r"nothing in the file"):
            series.read(1)


FIELD_REFERENCES = ("item_xml", "item_attribute", "element_attribute")


def _x_cell_taken(form, step0):
    """Steps 1 and 2's Attribute x_cell (a static field) taken from ``step0`` (the XPath of step 0's grid or
    piece) by Reference (XDMF Model and Format: any element may be a reference): its DataItem with
    Reference="XML" and the path as text ('item_xml') or the path in the attribute ('item_attribute'), or the
    Attribute itself referring ('element_attribute')."""
    target = f"{step0}/Attribute[@Name='x_cell']"
    if form == "element_attribute":
        return f'<Attribute Reference="{target}"/>'
    item = (f'<DataItem Reference="XML">{target}/DataItem</DataItem>' if form == "item_xml"
            else f'<DataItem Reference="{target}/DataItem"/>')
    return f'<Attribute Name="x_cell" AttributeType="Scalar" Center="Cell">{item}</Attribute>'


def _x_cell_is_the_cells_x(path, step):
    # outside check (numpy): x_cell was written as the mean x of each cell's corners
    mesh, fields, _ = _mesh(path, step=step)
    corners = np.concatenate([mesh.points[block.connectivity].mean(axis=1)[:, 0] for block in mesh.blocks])
    np.testing.assert_allclose(fields.cell_data["x_cell"], corners, rtol=1e-12)


@pytest.mark.parametrize("layout", ["uniform", "pieces"])
@pytest.mark.parametrize("form", FIELD_REFERENCES)
def test_a_field_written_once_and_taken_by_reference_reads_as_written_whole(tmp_path, form, layout):
    # a static cell field written in step 0 only, later steps' Attribute taking it by Reference: every later
    # step was skipped ("cannot read the step's data ... HDF5 files ... complete", 1 step measured, exit 0).
    # Reference: the same mesh and fields written in every step by meshio's time-series writer
    if layout == "pieces":
        path = pathlib.Path(_reusing(pathlib.Path(write_pieces(tmp_path / "series.xdmf", SHAPE_3D, 2)), "include"))
        steps = path.read_text().split('<Grid Name="step')
        for k in range(2, len(steps)):
            steps[k] = re.sub(r'(<Grid Name="(p\d)" GridType="Uniform">.*?)<Attribute Name="x_cell".*?</Attribute>',
                              lambda m: m.group(1) + _x_cell_taken(
                                  form, f"/Xdmf/Domain/Grid/Grid[1]/Grid[@Name='{m.group(2)}']"), steps[k],
                              flags=re.S)
        path.write_text('<Grid Name="step'.join(steps))
        taken = 4  # 2 steps, 2 pieces
    else:
        path = tmp_path / "series.xdmf"
        points, cells = _box(SHAPE_3D, range(SHAPE_3D[0]))
        with h5py.File(path.with_suffix(".h5"), "w") as h5:
            grids = []
            for k, t in enumerate(TIMES):
                point_data, cell_data = _fields(points, cells, t)
                mesh = (f'<Topology TopologyType="Hexahedron" NumberOfElements="{len(cells)}">'
                        f'{_item(h5, "cells", cells, "series.h5")}</Topology><Geometry GeometryType="XYZ">'
                        f'{_item(h5, "points", points, "series.h5")}</Geometry>' if k == 0 else
                        '<Topology Reference="/Xdmf/Domain/Grid/Grid[1]/Topology"/>'
                        '<Geometry Reference="/Xdmf/Domain/Grid/Grid[1]/Geometry"/>')
                x_cell = (f'<Attribute Name="x_cell" AttributeType="Scalar" Center="Cell">'
                          f'{_item(h5, "x_cell", cell_data["x_cell"], "series.h5")}</Attribute>' if k == 0
                          else _x_cell_taken(form, "/Xdmf/Domain/Grid/Grid[1]"))
                grids.append(f'<Grid Name="s{k}" GridType="Uniform"><Time Value="{t!r}"/>{mesh}'
                             f'<Attribute Name="c" Center="Node">{_item(h5, f"c{k}", point_data["c"], "series.h5")}'
                             f'</Attribute>{x_cell}</Grid>')
        path.write_text('<?xml version="1.0"?><Xdmf Version="3.0"><Domain><Grid Name="run" GridType="Collection" '
                        f'CollectionType="Temporal">{"".join(grids)}</Grid></Domain></Xdmf>')
        taken = 2
    assert path.read_text().count("x_cell']") == taken
    whole, _ = _measured(write_uniform(tmp_path / "whole.xdmf", SHAPE_3D))
    result, said = _measured(str(path))
    assert not said and result.steps["time"].tolist() == list(TIMES)
    for column in whole.steps.columns:  # our threshold: equal to round-off
        np.testing.assert_allclose(result.steps[column], whole.steps[column], rtol=1e-12, atol=1e-15)
    _x_cell_is_the_cells_x(str(path), 2)


def test_a_field_taken_from_nowhere_is_named_with_the_files_path(tmp_path):
    path = pathlib.Path(_reusing(pathlib.Path(write_pieces(tmp_path / "pieces.xdmf", SHAPE_3D, 2)), "include"))
    steps = path.read_text().split('<Grid Name="step')
    steps[2] = re.sub(r'<Attribute Name="x_cell".*?</Attribute>',
                      _x_cell_taken("item_attribute", "/Xdmf/Domain/Grid/Grid[1]/Grid[@Name='q9']"), steps[2],
                      count=1, flags=re.S)
    path.write_text('<Grid Name="step'.join(steps))
    with phasegauge.open_series(str(path)) as series:
        assert series.read(0).mesh.n_cells == 2000
        with pytest.raises(UnsupportedMeshError, match=r"pieces.xdmf, step 1, piece p0: the DataItem Reference "
                                                       r"\"/Xdmf/Domain/Grid/Grid\[1\]/Grid\[@Name='q9'\]/Attribute"
                                                       r"\[@Name='x_cell'\]/DataItem\" finds nothing in the file; "
                                                       r"write the field's DataItem in the grid"):
            series.read(1)
