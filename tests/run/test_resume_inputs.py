"""What a resume checks: the data files behind every XDMF step file, and whether contour files are written.

A solver run again writes the same file names: one-step XDMF files whose text is unchanged while the
HDF5 files they name hold new numbers. A resumed run must see that, whatever form names the step files
(a folder, a 'time,path' listing, a collection that includes them), and a run that wrote contour files
is resumed only by one that writes them (and the reverse), so that ``contours/`` never misses steps.
"""

import json
import re
import os

import h5py
import numpy as np
import pandas as pd
import pytest

from phasegauge import measure
from phasegauge.errors import OutputError, SeriesError
from phasegauge.run.step import StepRunner

N = 60          # quads a side on the unit square
WIDTH = 0.03    # the tanh profile's width w
STEPS = 6


def _radius(k, growth):
    return 0.15 + growth * k


def _write_data(folder, growth):
    """The HDF5 file of each step: a tanh drop c = (1 - tanh((d - r) / w)) / 2 of radius 0.15 + growth k."""
    x, y = np.meshgrid(np.linspace(0, 1, N + 1), np.linspace(0, 1, N + 1), indexing="xy")
    points = np.c_[x.ravel(), y.ravel()]
    at = lambda i, j: j * (N + 1) + i
    quads = np.array([[at(i, j), at(i + 1, j), at(i + 1, j + 1), at(i, j + 1)] for j in range(N) for i in range(N)])
    for k in range(STEPS):
        distance = np.linalg.norm(points - [0.3 + 0.06 * k, 0.5], axis=1)
        with h5py.File(os.path.join(folder, f"out_{k:04d}.h5"), "w") as handle:
            handle["geometry"] = points
            handle["topology"] = quads
            handle["c"] = 0.5 * (1 - np.tanh((distance - _radius(k, growth)) / WIDTH))
    return len(points), len(quads)


def _write_series(folder, growth, form):
    """One-step XDMF files (a Uniform grid with its Time, numbers in its own HDF5 file), in ``form``:
    'folder', 'listing' or 'collection' (an xi:include collection of them). Returns the path to measure."""
    os.makedirs(folder, exist_ok=True)
    n_points, n_cells = _write_data(folder, growth)
    for k in range(STEPS):
        h5 = f"out_{k:04d}.h5"
        text = (f'<?xml version="1.0"?>\n<Xdmf Version="3.0"><Domain><Grid Name="mesh" GridType="Uniform">'
                f'<Time Value="{0.1 * k!r}"/>'
                f'<Geometry GeometryType="XY"><DataItem Dimensions="{n_points} 2" NumberType="Float" Precision="8" '
                f'Format="HDF">{h5}:/geometry</DataItem></Geometry>'
                f'<Topology TopologyType="Quadrilateral" NumberOfElements="{n_cells}"><DataItem '
                f'Dimensions="{n_cells} 4" NumberType="Int" Precision="8" Format="HDF">{h5}:/topology</DataItem>'
                f'</Topology><Attribute Name="c" AttributeType="Scalar" Center="Node"><DataItem '
                f'Dimensions="{n_points}" NumberType="Float" Precision="8" Format="HDF">{h5}:/c</DataItem>'
                '</Attribute></Grid></Domain></Xdmf>\n')
        with open(os.path.join(folder, f"out_{k:04d}.xdmf"), "w") as handle:
            handle.write(text)
    if form == "listing":
        path = os.path.join(folder, "run.steps")
        with open(path, "w") as handle:
            handle.write("time,path\n" + "".join(f"{0.1 * k!r},out_{k:04d}.xdmf\n" for k in range(STEPS)))
        return path
    if form == "collection":
        path = os.path.join(folder, "run.xmf")
        includes = "".join(f'<xi:include href="out_{k:04d}.xdmf"/>' for k in range(STEPS))
        with open(path, "w") as handle:
            handle.write('<?xml version="1.0"?>\n<Xdmf Version="3.0" xmlns:xi="http://www.w3.org/2001/XInclude">'
                         f'<Domain><Grid Name="T" GridType="Collection" CollectionType="Temporal">{includes}'
                         '</Grid></Domain></Xdmf>\n')
        return path
    return folder


