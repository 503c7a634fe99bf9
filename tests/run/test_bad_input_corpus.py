"""Reliability, second round (issue 21): a corpus of bad inputs, each refused in one clean line or
skipped with one warning, exit status exact, outputs consistent.

Families: a bad step in a series; times that are not numbers; files the user cannot read;
headers that claim huge sizes; meshes that are wrong but read; messages that misled. The corpus is
built here in ``tmp_path`` from the small good case of ``test_reliability.py``.
"""

import json
import os

import meshio
import numpy as np
import pytest

from test_reliability import DISC, FAST, MESH, _assert_one_error_line, _cli, _good, _warning_lines
from phasegauge.meshgen import to_meshio

CASES = []  # the names of the corpus cases, counted by test_the_corpus_size


def case(name):
    CASES.append(name)
    return name


def _xdmf(folder, fields, times=None, name="ts.xdmf"):
    """A meshio XDMF time series in ``folder``; ``fields[k]`` is step k's cell field."""
    old = os.getcwd()
    os.chdir(folder)
    try:
        m = to_meshio(MESH)
        with meshio.xdmf.TimeSeriesWriter(name) as w:
            w.write_points_cells(m.points, m.cells)
            for k, values in enumerate(fields):
                w.write_data(0.1 * k if times is None else times[k], cell_data={"alpha": [values]})
    finally:
        os.chdir(old)
    return str(folder / name)


def _measure_ok(path, out, *extra):
    code, err, _ = _cli(["measure", path, "--field", "alpha", "-o", out, *FAST, *extra])
    assert code == 0, err
    return _warning_lines(err)


def _recorded(out):
    """The skipped steps as manifest.json records them, and report.html's text."""
    manifest = json.load(open(os.path.join(out, "manifest.json")))
    html = open(os.path.join(out, "report.html")).read()
    return manifest, html


# ------------------------------------------------------------------ 1. a bad step stops or corrupts the run
@pytest.mark.parametrize("short", [case("xdmf field 10 values short"), case("xdmf field 10 values long")])
def test_an_xdmf_step_with_a_field_of_the_wrong_length_is_skipped(tmp_path, short):
    wrong = DISC[:-10] if "short" in short else np.concatenate([DISC, DISC[:10]])
    path = _xdmf(tmp_path, [DISC, wrong, DISC])
    out = str(tmp_path / "out")
    err = _measure_ok(path, out)
    assert len(err) == 1 and "ts.xdmf, step 1" in err[0] and "step skipped" in err[0], err
    assert f"{len(wrong)} values for {len(DISC)} cells" in err[0]
    steps = open(os.path.join(out, "steps.csv")).read().splitlines()
    assert [ln.split(",")[0] for ln in steps[1:]] == ["0", "2"]
    manifest, html = _recorded(out)
    assert "step 1" in json.dumps(manifest) and "step 1" in html


def test_a_step_path_that_is_a_folder_is_skipped_and_the_inputs_are_still_hashed(tmp_path):
    case("listing step that is a folder")
    for k in (0, 2):
        _good(tmp_path / f"s_{k}.vtu")
    (tmp_path / "s_1.vtu").mkdir()
    listing = tmp_path / "run.steps"
    listing.write_text("0,s_0.vtu\n0.1,s_1.vtu\n0.2,s_2.vtu\n")
    out = str(tmp_path / "out")
    err = _measure_ok(str(listing), out)
    assert len(err) == 1 and "is a folder" in err[0] and "s_1.vtu, step 1" in err[0], err
    manifest, html = _recorded(out)
    hashed = [f for f in manifest["inputs"]] if "inputs" in manifest else json.dumps(manifest)
    assert "s_0.vtu" in json.dumps(hashed) and "s_1.vtu" in html


# ------------------------------------------------------------------ 3. files the user cannot read
def _loop(folder, name):
    os.symlink(name + ".other", folder / name)
    os.symlink(name, folder / (name + ".other"))


