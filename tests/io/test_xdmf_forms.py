"""XDMF files in the forms C and Fortran solvers write them: a collection's time list, version 2,
a Topology's BaseOffset, and forms that are not read (named, with what to write instead).

Outside checks: the files are written here by hand as the XDMF specification lays them out
(XDMF Model and Format, https://www.xdmf.org/index.php/XDMF_Model_and_Format: Time with
TimeType List / HyperSlab / Range, Topology BaseOffset, GeometryType X_Y_Z, 2DCoRectMesh) [spec],
their numbers with h5py [lib]; every time and every step's values read are compared with the
numpy arrays written [lib]; a BaseOffset file is compared with meshio's reading of the same
cells numbered from 0 [lib].
"""

import os

import numpy as np
import pytest

from phasegauge.errors import InputFileNotFound, SeriesError, UnreadableFileError, UnsupportedMeshError
from phasegauge.io import Series

h5py = pytest.importorskip("h5py")

NX, NY = 4, 3  # cells along x and y
TIMES = (0.0, 1e-7, 2.5e-7)  # unevenly spaced, so a step index is no time


def _mesh_arrays():
    """Points (x fastest) and quads of an NX x NY grid of unit squares."""
    xs, ys = np.meshgrid(np.arange(NX + 1.0), np.arange(NY + 1.0))
    points = np.c_[xs.ravel(), ys.ravel()]
    i, j = np.meshgrid(np.arange(NX), np.arange(NY))
    first = (j * (NX + 1) + i).ravel()
    quads = np.c_[first, first + 1, first + NX + 2, first + NX + 1]
    return points, quads


def _values(k):
    """Step k's cell field: different in every cell and every step."""
    return k + 0.01 * np.arange(NX * NY)


def _write(folder, name="run.xdmf", *, version="3.0", times="grid", offset=0, geometry="XY", topology=None,
           header=""):
    """An XDMF temporal collection of len(TIMES) grids, its numbers in mesh.h5 and fields.h5.

    ``times``: 'grid' (a <Time Value> in each grid), 'list-first' / 'list-after' (a collection-level
    <Time TimeType="List"> before or after the grids, values inline), 'list-hdf' (the list in an HDF5
    dataset), or an XML string put first in the collection. ``offset``: the Topology's BaseOffset, added
    to the corner numbers written."""
    points, quads = _mesh_arrays()
    with h5py.File(folder / "mesh.h5", "w") as f:
        f["xy"] = points
        f["conn"] = (quads + offset).astype(np.int64)
        for axis, column in zip("xyz", (points[:, 0], points[:, 1], np.zeros(len(points)))):
            f[axis] = column
        f["times"] = np.array(TIMES)
    with h5py.File(folder / "fields.h5", "w") as f:
        for k in range(len(TIMES)):
            f[f"c_{k}"] = _values(k)
    n = len(points)
    kind = 'Type' if version.startswith("2") else 'TopologyType'
    base = f' BaseOffset="{offset}"' if offset else ""
    topo = topology or (f'<Topology {kind}="Quadrilateral" NumberOfElements="{NX * NY}"{base}><DataItem '
                        f'Dimensions="{NX * NY} 4" NumberType="Int" Precision="8" Format="HDF">mesh.h5:/conn'
                        '</DataItem></Topology>')
    if geometry == "X_Y_Z":
        geo = '<Geometry GeometryType="X_Y_Z">' + "".join(
            f'<DataItem Dimensions="{n}" NumberType="Float" Precision="8" Format="HDF">mesh.h5:/{a}</DataItem>'
            for a in "xyz") + "</Geometry>"
    else:
        geo = (f'<Geometry GeometryType="XY"><DataItem Dimensions="{n} 2" NumberType="Float" Precision="8" '
               'Format="HDF">mesh.h5:/xy</DataItem></Geometry>')
    grids = []
    for k, t in enumerate(TIMES):
        own_time = f'<Time Value="{t!r}"/>' if times == "grid" else ""
        grids.append(f'<Grid Name="s{k}" GridType="Uniform">{own_time}{topo}{geo}<Attribute Name="c" '
                     f'AttributeType="Scalar" Center="Cell"><DataItem Dimensions="{NX * NY}" NumberType="Float" '
                     f'Precision="8" Format="HDF">fields.h5:/c_{k}</DataItem></Attribute></Grid>')
    inline = " ".join(repr(t) for t in TIMES)
    listed = {"list-first": inline, "list-after": inline, "list-hdf": None}
    before, after = "", ""
    if times in listed:
        item = (f'<DataItem Format="XML" Dimensions="{len(TIMES)}">{inline}</DataItem>' if times != "list-hdf" else
                f'<DataItem Format="HDF" NumberType="Float" Precision="8" Dimensions="{len(TIMES)}">'
                'mesh.h5:/times</DataItem>')
        element = f'<Time TimeType="List">{item}</Time>'
        before, after = (element, "") if times != "list-after" else ("", element)
    elif times != "grid":
        before = times
    path = folder / name
    path.write_text(f'<?xml version="1.0" ?>\n{header}<Xdmf Version="{version}" '
                    'xmlns:xi="http://www.w3.org/2001/XInclude"><Domain><Grid Name="T" GridType="Collection" '
                    f'CollectionType="Temporal">{before}{"".join(grids)}{after}</Grid></Domain></Xdmf>\n')
    return path