def _interrupted(path, out, monkeypatch, *, stop_at=3, **kwargs):
    """A run stopped (Ctrl-C) when it reaches step ``stop_at``: the steps before it are cached."""
    real = StepRunner.run

    def run(runner, index):
        if index == stop_at:
            raise KeyboardInterrupt
        return real(runner, index)

    monkeypatch.setattr(StepRunner, "run", run)
    with pytest.raises(KeyboardInterrupt):
        measure(path, "c", out=out, **kwargs)
    monkeypatch.setattr(StepRunner, "run", real)


def _texts(folder):
    return {name: open(os.path.join(folder, name)).read() for name in sorted(os.listdir(folder))
            if name.endswith((".xdmf", ".xmf", ".steps"))}


@pytest.mark.parametrize("form", ["folder", "listing", "collection"])
def test_a_resume_sees_rewritten_hdf5_data_behind_unchanged_xdmf_step_files(tmp_path, monkeypatch, form):
    # regression: the resume cache keyed a one-step XDMF file by its text alone, so a resume after the
    # solver rewrote the HDF5 data took the first run's steps and the table mixed two runs
    path = _write_series(str(tmp_path / "in"), 0.0, form)
    out, fresh = tmp_path / "out", tmp_path / "fresh"
    options = dict(analyses=("conservation",), contours=False)
    _interrupted(path, out, monkeypatch, **options)
    text = _texts(tmp_path / "in")
    _write_series(str(tmp_path / "in"), 0.01, form)  # the solver run again: same XDMF text, new HDF5 data
    assert _texts(tmp_path / "in") == text
    with pytest.raises(SeriesError, match="out_0000.xdmf, step 0: the step's file or a data file it names changed "
                                          "since the run that is being resumed read it") as refused:
        measure(path, "c", out=out, resume=True, **options)
    assert "--overwrite" in refused.value.fix
    again = measure(path, "c", out=out, overwrite=True, **options)
    reference = measure(path, "c", out=fresh, **options)
    pd.testing.assert_frame_equal(again.steps, reference.steps)
    # reference: the Sommerfeld expansion of the Fermi function 1 / (1 + exp(2 (r' - r) / w)), which the
    # tanh profile is, integrated over 2 pi r' dr': pi r^2 + pi^3 w^2 / 12, exact up to exp(-2 r / w)
    # (Ashcroft & Mermin, Solid State Physics, ch. 2; the equation number 2.70 from memory); tolerance:
    # the 0.1 % phase-volume drift the run flags ("Findings and their tolerances")
    radii = np.array([_radius(k, 0.01) for k in range(STEPS)])
    np.testing.assert_allclose(again.steps["phase_volume"], np.pi * radii ** 2 + np.pi ** 3 * WIDTH ** 2 / 12,
                               rtol=1e-3)
    # the manifest lists the HDF5 files that hold the numbers, each after the step file that names it
    inputs = [os.path.basename(f["path"]) for f in json.loads((out / "manifest.json").read_text())["inputs"]]
    steps = [name for k in range(STEPS) for name in (f"out_{k:04d}.xdmf", f"out_{k:04d}.h5")]
    assert inputs == {"folder": steps, "listing": ["run.steps"] + steps, "collection": ["run.xmf"] + steps}[form]