def test_a_symbolic_link_loop_is_named_as_one(tmp_path):
    case("symlink loop given as the path")
    _loop(tmp_path, "s_1.vtu")
    _assert_one_error_line(["inspect", tmp_path / "s_1.vtu"], "s_1.vtu", "symbolic link that loops")


def test_a_symbolic_link_loop_in_a_folder_is_skipped(tmp_path):
    case("symlink loop as a step of a folder")
    folder = tmp_path / "in"
    folder.mkdir()
    for k in (0, 2, 3):
        _good(folder / f"s_{k}.vtu")
    _loop(folder, "s_1.vtu")
    err = _measure_ok(str(folder), str(tmp_path / "out"))
    assert any("s_1.vtu, step 1" in ln and "loops" in ln and "step skipped" in ln for ln in err), err


def test_a_dangling_link_says_where_it_points(tmp_path):
    case("dangling symlink")
    os.symlink("gone.vtu", tmp_path / "s.vtu")
    _assert_one_error_line(["inspect", tmp_path / "s.vtu"], "s.vtu", "gone.vtu", "does not exist")


def _unreadable_series(tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    for k in (0, 1, 2):
        _good(folder / f"s_{k}.vtu")
    return folder / "s_1.vtu"


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0,
                    reason="running as root: permission bits do not stop root from reading "
                           "(test_no_read_permission_as_the_check_sees_it covers the message)")
def test_a_step_without_read_permission_is_skipped(tmp_path):
    case("step without read permission")
    bad = _unreadable_series(tmp_path)
    bad.chmod(0)
    try:
        out = str(tmp_path / "out")
        err = _measure_ok(str(bad.parent), out)
        assert len(err) == 1 and "no read permission" in err[0] and "step skipped" in err[0], err
        assert os.path.exists(os.path.join(out, "manifest.json"))
        _assert_one_error_line(["inspect", bad], "s_1.vtu", "no read permission")
    finally:
        bad.chmod(0o644)


def test_no_read_permission_as_the_check_sees_it(tmp_path, monkeypatch):
    case("no read permission (the check's own view, also as root)")
    bad = _unreadable_series(tmp_path)
    real = os.access
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if os.fspath(p) == str(bad) else real(p, mode, **kw))
    _assert_one_error_line(["inspect", bad], "s_1.vtu", "no read permission", "chmod u+r")
    out = str(tmp_path / "out")
    err = _measure_ok(str(bad.parent), out)
    assert len(err) == 1 and "s_1.vtu, step 1" in err[0] and "no read permission" in err[0], err
    manifest, html = _recorded(out)
    assert "s_1.vtu" in html


# ------------------------------------------------------------------ 2. times that are not numbers
BAD_TIMES = {"text": ("abc", "'abc', not a finite number"), "empty": ("", "is empty"),
             "nan": ("nan", "'nan', not a finite number"), "inf": ("inf", "'inf', not a finite number")}


@pytest.mark.parametrize("kind", sorted(BAD_TIMES))
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_an_xdmf_time_that_is_not_a_number(tmp_path, kind, command):
    case(f"xdmf Time {kind} ({command})")
    value, words = BAD_TIMES[kind]
    path = _xdmf(tmp_path, [DISC, DISC, DISC])
    text = open(path).read().replace('<Time Value="0.1"', f'<Time Value="{value}"')
    open(path, "w").write(text)
    extra = ["--field", "alpha", "-o", tmp_path / "out", *FAST] if command == "measure" else []
    _assert_one_error_line([command, path, *extra], "ts.xdmf, step 1", "XDMF <Time", words)
    assert not os.path.exists(tmp_path / "out")


