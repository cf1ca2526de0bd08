"""Posed meshes (.stl, .obj) of the mechanism at one drive value.

Panels have no thickness in the model, so these are surfaces: one triangle fan
per panel (from `triangles.triangulate`), every triangle wound counter-clockwise
seen from the side that ends up outside, so its normal points out. Lengths are
written in millimetres, the unit slicers and most CAD importers assume for
these unit-less formats (converted with `common.unit_scale`).

- STL (binary): all panels in one triangle list.
- OBJ: one object per panel, named ``panel F``, so a CAD tool can pick parts.

A file with a ``build`` object (docs/build.md) is written as its solids instead:
every panel's tapered prism and every gear body (and rod), closed meshes posed
at t, one OBJ object each (``panel F``, ``coupling K gear on hinge H``, ...).
"""

from .. import __version__
from ..analysis.triangles import triangulate
from ..errors import FoldsimError
from ..kinematics import posed_faces
from . import common


def posed_panels(mech, t, schedule=None):
    """Every panel's vertices and triangles at drive value t, in millimetres.

    Parameters
    ----------
    mech : Mechanism
    t : float
    schedule : Schedule, optional

    Returns
    -------
    list of ((k, 3) float, (k - 2, 3) int)
        Vertices in the face's own order, and triangles indexing them.
    """
    scale = common.unit_scale(mech.units, "mm")
    posed = posed_faces(mech, common.poses(mech, [t], schedule)[0])
    out = []
    for f, (flat, pts) in enumerate(zip(mech.flat_faces, posed)):
        try:
            tris = triangulate(flat)
        except ValueError as exc:
            raise FoldsimError(f"faces[{f}]: cannot triangulate the panel: {exc}") from None
        out.append((pts * scale, tris))
    return out


def posed_build_solids(mech, t, schedule=None):
    """Every prism and gear body at drive value t, in millimetres, or None without a ``build`` object.

    Returns
    -------
    list of (str, (n, 3, 3) float)
        Each solid's label and posed triangles.
    """
    from ..build.gears import posed_solid_meshes
    from ..build.spec import build_spec
    from ..gearing import fold_schedule

    spec = build_spec(mech)
    if spec is None:
        return None
    scale = common.unit_scale(mech.units, "mm")
    posed, owner, solids = posed_solid_meshes(mech, spec, schedule or fold_schedule(mech), [t])
    return [(s.label, posed[0, owner == k] * scale) for k, s in enumerate(solids)]


def _meshes(mech, t, schedule):
    """(name, trimesh.Trimesh) of every part."""
    import numpy as np
    import trimesh

    solids = posed_build_solids(mech, t, schedule)
    if solids is not None:
        return [(name, trimesh.Trimesh(vertices=tris.reshape(-1, 3), faces=np.arange(3 * len(tris)).reshape(-1, 3),
                                       process=False)) for name, tris in solids]
    return [(f"panel {f}", trimesh.Trimesh(vertices=v, faces=tri, process=False))
            for f, (v, tri) in enumerate(posed_panels(mech, t, schedule))]


def stl_bytes(mech, t, schedule=None):
    """Binary STL of the posed mechanism (millimetres)."""
    import trimesh

    mesh = trimesh.util.concatenate([m for _, m in _meshes(mech, t, schedule)])
    return mesh.export(file_type="stl")


def obj_text(mech, t, schedule=None):
    """OBJ text of the posed mechanism, one object per panel (millimetres)."""
    import trimesh

    scene = trimesh.Scene()
    for name, mesh in _meshes(mech, t, schedule):
        scene.add_geometry(mesh, geom_name=name, node_name=name)
    header = (f"foldsim {__version__}: {mech.name or 'mechanism'} posed at t = {t:g}; "
              f"millimetres (model units: {mech.units})")
    return scene.export(file_type="obj", header=header, digits=10, include_normals=False)


def write(mech, path, t, as_obj, schedule=None):
    """Write an STL or OBJ of the pose at t atomically.

    Returns
    -------
    str
        One line saying what was written.
    """
    if as_obj:
        common.write_atomic_text(path, obj_text(mech, t, schedule))
    else:
        common.write_atomic_bytes(path, stl_bytes(mech, t, schedule))
    solids = posed_build_solids(mech, t, schedule)
    if solids is not None:
        n_tris = sum(len(tris) for _, tris in solids)
        return f"{len(solids)} solids, thick panels and gear bodies ({n_tris} triangles) posed at t = {t:g}, in mm"
    n_tris = sum(len(p) - 2 for p in mech.flat_faces)
    return f"{mech.n_faces} panels ({n_tris} triangles) posed at t = {t:g}, in mm"


__all__ = ["obj_text", "posed_build_solids", "posed_panels", "stl_bytes", "write"]
