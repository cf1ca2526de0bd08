"""glTF 2.0 (.glb, .gltf): the mechanism as an animated node tree for viewers.

Layout of the scene (node names in quotes)::

    "mechanism"                       no transform; extras say units and drive range
      "face R"        (root panel)    mesh of face R in flat coordinates
        "hinge h"     translation = a point of hinge h's line, rotation animated
          "face C"    translation = minus that point; mesh of face C
            "hinge ..."

A face node's frame is the flat frame, so its mesh holds the panel's flat
vertices and the world transform of face C is pose(parent) . T(a) R(theta) T(-a),
which is the engine's pose: a rotation by the fold angle about the hinge line.

Each hinge node's ``rotation`` channel is sampled at keyframes with LINEAR
interpolation, which glTF defines as spherical linear interpolation (slerp) of
the quaternions. Fold angles are linear in the drive t and the axis of each
hinge node is fixed in its parent's frame, so slerp between two keys reproduces
every in-between pose exactly, provided two neighbouring keys are less than
180 degrees of fold apart (their quaternions then have a positive dot product).
`keyframe_count` keeps every step at 90 degrees or less, so a handful of keys
suffices whatever ``frames`` asks for; more keys add nothing but size.

A file with a ``build`` object (docs/build.md) gives each face's mesh its
tapered prism (material ``panel``) and the gear bodies it carries (material
``gear body``), closed triangle lists in the same flat frame.

Units and axes follow the glTF specification: metres, +Y up. Model lengths are
scaled by `common.unit_scale` and the model's Z-up frame is turned to Y-up by
(x, y, z) -> (x, z, -y) (`common.Z_UP_TO_Y_UP`); both are baked into the vertex
data, hinge points and axes, so no node carries a scale.
"""

import base64
import math

import numpy as np

from .. import __version__
from ..analysis.triangles import triangulate
from ..errors import FoldsimError
from ..gearing import fold_schedule
from ..geometry import unit
from . import common

FLOAT, UNSIGNED_SHORT, UNSIGNED_INT = 5126, 5123, 5125
ARRAY_BUFFER, ELEMENT_ARRAY_BUFFER = 34962, 34963
PANEL_COLOUR = [0.93, 0.80, 0.55, 1.0]
ROOT_COLOUR = [0.55, 0.68, 0.85, 1.0]
GEAR_COLOUR = [0.72, 0.45, 0.20, 1.0]


def quaternion(axis, angle):
    """Unit quaternion (x, y, z, w) of a right-handed turn by ``angle`` about ``axis``.

    Parameters
    ----------
    axis : (3,) float
        Unit vector.
    angle : (...) float
        Radians.

    Returns
    -------
    (..., 4) float

    Examples
    --------
    >>> np.round(quaternion(np.array([0.0, 0, 1]), np.pi), 12).tolist()
    [0.0, 0.0, 1.0, 0.0]
    """
    half = 0.5 * np.asarray(angle, float)[..., None]
    return np.concatenate([np.sin(half) * np.asarray(axis, float), np.cos(half)], axis=-1)


def keyframe_count(rates, t_from, t_to, frames=None):
    """Number of animation keys: enough for exact slerp, at least ``frames``.

    Parameters
    ----------
    rates : (H,) float
        Fold angle per unit t of each hinge (radians).
    t_from, t_to : float
    frames : int, optional
        Keys asked for.

    Returns
    -------
    int
        At least 2, and enough that no hinge turns more than 90 degrees between
        neighbouring keys.

    Examples
    --------
    >>> keyframe_count(np.array([np.pi]), -1.0, 1.0)
    5
    """
    travel = float(np.max(np.abs(rates), initial=0.0)) * abs(t_to - t_from)
    needed = max(2, math.ceil(travel / (0.5 * math.pi) - 1e-9) + 1)
    return max(needed, int(frames or 0))


class _Blob:
    """One binary buffer with 4-byte aligned views, and accessors over them."""

    def __init__(self, gltf, pg):
        self.gltf, self.pg = gltf, pg
        self.data = bytearray()

    def add(self, array, component, kind, target=None, bounds=False):
        """Append an array as a new buffer view and accessor; return its index."""
        raw = np.ascontiguousarray(array, dtype="<f4" if component == FLOAT else
                                   "<u2" if component == UNSIGNED_SHORT else "<u4").tobytes()
        offset = len(self.data)
        self.data += raw + b"\0" * (-len(raw) % 4)
        self.gltf.bufferViews.append(self.pg.BufferView(buffer=0, byteOffset=offset,
                                                        byteLength=len(raw), target=target))
        columns = {"SCALAR": 1, "VEC3": 3, "VEC4": 4}[kind]
        flat = np.asarray(array, dtype=float).reshape(-1, columns)
        accessor = self.pg.Accessor(bufferView=len(self.gltf.bufferViews) - 1, componentType=component,
                                    count=len(flat), type=kind)
        if bounds:
            # min/max of the values as stored (float32), as the specification asks.
            stored = flat.astype(np.float32).astype(float)
            accessor.min = stored.min(axis=0).tolist()
            accessor.max = stored.max(axis=0).tolist()
        self.gltf.accessors.append(accessor)
        return len(self.gltf.accessors) - 1