def _check_steps(path):
    """Every step's time and cell values are the ones written for its grid [spec, numpy]."""
    series = Series(path)
    assert series.kind == "collection" and len(series) == len(TIMES)
    np.testing.assert_array_equal(series.times, TIMES)
    assert series.time_origins == ["xdmf"]
    for k, step in enumerate(series):
        np.testing.assert_array_equal(step.fields.cell_data["c"], _values(k))
    series.close()
    return series


@pytest.mark.parametrize("times", ["list-first", "list-after", "list-hdf"])
def test_collection_time_list_gives_the_times_and_step_k_reads_grid_k(tmp_path, times):
    """A <Time TimeType="List"> child of the collection [spec] (inline, or an HDF5 dataset written by h5py
    [lib]): the steps take its times, and the Time element before the grids shifts no step onto the
    previous grid's data (regression: step 1 read grid 0)."""
    _check_steps(_write(tmp_path, times=times))


def test_collection_time_hyperslab_gives_start_stride_count(tmp_path):
    """TimeType="HyperSlab" holds start, stride and count [spec]: the times are start + k * stride."""
    path = _write(tmp_path, times='<Time TimeType="HyperSlab"><DataItem Format="XML" Dimensions="3">'
                                  f'0.5 0.25 {len(TIMES)}</DataItem></Time>')
    series = Series(path)
    np.testing.assert_allclose(series.times, 0.5 + 0.25 * np.arange(len(TIMES)), rtol=0, atol=0)
    np.testing.assert_array_equal(series.read(2).fields.cell_data["c"], _values(2))


@pytest.mark.parametrize("time, message", [
    ('<Time TimeType="List"><DataItem Format="XML" Dimensions="2">0 1</DataItem></Time>',
     r"the list holds 2 times for 3 grids; write one time per grid"),
    ('<Time TimeType="Range"><DataItem Format="XML" Dimensions="2">0 1</DataItem></Time>',
     r"a Range gives the first and the last time of the collection, not each grid's time; write one time"),
    ('<Time TimeType="List"><DataItem Format="HDF" Dimensions="3">gone.h5:/t</DataItem></Time>',
     r"the HDF5 file 'gone.h5' holding the times is missing; put gone.h5 back"),
])
def test_collection_time_list_that_gives_no_time_per_grid_is_refused(tmp_path, time, message):
    """A list of the wrong length, a Range (the collection's span [spec]) or a list in a missing HDF5 file
    is refused in one line naming the Time element and the fix."""
    path = _write(tmp_path, times=time)
    with pytest.raises((SeriesError, FileNotFoundError), match=message) as caught:
        Series(path)
    assert "<Time TimeType=" in str(caught.value) and "\n" not in str(caught.value)


