"""Each step its own XDMF file pointing into one HDF5 file: the HDF5 claims are checked once per file.

Outside check: the steps read are compared with meshio's own reading of the XDMF files [lib];
the damaged-file refusal is the corpus case of tests/run/test_bad_input_corpus.py, unchanged.
"""

import os
import shutil

import meshio
import numpy as np
import pytest

from phasegauge.errors import UnreadableFileError
from phasegauge.io import Series
from phasegauge.io import _claims
from phasegauge.meshgen import grid_mesh, to_meshio


def _steps(tmp_path, n=4):
    """n XDMF files naming the one HDF5 file the first was written with (as a solver writing one data file)."""
    folder = tmp_path / "run"
    folder.mkdir()
    mesh = grid_mesh((6, 5))
    old = os.getcwd()
    os.chdir(folder)
    try:
        to_meshio(mesh, point_data={"c": mesh.points[:, 0]}).write("step_0.xdmf")
    finally:
        os.chdir(old)
    for k in range(1, n):
        shutil.copy(folder / "step_0.xdmf", folder / f"step_{k}.xdmf")
    return folder


def _counting(monkeypatch):
    opened = []
    real = _claims._check_hdf5_file

    def counted(xdmf_path, name):
        opened.append(os.path.basename(name))
        return real(xdmf_path, name)

    monkeypatch.setattr(_claims, "_check_hdf5_file", counted)
    return opened


def test_hdf5_file_shared_by_steps_is_checked_once_and_steps_are_unchanged(tmp_path, monkeypatch):
    folder = _steps(tmp_path)
    opened = _counting(monkeypatch)
    series = Series(str(folder))
    steps = [series.read(i) for i in range(len(series))]
    assert len(steps) == 4
    # regression: the check opened the HDF5 file and walked its datasets once per step
    assert opened == ["step_0.h5"]
    for step in steps:  # the same numbers as meshio's own reading [lib]
        raw = meshio.read(step.info.path)
        np.testing.assert_array_equal(step.fields.point_data["c"], raw.point_data["c"])
        np.testing.assert_array_equal(step.mesh.points[:, :2], raw.points[:, :2])


def test_a_rewritten_hdf5_file_is_checked_again(tmp_path, monkeypatch):
    import h5py

    folder = _steps(tmp_path, n=2)
    opened = _counting(monkeypatch)
    series = Series(str(folder))
    series.read(0)
    with h5py.File(folder / "step_0.h5", "a") as f:  # damaged after the first step: claims more than it stores
        name = next(k for k in f if f[k].ndim == 2 and f[k].shape[1] == 3)
        del f[name]
        f.create_dataset(name, shape=(3_000_000, 3), dtype="f8", chunks=(1 << 16, 3))
    with pytest.raises(UnreadableFileError, match="but stores only"):
        series.read(1)
    assert opened == ["step_0.h5", "step_0.h5"]


def test_each_hdf5_file_is_looked_at_once_per_check(tmp_path, monkeypatch):
    # regression: the check stat-ed each file twice (its key, then whether it is a file)
    folder = _steps(tmp_path, n=1)
    h5 = str(folder / "step_0.h5")
    opened = _counting(monkeypatch)
    looked, stat = [], os.stat
    monkeypatch.setattr(os, "stat", lambda path, *a, **k: (looked.append(os.fspath(path)), stat(path, *a, **k))[1])
    checked = _claims.CheckedFiles()
    _claims.check_hdf5_claims(str(folder / "step_0.xdmf"), [h5], checked=checked)
    assert looked.count(h5) == 1 and opened == ["step_0.h5"]
    _claims.check_hdf5_claims(str(folder / "step_0.xdmf"), [h5], checked=checked)  # passed before: not opened
    assert looked.count(h5) == 2 and opened == ["step_0.h5"]
    # a file that is missing or a folder is left to the reader, unopened
    _claims.check_hdf5_claims(str(folder / "step_0.xdmf"), [str(folder / "gone.h5"), str(folder)], checked=checked)
    _claims.check_hdf5_claims(str(folder / "step_0.xdmf"), [str(folder)])
    assert opened == ["step_0.h5"]
