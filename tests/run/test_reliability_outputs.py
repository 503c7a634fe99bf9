"""Nothing lost: atomic writes, no overwrite without --overwrite, earlier outputs kept when a run
fails, killed runs resumed to identical tables, inputs byte-identical after every command (issue 10)."""

import hashlib
import json
import os
import signal
import subprocess
import sys
import time

import pandas as pd
import pytest
from click.testing import CliRunner

from phasegauge.cli import main
from phasegauge.errors import OutputError
from phasegauge.meshgen import grid_mesh
from phasegauge.report import _files

FAST = ["--analyses", "conservation,droplets", "--no-contours", "-q"]

COMPARE_WORKS = True


def _series(folder, steps=4, n=16):
    """Two discs drifting together on a fixed mesh (cell data), times in a listing."""
    from test_measure_run import _moving_disc_series

    os.makedirs(folder, exist_ok=True)
    return _moving_disc_series(folder, steps=steps, n=n)


def _cli(args):
    res = CliRunner().invoke(main, [str(a) for a in args])
    if res.exception is not None and not isinstance(res.exception, SystemExit):
        raise AssertionError(f"exception escaped the command line: {res.exception!r}")
    return res.exit_code, [ln for ln in res.stderr.splitlines() if ln.strip()]


def _tree(folder):
    """{relative path: sha256} of every file under ``folder``."""
    out = {}
    for base, _, files in os.walk(folder):
        for name in files:
            path = os.path.join(base, name)
            with open(path, "rb") as f:
                out[os.path.relpath(path, folder)] = hashlib.sha256(f.read()).hexdigest()
    return out


def _temporaries(folder):
    return [os.path.join(b, n) for b, _, files in os.walk(folder) for n in files if n.startswith(_files.TEMP_PREFIX)]


def _tables(out):
    return {name: pd.read_csv(os.path.join(out, name)) for name in ("steps.csv", "droplets.csv", "events.csv")}


# ------------------------------------------------------------------ atomic writes
def test_failed_write_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "steps.csv"
    target.write_text("old")

    class Unwritable:
        pass

    with pytest.raises(TypeError):
        _files.atomic_write_bytes(target, Unwritable())
    assert target.read_text() == "old" and _temporaries(tmp_path) == []


def test_write_error_mid_run_is_one_line_and_leaves_no_temporary(tmp_path, monkeypatch):
    listing = _series(str(tmp_path / "in"), n=10)
    out = tmp_path / "o"
    real_replace = os.replace

    def full_disk(src, dst):
        if str(dst).endswith("report.html"):
            raise OSError(28, "No space left on device")
        return real_replace(src, dst)

    monkeypatch.setattr(_files.os, "replace", full_disk)
    code, err = _cli(["measure", listing, "-f", "alpha", "-o", out] + FAST)
    assert code == 2 and len(err) == 1
    assert "cannot write report.html (No space left on device)" in err[0]
    # the finished steps stay for --resume, and the error says so
    assert "the finished steps are kept in" in err[0] and "for --resume" in err[0]
    assert _temporaries(out) == []
    monkeypatch.setattr(_files.os, "replace", real_replace)
    code, err = _cli(["measure", listing, "-f", "alpha", "-o", out, "--resume"] + FAST)
    assert code == 0, err
    code, err = _cli(["measure", listing, "-f", "alpha", "-o", tmp_path / "clean"] + FAST)
    ref, got = _tables(tmp_path / "clean"), _tables(out)
    for name in ref:
        pd.testing.assert_frame_equal(ref[name], got[name], check_exact=True)


# ------------------------------------------------------------------ output folders
def test_failed_new_run_leaves_no_folder(tmp_path):
    listing = _series(str(tmp_path / "in"), steps=2)
    out = tmp_path / "o"
    code, err = _cli(["measure", listing, "-f", "phi", "-o", out])
    assert code == 2 and not out.exists()
    # so the corrected command needs no --overwrite
    assert _cli(["measure", listing, "-f", "alpha", "-o", out] + FAST)[0] == 0
    empty = tmp_path / "empty"
    empty.mkdir()
    assert _cli(["measure", listing, "-f", "phi", "-o", empty])[0] == 2
    assert empty.is_dir() and os.listdir(empty) == []