@pytest.mark.parametrize("kind", ["text", "nan", "inf", "empty"])
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_a_listing_time_that_is_not_a_number(tmp_path, kind, command):
    case(f"listing time {kind} ({command})")
    value, words = BAD_TIMES[kind]
    for k in (0, 1):
        _good(tmp_path / f"s_{k}.vtu")
    listing = tmp_path / "run.steps"
    listing.write_text(f"0,s_0.vtu\n{value},s_1.vtu\n")
    extra = ["--field", "alpha", "-o", tmp_path / "out", *FAST] if command == "measure" else []
    needles = ["run.steps, line 2", words] if kind in ("nan", "inf") else ["run.steps", "line 2 is not 'time,path'"]
    _assert_one_error_line([command, listing, *extra], *needles)


def _with_time(path, value, *, binary, dtype=np.float64):
    """A step written by VTK's own writer (pyvista) with ``TimeValue`` in its field data."""
    import pyvista

    grid = pyvista.from_meshio(to_meshio(MESH, cell_data={"alpha": DISC}))
    grid.field_data["TimeValue"] = np.array([value], dtype=dtype)
    grid.save(str(path), binary=binary)
    return str(path)


@pytest.mark.parametrize("name", [case("TimeValue nan in a legacy ASCII file"),
                                  case("TimeValue inf in a binary VTU file"),
                                  case("TimeValue as text in a legacy ASCII file")])
@pytest.mark.parametrize("command", ["inspect", "measure"])
def test_a_time_in_the_field_data_that_is_not_a_number(tmp_path, name, command):
    folder = tmp_path / "in"
    folder.mkdir()
    _with_time(folder / "s_0.vtu", 0.0, binary=True)
    suffix = ".vtu" if "VTU" in name else ".vtk"
    bad = _with_time(folder / f"s_1{suffix}", np.inf if "inf" in name else np.nan, binary="binary" in name)
    if "text" in name:
        text = open(bad).read()
        assert "double\nnan" in text
        open(bad, "w").write(text.replace("double\nnan", "double\nsoon"))
    extra = ["--field", "alpha", "-o", tmp_path / "out", *FAST] if command == "measure" else []
    shown = "'soon'" if "text" in name else ("inf" if "inf" in name else "'nan'")
    _assert_one_error_line([command, folder, *extra], f"s_1{suffix}, step 1", "TimeValue", shown,
                           "not a finite number")


@pytest.mark.parametrize("suffix", [".vtu", ".vtk"])
@pytest.mark.parametrize("binary", [True, False])
def test_a_time_stored_in_single_precision_keeps_its_own_digits(tmp_path, suffix, binary):
    case(f"single-precision TimeValue ({suffix}, {'binary' if binary else 'ascii'})")
    path = _with_time(tmp_path / f"s{suffix}", 0.15, binary=binary, dtype=np.float32)
    code, err, out = _cli(["inspect", "--json", path])
    assert code == 0, err
    assert json.loads(out)["times"] == [0.15]  # not 0.150000006


def test_a_listing_with_a_byte_order_mark_is_read(tmp_path):
    case("listing with a UTF-8 byte-order mark")
    for k in (0, 1):
        _good(tmp_path / f"s_{k}.vtu")
    listing = tmp_path / "run.steps"
    listing.write_bytes(b"\xef\xbb\xbftime,path\n0,s_0.vtu\n0.5,s_1.vtu\n")
    code, err, out = _cli(["inspect", "--json", listing])
    assert code == 0, err
    assert json.loads(out)["times"] == [0.0, 0.5]


# ------------------------------------------------------------------ 4. headers that claim huge sizes
def _legacy_claim(path, *, binary, old, new):
    _good(path, binary=binary)
    data = open(path, "rb").read()
    assert old in data
    open(path, "wb").write(data.replace(old, new))
    return str(path)


def _hdf5_claim(path, *, compressed):
    """An XDMF file whose points dataset (in its HDF5 file) claims three billion points."""
    import h5py

    old = os.getcwd()
    os.chdir(path.parent)
    try:
        to_meshio(MESH, cell_data={"alpha": DISC}).write(path.name)
    finally:
        os.chdir(old)
    with h5py.File(path.with_suffix(".h5"), "a") as f:
        name = next(k for k in f if f[k].shape == (MESH.n_points, 3))
        del f[name]
        f.create_dataset(name, shape=(3_000_000_000, 3), dtype="f8", chunks=(1 << 16, 3),
                         compression="gzip" if compressed else None)
    return str(path)