def test_version_2_collection_reads_as_written(tmp_path):
    """An XDMF 2 file (DOCTYPE, Topology Type=, NumberType [spec]) reads through meshio's version 3 reader
    [lib]: the same times and values as written (it was refused as 'Unknown XDMF version 2.0')."""
    header = '<!DOCTYPE Xdmf SYSTEM "Xdmf.dtd" []>\n'
    _check_steps(_write(tmp_path, name="run.xmf", version="2.0", header=header))
    _check_steps(_write(tmp_path, name="list.xmf", version="2.0", header=header, times="list-first"))


def test_other_xdmf_versions_are_refused_naming_the_version(tmp_path):
    path = _write(tmp_path, version="1.0")
    with pytest.raises(UnreadableFileError, match=r"has version 1.0; time collections of versions 2 and 3 are "
                                                  r"read; write Version=\"3.0\""):
        Series(path).read(0)


def test_topology_base_offset_is_subtracted_from_the_corner_numbers(tmp_path):
    """Corner numbers from 1 with BaseOffset="1" [spec] (as Fortran solvers write them) read as the same
    mesh as meshio's reading [lib] of the numbers from 0 (they were refused as a damaged file)."""
    import meshio

    points, quads = _mesh_arrays()
    series = _check_steps(_write(tmp_path, offset=1))
    mesh = Series(series.path).read(0).mesh
    plain = tmp_path / "zero"
    plain.mkdir()
    meshio.write(plain / "zero.vtu", meshio.Mesh(points, [("quad", quads)]))
    expected = Series(plain / "zero.vtu").read(0).mesh
    np.testing.assert_array_equal(mesh.points, expected.points)
    np.testing.assert_array_equal(mesh.blocks[0].connectivity, expected.blocks[0].connectivity)


def test_base_offset_of_a_plain_xdmf_file_is_subtracted(tmp_path):
    """One Uniform grid (no collection) with BaseOffset="1" [spec]: the cells number the points from 0
    (compared with the quads written, numpy [lib])."""
    _write(tmp_path, offset=1)  # the HDF5 files
    topo = (f'<Topology TopologyType="Quadrilateral" NumberOfElements="{NX * NY}" BaseOffset="1"><DataItem '
            f'Dimensions="{NX * NY} 4" NumberType="Int" Precision="8" Format="HDF">mesh.h5:/conn</DataItem>'
            '</Topology>')
    n = (NX + 1) * (NY + 1)
    path = tmp_path / "one.xdmf"
    path.write_text(f'<?xml version="1.0" ?><Xdmf Version="3.0"><Domain><Grid Name="m" GridType="Uniform">{topo}'
                    f'<Geometry GeometryType="XY"><DataItem Dimensions="{n} 2" NumberType="Float" Precision="8" '
                    'Format="HDF">mesh.h5:/xy</DataItem></Geometry></Grid></Domain></Xdmf>\n')
    step = Series(path).read(0)
    np.testing.assert_array_equal(step.mesh.blocks[0].connectivity, _mesh_arrays()[1])


def test_base_offset_above_the_corner_numbers_is_refused_naming_it(tmp_path):
    path = _write(tmp_path)
    path.write_text(path.read_text().replace('NumberOfElements="12"', 'NumberOfElements="12" BaseOffset="1"'))
    with pytest.raises(UnsupportedMeshError, match="the Topology's BaseOffset is 1 but a corner number is 0; "
                                                   "write the BaseOffset"):
        Series(path).read(0)


