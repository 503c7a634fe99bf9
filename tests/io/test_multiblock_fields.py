"""A multiblock step whose blocks do not all hold a field: the refusal names the blocks, their fields and the
way out, and a copy left out on cells does not switch the run to the point copy without a word.

Outside references: the files are written by pyvista's ``MultiBlock.save`` (VTK's multiblock writer) as a
conjugate heat transfer run writes them (a fluid region holding the phase field, a solid region the
temperature); the blocks' fields the messages must name are those VTK's own reader gives back
(``pyvista.read``).
"""

import warnings

import numpy as np
import pytest
import pyvista

from phasegauge.errors import FieldNotFoundError, MeshWarning
from phasegauge.io import Series
from phasegauge.model.indicator import select_field

pyvista.OFF_SCREEN = True


def _region(z0):
    grid = pyvista.ImageData(dimensions=(9, 9, 5), spacing=(1 / 8,) * 3, origin=(0, 0, z0))
    grid = grid.cast_to_unstructured_grid()
    centres = grid.cell_centers().points
    grid.cell_data["alpha"] = (np.linalg.norm(centres - [0.5, 0.5, 0.5], axis=1) < 0.3).astype(float)
    return grid


def _fluid_and_solid(path):
    fluid, solid = _region(0.0), _region(0.5)
    del solid.cell_data["alpha"]
    solid.cell_data["T"] = np.ones(solid.n_cells)
    regions = pyvista.MultiBlock()
    regions["fluid"], regions["solid"] = fluid, solid
    regions.save(path)
    return path


def _alpha_on_points_in_one_block(path):
    lower, upper = _region(0.0), _region(0.5)
    lower.point_data["alpha"] = lower.cell_data_to_point_data().point_data["alpha"]
    upper.point_data["alpha"] = upper.cell_data_to_point_data().point_data["alpha"]
    del upper.cell_data["alpha"]
    blocks = pyvista.MultiBlock()
    blocks["lower"], blocks["upper"] = lower, upper
    blocks.save(path)
    return path


def test_a_field_one_region_lacks_is_refused_naming_the_blocks_and_the_way_out(tmp_path):
    path = _fluid_and_solid(tmp_path / "cht.vtm")
    read = pyvista.read(path)  # VTK's reader: the fluid block holds alpha, the solid block T
    assert list(read["fluid"].cell_data) == ["alpha"] and list(read["solid"].cell_data) == ["T"]
    step = Series(path).read(0)
    with pytest.raises(FieldNotFoundError) as caught:
        select_field(step.fields, "alpha", where=step.info.where)
    error = caught.value
    assert "block solid of the multiblock file holds no 'alpha' on cells" in error.what
    assert "fluid: alpha on cells; solid: T on cells" in error.what
    assert "fields there: none" not in error.what
    assert "quoted glob" in error.fix and "cht_0.vtu" in error.fix  # the fluid block's file
    with pytest.raises(FieldNotFoundError, match=r"not read, held by some blocks only: T, alpha"):
        select_field(step.fields, "phi", where=step.info.where)
    from phasegauge.io.describe import describe_series, format_description

    described = describe_series(str(path))  # inspect names them too
    assert set(described["fields_left_out"]) == {"T", "alpha"}
    assert "alpha            not read: block solid" in format_description(described)


def test_a_cell_copy_one_block_lacks_is_not_swapped_for_the_point_copy_silently(tmp_path):
    path = _alpha_on_points_in_one_block(tmp_path / "mixed.vtm")
    read = pyvista.read(path)
    assert "alpha" in read["lower"].cell_data and "alpha" not in read["upper"].cell_data
    assert "alpha" in read["upper"].point_data
    step = Series(path).read(0)
    with pytest.warns(MeshWarning, match=r"field 'alpha': its copy on cells is left out, as block upper .* the copy "
                                         r"on points is read; .*--field-location point"):
        _, location = select_field(step.fields, "alpha", where=step.info.where)
    assert location == "point"
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the point copy chosen: no word
        assert select_field(step.fields, "alpha", where=step.info.where, location="point")[1] == "point"
    from phasegauge.io.describe import describe_series, format_description

    described = describe_series(str(path))  # inspect names the lost cell copy
    assert set(described["cell_copies_left_out"]) == {"alpha"}
    assert "alpha            cell copy not read: block upper" in format_description(described)