HUGE_CLAIMS = {
    # name: (builder, words the one line must hold)
    "legacy binary POINTS": (lambda p: _legacy_claim(p, binary=True, old=b"POINTS 81 ", new=b"POINTS 3000000000 "),
                             ["3,000,000,000 points", "72,000,000,000 bytes", "but the file has only"]),
    "legacy ASCII POINTS": (lambda p: _legacy_claim(p, binary=False, old=b"POINTS 81 ", new=b"POINTS 3000000000 "),
                            ["3,000,000,000 points", "but the file has only"]),
    "legacy CELL_TYPES": (lambda p: _legacy_claim(p, binary=True, old=b"CELL_TYPES 128",
                                                  new=b"CELL_TYPES 2000000000"),
                          ["2,000,000,000 cell types", "but the file has only"]),
    "legacy CELLS": (lambda p: _legacy_claim(p, binary=True, old=b"CELLS 129", new=b"CELLS 2000000000"),
                     ["2,000,000,000 cells", "but the file has only"]),
    "HDF5 dataset stored short": (lambda p: _hdf5_claim(p, compressed=False),
                                  ["HDF5 dataset", "9,000,000,000 values", "but stores only"]),
    "HDF5 dataset compressed, beyond memory": (lambda p: _hdf5_claim(p, compressed=True),
                                               ["HDF5 dataset", "9,000,000,000 values", "of memory",
                                                "this machine has"]),
}


@pytest.mark.parametrize("name", sorted(HUGE_CLAIMS))
def test_a_header_that_claims_a_huge_size_is_refused_with_the_numbers(tmp_path, name):
    case(f"huge claim: {name}")
    build, words = HUGE_CLAIMS[name]
    path = build(tmp_path / ("s.xdmf" if "HDF5" in name else "s.vtk"))
    _assert_one_error_line(["inspect", path], "s.", *words)


def test_a_huge_claim_is_refused_without_allocating(tmp_path):
    """The refusal reads headers only: the process's peak memory stays under 200 MB.

    Measured in a subprocess with ``resource.getrusage``, or on Linux its ``VmHWM`` (which, unlike
    ``ru_maxrss``, does not carry the pytest process's own peak across ``exec``).
    """
    case("huge claims refused within 200 MB (subprocess peak memory)")
    paths = [HUGE_CLAIMS[n][0](tmp_path / f"c{k}{'.xdmf' if 'HDF5' in n else '.vtk'}")
             for k, n in enumerate(sorted(HUGE_CLAIMS))]
    code = ("import resource, sys\n"
            "from click.testing import CliRunner\n"
            "from phasegauge.cli import main\n"
            "codes = [CliRunner().invoke(main, ['inspect', p]).exit_code for p in sys.argv[1:]]\n"
            "peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss\n"  # KiB on Linux
            "try:\n"  # Linux keeps ru_maxrss across exec (the test process's own peak): VmHWM starts afresh
            "    status = open('/proc/self/status').read().split('VmHWM:')[1]\n"
            "    peak = int(status.split()[0])\n"
            "except (OSError, IndexError):\n"
            "    pass\n"
            "print(codes, peak)\n")
    import subprocess
    import sys

    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path))
    done = subprocess.run([sys.executable, "-c", code, *paths], capture_output=True, text=True, env=env,
                          check=True)
    codes, peak = done.stdout.rsplit("]", 1)
    assert codes.strip("[ ").split(", ") == ["2"] * len(paths), done.stdout
    assert int(peak) < 200 * 1024, f"peak memory {int(peak) / 1024:.0f} MB"


def test_the_corpus_size():
    """The corpus counts its cases (issue 21's closing note gives the number)."""
    assert len(set(CASES)) == len(CASES) >= 7
