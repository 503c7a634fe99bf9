"""Index files another program writes beside the step files (an XML collection, a JSON file series), told by
their content, are not read, but their times are not dropped without a word: one warning names them and the way
to give the times.

Outside references: Python's XML parser (xml.etree) and json module read the times the two index files list and
the folder's files do not store.
"""

import json
import warnings
import xml.etree.ElementTree as ElementTree

import meshio
import numpy as np
import pytest
import pyvista

from phasegauge.errors import SeriesWarning
from phasegauge.io import Series
from phasegauge.meshgen import grid_mesh, to_meshio

TIMES = (0.0, 0.002, 0.004, 0.006)


def _files(folder, stored=False):
    folder.mkdir()
    mesh = grid_mesh((4, 4, 4))
    names = [f"out_{k * 200:06d}.vtu" for k in range(len(TIMES))]
    for name, t in zip(names, TIMES):
        grid = pyvista.wrap(to_meshio(mesh, cell_data={"alpha": np.full(mesh.n_cells, 0.5)}))
        if stored:
            grid.field_data["TimeValue"] = [t]
        grid.save(folder / name)
    return names


def _indexes(folder, names):
    (folder / "run_times.xml").write_text(
        '<?xml version="1.0"?>\n<VTKFile type="Collection" version="0.1">\n<Collection>\n'
        + "".join(f'<DataSet timestep="{t}" file="{n}"/>\n' for n, t in zip(names, TIMES))
        + "</Collection>\n</VTKFile>\n")
    (folder / "run_times.json").write_text(json.dumps(
        {"file-series-version": "1.0", "files": [{"name": n, "time": t} for n, t in zip(names, TIMES)]}))


def _series_warnings(path):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        series = Series(path)
    return series, [w.message for w in caught if issubclass(w.category, SeriesWarning)]


def test_an_xml_collection_and_a_json_series_beside_unstamped_steps_are_named_once(tmp_path):
    folder = tmp_path / "indexed"
    names = _files(folder)
    _indexes(folder, names)
    # the times are there: Python's XML parser and json read them (and the files store none)
    listed = ElementTree.parse(folder / "run_times.xml").getroot().iter("DataSet")
    assert [float(d.get("timestep")) for d in listed] == pytest.approx(TIMES)
    assert [f["time"] for f in json.loads((folder / "run_times.json").read_text())["files"]] == list(TIMES)
    assert "TimeValue" not in meshio.read(folder / names[1]).field_data
    for path in (str(folder), str(folder / "out_*.vtu")):
        series, found = _series_warnings(path)
        assert series.times.tolist() == [0, 1, 2, 3]  # not read: the step numbers, now said
        named = [w for w in found if "another program's index" in w.what]
        assert len(named) == 1
        assert named[0].what.startswith("run_times.json, run_times.xml beside the step files list their times")
        assert "'time,path' listing" in named[0].what


def test_no_word_when_the_files_store_their_times_or_the_index_names_other_files(tmp_path):
    stamped = tmp_path / "stamped"
    _indexes(stamped, _files(stamped, stored=True))
    series, found = _series_warnings(stamped)
    assert series.times.tolist() == pytest.approx(TIMES)
    assert not [w for w in found if "another program's index" in w.what]
    other = tmp_path / "other"
    other.mkdir()
    _indexes(other, [f"patch_{k}.vtp" for k in range(len(TIMES))])
    (other / "run").mkdir()
    _files(other / "run" / "steps")  # deeper than the folder above the step files
    _, found = _series_warnings(other / "run" / "steps")
    assert not [w for w in found if "another program's index" in w.what]
    notes = tmp_path / "notes"  # a file naming the steps that lists no times is no index: told by content
    names = _files(notes)
    (notes / "run_notes.txt").write_text("started from " + names[0] + "\n")
    _, found = _series_warnings(notes)
    assert not [w for w in found if "another program's index" in w.what]


def test_a_listing_beside_the_index_gives_the_times_without_the_warning(tmp_path):
    folder = tmp_path / "indexed"
    names = _files(folder)
    _indexes(folder, names)
    (folder / "times.steps").write_text("".join(f"{t},{n}\n" for n, t in zip(names, TIMES)))
    series, found = _series_warnings(folder)
    assert series.times.tolist() == list(TIMES)
    assert not [w for w in found if "another program's index" in w.what]


def _fluid_and_solid_steps(folder, with_time=True):
    """Steps as VTK's multiblock writer leaves a run of a fluid and a solid region: the time in each .vtm only."""
    folder.mkdir()
    for k, t in enumerate(TIMES[:3]):
        grid = pyvista.ImageData(dimensions=(5, 5, 5), spacing=(0.25,) * 3).cast_to_unstructured_grid()
        fluid, solid = grid.copy(), grid.translate((1, 0, 0))
        fluid.cell_data["alpha"] = np.full(fluid.n_cells, 0.5)
        solid.cell_data["T"] = np.full(solid.n_cells, 300.0)
        regions = pyvista.MultiBlock()
        regions["fluid"], regions["solid"] = fluid, solid
        if with_time:
            regions.field_data["TimeValue"] = [t]
        regions.save(folder / f"case_{k}.vtm")


def test_vtm_files_storing_the_times_of_the_block_files_given_are_named(tmp_path):
    folder = tmp_path / "cht"
    _fluid_and_solid_steps(folder)
    # VTK's readers: the .vtm files hold the times, the fluid block files none
    assert [float(pyvista.read(folder / f"case_{k}.vtm").field_data["TimeValue"][0]) for k in range(3)] == \
        list(TIMES[:3])
    assert "TimeValue" not in pyvista.read(folder / "case_1" / "case_1_0.vtu").field_data
    series, found = _series_warnings(str(folder / "case_*" / "case_*_0.vtu"))
    assert series.times.tolist() == [0, 1, 2]  # the step numbers, now said
    (named,) = [w for w in found if "store their times" in w.what]
    assert named.what.startswith("the .vtm files beside the step files (case_0.vtm, case_1.vtm, case_2.vtm) store "
                                 "their times, not read")
    assert "give the .vtm files" in named.what
    bare = tmp_path / "bare"  # .vtm files storing no time: no word
    _fluid_and_solid_steps(bare, with_time=False)
    _, found = _series_warnings(str(bare / "case_*" / "case_*_0.vtu"))
    assert not [w for w in found if "store their times" in w.what]