@pytest.mark.parametrize("form, message", [
    ({"geometry": "X_Y_Z"}, r"GeometryType is X_Y_Z \(one DataItem per coordinate\), which is not read; write the "
                            r"points as one DataItem of n x 3 values \(GeometryType XYZ\)"),
    ({"topology": f'<Topology TopologyType="2DCoRectMesh" Dimensions="{NY + 1} {NX + 1}"/>'},
     r"Topology is 2DCoRectMesh \(a structured grid with no corner numbers stored\), which is not read; write "
     r"the grid as points"),
])
def test_forms_meshio_does_not_read_are_named_with_what_to_write(tmp_path, form, message):
    """Forms of the specification [spec] meshio does not read: the form is named, not a truncated file."""
    path = _write(tmp_path, **form)
    with pytest.raises(UnsupportedMeshError, match=message) as caught:
        Series(path).read(0)
    assert "truncated" not in str(caught.value) and "damaged" not in str(caught.value)


def test_data_items_without_a_format_read_as_xml(tmp_path):
    """A DataItem with no Format is XML by the specification's default [spec]: inline numbers read as
    written [numpy] (meshio needs the attribute: it is given before meshio reads)."""
    points, quads = _mesh_arrays()
    item = lambda dims, values, kind: (f'<DataItem Dimensions="{dims}" NumberType="{kind}" Precision="8">'
                                       + " ".join(str(v) for v in np.ravel(values).tolist()) + "</DataItem>")
    grids = "".join(
        f'<Grid Name="s{k}" GridType="Uniform"><Time Value="{t!r}"/>'
        f'<Topology TopologyType="Quadrilateral" NumberOfElements="{NX * NY}">'
        f'{item(f"{NX * NY} 4", quads, "Int")}</Topology><Geometry GeometryType="XY">'
        f'{item(f"{len(points)} 2", points, "Float")}</Geometry><Attribute Name="c" AttributeType="Scalar" '
        f'Center="Cell">{item(NX * NY, _values(k), "Float")}</Attribute></Grid>' for k, t in enumerate(TIMES))
    path = tmp_path / "noformat.xdmf"
    path.write_text('<?xml version="1.0" ?>\n<Xdmf Version="3.0"><Domain><Grid Name="T" GridType="Collection" '
                    f'CollectionType="Temporal">{grids}</Grid></Domain></Xdmf>\n')
    _check_steps(path)


def test_a_file_of_two_time_collections_refused(tmp_path):
    """Two temporal collections in one file (one a field, as some writers write them) [spec]: which grid
    a step's field is in is not clear, so the file is refused in one line, not read wrongly."""
    path = _write(tmp_path)
    text = path.read_text()
    start = text.index('<Grid Name="T"')
    end = text.rindex("</Grid>") + len("</Grid>")
    path.write_text(text[:end] + text[start:end].replace('Name="T"', 'Name="U"') + text[end:])
    with pytest.raises(SeriesError, match="the file holds 2 time collections, which is not read"):
        Series(str(path))


def _step_file(path, k, t):
    """One step a file: a plain XDMF grid with its own <Time Value> [spec], numbers inline."""
    points, quads = _mesh_arrays()
    item = lambda dims, values, kind: (f'<DataItem Dimensions="{dims}" NumberType="{kind}" Precision="8" '
                                       'Format="XML">' + " ".join(str(v) for v in np.ravel(values).tolist())
                                       + "</DataItem>")
    path.write_text(f'<?xml version="1.0" ?>\n<Xdmf Version="3.0"><Domain><Grid Name="m" GridType="Uniform">'
                    f'<Time Value="{t!r}"/><Topology TopologyType="Quadrilateral" NumberOfElements="{NX * NY}">'
                    f'{item(f"{NX * NY} 4", quads, "Int")}</Topology><Geometry GeometryType="XY">'
                    f'{item(f"{len(points)} 2", points, "Float")}</Geometry><Attribute Name="c" '
                    f'AttributeType="Scalar" Center="Cell">{item(NX * NY, _values(k), "Float")}</Attribute>'
                    '</Grid></Domain></Xdmf>\n')
    return path


