"""The house rules of DEVELOPERS.md, checked by reading every module's imports and calls.

A folder (or top-level module) may import only from its own folder or from folders below it.
"""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "cosmogrow"

LAYERS = {
    0: {"__init__", "errors", "seeding", "interpolation", "outputs", "validate"},
    1: {"background", "config"},
    2: {"data"},
    3: {"selection", "consequences"},
    4: {"model"},
    5: {"simulation"},
    6: {"inference"},
    7: {"campaigns"},
    8: {"checks"},
    9: {"forecast"},
    10: {"report"},
    11: {"cli", "api"},
}
# At most a dozen modules directly in cosmogrow/; everything else lives in a folder by concern.
MAX_TOP_LEVEL_MODULES = 12
LAYER_OF = {name: layer for layer, names in LAYERS.items() for name in names}


def modules():
    return sorted(p for p in PACKAGE.rglob("*.py"))


def unit(path):
    """The folder of a module in a folder (e.g. 'inference'), else the top-level module's name."""
    rel = path.relative_to(PACKAGE)
    return rel.parts[0] if len(rel.parts) > 1 else rel.stem


def internal_imports(path):
    """Units this module imports from the package (relative imports), and external top-level names."""
    tree = ast.parse(path.read_text())
    depth = len(path.relative_to(PACKAGE).parts) - 1
    internal, external = set(), set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level == 0:
                external.add(node.module.split(".")[0])
                continue
            base = list(path.relative_to(PACKAGE).parts[:depth])[: depth - (node.level - 1)]
            target = base + (node.module.split(".") if node.module else [])
            if not target:  # "from . import x" at the top level
                internal.update(alias.name for alias in node.names)
            else:
                internal.add(target[0])
        elif isinstance(node, ast.Import):
            external.update(alias.name.split(".")[0] for alias in node.names)
    return internal, external


def test_every_module_has_a_layer():
    missing = sorted({unit(p) for p in modules()} - set(LAYER_OF))
    assert not missing, f"add these to LAYERS (and DEVELOPERS.md): {missing}"


@pytest.mark.parametrize("path", modules(), ids=lambda p: str(p.relative_to(PACKAGE)))
def test_imports_point_down(path):
    internal, _ = internal_imports(path)
    mine = LAYER_OF[unit(path)]
    upward = sorted(name for name in internal if name in LAYER_OF and LAYER_OF[name] > mine
                    and name != unit(path))
    assert not upward, f"{path.name} (layer {mine}) imports upward: {upward}"


def dotted(path):
    return ".".join(path.relative_to(PACKAGE).with_suffix("").parts)


def module_imports(path):
    """Dotted names of the package's modules (or packages) this module imports."""
    tree = ast.parse(path.read_text())
    here = path.relative_to(PACKAGE).parts[:-1]
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level:
            base = list(here[: len(here) - (node.level - 1)])
            target = base + (node.module.split(".") if node.module else [])
            for alias in node.names:
                candidate = target + [alias.name]
                if (PACKAGE.joinpath(*candidate).with_suffix(".py").exists()
                        or PACKAGE.joinpath(*candidate).is_dir()):
                    found.add(".".join(candidate))
                elif target:
                    found.add(".".join(target))
    return found


def test_no_import_cycles_between_modules():
    graph = {dotted(p).removesuffix(".__init__"): module_imports(p) for p in modules()}

    def visit(node, stack):
        for nxt in graph.get(node, ()):
            assert nxt not in stack, f"import cycle: {' -> '.join(stack + [nxt])}"
            visit(nxt, stack + [nxt])

    for start in graph:
        visit(start, [start])


def test_top_level_stays_small():
    top = sorted(p.stem for p in PACKAGE.glob("*.py"))
    assert len(top) <= MAX_TOP_LEVEL_MODULES, f"move some of these into folders: {top}"


def test_every_folder_says_what_lives_there():
    for folder in (p for p in PACKAGE.iterdir() if p.is_dir() and p.name != "__pycache__"):
        init = folder / "__init__.py"
        assert init.exists(), f"{folder.name}/ has no __init__.py"
        assert ast.get_docstring(ast.parse(init.read_text())), f"{folder.name}/__init__.py: no docstring"


@pytest.mark.parametrize("library,allowed", [("matplotlib", {"report"}), ("corner", {"report"}),
                                             ("emcee", {"inference"}), ("distributed", {"campaigns"})])
def test_heavy_libraries_stay_in_their_module(library, allowed):
    offenders = [str(p.relative_to(PACKAGE)) for p in modules()
                 if library in internal_imports(p)[1] and unit(p) not in allowed]
    assert not offenders, f"{library} imported outside {allowed}: {offenders}"


def test_only_the_command_line_prints_or_exits():
    offenders = []
    for path in modules():
        if unit(path) in {"cli", "commands"}:
            continue
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Call):
                func = node.func
                name = func.id if isinstance(func, ast.Name) else getattr(func, "attr", "")
                owner = getattr(getattr(func, "value", None), "id", "")
                if name == "print" or (owner == "sys" and name == "exit"):
                    offenders.append(f"{path.relative_to(PACKAGE)}:{node.lineno}")
    assert not offenders, f"print/sys.exit outside the command line: {offenders}"


def test_modules_stay_small():
    big = [f"{p.relative_to(PACKAGE)} ({n} lines)" for p in modules()
           if (n := len(p.read_text().splitlines())) > 400]
    assert not big, f"split these by concept: {big}"