def test_failed_overwrite_keeps_the_earlier_outputs(tmp_path):
    listing = _series(str(tmp_path / "in"), steps=3, n=10)
    out = tmp_path / "o"
    assert _cli(["measure", listing, "-f", "alpha", "-o", out] + FAST)[0] == 0
    before = _tree(out)
    code, err = _cli(["measure", listing, "-f", "phi", "-o", out, "--overwrite"] + FAST)
    assert code == 2 and len(err) == 1 and "the earlier outputs in" in err[0] and "are kept" in err[0]
    assert _tree(out) == before
    code, err = _cli(["measure", listing, "-f", "alpha", "-o", out, "--overwrite", "--level", "0.4"] + FAST)
    assert code == 0 and not (out / _files.PREVIOUS_RUN).exists()
    assert json.loads((out / "manifest.json").read_text())["options"]["level"] == 0.4


def test_interrupted_overwrite_is_finished_by_resume(tmp_path, monkeypatch):
    from phasegauge import measure
    from phasegauge.run.step import StepRunner

    listing = _series(str(tmp_path / "in"), steps=4)
    out = tmp_path / "o"
    measure(listing, "alpha", out=out, analyses=("conservation",), contours=False)
    real = StepRunner.run

    def interrupted(runner, index):
        if index == 2:
            raise KeyboardInterrupt
        return real(runner, index)

    monkeypatch.setattr(StepRunner, "run", interrupted)
    with pytest.raises(KeyboardInterrupt):
        measure(listing, "alpha", out=out, overwrite=True, analyses=("conservation",), contours=False)
    # an interrupt keeps everything for --resume; the earlier run waits aside until this one finishes
    assert (out / _files.PREVIOUS_RUN / "steps.csv").exists()
    monkeypatch.setattr(StepRunner, "run", real)
    result = measure(listing, "alpha", out=out, resume=True, analyses=("conservation",), contours=False)
    assert sum(r.reused for r in result.results) == 2
    assert not (out / _files.PREVIOUS_RUN).exists() and (out / "steps.csv").exists()


def test_resume_removes_temporaries_of_a_killed_run(tmp_path):
    listing = _series(str(tmp_path / "in"), steps=2, n=6)
    out = tmp_path / "o"
    assert _cli(["measure", listing, "-f", "alpha", "-o", out, "--keep-cache"] + FAST)[0] == 0
    (out / ".cache" / ".tmp-abcdstep_000001.pkl.part").write_bytes(b"half")
    (out / ".tmp-xyzsteps.csv.part").write_text("half")
    assert _cli(["measure", listing, "-f", "alpha", "-o", out, "--resume"] + FAST)[0] == 0
    assert _temporaries(out) == []


def test_prepare_output_folder_rules(tmp_path):
    (tmp_path / "file").write_text("x")
    with pytest.raises(OutputError, match="exists and is not a folder"):
        _files.prepare_output_folder(tmp_path / "file")
    with pytest.raises(OutputError, match="cannot be written"):
        _files.prepare_output_folder(tmp_path / "file" / "sub")
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep")
    with pytest.raises(OutputError, match="holds no phasegauge run to resume"):
        _files.prepare_output_folder(mine, resume=True)
    with pytest.raises(OutputError, match="did not write"):
        _files.prepare_output_folder(mine, overwrite=True)
    assert (mine / "notes.txt").read_text() == "keep"