def test_step_files_with_their_times_and_a_collection_including_them(tmp_path):
    """Step files each with a grid's <Time Value> [spec] (meshio's plain reader refuses the Time: they are
    read as a collection of that one grid), given as a folder; and a collection of <xi:include href>
    children (XInclude, W3C) naming them, given as its file or as the folder holding it and them:
    every time and value as written [numpy]."""
    plain, included = tmp_path / "plain", tmp_path / "included"
    plain.mkdir(), included.mkdir()
    for k, t in enumerate(TIMES):
        _step_file(plain / f"s_{k:04d}.xmf", k, t)
        _step_file(included / f"s_{k:04d}.xmf", k, t)
    includes = "".join(f'<xi:include href="s_{k:04d}.xmf" xpointer="xpointer(//Xdmf/Domain/Grid[1])"/>'
                       for k in range(len(TIMES)))
    (included / "run.xmf").write_text(
        '<?xml version="1.0" ?>\n<Xdmf Version="3.0" xmlns:xi="http://www.w3.org/2001/XInclude"><Domain>'
        f'<Grid Name="T" GridType="Collection" CollectionType="Temporal">{includes}</Grid></Domain></Xdmf>\n')
    for given in (plain, included / "run.xmf", included):
        series = Series(str(given))
        assert len(series) == len(TIMES) and series.time_origins == ["file"]
        np.testing.assert_array_equal(series.times, TIMES)
        for k, step in enumerate(series):
            np.testing.assert_array_equal(step.fields.cell_data["c"], _values(k))
    (included / "s_0001.xmf").unlink()
    with pytest.raises(InputFileNotFound, match="1 of the 3 step files the collection includes are missing"):
        Series(str(included / "run.xmf"))


def test_an_include_of_another_grid_than_the_first_refused(tmp_path):
    """An <xi:include> whose xpointer names a file's second grid [XInclude, XPointer]: a step file is read
    by its first grid, so this is refused in one line, not read as the wrong grid."""
    _step_file(tmp_path / "s_0.xmf", 0, 0.0)
    (tmp_path / "run.xmf").write_text(
        '<?xml version="1.0" ?>\n<Xdmf Version="3.0" xmlns:xi="http://www.w3.org/2001/XInclude"><Domain>'
        '<Grid Name="T" GridType="Collection" CollectionType="Temporal">'
        '<xi:include href="s_0.xmf" xpointer="xpointer(//Xdmf/Domain/Grid[2])"/></Grid></Domain></Xdmf>\n')
    with pytest.raises(SeriesError,
                       match=r"includes s_0.xmf at .*Grid\[2\].*, but a step file is read by its first grid"):
        Series(str(tmp_path / "run.xmf"))


def test_a_file_included_twice_refused(tmp_path):
    """One step file included twice (its grids meant as two steps) [XInclude]: it would be read twice by
    its first grid, so it is refused in one line."""
    _step_file(tmp_path / "s_0.xmf", 0, 0.0)
    twice = '<xi:include href="s_0.xmf"/>' * 2
    (tmp_path / "run.xmf").write_text(
        '<?xml version="1.0" ?>\n<Xdmf Version="3.0" xmlns:xi="http://www.w3.org/2001/XInclude"><Domain>'
        f'<Grid Name="T" GridType="Collection" CollectionType="Temporal">{twice}</Grid></Domain></Xdmf>\n')
    with pytest.raises(SeriesError, match="includes s_0.xmf more than once"):
        Series(str(tmp_path / "run.xmf"))


def _gap_warnings(path):
    import warnings

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = Series(str(path))
    return series, [str(w.message) for w in caught if "jump" in str(w.message)]


