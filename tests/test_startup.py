"""Start-up: `foldsim --help` and `foldsim check` import only what they use (issue: start-up).

Each command runs in a fresh interpreter, which then prints the top-level names in
`sys.modules`; the test looks for packages the command has no use for.
"""

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
GIFT_BOX = ROOT / "assets" / "gift-box.mech.json"

# Common practice: the desktop app's toolkit, the mesh, glTF and video libraries and
# image libraries load only when a command draws, reads a mesh or writes a file.
NEVER = {"PySide6", "shiboken6", "pyqtgraph", "OpenGL", "trimesh", "pygltflib", "av", "PIL", "matplotlib",
         # the cluster and its tables load only when a study runs or is read.
         "dask", "distributed", "pyarrow"}
# Help text needs no arrays, graphs or geometry.
HELP_ALSO = {"numpy", "scipy", "networkx"}

CODE = """
import contextlib, io, json, sys
from foldsim.cli import main
with contextlib.redirect_stdout(io.StringIO()):
    try:
        code = main(sys.argv[1:])
    except SystemExit as exc:
        code = exc.code
print(json.dumps({"code": code, "modules": sorted({m.split('.')[0] for m in sys.modules})}))
"""


def loaded_after(*argv):
    done = subprocess.run([sys.executable, "-c", CODE, *argv], capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    result = json.loads(done.stdout.strip().splitlines()[-1])
    return result["code"], set(result["modules"])


@pytest.mark.parametrize("argv", [["--help"], ["check", "--help"], ["nets", "--help"], ["stackup", "--help"],
                                  ["study", "--help"]])
def test_help_loads_no_heavy_package(argv):
    code, modules = loaded_after(*argv)
    assert code == 0
    assert "foldsim" in modules
    assert modules & (NEVER | HELP_ALSO) == set()


def test_check_on_a_small_demo_loads_no_gui_mesh_or_gltf_package():
    code, modules = loaded_after("check", str(GIFT_BOX))
    assert code == 0
    # the check does need the engine's arrays and graphs: they are loaded, so the
    # probe sees real imports.
    assert {"numpy", "scipy", "networkx"} <= modules
    assert modules & NEVER == set()
