"""A warning repeated over steps counts steps, not the ways a step's place is written; a boundary patch left out
of a multiblock step is said alike whether written as polygon data (.vtp) or as a grid of faces (.vtu).

Outside references: the steps are written by pyvista's ``MultiBlock.save`` (VTK's multiblock writer), three of
them, so three steps is the count; the block kept out is the one VTK's reader finds holding only faces
(quadrilaterals, ``pyvista.CellType.QUAD``).
"""

import json
import warnings

import numpy as np
import pytest
import pyvista

import phasegauge as pg
from phasegauge.errors import MeshWarning, collapse_warnings

pyvista.OFF_SCREEN = True


def test_a_step_read_when_found_and_when_measured_counts_once():
    places = ["a18/case_0.vtm", "a18/case_1.vtm", "a18/case_2.vtm",
              "a18/case_0.vtm, step 0", "a18/case_1.vtm, step 1", "a18/case_2.vtm, step 2"]
    (_, text), = collapse_warnings([(MeshWarning, "same words", where) for where in places])
    assert text == "a18/case_0.vtm: same words (and 2 more steps)"
    (_, text), = collapse_warnings([(MeshWarning, "same words", w) for w in ("run/case_0.vtm", "case_0.vtm, step 0")])
    assert text == "run/case_0.vtm: same words"  # one step given alone: nothing more
    # the steps of one collection file are told apart by their numbers; files apart by their paths
    from phasegauge.errors import count_steps

    assert count_steps([f"run.xdmf, step {k}" for k in range(4)] + ["run.xdmf"]) == 4
    assert count_steps(["a/case_0.vtm", "b/case_0.vtm"]) == 2


def _steps(folder, patch_suffix, times=(0.0, 0.1, 0.2), block_time=None):
    folder.mkdir()
    grid = pyvista.ImageData(dimensions=(7, 7, 7), spacing=(1 / 6,) * 3).cast_to_unstructured_grid()
    centres = grid.cell_centers().points
    surface = grid.extract_surface(algorithm="dataset_surface")
    outlet = surface.extract_cells(np.flatnonzero(surface.cell_centers().points[:, 0] > 1 - 1e-9))
    assert set(outlet.celltypes) == {pyvista.CellType.QUAD}  # VTK's reading: faces only
    for k, t in enumerate(times):
        volume = grid.copy()
        volume.cell_data["alpha"] = (np.linalg.norm(centres - [0.4 + t, 0.5, 0.5], axis=1) < 0.3).astype(float)
        if block_time is not None:
            volume.field_data["TimeValue"] = [block_time]
        patch = outlet.copy() if patch_suffix == ".vtu" else outlet.extract_surface(algorithm="dataset_surface")
        patch.cell_data["alpha"] = np.ones(patch.n_cells)
        blocks, boundary = pyvista.MultiBlock(), pyvista.MultiBlock()
        blocks["internal"], boundary["outlet"] = volume, patch
        blocks["boundary"] = boundary
        blocks.field_data["TimeValue"] = [t]
        blocks.save(folder / f"case_{k}.vtm")
    return folder


def test_a_warning_on_every_step_of_a_multiblock_series_counts_its_steps(tmp_path):
    folder = _steps(tmp_path / "run", ".vtp", block_time=5.0)  # every step's block stores another time
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = pg.measure(folder, "alpha")
    (line,) = [w for w in result.warnings if "stores time" in w]
    assert line.endswith("(and 2 more steps)")


def test_a_block_time_disagreement_is_not_said_where_a_listing_gives_the_times(tmp_path):
    folder = _steps(tmp_path / "run", ".vtp", block_time=5.0)
    # VTK's reader: the .vtm stores 0.1, its block 5 (the disagreement a run without a listing warns of)
    assert pyvista.read(folder / "case_1.vtm").field_data["TimeValue"][0] == pytest.approx(0.1)
    assert pyvista.read(folder / "case_1" / "case_1_0.vtu").field_data["TimeValue"][0] == 5.0
    (folder / "run.steps").write_text("0,case_0.vtm\n0.5,case_1.vtm\n1,case_2.vtm\n")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = pg.measure(folder / "run.steps", "alpha")
    assert result.steps["time"].tolist() == [0.0, 0.5, 1.0]  # the listing's
    assert not [w for w in result.warnings if "stores time" in w]


@pytest.mark.parametrize("suffix", [".vtu", ".vtp"])
def test_a_patch_left_out_is_an_info_line_whatever_its_format(tmp_path, suffix):
    folder = _steps(tmp_path / "run", suffix)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = pg.measure(folder, "alpha", out=tmp_path / "o")
    assert result.steps["time"].tolist() == [0.0, 0.1, 0.2]
    assert not [f for f in result.flags if "outlet" in f]
    assert not [w for w in result.warnings if "outlet" in w]
    (line,) = [r for r in result.reading if "outlet" in r]
    assert line == "multiblock blocks left out: outlet (boundary patches: the volume blocks are read)"
    manifest = json.loads((tmp_path / "o" / "manifest.json").read_text())
    assert manifest["series"]["blocks_left_out"] == ["outlet"]