def test_a_copy_left_out_of_a_field_not_measured_or_not_preferred_gives_no_word(tmp_path, recwarn):
    lower, upper = _region(0.0), _region(0.5)
    # an unrelated field on cells and points in one block, on points only in the other
    lower.point_data["p"], upper.point_data["p"] = lower.points[:, 2], upper.points[:, 2]
    lower.cell_data["p"] = lower.cell_centers().points[:, 2]
    # the measured field on cells in both blocks, on points too in one (its point copy is the one left out)
    upper.point_data["alpha"] = upper.cell_data_to_point_data().point_data["alpha"]
    blocks = pyvista.MultiBlock()
    blocks["lower"], blocks["upper"] = lower, upper
    blocks.save(tmp_path / "unrelated.vtm")
    read = pyvista.read(tmp_path / "unrelated.vtm")  # VTK's reader: alpha on cells in both, p on cells in one
    assert "alpha" in read["lower"].cell_data and "alpha" in read["upper"].cell_data
    assert "p" in read["lower"].cell_data and "p" not in read["upper"].cell_data and "p" in read["upper"].point_data
    step = Series(tmp_path / "unrelated.vtm").read(0)
    _, location = select_field(step.fields, "alpha", where=step.info.where)
    assert location == "cell"
    assert not [w for w in recwarn if "left out" in str(w.message)]
    assert step.fields.cell_copies_left_out.keys() == {"p"}  # kept for a run measuring p


def test_a_field_every_block_holds_alike_gives_no_word(tmp_path, recwarn):
    path = tmp_path / "both.vtm"
    blocks = pyvista.MultiBlock()
    blocks["lower"], blocks["upper"] = _region(0.0), _region(0.5)
    blocks.save(path)
    step = Series(path).read(0)
    assert "alpha" in step.fields.cell_data and not step.fields.fields_left_out
    assert not [w for w in recwarn if "left out" in str(w.message)]


def test_a_velocity_read_from_its_point_copy_in_place_of_a_lost_cell_copy_is_warned_of():
    from phasegauge.io import StepFields
    from phasegauge.model.fields import vector_field

    fields = StepFields(point_data={"U": np.ones((4, 3))}, cell_copies_left_out={"U": "block b holds no 'U' on cells"})
    with pytest.warns(MeshWarning, match=r"velocity field 'U': its copy on cells is left out, as block b") as caught:
        _, location = vector_field(fields, "U", where="case.vtm, step 0")
    assert location == "point" and "--field-location" not in str(caught[0].message)  # an option of the phase only


def test_the_way_out_of_a_field_one_region_lacks_keeps_the_vtm_time(tmp_path):
    """The fix offered works: a listing of the fluid block's files with the .vtm times, or a .vtm naming it only."""
    import re

    paths = []
    for k, t in enumerate((0.0, 0.05, 0.1)):
        fluid, solid = _region(0.0), _region(0.5)
        del solid.cell_data["alpha"]
        regions = pyvista.MultiBlock()
        regions["fluid"], regions["solid"] = fluid, solid
        regions.field_data["TimeValue"] = [t]
        regions.save(tmp_path / f"case_{k}.vtm")
        paths.append(tmp_path / f"case_{k}.vtm")
    times = [float(pyvista.read(p).field_data["TimeValue"][0]) for p in paths]  # VTK's reader
    step = Series(paths[1]).read(0)
    with pytest.raises(FieldNotFoundError) as caught:
        select_field(step.fields, "alpha", where=step.info.where)
    fix = caught.value.fix
    assert "'0.05,case_1/case_1_0.vtu'" in fix and "copies of the .vtm files naming only block fluid" in fix
    (tmp_path / "fluid.steps").write_text("".join(f"{t},case_{k}/case_{k}_0.vtu\n" for k, t in enumerate(times)))
    assert Series(tmp_path / "fluid.steps").times.tolist() == times
    (tmp_path / "copies").mkdir()
    for k, p in enumerate(paths):  # the .vtm without its solid block
        text = re.sub(r'\s*<DataSet[^>]*name="solid"[^>]*/>', "", p.read_text())
        (tmp_path / "copies" / p.name).write_text(text.replace(f'file="case_{k}/', f'file="../case_{k}/'))
    copies = Series(tmp_path / "copies")
    assert copies.times.tolist() == times
    assert "alpha" in copies.read(1).fields.cell_data


def test_several_blocks_holding_a_field_are_named_for_a_vtm_of_their_own(tmp_path):
    path = tmp_path / "three.vtm"
    blocks = pyvista.MultiBlock()
    blocks["A"], blocks["B"], blocks["C"] = _region(0.0), _region(0.5), _region(1.0)
    del blocks["C"].cell_data["alpha"]
    blocks.save(path)
    step = Series(path).read(0)
    with pytest.raises(FieldNotFoundError, match=r"block C of the multiblock") as caught:
        select_field(step.fields, "alpha", where=step.info.where)
    assert caught.value.fix == "measure the blocks holding it alone: give copies of the .vtm files naming only " \
                               "blocks A, B (each keeps its step's time)"
    assert "glob" not in caught.value.fix  # a glob of several blocks' files makes each block a step