def test_a_resume_takes_the_finished_steps_when_only_later_data_was_rewritten(tmp_path, monkeypatch):
    """Steps the interrupted run had not reached are read as they are now: the resumed table equals
    a fresh run's (pandas), and the cached steps are reused."""
    path = _write_series(str(tmp_path / "in"), 0.0, "folder")
    out, fresh = tmp_path / "out", tmp_path / "fresh"
    options = dict(analyses=("conservation",), contours=False)
    _interrupted(path, out, monkeypatch, **options)
    cached = {k: os.path.join(path, f"out_{k:04d}.h5") for k in range(3)}
    kept = {k: open(f, "rb").read() for k, f in cached.items()}
    stamps = {k: os.stat(f).st_mtime_ns for k, f in cached.items()}
    _write_series(path, 0.01, "folder")  # steps 3 to 5 grow; 0 to 2 are put back as they were
    for k, f in cached.items():
        with open(f, "wb") as handle:
            handle.write(kept[k])
        os.utime(f, ns=(stamps[k], stamps[k]))
    resumed = measure(path, "c", out=out, resume=True, **options)
    assert [r.reused for r in resumed.results] == [True] * 3 + [False] * 3
    pd.testing.assert_frame_equal(resumed.steps, measure(path, "c", out=fresh, **options).steps)


@pytest.mark.parametrize("first, then", [(False, True), (True, False)])
def test_a_resume_that_would_change_whether_contours_are_written_is_refused(tmp_path, monkeypatch, first, then):
    # regression: --contours / --no-contours were outside the run key; a resume with the other setting left
    # contours/ without the finished steps (or with the files of a run that writes none)
    path = _write_series(str(tmp_path / "in"), 0.01, "folder")
    out = tmp_path / "out"
    _interrupted(path, out, monkeypatch, contours=first)
    said = "without contour files (--no-contours)" if then else "with contour files, so a resume without them"
    with pytest.raises(OutputError, match=rf"was measured {re.escape(said)}") as refused:
        measure(path, "c", out=out, resume=True, contours=then)
    assert refused.value.fix.startswith("resume with --no-contours" if then else "resume with --contours")
    assert "--overwrite" in refused.value.fix
    resumed = measure(path, "c", out=out, resume=True, contours=first)  # the same setting finishes it
    assert sum(r.reused for r in resumed.results) == 3
    written = sorted(os.listdir(out / "contours")) if (out / "contours").exists() else []
    # what an uninterrupted run writes: a file a step (times from the XDMF grids) and their listing
    assert written == (sorted([f"interface_{k:06d}.vtu" for k in range(STEPS)] + ["interface.steps"]) if first
                       else [])
    measure(path, "c", out=out, overwrite=True, contours=then)
    written = sorted(os.listdir(out / "contours")) if (out / "contours").exists() else []
    assert len(written) == (STEPS + 1 if then else 0)


def test_a_campaign_resumed_with_other_contours_is_refused(tmp_path, monkeypatch):
    """A campaign whose first run finished without contour files, resumed with them: the finished run's
    folder would keep none while the others get theirs."""
    from phasegauge.run.campaign import run_campaign
    from phasegauge.run.options import MeasureOptions

    runs = [{"path": _write_series(str(tmp_path / f"in_{k}"), 0.01 * k, "folder"), "parameter": float(k),
             "label": f"q{k}"} for k in (1, 2)]
    options = MeasureOptions(field="c", analyses=("conservation", "interface"))
    real = StepRunner.run

    def run(runner, index):
        if runner.path == runs[1]["path"]:
            raise KeyboardInterrupt
        return real(runner, index)

    monkeypatch.setattr(StepRunner, "run", run)
    with pytest.raises(KeyboardInterrupt):
        run_campaign(runs, options, out=tmp_path / "camp", contours=False)
    monkeypatch.setattr(StepRunner, "run", real)
    assert (tmp_path / "camp" / "run_q1" / "steps.csv").exists()  # the first run finished
    with pytest.raises(OutputError, match="was measured without contour files"):
        run_campaign(runs, options, out=tmp_path / "camp", contours=True, resume=True)
    resumed = run_campaign(runs, options, out=tmp_path / "camp", contours=False, resume=True)
    assert resumed.runs[0] is None and not (tmp_path / "camp" / "run_q2" / "contours").exists()
