"""No module-level mutable state in the io and run layers: caches are explicit objects passed in.

The source is parsed (Python's own ``ast``) and every module-level assignment checked: a dict,
list or set (literal, comprehension or call) outside ``__all__`` is state that hides between calls
and processes. Read-only tables use tuples or ``types.MappingProxyType``.
"""

import ast
import pathlib

import pytest

import phasegauge

PACKAGE = pathlib.Path(phasegauge.__file__).parent
LAYERS = ("io", "run")
MUTABLE_CALLS = {"dict", "list", "set", "defaultdict", "OrderedDict", "deque", "WeakKeyDictionary",
                 "WeakValueDictionary"}


def _module_state(path: pathlib.Path) -> list:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = []
    for node in tree.body:
        if isinstance(node, ast.Assign):
            targets, value = node.targets, node.value
        elif isinstance(node, ast.AnnAssign) and node.value is not None:
            targets, value = [node.target], node.value
        else:
            continue
        names = [ast.unparse(t) for t in targets]
        if names == ["__all__"]:
            continue
        mutable = isinstance(value, (ast.Dict, ast.List, ast.Set, ast.DictComp, ast.ListComp, ast.SetComp))
        if isinstance(value, ast.Call):
            func = value.func
            mutable = (func.attr if isinstance(func, ast.Attribute) else getattr(func, "id", "")) in MUTABLE_CALLS
        if mutable:
            found.append(f"{path.relative_to(PACKAGE)}:{node.lineno} {', '.join(names)}")
    found += [f"{path.relative_to(PACKAGE)}:{n.lineno} global {', '.join(n.names)}"
              for n in ast.walk(tree) if isinstance(n, ast.Global)]
    return found


@pytest.mark.parametrize("layer", LAYERS)
def test_no_module_level_mutable_state(layer):
    found = [line for path in sorted((PACKAGE / layer).rglob("*.py")) for line in _module_state(path)]
    assert not found, "module-level mutable state: " + "; ".join(found)
