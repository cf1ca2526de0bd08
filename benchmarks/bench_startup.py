"""Start-up time of the command line against a bare interpreter.

    python benchmarks/bench_startup.py             # 10 runs of each, best and median
    python benchmarks/bench_startup.py --runs 30

Each row runs a fresh interpreter (``sys.executable``) as a subprocess and times it
from launch to exit with a wall clock:

* ``python -c pass``: the reference, an interpreter that starts and stops;
* ``foldsim --help``: ``python -m foldsim --help``, the parser and every
  subcommand's help, no engine;
* ``foldsim check``: ``python -m foldsim check assets/gift-box.mech.json``, a small
  demo (6 panels), so almost all of it is import time.

A second table lists what each command imports beyond the bare interpreter
(top-level packages) and the import time of ``foldsim.cli`` from ``-X importtime``.
Prints ratios to the reference; asserts nothing about time.
"""

import argparse
import json
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "assets" / "gift-box.mech.json"

CASES = (
    ("python -c pass", ["-c", "pass"]),
    ("foldsim --help", ["-m", "foldsim", "--help"]),
    ("foldsim check (gift box)", ["-m", "foldsim", "check", str(DEMO)]),
)

PROBE = """
import contextlib, io, json, sys
before = set(sys.modules)
from foldsim.cli import main
with contextlib.redirect_stdout(io.StringIO()):
    try:
        main(sys.argv[1:])
    except SystemExit:
        pass
print(json.dumps(sorted({m.split('.')[0] for m in set(sys.modules) - before})))
"""


def wall(args, runs):
    """Wall times (s) of ``runs`` fresh interpreters with these arguments."""
    times = []
    for _ in range(runs):
        start = time.perf_counter()
        subprocess.run([sys.executable, *args], cwd=ROOT, stdout=subprocess.DEVNULL,
                       stderr=subprocess.DEVNULL, check=False)
        times.append(time.perf_counter() - start)
    return times


def loaded(argv):
    """Top-level packages a command imports beyond the interpreter's own start-up."""
    done = subprocess.run([sys.executable, "-c", PROBE, *argv], cwd=ROOT, capture_output=True, text=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def cli_import_ms():
    """Cumulative import time of `foldsim.cli` (ms), from ``-X importtime``."""
    done = subprocess.run([sys.executable, "-X", "importtime", "-c", "import foldsim.cli"], cwd=ROOT,
                          capture_output=True, text=True)
    for line in done.stderr.splitlines():
        parts = [p.strip() for p in line.split("|")]
        if len(parts) == 3 and parts[2] == "foldsim.cli":
            return int(parts[1]) / 1000
    return float("nan")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=10, help="runs of each command (default 10)")
    args = parser.parse_args(argv)
    rows = [(name, wall(case, args.runs)) for name, case in CASES]
    reference = min(rows[0][1])
    print(f"{'command':<28}{'best ms':>10}{'median ms':>12}{'best / python -c pass':>24}")
    for name, times in rows:
        print(f"{name:<28}{min(times) * 1e3:>10.1f}{statistics.median(times) * 1e3:>12.1f}"
              f"{min(times) / reference:>24.2f}")
    print(f"\nimport foldsim.cli: {cli_import_ms():.1f} ms (-X importtime, cumulative)")
    heavy = ("numpy", "scipy", "networkx", "trimesh", "pygltflib", "PySide6", "pyqtgraph", "OpenGL", "av")
    for label, argv_ in (("foldsim --help", ["--help"]), ("foldsim check", ["check", str(DEMO)])):
        got = set(loaded(argv_))
        print(f"{label}: of {', '.join(heavy)} loads {', '.join(h for h in heavy if h in got) or 'none'}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
