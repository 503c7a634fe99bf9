"""The package keeps its layers: imports run one way, no module-level mutable state, small modules.

errors <- model <- {io, analysis} <- run -> report (DESIGN.md, issue 19); the command line, recipes,
samples and mesh generators sit on top and may import anything.
"""

import ast
import os

import pytest

import phasegauge

PACKAGE = os.path.dirname(os.path.abspath(phasegauge.__file__))

#: what each layer may import from inside the package (besides itself)
ALLOWED = {
    "errors": set(),
    "model": {"errors"},
    "io": {"errors", "model"},
    "analysis": {"errors", "model"},
    "thermo": {"errors"},
    "run": {"errors", "model", "io", "analysis", "thermo", "report"},
    "report": {"errors"},
}
TOP = {"cli", "_cli_options", "recipes", "samples", "meshgen", "__init__", "__main__"}

MAX_LINES = 600


def modules():
    for folder, _, files in os.walk(PACKAGE):
        for name in files:
            if name.endswith(".py"):
                path = os.path.join(folder, name)
                yield os.path.relpath(path, PACKAGE), path


def layer_of(rel: str) -> str:
    head = rel.split(os.sep)[0]
    return head[:-3] if head.endswith(".py") else head


def imported_layers(rel: str, tree: ast.AST):
    """Package layers a module imports (relative and absolute imports, at any depth)."""
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                up = node.level - 1
                parts = rel.split(os.sep)[:-1]
                base = parts[: len(parts) - up] if up else parts
                target = base + (node.module.split(".") if node.module else [])
                if not target:  # 'from .. import name': the names are modules or package attributes
                    for alias in node.names:
                        yield alias.name, node.lineno
                else:
                    yield target[0], node.lineno
            elif node.module and node.module.split(".")[0] == "phasegauge":
                parts = node.module.split(".")
                yield (parts[1] if len(parts) > 1 else "__init__"), node.lineno
        elif isinstance(node, ast.Import):
            for alias in node.names:
                parts = alias.name.split(".")
                if parts[0] == "phasegauge":
                    yield (parts[1] if len(parts) > 1 else "__init__"), node.lineno


def test_imports_run_one_way():
    wrong = []
    for rel, path in modules():
        layer = layer_of(rel)
        if layer in TOP:
            continue
        tree = ast.parse(open(path).read())
        for target, line in imported_layers(rel, tree):
            target = target[:-3] if target.endswith(".py") else target
            if target == layer or target == "__version__" and layer == "report":
                continue
            if target not in ALLOWED.get(layer, set()):
                wrong.append(f"{rel}:{line} ({layer} imports {target})")
    assert not wrong, "imports against the layers: " + "; ".join(wrong)


def test_report_imports_no_input_or_analysis():
    for rel, path in modules():
        if layer_of(rel) != "report":
            continue
        text = open(path).read()
        assert "import Series" not in text and "analysis" not in [t for t, _ in
                                                                   imported_layers(rel, ast.parse(text))], rel


def _mutable(node) -> bool:
    if isinstance(node, (ast.Dict, ast.List, ast.Set, ast.DictComp, ast.ListComp, ast.SetComp)):
        return True
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
        return node.func.id in {"dict", "list", "set", "OrderedDict", "defaultdict", "WeakValueDictionary",
                                "WeakKeyDictionary", "deque"}
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
        return node.func.attr in {"WeakValueDictionary", "WeakKeyDictionary", "OrderedDict", "defaultdict"}
    return False


def module_assignments(tree: ast.Module):
    """(statement, targets, value) of every module-level assignment with a value."""
    for node in tree.body:
        if isinstance(node, ast.Assign):
            yield node, node.targets, node.value
        elif isinstance(node, ast.AnnAssign) and node.value is not None:
            yield node, [node.target], node.value


def test_no_module_level_mutable_state():
    """Module-level names bound to mutable containers must be constant tables (UPPER_CASE, never
    assigned again) or ``__all__``; caches live on objects (Mesh.memo, MeshPool, StepCache)."""
    found = []
    for rel, path in modules():
        tree = ast.parse(open(path).read())
        for node, targets, value in module_assignments(tree):
            for t in targets:
                if not isinstance(t, ast.Name) or not _mutable(value):
                    continue
                name = t.id
                if name == "__all__" or name.lstrip("_").isupper():
                    continue
                found.append(f"{rel}:{node.lineno} {name}")
        # 'global' statements rebind module state
        for node in ast.walk(tree):
            if isinstance(node, ast.Global):
                found.append(f"{rel}:{node.lineno} global {', '.join(node.names)}")
    assert not found, "module-level mutable state: " + "; ".join(found)


def test_constant_tables_are_not_mutated():
    """UPPER_CASE module tables are never written to (no item assignment, setdefault, append...)."""
    found = []
    for rel, path in modules():
        tree = ast.parse(open(path).read())
        tables = set()
        for _, targets, value in module_assignments(tree):
            tables |= {t.id for t in targets
                       if isinstance(t, ast.Name) and t.id.lstrip("_").isupper() and _mutable(value)}
        for node in ast.walk(tree):
            if isinstance(node, (ast.Assign, ast.AugAssign)):
                for t in (node.targets if isinstance(node, ast.Assign) else [node.target]):
                    if isinstance(t, ast.Subscript) and isinstance(t.value, ast.Name) and t.value.id in tables:
                        found.append(f"{rel}:{node.lineno} {t.value.id}[...] =")
            if isinstance(node, ast.Delete):
                for t in node.targets:
                    if isinstance(t, ast.Subscript) and isinstance(t.value, ast.Name) and t.value.id in tables:
                        found.append(f"{rel}:{node.lineno} del {t.value.id}[...]")
            if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                    and isinstance(node.func.value, ast.Name) and node.func.value.id in tables
                    and node.func.attr in {"append", "extend", "update", "setdefault", "pop", "clear", "add",
                                           "insert", "remove"}):
                found.append(f"{rel}:{node.lineno} {node.func.value.id}.{node.func.attr}()")
    assert not found, "module tables changed at run time: " + "; ".join(found)


@pytest.mark.parametrize("rel,path", sorted(modules()))
def test_module_is_small(rel, path):
    lines = sum(1 for _ in open(path))
    assert lines <= MAX_LINES, f"{rel} has {lines} lines; split it by job (at most {MAX_LINES})"