def test_overwrite_keeps_the_users_own_files_in_a_run_folder(tmp_path):
    # audit 11: a note and a folder of one's own kept in a phasegauge output folder were deleted by --overwrite
    src, out = _series(tmp_path / "run"), tmp_path / "out"
    assert CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), *FAST]).exit_code == 0
    assert "written" in json.loads((out / _files.RUN_MARKER).read_text())  # what the run wrote
    (out / "notes.txt").write_text("keep")
    (out / "postpro").mkdir()
    (out / "postpro" / "fig.py").write_text("keep")
    run = CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), "--overwrite", *FAST])
    assert run.exit_code != 0 and "did not write (notes.txt, postpro/fig.py)" in run.output
    assert (out / "notes.txt").read_text() == "keep" and (out / "postpro" / "fig.py").read_text() == "keep"
    (out / "notes.txt").unlink()
    (out / "postpro" / "fig.py").unlink()
    (out / "postpro").rmdir()
    assert CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), "--overwrite",
                                     *FAST]).exit_code == 0


def test_overwrite_keeps_the_users_files_in_the_runs_subfolders_and_after_a_resume(tmp_path):
    # review 47: a file of one's own in contours/ was deleted by --overwrite (only top-level names were
    # recorded), and one added before --resume was counted as the run's, then deleted by --overwrite
    src, out = _series(tmp_path / "run"), tmp_path / "out"
    base = ["measure", src, "--field", "alpha", "-o", str(out), "--analyses", "interface,droplets", "-q"]
    assert CliRunner().invoke(main, base).exit_code == 0
    (out / "contours" / "my_view.txt").write_text("keep")
    run = CliRunner().invoke(main, base + ["--overwrite"])
    assert run.exit_code != 0 and "contours/my_view.txt" in run.output
    assert (out / "contours" / "my_view.txt").read_text() == "keep"
    (out / "contours" / "my_view.txt").unlink()
    marker = json.loads((out / _files.RUN_MARKER).read_text())
    marker.pop("written")  # as a killed run leaves it
    marker["state"] = "running"
    (out / _files.RUN_MARKER).write_text(json.dumps(marker))
    (out / "notes.txt").write_text("keep")
    (out / "contours" / "my_view.txt").write_text("keep")  # review 48: in a folder of the run's own name
    assert CliRunner().invoke(main, base + ["--resume"]).exit_code == 0
    written = json.loads((out / _files.RUN_MARKER).read_text())["written"]
    assert "notes.txt" not in written and "contours/my_view.txt" not in written
    run = CliRunner().invoke(main, base + ["--overwrite"])
    assert run.exit_code != 0 and "contours/my_view.txt, notes.txt" in run.output
    assert (out / "notes.txt").read_text() == "keep" and (out / "contours" / "my_view.txt").read_text() == "keep"


def test_a_lock_of_this_very_process_is_stale(tmp_path):
    # review 47: in a container a killed run and its resume are both process 1 of the same host, and the
    # resume was refused as "another run"
    import socket

    src, out = _series(tmp_path / "run"), tmp_path / "out"
    out.mkdir()
    (out / _files.RUN_LOCK).write_text(json.dumps({"host": socket.gethostname(), "pid": os.getpid()}))
    run = CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), "--overwrite", *FAST])
    assert run.exit_code == 0, run.output
    # review 48: one held by this very process (another thread's run, its token) is live
    (out / _files.RUN_LOCK).write_text(json.dumps({"host": socket.gethostname(), "pid": os.getpid(),
                                                   "process": _files._PROCESS_TOKEN}))
    run = CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), "--overwrite", *FAST])
    assert run.exit_code != 0 and "is writing this folder" in run.output
    (out / _files.RUN_LOCK).unlink()
    # a link to a folder kept in the run's folder is the user's: refused, named, kept
    (tmp_path / "elsewhere").mkdir()
    os.symlink(tmp_path / "elsewhere", out / "linked")
    run = CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), "--overwrite", *FAST])
    assert run.exit_code != 0 and "(linked)" in run.output and (out / "linked").is_symlink()