def test_a_collection_warns_of_a_missing_output_and_not_of_rounded_text_times(tmp_path, monkeypatch):
    """A missing output (t = 0.5 of steps 0.1 apart) is warned of in a collection of grids and in one
    including step files, as in a folder; times written as text with six significant digits (C's %g: t =
    10 + 0.00014 k shows as 10.0001, 10.0003, ...) are rounded to 1e-4, a share of the interval, so their
    jumps are no gaps [the times written by hand]."""
    missing = tuple(round(0.1 * k, 10) for k in range(12) if k != 5)
    monkeypatch.setitem(globals(), "TIMES", missing)
    grids, files = tmp_path / "grids", tmp_path / "files"
    grids.mkdir(), files.mkdir()
    _, said = _gap_warnings(_write(grids))
    assert len(said) == 1 and "0.4 to 0.6" in said[0], said
    for k, t in enumerate(missing):
        _step_file(files / f"s_{k:04d}.xmf", k, t)
    include = "".join(f'<xi:include href="s_{k:04d}.xmf" xpointer="xpointer(//Xdmf/Domain/Grid[1])"/>'
                      for k in range(len(missing)))
    (files / "run.xmf").write_text('<?xml version="1.0" ?>\n<Xdmf Version="3.0" xmlns:xi="http://www.w3.org/2001/'
                                   'XInclude"><Domain><Grid Name="T" GridType="Collection" CollectionType="Temporal">'
                                   f'{include}</Grid></Domain></Xdmf>\n')
    _, said = _gap_warnings(files / "run.xmf")
    assert len(said) == 1 and "0.4 to 0.6" in said[0], said
    rounded = tuple(10 + 0.00014 * k for k in range(30))
    monkeypatch.setitem(globals(), "TIMES", rounded)
    text = tmp_path / "text"
    text.mkdir()
    path = _write(text)
    xml = path.read_text()
    for t in rounded:
        xml = xml.replace(f'<Time Value="{t!r}"/>', f'<Time Value="{t:g}"/>', 1)
    path.write_text(xml)
    series, said = _gap_warnings(path)
    assert said == [] and series.steps[1].time_resolution == pytest.approx(1e-4)


@pytest.mark.parametrize("name", ["out 0000.h5", "OUT_0000.H5", "run-1 a.hdf5", "fields.data", "sub/out_0000.h5"])
def test_the_data_files_an_xdmf_file_names_are_read_from_its_hdf_items(tmp_path, name):
    # the HDF5 file behind each Format="HDF" DataItem, as the file writes it (a name with a space, as meshio
    # names the data of "out 0000.xdmf", an upper-case suffix, another suffix): the resume key and the
    # manifest's inputs take them from here. Reference: the names written, and Python's XML parser
    # reading the same items back
    import xml.etree.ElementTree as ET

    from phasegauge.io import step_data_files
    from phasegauge.io._xdmf import data_file_names

    text = ('<?xml version="1.0"?>\n<Xdmf Version="3.0"><Domain><Grid Name="mesh" GridType="Uniform">'
            '<Geometry GeometryType="XY"><DataItem Dimensions="4 2" Format="HDF">\n'
            f'  {name}:/geometry\n</DataItem></Geometry>'
            '<Topology TopologyType="Quadrilateral" NumberOfElements="1"><DataItem Dimensions="1 4" '
            f'Format="hdf">{name}:/topology</DataItem></Topology>'
            '<Attribute Name="c" Center="Node"><DataItem Dimensions="4" Format="XML">0 1 2 3</DataItem>'
            '</Attribute></Grid></Domain></Xdmf>\n')
    path = tmp_path / "out 0000.xdmf"
    path.write_text(text)
    items = [item.text.strip() for item in ET.parse(path).getroot().iter("DataItem")
             if item.get("Format").upper() == "HDF"]
    assert {item.rpartition(":/")[0] for item in items} == {name}
    assert data_file_names(str(path)) == [name]
    assert step_data_files(path) == [os.path.join(str(tmp_path), name)]
