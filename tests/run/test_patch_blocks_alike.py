"""A boundary patch block is an info line of the run however it is written (.vtp or .vtu of faces):
manifest.json names it in series.blocks_left_out and counts no warning for it; `inspect --json` lists it
under the same key, as the same list."""
import json

import numpy as np
import pytest
from click.testing import CliRunner

import phasegauge as pg
from phasegauge.cli import main

pyvista = pytest.importorskip("pyvista")


def _write(folder, suffix, name="bottom"):
    """Two steps of a .vtm: a volume block of hexahedra and a wall block of quads (named ``name``), as .vtp
    or .vtu."""
    folder.mkdir()
    for s in range(2):
        volume = pyvista.ImageData(dimensions=(9, 9, 9), spacing=(1 / 8,) * 3).cast_to_unstructured_grid()
        centres = volume.cell_centers().points
        volume.cell_data["c"] = (np.linalg.norm(centres - 0.5, axis=1) < 0.25 + 0.01 * s).astype(float)
        wall = pyvista.Plane(center=(0.5, 0.5, 0), direction=(0, 0, 1), i_size=1, j_size=1,
                             i_resolution=8, j_resolution=8)
        if suffix == ".vtu":
            wall = wall.cast_to_unstructured_grid()
        wall.cell_data["c"] = np.zeros(wall.n_cells)
        # VTK's own cell dimensions make the wall a patch of the volume: quads 2, hexahedra 3
        assert wall.get_cell(0).dimension == 2 and volume.get_cell(0).dimension == 3
        pyvista.MultiBlock({"internal": volume, name: wall}).save(folder / f"case_{s}.vtm")
    return folder


@pytest.mark.filterwarnings("ignore")
def test_a_patch_reads_alike_in_the_manifest_as_vtu_and_as_vtp(tmp_path):
    manifests = {}
    for suffix in (".vtp", ".vtu"):
        folder = _write(tmp_path / suffix[1:], suffix)
        out = tmp_path / f"out_{suffix[1:]}"
        pg.measure(folder, "c", out=out, analyses=("conservation",))
        manifests[suffix] = json.loads((out / "manifest.json").read_text())
    for suffix, manifest in manifests.items():
        assert not [w for w in manifest["warnings"] if "left out" in w], suffix
        assert manifest["series"]["blocks_left_out"] == ["bottom"], suffix
    assert manifests[".vtu"]["warnings"] == manifests[".vtp"]["warnings"]
    assert manifests[".vtu"]["series"]["blocks_left_out"] == manifests[".vtp"]["series"]["blocks_left_out"]


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("suffix", [".vtp", ".vtu"])
def test_the_manifest_and_inspect_json_name_the_blocks_left_out_alike(tmp_path, suffix):
    folder = _write(tmp_path / "run", suffix)
    # outside reference: the block names pyvista wrote into the .vtm, less the volume block VTK reads as 3D
    written = [name for name in pyvista.read(folder / "case_0.vtm").keys() if name != "internal"]
    assert written == ["bottom"]
    out = tmp_path / "out"
    pg.measure(folder, "c", out=out, analyses=("conservation",))
    manifest = json.loads((out / "manifest.json").read_text())
    res = CliRunner().invoke(main, ["inspect", str(folder), "--json"])
    assert res.exit_code == 0, res.output
    described = json.loads(res.output)
    assert manifest["series"]["blocks_left_out"] == described["blocks_left_out"] == written
    assert "left_out_blocks" not in described


@pytest.mark.filterwarnings("ignore")
@pytest.mark.parametrize("suffix", [".vtp", ".vtu"])
def test_a_block_name_holding_a_comma_is_named_whole(tmp_path, suffix, monkeypatch):
    # the names of blocks of faces in a volume format were put into the note's text and split back on ", ":
    # "wall, left" came back as two blocks, "wall" and "left". The series record (the first .vtm parsed for
    # its blocks) was built three times a run; once now
    import pickle

    from phasegauge.errors import BlocksLeftOutNote
    from phasegauge.run import _report_data

    note = pickle.loads(pickle.dumps(BlocksLeftOutNote("left out", "case_0.vtm", names=["wall, left"])))
    assert note.names == ("wall, left",) and note.where == "case_0.vtm"  # as a worker hands it over
    built, record = [], _report_data.series_record
    monkeypatch.setattr(_report_data, "series_record", lambda series: built.append(1) or record(series))
    folder = _write(tmp_path / "run", suffix, name="wall, left")
    # outside reference: the block names pyvista wrote into the .vtm, less the volume block VTK reads as 3D
    written = [name for name in pyvista.read(folder / "case_0.vtm").keys() if name != "internal"]
    assert written == ["wall, left"]
    out = tmp_path / "out"
    result = pg.measure(folder, "c", out=out, analyses=("conservation",))
    manifest = json.loads((out / "manifest.json").read_text())
    res = CliRunner().invoke(main, ["inspect", str(folder), "--json"])
    assert res.exit_code == 0, res.output
    assert manifest["series"]["blocks_left_out"] == json.loads(res.output)["blocks_left_out"] == written
    assert [line for line in result.reading if line.startswith("multiblock blocks left out: wall, left (")]
    assert len(built) == 1
