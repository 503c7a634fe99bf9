"""Command-line messages: -q hides only the progress, --debug after the subcommand, samples --list,
run --strict."""

import os

import pytest
from click.testing import CliRunner

from phasegauge.cli import main
from phasegauge.meshgen import grid_mesh, to_meshio
from phasegauge.samples import SAMPLE_NAMES


def _series(folder, steps=2):
    mesh = grid_mesh((8, 8), kind="quad")
    x = mesh.cell_centroids[:, 0]
    lines = []
    for k in range(steps):
        to_meshio(mesh, cell_data={"alpha": (x < 0.5).astype(float)}).write(folder / f"s_{k}.vtu")
        lines.append(f"{k},s_{k}.vtu")
    (folder / "run.steps").write_text("\n".join(lines) + "\n")
    return str(folder / "run.steps")


def test_samples_list_names_the_series():
    result = CliRunner().invoke(main, ["samples", "--list"])
    assert result.exit_code == 0 and result.output.split() == list(SAMPLE_NAMES)


def test_quiet_keeps_the_summary(tmp_path):
    listing = _series(tmp_path)
    result = CliRunner().invoke(main, ["measure", listing, "-f", "alpha", "-o", str(tmp_path / "o"), "-q",
                                       "--analyses", "conservation", "--no-contours"])
    assert result.exit_code == 0 and "measured 2 steps" in result.output


def test_debug_after_the_subcommand_shows_the_traceback(tmp_path):
    runner = CliRunner()
    plain = runner.invoke(main, ["inspect", str(tmp_path / "missing.vtu")])
    assert plain.exit_code == 2 and "error:" in plain.output
    debug = runner.invoke(main, ["inspect", str(tmp_path / "missing.vtu"), "--debug"])
    assert debug.exit_code != 0 and debug.exception is not None and "error:" not in debug.output


def test_run_strict_overrides_the_recipe(tmp_path):
    listing = _series(tmp_path, steps=3)
    (tmp_path / "s_1.vtu").write_text("not a mesh")
    recipe = tmp_path / "r.toml"
    recipe.write_text(f'[input]\npath = "{listing}"\nfield = "alpha"\n[interface]\ncontours = false\n'
                      f'[run]\nanalyses = ["conservation"]\n[output]\nfolder = "{tmp_path / "o"}"\n')
    assert CliRunner().invoke(main, ["run", str(recipe), "-q"]).exit_code == 0  # the bad step skipped
    strict = CliRunner().invoke(main, ["run", str(recipe), "-q", "--strict", "--overwrite"])
    assert strict.exit_code == 2 and "s_1.vtu" in strict.output
    # a recipe that is strict, made lenient for one run from the command line
    recipe.write_text(recipe.read_text().replace('analyses = ["conservation"]',
                                                 'analyses = ["conservation"]\nstrict = true'))
    assert CliRunner().invoke(main, ["run", str(recipe), "-q", "--overwrite"]).exit_code == 2
    assert CliRunner().invoke(main, ["run", str(recipe), "-q", "--no-strict", "--overwrite"]).exit_code == 0


def test_missing_dask_is_reported_before_any_step(tmp_path, monkeypatch):
    import sys

    listing = _series(tmp_path)
    monkeypatch.setitem(sys.modules, "distributed", None)  # as if the extra were not installed
    result = CliRunner().invoke(main, ["measure", listing, "-f", "alpha", "-o", str(tmp_path / "o"),
                                       "--scheduler", "local", "-q"])
    assert result.exit_code == 2 and 'pip install ".[cluster]"' in result.output
    assert not (tmp_path / "o").exists()  # nothing started


def test_inspect_help_lists_the_readme_formats():
    """The suffixes the README names for PATH, and every suffix the format registry reads."""
    import re

    from phasegauge.io import MESH_SUFFIXES

    text = " ".join(CliRunner().invoke(main, ["inspect", "--help"]).output.split())
    readme = open(__file__.rsplit("/tests/", 1)[0] + "/README.md", encoding="utf-8").read()
    named = set(re.findall(r"`(\.[a-z]{3,4})`", readme.split("`PATH` is one mesh file", 1)[1][:400]))
    assert named and all(suffix in text for suffix in named)
    assert {".vtu", ".vtk", ".xdmf", ".vtm"} <= set(MESH_SUFFIXES)


def test_the_command_turns_numpys_huge_page_advice_off_unless_the_user_set_it(monkeypatch):
    # numpy reads NUMPY_MADVISE_HUGEPAGE when it is imported [numpy's "Global state" page]: the
    # command sets it before any command imports numpy, and keeps a value the user gave
    import subprocess
    import sys

    for given, expected in ((None, "0"), ("1", "1")):
        if given is None:
            monkeypatch.delenv("NUMPY_MADVISE_HUGEPAGE", raising=False)
        else:
            monkeypatch.setenv("NUMPY_MADVISE_HUGEPAGE", given)
        assert CliRunner().invoke(main, ["samples", "--list"]).exit_code == 0
        assert os.environ["NUMPY_MADVISE_HUGEPAGE"] == expected
    # in a fresh interpreter numpy takes it up: imported after the group's callback ran, it reads
    # the advice off (numpy's own reading of the switch; a private name, so skipped where it is gone)
    code = ("import os, sys\n"
            "os.environ.pop('NUMPY_MADVISE_HUGEPAGE', None)\n"
            "import phasegauge.cli\n"
            "before = 'numpy' in sys.modules\n"
            "phasegauge.cli.main(['samples', '--list'], standalone_mode=False)\n"
            "import numpy._core.multiarray as m\n"
            "read = getattr(m, '_get_madvise_hugepage', lambda: 'gone')()\n"
            "print(before, read)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    before, read = out.stdout.split()[-2:]
    assert before == "False"  # numpy not imported before the callback (else the switch came too late)
    if read == "gone":
        pytest.skip("this numpy has no _get_madvise_hugepage")
    assert read == "False"


def test_output_into_a_closed_pipe_ends_quietly(tmp_path):
    # `phasegauge inspect ... | head -1`: the reader closes the pipe; the command ends with status 1 and
    # no "internal error" (the Python documentation's note on SIGPIPE gives the way: stdout to the null
    # device); the operating system's pipe is the outside check
    import subprocess
    import sys

    series = _series(tmp_path, steps=3)
    proc = subprocess.Popen([sys.executable, "-m", "phasegauge", "inspect", series], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, env={**os.environ, "MPLBACKEND": "Agg"})
    proc.stdout.close()  # closed before the command writes (its start takes far longer)
    err = proc.stderr.read().decode()
    proc.stderr.close()
    assert proc.wait(timeout=120) == 1
    assert "internal error" not in err and "Traceback" not in err and "BrokenPipe" not in err