def test_datasets_named_alike_in_several_regions_are_named_by_their_files(tmp_path):
    """A converter's layout of several regions: each region block holds a dataset named 'internal'."""
    _fluid_and_solid(tmp_path / "cht.vtm")
    (tmp_path / "regions.vtm").write_text(
        '<?xml version="1.0"?>\n<VTKFile type="vtkMultiBlockDataSet" version="1.0">\n<vtkMultiBlockDataSet>\n'
        '<Block name="fluid"><DataSet name="internal" file="cht/cht_0.vtu"/></Block>\n'
        '<Block name="solid"><DataSet name="internal" file="cht/cht_1.vtu"/></Block>\n'
        '</vtkMultiBlockDataSet>\n</VTKFile>\n')
    read = pyvista.read(tmp_path / "regions.vtm")  # VTK's reader: the fluid region holds alpha, the solid T
    assert list(read["fluid"][0].cell_data) == ["alpha"] and list(read["solid"][0].cell_data) == ["T"]
    step = Series(tmp_path / "regions.vtm").read(0)
    with pytest.raises(FieldNotFoundError) as caught:
        select_field(step.fields, "alpha", where=step.info.where)
    assert "block cht/cht_1.vtu of the multiblock file holds no 'alpha' on cells (cht/cht_0.vtu: alpha on cells; " \
           "cht/cht_1.vtu: T on cells)" in caught.value.what


def test_the_listing_line_offered_keeps_the_vtm_time_exactly(tmp_path):
    # a time of 1000 plus a billionth: a listing line written to 10 digits would read back as 1000
    fluid, solid = _region(0.0), _region(0.5)
    del solid.cell_data["alpha"]
    regions = pyvista.MultiBlock()
    regions["fluid"], regions["solid"] = fluid, solid
    regions.field_data["TimeValue"] = [1000.000000001]
    regions.save(tmp_path / "case_0.vtm")
    vtk_time = float(pyvista.read(tmp_path / "case_0.vtm").field_data["TimeValue"][0])  # VTK's reader [lib]
    step = Series(tmp_path / "case_0.vtm").read(0)
    with pytest.raises(FieldNotFoundError) as caught:
        select_field(step.fields, "alpha", where=step.info.where)
    line = caught.value.fix.split("as '")[1].split("'")[0]
    assert line == f"{vtk_time!r},case_0/case_0_0.vtu"
    assert float(line.split(",")[0]) == vtk_time  # reads back as the same number


def test_a_step_read_parses_its_vtm_once_and_decodes_its_time_once(tmp_path, monkeypatch):
    # the .vtm was parsed for its blocks, again for its own time, and again for each field a block lacks
    # (the fix's listing line), its binary time decoded through VTK's reader each time: 4 parses, 3 decodes
    import xml.etree.ElementTree as ET

    from phasegauge.io import _multiblock

    fluid, solid = _region(0.0), _region(0.5)
    del solid.cell_data["alpha"]
    solid.cell_data["T"] = np.ones(solid.n_cells)
    regions = pyvista.MultiBlock()
    regions["fluid"], regions["solid"] = fluid, solid
    regions.field_data["TimeValue"] = [0.25]
    path = tmp_path / "case_0.vtm"
    regions.save(path)  # the time in binary (VTK's writer)
    vtk_time = float(pyvista.read(path).field_data["TimeValue"][0])  # VTK's reader [lib]
    series = Series(path)
    counts = {"parse": 0, "decode": 0}
    parse, decode = ET.parse, _multiblock._decoded_field_data

    def counted_parse(source, *args, **kwargs):
        counts["parse"] += str(source).endswith(".vtm")
        return parse(source, *args, **kwargs)

    def counted_decode(*args, **kwargs):
        counts["decode"] += 1
        return decode(*args, **kwargs)

    monkeypatch.setattr(ET, "parse", counted_parse)
    monkeypatch.setattr(_multiblock, "_decoded_field_data", counted_decode)
    step = series.read(0)
    assert counts == {"parse": 1, "decode": 1}
    assert step.time == vtk_time
    for field, block in (("alpha", 0), ("T", 1)):  # each lost field's fix keeps the .vtm's time
        with pytest.raises(FieldNotFoundError) as caught:
            select_field(step.fields, field, where=step.info.where)
        assert f"'{vtk_time!r},case_0/case_0_{block}.vtu'" in caught.value.fix
