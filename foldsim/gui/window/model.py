"""What the desktop app holds about one loaded mechanism, and small helpers for it.

`Model` is read from a mechanism file or made from a shape as `foldsim new` makes
it, with the hinge table and every cut edge's gap over the drive range computed
once. The helpers turn a check report's part types into labels and colours, name
files and word refusals as the command line does.
"""

from pathlib import Path

import numpy as np

from ...analysis.closure import cut_edge_gaps
from ...analysis.collision import panels
from ...design import is_mesh
from ...gearing import fold_schedule
from ...io.mechanism_json import load
from ...kinematics import poses_at
from ...report import hinge_table
from ...tolerances import DEFAULT
from ..view import palette

GAP_GRID = 401
"""Drive values from -1 to 1 at which the gap plot is computed."""



def error_line(exc):
    """The one line the command line prints for a refused file.

    Examples
    --------
    >>> from foldsim.errors import FoldsimError
    >>> error_line(FoldsimError("box.mech.json: faces[2]: repeats a vertex"))
    'foldsim: box.mech.json: faces[2]: repeats a vertex'
    """
    return f"foldsim: {exc}"


def part_labels(part_types, n_faces):
    """A part-type label per face from a report's ``part_types``, or None.

    Accepts the core's list of groups (each a list of faces; labelled "type 1",
    "type 2", ... in order), a list of groups as dicts with ``faces`` (and
    optionally ``name``), a mapping from label to faces, or one label per face.
    Anything else, or groups that leave a face out, gives None.

    Examples
    --------
    >>> part_labels([[0, 2], [1]], 3)
    ['type 1', 'type 2', 'type 1']
    >>> part_labels({"x": [1], "y": [0]}, 2)
    ['y', 'x']
    >>> part_labels([[0]], 2) is None
    True
    """
    if isinstance(part_types, dict):
        groups = list(part_types.items())
    elif isinstance(part_types, list) and part_types and all(isinstance(g, (list, tuple)) for g in part_types):
        groups = [(f"type {k + 1}", g) for k, g in enumerate(part_types)]
    elif isinstance(part_types, list) and part_types and all(isinstance(g, dict) for g in part_types):
        groups = [(g.get("name", f"type {k + 1}"), g.get("faces", [])) for k, g in enumerate(part_types)]
    elif isinstance(part_types, list) and len(part_types) == n_faces:
        return [str(p) for p in part_types]
    else:
        return None
    labels = [None] * n_faces
    for name, faces in groups:
        for f in faces:
            if isinstance(f, (int, np.integer)) and 0 <= f < n_faces:
                labels[f] = str(name)
    return labels if all(label is not None for label in labels) else None


def label_order(labels):
    """The distinct labels in order of first use, each with its colour (0-255 RGB) from `palette.PART_TYPES`.

    Examples
    --------
    >>> label_order(["b", "a", "b"])
    [('b', (119, 170, 221)), ('a', (238, 136, 102))]
    """
    order = {}
    for label in labels:
        order.setdefault(label, len(order))
    n = len(palette.PART_TYPES)
    return [(label, palette.PART_TYPES[k % n]) for label, k in order.items()]


def label_colors(labels):
    """Colours (F, 3) in [0, 1]: one palette colour per distinct label, in order of first use."""
    colour = dict(label_order(labels))
    return np.array([palette.unit_rgb(colour[label]) for label in labels])


def file_stem(path):
    """A model file's name without ``.mech.json`` (or its one suffix).

    Examples
    --------
    >>> file_stem("a/gift-box.mech.json"), file_stem("cube.stl")
    ('gift-box', 'cube')
    """
    name = Path(path).name
    return name[:-len(".mech.json")] if name.endswith(".mech.json") else Path(name).stem

DETAIL_PAIRS = 64
"""Most gear pairs drawn with every facet (`Model.solids`)."""


