"""Exports for people outside foldsim: viewers, fabricators and reviewers.

`export` picks the format from the file's suffix:

========================  ===============================================  ==============
suffix                    what                                             module
========================  ===============================================  ==============
``.glb``, ``.gltf``       animated node tree of the hinges (glTF 2.0)      `gltf`
``.svg``                  flat pattern at true scale                       `svg`
``.csv``, ``.json``       fold angles and closure gaps at N drive values   `tables`
``.html``, ``.htm``       self-contained design review report              `report_html`
``.stl``, ``.obj``        posed mesh at one drive value                    `mesh`
========================  ===============================================  ==============

Every file is written atomically: to a temporary file in the same folder, then
renamed over the target, so a failed export leaves any old file whole.
"""

import math
from pathlib import Path

from .. import limits
from ..errors import FoldsimError
from .common import check_t, drive_samples

FORMATS = {
    ".glb": "glb", ".gltf": "gltf", ".svg": "svg", ".csv": "csv", ".json": "json",
    ".html": "html", ".htm": "html", ".stl": "stl", ".obj": "obj",
}


def check_frames(frames, n_faces):
    """Refuse more frames than `limits.MAX_FRAMES`, or frames x panels over `limits.MAX_FRAME_PANELS`."""
    if frames is None:
        return
    if frames > limits.MAX_FRAMES:
        raise FoldsimError(f"--frames: {frames:,} is more than the limit of {limits.MAX_FRAMES:,} frames")
    if frames * n_faces > limits.MAX_FRAME_PANELS:
        raise FoldsimError(f"--frames: {frames:,} frames of {n_faces:,} panels is more than the limit of "
                           f"{limits.MAX_FRAME_PANELS:,} panel poses; ask for at most "
                           f"{limits.MAX_FRAME_PANELS // n_faces:,} frames")


def format_of(path):
    """The export format named by a file's suffix.

    Examples
    --------
    >>> format_of("box.GLB"), format_of("net.svg")
    ('glb', 'svg')
    """
    suffix = Path(path).suffix.lower()
    if suffix not in FORMATS:
        known = ", ".join(sorted(FORMATS))
        raise FoldsimError(f"{path}: cannot tell the format from the suffix {suffix or '(none)'!r}; "
                           f"use one of {known}")
    return FORMATS[suffix]


def export(mech, path, t_from=0.0, t_to=1.0, frames=None, seconds=4.0, t=None, seam_gap=0.0, tabs=0.0,
           labels=True, views=None, clearance=0.0, gap_tol=None, sheet=False, study=None):
    """Write a mechanism to ``path`` in the format its suffix names.

    Parameters
    ----------
    mech : Mechanism
    path : str or Path
    t_from, t_to : float
        Drive range: of the animation (glTF), of the table rows (CSV/JSON), of
        the check and the plot (HTML).
    frames : int, optional
        Drive values sampled: table rows (default 11), gap-plot samples (default
        41), or the least number of glTF keyframes (default: as few as exact
        interpolation needs, see `gltf.keyframe_count`).
    seconds : float
        Length of the glTF animation.
    t : float, optional
        Pose of a mesh export (default 1, closed) or of the glTF nodes' rest
        rotations (default ``t_from``).
    seam_gap, tabs, labels
        Flat pattern options (`svg.build`).
    views, clearance, gap_tol, sheet
        Report options (`report_html.build`).
    study : path, optional
        A net study to add to the HTML report (its front and top nets).

    Returns
    -------
    str
        One line saying what was written.

    Raises
    ------
    FoldsimError
        Bad options or an unwritable file; `ModelError` when the model cannot
        be exported (for example a unit that true scale needs but that is
        unknown).
    """
    kind = format_of(path)
    if study is not None and kind != "html":
        raise FoldsimError("--study: only the .html review report shows a study")
    if study is not None:
        from ..study.table import read_plan

        read_plan(study)  # a bad study fails before any work
    t_from, t_to = check_t(t_from, "--from"), check_t(t_to, "--to-t")
    if t is not None:
        t = check_t(t, "--t")
    if views is not None:
        views = [check_t(v, "--views") for v in views]
    if frames is not None and frames < 2:
        raise FoldsimError(f"--frames: need at least 2, not {frames}")
    check_frames(frames, mech.n_faces)
    for value, name in ((clearance, "--clearance"), (gap_tol, "--gap-tol"), (seam_gap, "--seam-gap"),
                        (tabs, "--tabs")):
        if value is not None and not 0 <= value < math.inf:
            raise FoldsimError(f"{name}: must be a finite non-negative length, not {value}")
    if kind in ("glb", "gltf"):
        from . import gltf

        return gltf.write(mech, path, kind == "glb", t_from=t_from, t_to=t_to, frames=frames, seconds=seconds,
                          t_rest=t)
    if kind == "svg":
        from . import svg

        return svg.write(mech, path, seam_gap=seam_gap, tabs=tabs, labels=labels)
    if kind in ("csv", "json"):
        from . import tables

        return tables.write(mech, path, drive_samples(t_from, t_to, frames or 11), kind == "json")
    if kind == "html":
        from . import report_html

        return report_html.write(mech, path, t_from=t_from, t_to=t_to, frames=frames or 41, views=views,
                                 clearance=clearance, gap_tol=gap_tol, sheet=sheet, study=study)
    from . import mesh

    return mesh.write(mech, path, 1.0 if t is None else t, kind == "obj")


__all__ = ["FORMATS", "export", "format_of"]