def _build_solids(mech):
    """The prisms and gear bodies of a file with a ``build`` object (flat frame), else None."""
    from ..build.gears import build_solids
    from ..build.spec import build_spec

    spec = build_spec(mech)
    return None if spec is None else build_solids(mech, spec)


def build(mech, t_from=0.0, t_to=1.0, frames=None, seconds=4.0, t_rest=None, schedule=None):
    """The glTF document of a mechanism, its motion from ``t_from`` to ``t_to``.

    Parameters
    ----------
    mech : Mechanism
    t_from, t_to : float
        Drive values at the first and last key of the animation.
    frames : int, optional
        Minimum number of keys (see `keyframe_count`).
    seconds : float
        Length of the animation.
    t_rest : float, optional
        Drive value of the nodes' static rotations (what a viewer shows when it
        does not play the animation); default ``t_from``.
    schedule : Schedule, optional

    Returns
    -------
    pygltflib.GLTF2
        With one buffer (no uri yet) whose bytes are ``gltf.binary_blob()``.
    """
    import pygltflib as pg

    if not seconds > 0 or not math.isfinite(seconds):
        raise FoldsimError(f"--seconds: must be a positive duration, not {seconds}")
    schedule = schedule or fold_schedule(mech)
    t_rest = t_from if t_rest is None else t_rest
    scale = common.unit_scale(mech.units, "m")
    turn = common.Z_UP_TO_Y_UP

    def to_gltf(points):
        return scale * (np.asarray(points, float) @ turn.T)

    gltf = pg.GLTF2(asset=pg.Asset(version="2.0", generator=f"foldsim {__version__}"))
    blob = _Blob(gltf, pg)
    gltf.materials = [
        pg.Material(name="panel", doubleSided=True, pbrMetallicRoughness=pg.PbrMetallicRoughness(
            baseColorFactor=PANEL_COLOUR, metallicFactor=0.0, roughnessFactor=0.8)),
        pg.Material(name="root panel (fixed)", doubleSided=True, pbrMetallicRoughness=pg.PbrMetallicRoughness(
            baseColorFactor=ROOT_COLOUR, metallicFactor=0.0, roughnessFactor=0.8)),
    ]
    normals = common.face_normals(mech.flat_faces) @ turn.T
    solids = _build_solids(mech)
    if solids is not None:
        gltf.materials.append(pg.Material(name="gear body", pbrMetallicRoughness=pg.PbrMetallicRoughness(
            baseColorFactor=GEAR_COLOUR, metallicFactor=0.0, roughnessFactor=0.6)))
        for f in range(mech.n_faces):
            primitives = []
            for kind, material in (("panel", 1 if f == mech.root else 0), ("gear", 2)):
                tris = [s.triangles for s in solids if s.face == f and (s.kind == "panel") == (kind == "panel")]
                if not tris:
                    continue
                tris = np.concatenate(tris)
                flat_normals = unit(np.cross(tris[:, 1] - tris[:, 0], tris[:, 2] - tris[:, 0])) @ turn.T
                position = blob.add(to_gltf(tris.reshape(-1, 3)), FLOAT, "VEC3", ARRAY_BUFFER, bounds=True)
                normal = blob.add(np.repeat(flat_normals, 3, axis=0), FLOAT, "VEC3", ARRAY_BUFFER)
                primitives.append(pg.Primitive(attributes=pg.Attributes(POSITION=position, NORMAL=normal),
                                               material=material))
            gltf.meshes.append(pg.Mesh(name=f"panel {f}", primitives=primitives, extras={"face": f}))
    for f, poly in enumerate(mech.flat_faces if solids is None else ()):
        try:
            tris = triangulate(poly)
        except ValueError as exc:
            raise FoldsimError(f"faces[{f}]: cannot triangulate the panel: {exc}") from None
        k = len(poly)
        component = UNSIGNED_SHORT if k < 65535 else UNSIGNED_INT
        position = blob.add(to_gltf(poly), FLOAT, "VEC3", ARRAY_BUFFER, bounds=True)
        normal = blob.add(np.repeat(normals[f][None], k, axis=0), FLOAT, "VEC3", ARRAY_BUFFER)
        indices = blob.add(tris.reshape(-1), component, "SCALAR", ELEMENT_ARRAY_BUFFER)
        gltf.meshes.append(pg.Mesh(name=f"panel {f}", primitives=[pg.Primitive(
            attributes=pg.Attributes(POSITION=position, NORMAL=normal), indices=indices,
            material=1 if f == mech.root else 0)], extras={"face": f}))

    # Nodes: 0 is "mechanism", then one per face and one per hinge.
    face_node = {mech.root: 1}
    gltf.nodes = [pg.Node(name="mechanism", children=[1]),
                  pg.Node(name=f"face {mech.root}", mesh=mech.root, extras={"face": int(mech.root)})]
    points = to_gltf(mech.axes.mean(axis=1))
    axes = unit((mech.axes[:, 1] - mech.axes[:, 0]) @ turn.T)
    hinge_node = {}
    for level in mech.levels:
        for h in level:
            p, c = int(mech.parent[h]), int(mech.child[h])
            angle = schedule.rates[h] * t_rest
            hinge_node[h] = len(gltf.nodes)
            gltf.nodes[face_node[p]].children.append(hinge_node[h])
            gltf.nodes.append(pg.Node(
                name=f"hinge {h}", translation=points[h].tolist(),
                rotation=quaternion(axes[h], angle).tolist(), children=[hinge_node[h] + 1],
                extras={"hinge": int(h), "parent_face": p, "child_face": c,
                        "axis": axes[h].tolist(), "fold_rate_deg": math.degrees(schedule.rates[h])}))
            face_node[c] = len(gltf.nodes)
            gltf.nodes.append(pg.Node(name=f"face {c}", mesh=c, translation=(-points[h]).tolist(),
                                      extras={"face": c}))
    n_keys = keyframe_count(schedule.rates, t_from, t_to, frames)
    if t_to != t_from:
        t_keys = np.linspace(t_from, t_to, n_keys)
        times = blob.add(np.linspace(0.0, seconds, n_keys), FLOAT, "SCALAR", bounds=True)
        samplers, channels = [], []
        for h in range(mech.n_hinges):
            quats = quaternion(axes[h], schedule.rates[h] * t_keys)
            output = blob.add(quats, FLOAT, "VEC4")
            samplers.append(pg.AnimationSampler(input=times, output=output, interpolation="LINEAR"))
            channels.append(pg.AnimationChannel(sampler=h, target=pg.AnimationChannelTarget(
                node=hinge_node[h], path="rotation")))
        gltf.animations = [pg.Animation(name=f"fold t {t_from:g} to {t_to:g}", samplers=samplers,
                                        channels=channels)]
    gltf.scenes = [pg.Scene(name=mech.name or "mechanism", nodes=[0])]
    gltf.scene = 0
    gltf.nodes[0].extras = {
        "model": mech.name, "source_units": mech.units, "metres_per_unit": scale,
        "up": "+Y (model +Z)", "root_face": int(mech.root), "drive_hinge": int(mech.drive),
        "t_from": float(t_from), "t_to": float(t_to), "seconds": float(seconds),
        "t_rest": float(t_rest), "keyframes": n_keys if t_to != t_from else 0,
        "time_of_t": "seconds * (t - t_from) / (t_to - t_from)",
    }
    gltf.buffers = [pg.Buffer(byteLength=len(blob.data))]
    gltf.set_binary_blob(bytes(blob.data))
    return gltf


def to_bytes(gltf, binary):
    """Serialise a document from `build`: GLB bytes, or .gltf JSON with the buffer inline."""
    data = gltf.binary_blob()
    if binary:
        return b"".join(gltf.save_to_bytes())
    gltf.buffers[0].uri = "data:application/octet-stream;base64," + base64.b64encode(data).decode("ascii")
    try:
        return gltf.gltf_to_json().encode("utf-8")
    finally:
        gltf.buffers[0].uri = None


def write(mech, path, binary, **options):
    """Write a .glb (``binary``) or .gltf file atomically; options as for `build`.

    Returns
    -------
    str
        One line saying what was written.
    """
    gltf = build(mech, **options)
    common.write_atomic_bytes(path, to_bytes(gltf, binary))
    n_keys = gltf.nodes[0].extras["keyframes"]
    return (f"{mech.n_faces} panels, {mech.n_hinges} hinges, "
            f"{n_keys} keyframes over {gltf.nodes[0].extras['seconds']:g} s" if n_keys else
            f"{mech.n_faces} panels, {mech.n_hinges} hinges, static pose")


__all__ = ["build", "keyframe_count", "quaternion", "to_bytes", "write"]
