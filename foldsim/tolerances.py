"""The one place for numerical tolerances.

Lengths are relative to the model's size (`Mechanism.size`, the diagonal of the
closed shape's bounding box): multiply by it to get a length in model units.
"""

from dataclasses import dataclass


@dataclass(frozen=True)
class Tolerances:
    """Tolerances used across the engine (all positive).

    Attributes
    ----------
    coincident : float
        Two points closer than this (relative) are the same point.
    planar : float
        Largest distance (relative) of a face's vertex from the face's plane.
    area : float
        Smallest face area, relative to the model size squared.
    contact : float
        Overlap (relative) below which two panels touch rather than collide.
    gap : float
        Default closure tolerance (relative): a cut edge meets when its gap is below.
    ratio : float
        Relative tolerance on a product of gear ratios around a cycle.
    t_resolution : float
        Resolution in drive parameter t of collision interval ends.
    """

    coincident: float = 1e-7
    planar: float = 1e-5
    area: float = 1e-10
    contact: float = 1e-7
    gap: float = 1e-4
    ratio: float = 1e-9
    t_resolution: float = 1e-3


DEFAULT = Tolerances()
