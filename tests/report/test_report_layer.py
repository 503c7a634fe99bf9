"""The report layer draws what it is handed: it imports no reader, model or analysis, and reads no input."""

import ast
import hashlib
import os
import sys

import phasegauge.report as report_package
from phasegauge.io import Series, input_files

REPORT = os.path.dirname(report_package.__file__)
ROOT = os.path.dirname(os.path.dirname(os.path.dirname(REPORT)))
#: third-party libraries the report may draw and write with
PLOTTING = {"numpy", "pandas", "matplotlib", "mpl_toolkits", "PIL"}  # PIL: Pillow, matplotlib's imaging library


def _imports(path):
    tree = ast.parse(open(path, encoding="utf-8").read(), filename=path)
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield 0, alias.name
        elif isinstance(node, ast.ImportFrom):
            names = [node.module] if node.module else [alias.name for alias in node.names]
            for name in names:
                yield node.level, name


def test_report_imports_only_its_own_modules_errors_and_plotting():
    wrong = []
    for name in sorted(os.listdir(REPORT)):
        if not name.endswith(".py"):
            continue
        for level, module in _imports(os.path.join(REPORT, name)):
            top = module.split(".")[0]
            allowed = ((level == 1) or (level == 2 and module == "errors")
                       or (level == 0 and (top in sys.stdlib_module_names or top in PLOTTING)))
            if not allowed:
                wrong.append(f"{name}: {'.' * level}{module}")
    assert not wrong, "report imports outside its layer: " + ", ".join(wrong)


def _sha256(path):
    return hashlib.sha256(open(path, "rb").read()).hexdigest()


def test_input_files_lists_the_hdf5_file_an_xdmf_names(tmp_path):
    xdmf = os.path.join(ROOT, "sample_fields", "filament_breakup.xdmf")
    h5 = os.path.join(ROOT, "sample_fields", "filament_breakup.h5")
    files = input_files(Series(xdmf))  # every step names the same XDMF file: listed once
    assert [f["path"] for f in files] == [xdmf, h5]
    # sizes and hashes as the standard library computes them from the files
    assert [f["bytes"] for f in files] == [os.path.getsize(xdmf), os.path.getsize(h5)]
    assert [f["sha256"] for f in files] == [_sha256(xdmf), _sha256(h5)]
    # a hash already known (computed by a step worker) is taken as given
    assert input_files(Series(xdmf), {xdmf: "k"})[0]["sha256"] == "k"


def test_a_report_without_plots_never_imports_matplotlib(tmp_path):
    """One step draws no plot over time: the report is written without importing matplotlib
    (checked in a fresh interpreter's sys.modules, not by timing)."""
    import subprocess

    from phasegauge.meshgen import grid_mesh, to_meshio

    mesh = grid_mesh((8, 8), kind="quad")
    c = (mesh.cell_centroids[:, 0] > 0.5).astype(float)
    to_meshio(mesh, cell_data={"alpha": c}).write(tmp_path / "s.vtu")
    code = ("import sys, phasegauge; phasegauge.measure(sys.argv[1], 'alpha', out=sys.argv[2], snapshots=0); "
            "print('matplotlib' in sys.modules)")
    env = dict(os.environ, PYTHONPATH=os.path.join(ROOT, "src"))
    done = subprocess.run([sys.executable, "-c", code, str(tmp_path / "s.vtu"), str(tmp_path / "out")],
                          capture_output=True, text=True, env=env, check=True)
    assert done.stdout.strip().splitlines()[-1] == "False", done.stdout + done.stderr
    assert os.path.exists(tmp_path / "out" / "report.html")


def test_a_report_with_plots_imports_no_pyplot_and_no_image_plugins(tmp_path):
    """A run of several steps draws its plots on matplotlib's Agg canvas without pyplot (no window,
    no global figure state) and encodes its PNG files without Pillow's image plugins (checked in a
    fresh interpreter's sys.modules)."""
    import subprocess

    from phasegauge.meshgen import grid_mesh, to_meshio

    mesh = grid_mesh((8, 8), kind="quad")
    (tmp_path / "series").mkdir()
    for step in range(3):
        c = (mesh.cell_centroids[:, 0] > 0.3 + 0.1 * step).astype(float)
        to_meshio(mesh, cell_data={"alpha": c}).write(tmp_path / "series" / f"s_{step}.vtu")
    code = ("import sys, phasegauge; phasegauge.measure(sys.argv[1], 'alpha', out=sys.argv[2], snapshots=0); "
            "print(sorted(m for m in sys.modules if m == 'matplotlib.pyplot' or m.startswith('PIL.') "
            "and m.endswith('ImagePlugin') and m != 'PIL.PngImagePlugin'))")
    env = dict(os.environ, PYTHONPATH=os.path.join(ROOT, "src"), MPLBACKEND="Agg")
    done = subprocess.run([sys.executable, "-c", code, str(tmp_path / "series"), str(tmp_path / "out")],
                          capture_output=True, text=True, env=env)
    assert done.returncode == 0 and done.stdout.strip().splitlines()[-1] == "[]", done.stdout + done.stderr
    assert [name for name in os.listdir(tmp_path / "out") if name.endswith(".png")]
