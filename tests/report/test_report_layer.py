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
PLOTTING = {"numpy", "pandas", "matplotlib", "mpl_toolkits"}


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
