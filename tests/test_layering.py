"""The core runs without Qt: no module outside foldsim/gui imports it (STYLE.md)."""

import subprocess
import sys
from pathlib import Path

import foldsim

CORE = sorted(
    ".".join(p.relative_to(Path(foldsim.__file__).parent.parent).with_suffix("").parts)
    for p in Path(foldsim.__file__).parent.rglob("*.py")
    if "gui" not in p.parts and p.name != "__main__.py")


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
