"""foldsim: kinematics and checks for gear-coupled rigid folding mechanisms.

The public API, in data-flow order::

    mech = foldsim.load("box.mech.json")        # Mechanism
    sched = foldsim.fold_schedule(mech)         # Schedule
    poses = foldsim.poses_at(mech, sched, t)    # (T, F, 4, 4)
    report = foldsim.check(mech)                # dict, as `foldsim check --json`

The names load on first use (PEP 562), so that `import foldsim` — and the command
line's ``--help`` — does not pay for numpy, scipy and networkx until they are needed.
"""

import importlib

from .errors import FoldsimError, ModelError

__version__ = "0.1.0"

_LAZY = {
    "Schedule": "gearing", "fold_angles": "gearing", "fold_schedule": "gearing",
    "load": "io.mechanism_json", "loads": "io.mechanism_json", "save": "io.mechanism_json",
    "face_poses": "kinematics", "poses_at": "kinematics",
    "Coupling": "model", "Mechanism": "model", "build_mechanism": "model",
    "Tolerances": "tolerances",
}

__all__ = [
    "Coupling", "FoldsimError", "Mechanism", "ModelError", "Schedule", "Tolerances",
    "build_mechanism", "check", "face_poses", "fold_angles", "fold_schedule", "load",
    "loads", "poses_at", "save",
]


def check(mech, **options):
    """Run every check on a mechanism; see `foldsim.report.check`."""
    from .report import check as _check

    return _check(mech, **options)


def __getattr__(name):
    """Load a public name from its module on first use."""
    if name in _LAZY:
        value = getattr(importlib.import_module(f".{_LAZY[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
