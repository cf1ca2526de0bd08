"""foldsim: kinematics and checks for gear-coupled rigid folding mechanisms.

The public API, in data-flow order::

    mech = foldsim.load("box.mech.json")        # Mechanism
    sched = foldsim.fold_schedule(mech)         # Schedule
    poses = foldsim.poses_at(mech, sched, t)    # (T, F, 4, 4)
    report = foldsim.check(mech)                # dict, as `foldsim check --json`
"""

from .errors import FoldsimError, ModelError
from .gearing import Schedule, fold_angles, fold_schedule
from .io.mechanism_json import load, loads, save
from .kinematics import face_poses, poses_at
from .model import Coupling, Mechanism, build_mechanism
from .tolerances import Tolerances

__version__ = "0.1.0"

__all__ = [
    "Coupling", "FoldsimError", "Mechanism", "ModelError", "Schedule", "Tolerances",
    "build_mechanism", "check", "face_poses", "fold_angles", "fold_schedule", "load",
    "loads", "poses_at", "save",
]


def check(mech, **options):
    """Run every check on a mechanism; see `foldsim.report.check`."""
    from .report import check as _check

    return _check(mech, **options)
