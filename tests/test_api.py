"""The public API: every name in every __all__ imports (STYLE.md)."""

import importlib

import pytest

MODULES = ["phasegauge", "phasegauge.io", "phasegauge.report", "phasegauge.samples", "phasegauge.analysis",
           "phasegauge.analysis.interface", "phasegauge.analysis.droplets", "phasegauge.analysis.tracking",
           "phasegauge.analysis.mixing", "phasegauge.analysis.conservation", "phasegauge.analysis.compare",
           "phasegauge.analysis.references", "phasegauge.analysis.convergence", "phasegauge.analysis.probes",
           "phasegauge.errors", "phasegauge.model.mesh", "phasegauge.model.indicator",
           "phasegauge.run.measure", "phasegauge.recipes", "phasegauge.run.compare", "phasegauge.meshgen",
           "phasegauge.run.options", "phasegauge.run.step", "phasegauge.run.cache", "phasegauge.run.executors",
           "phasegauge.run.assemble", "phasegauge.model.fields", "phasegauge.model.axes",
           "phasegauge.model.outline", "phasegauge.analysis.thermo", "phasegauge.model.mixture_models",
           "phasegauge.run.convergence", "phasegauge.run.campaign"]


@pytest.mark.parametrize("name", MODULES)
def test_every_public_name_imports(name):
    module = importlib.import_module(name)
    assert module.__all__, name
    for item in module.__all__:
        assert getattr(module, item) is not None, f"{name}.{item}"


def test_cli_starts_without_heavy_libraries():
    import subprocess
    import sys

    from conftest import subprocess_env

    code = ("import sys, phasegauge.cli; heavy = [m for m in ('pandas', 'matplotlib', 'pyvista', 'vtk', "
            "'skimage', 'dask', 'scipy.spatial') if m in sys.modules]; print(','.join(heavy))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=subprocess_env())
    assert out.returncode == 0 and out.stdout.strip() == "", out.stdout + out.stderr


def test_the_command_line_starts_without_the_numeric_stack():
    """`phasegauge --help` imports neither numpy nor meshio (the API loads on first use, PEP 562);
    checked in a fresh interpreter's sys.modules, not by timing."""
    import subprocess
    import sys

    from conftest import subprocess_env

    code = ("import sys, phasegauge.cli, phasegauge; "
            "print(sorted(m for m in ('numpy', 'meshio', 'scipy', 'pandas') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=subprocess_env())
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"
    import phasegauge

    assert phasegauge.measure.__module__ == "phasegauge.run.measure"
    assert set(phasegauge.__all__) <= set(dir(phasegauge))