class Model:
    """Everything the window shows about one loaded mechanism.

    A model comes from a mechanism file (``path``), or is made from a shape
    (`from_shape`: ``recipe`` holds the options of `foldsim new`; ``path`` is
    None until it is saved).

    Attributes
    ----------
    path : Path or None
        The mechanism file, once there is one.
    source : Path or None
        The file the model was read or made from (watched for changes).
    recipe : argparse.Namespace or None
        How a model made from a shape was made.
    build_report : dict or None
        `foldsim new`'s report for a model made from a shape.
    mech, schedule, pan
    table : list of dict
        `foldsim.report.hinge_table`.
    t_grid : (T,) float
        Drive values from -1 to 1 (the last is exactly 1).
    gaps : (T, E) float
        Every cut edge's gap over ``t_grid``.
    labels : list of str or None
        Part type of every face, once the background report has come in.
    """

    def __init__(self, path=None, tol=DEFAULT, mech=None, recipe=None, source=None):
        self.path = Path(path) if path is not None else None
        self.source = Path(source) if source is not None else self.path
        self.recipe = recipe
        self.build_report = None
        self.mech = load(self.path, tol) if mech is None else mech
        self.schedule = fold_schedule(self.mech, tol)
        self.pan = panels(self.mech, tol)
        self.table = hinge_table(self.mech, self.schedule)
        self.t_grid = np.linspace(-1.0, 1.0, GAP_GRID)
        chunks = []
        for k in range(0, GAP_GRID, 64):
            poses = poses_at(self.mech, self.schedule, self.t_grid[k:k + 64])
            chunks.append(cut_edge_gaps(self.mech, poses))
        self.gaps = np.concatenate(chunks)
        self.labels = None
        self._solids = None

    def has_build(self):
        """Whether the file describes its printed parts (a ``build`` object, docs/build.md)."""
        return self.mech.extras.get("build") is not None

    def solids(self, gears=True):
        """The build's solids, each carried by one face (list of `Solid`; made once).

        Thick panels as the build's prisms, then the gear bodies
        (`foldsim.build.gears.build_solids`); ``gears=False`` leaves the gear
        bodies out. Empty for a file without a ``build`` object. Past
        `DETAIL_PAIRS` gear pairs the gear bodies are drawn with fewer facets
        (``coarse``: circumscribed about the fine ones, so never smaller on
        screen); the checks always use the fine ones.
        """
        if self._solids is None:
            from ...build.gears import build_solids
            from ...build.spec import build_spec

            spec = build_spec(self.mech)
            coarse = spec is not None and len(spec.gears) > DETAIL_PAIRS
            self._solids = [] if spec is None else build_solids(self.mech, spec, coarse=coarse)
        return [s for s in self._solids if gears or s.kind == "panel"]

    @classmethod
    def from_shape(cls, recipe, mech=None):
        """A model made from a built-in solid or a mesh file as `foldsim new` makes it.

        Parameters
        ----------
        recipe : argparse.Namespace
            `foldsim.design.shape_args`.
        mech : Mechanism, optional
            Already made from the recipe.
        """
        from ...design import build

        report = None
        if mech is None:
            mech, report = build(recipe)
        shape = Path(recipe.shape)
        model = cls(mech=mech, recipe=recipe, source=shape if is_mesh(shape) or shape.is_file() else None)
        model.build_report = report
        if report is not None:
            model.labels = part_labels(report.get("part_types"), mech.n_faces)
        return model

    def name(self):
        """What the window calls the model."""
        if self.mech.name:
            return self.mech.name
        return self.source.name if self.source is not None else "new model"

    def default_stem(self):
        """A file name (no suffix) for saving or exporting the model."""
        if self.path is not None:
            return file_stem(self.path)
        if self.source is not None:
            return file_stem(self.source)
        return "".join(c if c.isalnum() or c in "-_" else "-" for c in self.name()) or "model"

    def folder(self):
        """The folder of the model's file, or the current one."""
        return self.source.parent if self.source is not None else Path.cwd()
