"""Layers run one way: no module imports from a layer above its own (docs/architecture.md).

The core runs without Qt: no module outside foldsim/gui imports it (STYLE.md).
"""

import ast
import subprocess
import sys
from pathlib import Path

import foldsim

PACKAGE = Path(foldsim.__file__).parent
CORE = sorted(
    ".".join(p.relative_to(PACKAGE.parent).with_suffix("").parts)
    for p in PACKAGE.rglob("*.py")
    if "gui" not in p.parts and p.name != "__main__.py")

LAYERS = (
    # bottom first; the same list, in the same order, is in docs/architecture.md.
    ("base", ("foldsim.errors", "foldsim.tolerances", "foldsim.limits", "foldsim.geometry")),
    ("model", ("foldsim.gearing", "foldsim.kinematics", "foldsim.model", "foldsim.solids",
               "foldsim.nets", "foldsim.symmetry", "foldsim.netcount")),
    ("analysis", ("foldsim.analysis", "foldsim.picking", "foldsim.stackup")),
    ("design", ("foldsim.layout", "foldsim.parts", "foldsim.io", "foldsim.design", "foldsim.netcount.ranking",
                "foldsim.build", "foldsim.study")),
    ("output", ("foldsim.report", "foldsim.export")),
    ("gui", ("foldsim.gui",)),
    ("front", ("foldsim.commands", "foldsim.cli", "foldsim.__main__")),
)
"""The layers, bottom first. A module may import from its own layer and the ones below.

The package root `foldsim` (its `__init__`: the public names and `__version__`) is no
layer: Python loads it before any of its modules, so importing from it adds nothing.
"""


def layer_of(name):
    """Index into LAYERS of a dotted module name (longest prefix wins), or None."""
    best, depth = None, -1
    for index, (_, prefixes) in enumerate(LAYERS):
        for prefix in prefixes:
            if (name == prefix or name.startswith(prefix + ".")) and prefix.count(".") > depth:
                best, depth = index, prefix.count(".")
    return best


def module_name(path, root=PACKAGE):
    parts = path.relative_to(root.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def imported(source, name, is_package):
    """Dotted names of the foldsim modules a module's source imports, with line numbers.

    Every ``import`` and ``from ... import`` counts, at any depth (inside functions
    too). ``from a import b`` counts as ``a.b`` when that names a module, else ``a``.
    """
    package = name if is_package else name.rpartition(".")[0]
    out = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            out.extend((alias.name, node.lineno) for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module
            for alias in node.names:
                sub = f"{target}.{alias.name}"
                out.append((sub if _is_module(sub) else target, node.lineno))
    return [(n, line) for n, line in out if n == "foldsim" or n.startswith("foldsim.")]


def _is_module(name):
    parts = name.split(".")
    if parts[0] != "foldsim":
        return False
    path = PACKAGE.joinpath(*parts[1:])
    return path.with_suffix(".py").is_file() or (path / "__init__.py").is_file()


def upward_imports(source, name, is_package=False):
    """``(line, imported, its layer, own layer)`` for each import from a layer above."""
    own = layer_of(name)
    found = []
    for target, line in imported(source, name, is_package):
        if target == "foldsim":
            continue
        theirs = layer_of(target)
        if theirs is not None and own is not None and theirs > own:
            found.append((line, target, LAYERS[theirs][0], LAYERS[own][0]))
    return found


def test_every_module_has_a_layer():
    missing = [module_name(p) for p in PACKAGE.rglob("*.py")
               if p != PACKAGE / "__init__.py" and layer_of(module_name(p)) is None]
    assert missing == [], f"add these modules to LAYERS here and in docs/architecture.md: {missing}"


def test_no_module_imports_from_a_layer_above():
    bad = []
    for path in sorted(PACKAGE.rglob("*.py")):
        name = module_name(path)
        for line, target, theirs, own in upward_imports(path.read_text(), name, path.name == "__init__.py"):
            bad.append(f"{path.relative_to(PACKAGE.parent)}:{line}: {name} ({own}) imports {target} ({theirs})")
    assert bad == [], "\n".join(bad)


def test_the_check_sees_upward_imports_at_any_depth():
    # Common practice: a guard is tested on an input it must reject.
    source = ("from ..geometry import unit\n"
              "def f():\n"
              "    from ..gui.view import palette\n"
              "    import foldsim.commands.check\n"
              "    from . import triangles\n")
    found = upward_imports(source, "foldsim.analysis.example")
    assert [(line, target) for line, target, _, _ in found] == [
        (3, "foldsim.gui.view.palette"), (4, "foldsim.commands.check")]
    assert upward_imports("from .. import __version__\n", "foldsim.analysis.example") == []
    assert [t for _, t, _, _ in upward_imports("from .report import check\n", "foldsim.layout")] == [
        "foldsim.report"]


def test_layers_in_the_docs_match():
    text = (PACKAGE.parent / "docs" / "architecture.md").read_text()
    positions = [text.index(f"**{name}**") for name, _ in LAYERS]
    assert positions == sorted(positions)
    for _, prefixes in LAYERS:
        for prefix in prefixes:
            assert f"`{prefix.removeprefix('foldsim.')}`" in text, prefix


def test_core_modules_import_with_qt_blocked():
    # Common practice: make the forbidden imports fail and import everything else.
    code = (
        "import sys, importlib\n"
        "class Block:\n"
        "    def find_spec(self, name, path=None, target=None):\n"
        "        if name.split('.')[0] in ('PySide6', 'PyQt5', 'PyQt6', 'pyqtgraph', 'OpenGL'):\n"
        "            raise ImportError('blocked: ' + name)\n"
        "sys.meta_path.insert(0, Block())\n"
        f"for m in {CORE!r}:\n"
        "    importlib.import_module(m)\n"
        "print(len(sys.modules))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert len(CORE) >= 10