def test_a_folder_another_run_is_writing_is_refused(tmp_path):
    # audit 11: two runs writing one folder at once mixed their outputs and left the folder mislabelled.
    # A run holds a lock while it writes; one left by a process that has ended is taken over
    import socket

    src, out = _series(tmp_path / "run"), tmp_path / "out"
    out.mkdir()
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        (out / _files.RUN_LOCK).write_text(json.dumps({"host": socket.gethostname(), "pid": sleeper.pid}))
        run = CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), "--overwrite", *FAST])
        assert run.exit_code != 0 and f"another phasegauge run (process {sleeper.pid}" in run.output
        assert (out / _files.RUN_LOCK).exists() and not (out / "steps.csv").exists()
    finally:
        sleeper.kill()
        sleeper.wait()
    # the process has ended: its lock is stale, and the run takes the folder; no lock is left after it
    run = CliRunner().invoke(main, ["measure", src, "--field", "alpha", "-o", str(out), "--overwrite", *FAST])
    assert run.exit_code == 0, run.output
    assert (out / "steps.csv").exists() and not (out / _files.RUN_LOCK).exists()


# ------------------------------------------------------------------ killed and resumed
def test_kill_with_two_workers_and_resume_gives_identical_tables(tmp_path):
    from conftest import subprocess_env

    listing = _series(str(tmp_path / "in"), steps=10, n=40)
    assert _cli(["measure", listing, "-f", "alpha", "-o", tmp_path / "whole"] + FAST)[0] == 0
    out = tmp_path / "killed"
    cmd = [sys.executable, "-m", "phasegauge", "measure", listing, "-f", "alpha", "-o", str(out), "-j", "2"] + FAST
    # a session of its own, so the kill takes the workers this test started with their parent
    proc = subprocess.Popen(cmd, env=subprocess_env(), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    cache = out / ".cache"
    deadline = time.time() + 120
    while time.time() < deadline and proc.poll() is None:
        if cache.is_dir() and len([f for f in os.listdir(cache) if f.startswith("step_")]) >= 3:
            break
        time.sleep(0.02)
    if proc.poll() is None:
        os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    cached = len([f for f in os.listdir(cache) if f.startswith("step_") and f.endswith(".pkl")])
    assert cached >= 1
    code, err = _cli(["measure", listing, "-f", "alpha", "-o", out, "--resume", "-j", "2"] + FAST)
    assert code == 0, err
    ref, got = _tables(tmp_path / "whole"), _tables(out)
    for name in ref:
        pd.testing.assert_frame_equal(ref[name], got[name], check_exact=True)
    assert _temporaries(out) == []
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["timings"]["steps_reused"] >= min(cached, 10)


# ------------------------------------------------------------------ inputs untouched
def test_inputs_byte_identical_after_every_command(tmp_path):
    inputs = tmp_path / "in"
    listing = _series(str(inputs), steps=3)
    xdmf_dir = tmp_path / "xin"
    xdmf_dir.mkdir()
    import meshio

    m = grid_mesh((6, 6), kind="quad")
    old = os.getcwd()
    os.chdir(xdmf_dir)
    try:
        with meshio.xdmf.TimeSeriesWriter("ts.xdmf") as w:
            w.write_points_cells(m.points, [(b.cell_type, b.connectivity) for b in m.blocks])
            for k in range(2):
                w.write_data(0.5 * k, point_data={"phi": m.points[:, 0] * 2 - 1})
    finally:
        os.chdir(old)
    recipe = inputs / "r.toml"
    recipe.write_text(f'[input]\npath = "run.steps"\nfield = "alpha"\n[run]\nanalyses = ["conservation"]\n'
                      f'[output]\nfolder = "{tmp_path / "recipe_out"}"\n')
    before = {**_tree(inputs), **{f"x/{k}": v for k, v in _tree(xdmf_dir).items()}}

    def unchanged():
        return {**_tree(inputs), **{f"x/{k}": v for k, v in _tree(xdmf_dir).items()}} == before

    commands = [
        ["inspect", listing], ["inspect", listing, "--json"], ["inspect", xdmf_dir / "ts.xdmf"],
        ["measure", listing, "-f", "alpha", "-o", tmp_path / "m1"] + FAST,
        ["measure", listing, "-f", "alpha", "-o", tmp_path / "m1", "--resume"] + FAST,
        ["measure", listing, "-f", "alpha", "-o", tmp_path / "m1", "--overwrite"] + FAST,
        ["measure", xdmf_dir / "ts.xdmf", "-f", "phi", "--range", "-1,1", "-o", tmp_path / "m2"] + FAST,
        ["measure", listing, "-f", "nope", "-o", tmp_path / "m3"],
        ["run", recipe, "-q"],
    ]
    if COMPARE_WORKS:
        commands.append(["compare", listing, listing, "--field-a", "alpha", "--field-b", "alpha",
                         "-o", tmp_path / "c", "-q"])
    for args in commands:
        code, err = _cli(args)
        assert code in (0, 2), (args, err)
        assert unchanged(), args
    # an output folder inside the input folder is refused when it would hold the inputs
    assert _cli(["measure", listing, "-f", "alpha", "-o", inputs, "--overwrite"] + FAST)[0] == 2
    assert unchanged()


def test_samples_never_overwrite_without_the_flag(tmp_path):
    code, err = _cli(["samples", tmp_path, "--only", "vortex_upwind"])
    assert code == 0, err
    before = _tree(tmp_path)
    code, err = _cli(["samples", tmp_path, "--only", "vortex_upwind"])
    assert code == 2 and len(err) == 1 and "series already there: vortex_upwind" in err[0]
    assert _tree(tmp_path) == before
    # a series written as one XDMF + HDF5 pair is protected as well
    (tmp_path / "channel_mixing.xdmf").write_text("mine")
    code, err = _cli(["samples", tmp_path, "--only", "channel_mixing"])
    assert code == 2 and "channel_mixing" in err[0]
    assert (tmp_path / "channel_mixing.xdmf").read_text() == "mine"


def test_outputs_follow_the_umask_and_json_is_strict(tmp_path):
    """Every output file gets mode 0666 less the umask like any new file (POSIX open(2)), and every
    JSON file parses under RFC 8259, which has no NaN or Infinity (a strict parser refuses them)."""
    series = _series(tmp_path / "in", steps=3)
    old = os.umask(0o022)
    try:
        code, err = _cli(["measure", series, "-f", "alpha", "-o", tmp_path / "o", "--quiet",
                          "--diffusivity", "0"])
    finally:
        os.umask(old)
    assert code == 0, err

    def refuse(token):
        raise ValueError(f"not strict JSON: {token}")

    checked = 0
    for base, _, files in os.walk(tmp_path / "o"):
        for name in files:
            path = os.path.join(base, name)
            if ".cache" in path:
                continue
            assert os.stat(path).st_mode & 0o777 == 0o644, path
            if name.endswith(".json"):
                json.loads(open(path).read(), parse_constant=refuse)
                checked += 1
    assert checked >= 2


def test_a_killed_runs_folder_tells_the_users_files_by_names_and_the_runs_own_records(tmp_path):
    # review 49: a killed run recorded nothing, so on --resume a campaign run folder's notes, a json of one's
    # own and a contour write a kill cut short were judged by broad patterns (the first two taken as the
    # run's, the last as the user's); a campaign's run folders keep their own records
    out = tmp_path / "out"
    (out / "run_a").mkdir(parents=True)
    (out / "contours").mkdir()
    (out / _files.RUN_MARKER).write_text(json.dumps({"run_key": "k", "state": "running"}))
    (out / "run_a" / _files.RUN_MARKER).write_text(json.dumps({"state": "complete", "written": ["steps.csv"]}))
    for name in ("steps.csv", "my_settings.json", "run_a/steps.csv", "run_a/notes.txt",
                 "contours/interface_000001.vtu", "contours/.interface_000002.a1b2c3d4e5f6.vtu"):
        (out / name).write_text("x")
    assert _files._foreign_files(str(out), str(out / _files.RUN_MARKER)) == ["my_settings.json", "run_a/notes.txt"]
