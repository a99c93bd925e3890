"""Reading triangle-mesh part files (STL, OBJ, PLY, OFF, ... through trimesh) into MeshShape.

A body mesh must be closed (watertight) and consistently wound; one wound inside-out (negative
volume) is turned right way out. Coordinates are scaled from `file_units` to metres; the file's
origin becomes the body's reference point.

Coincident vertices are merged by trimesh in coordinates centred on the mesh's bounding box and
scaled by its size (a power of two), so the merge tolerance is relative to the part and a closed
part far from its file's origin stays closed (trimesh's own merge hashes absolute coordinates times
1e8 into 64-bit integers, which overflows beyond about 9e10 file units).

A file may hold several closed shells: disjoint parts, or a cavity (an inward-wound shell inside an
outward one). Shells that overlap are refused, not joined: their overlap would be counted twice.
The test is the winding number of the whole mesh just inside every shell, which must be 1.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import numpy as np

from truepull.geometry.errors import InputError
from truepull.geometry.quantities import LIMITS, si_factor
from truepull.geometry.shapes import MeshShape


STEP_SUFFIXES = (".step", ".stp")
STEP_TOLERANCES = (1.6e-5, 4e-6)
"""Chord (linear deflection) tolerances of a STEP part's tessellation, relative to each edge's length:
the part is tessellated at both, the finer is the body, the change between them its tessellation
error. A circle of radius R cut into chords of angle theta deviates by the sagitta R theta^2 / 8, so
the volume (and field) error of a tessellated curved surface is proportional to the chord tolerance:
the coarser one's error is about 4 times the finer one's. The GLB interchange (cascadio) stores
float32 vertices, so no tessellation is better than about 1e-7 of the part's size."""


def is_step(path) -> bool:
    return Path(path).suffix.lower() in STEP_SUFFIXES


def _step_mesh(path, tolerance: float, where, key):
    """A STEP file tessellated by OpenCASCADE (cascadio) at the relative chord `tolerance`, in metres."""
    import io

    import trimesh

    try:
        import cascadio
    except ImportError:
        raise InputError(where, key, f"reading STEP ('{Path(path).name}') needs the optional CAD extra: "
                                     "pip install truepull[cad]") from None
    try:
        glb = cascadio.load(Path(path).read_bytes(), file_type="step", tol_linear=tolerance, tol_angular=0.5,
                            tol_relative=True)
        return trimesh.load(io.BytesIO(glb), file_type="glb", force="mesh", process=False)
    except Exception as exc:
        msg = " ".join(str(exc).split())[:200] or type(exc).__name__
        raise InputError(where, key, f"cannot read '{Path(path).name}' as a STEP solid ({msg})") from None


def is_measured(path) -> bool:
    """A CSV file: a measured form (geometry/measured_form.py)."""
    return Path(path).suffix.lower() == ".csv"


def _measured_hull(path, where, key):
    """A measured surface read as a trimesh in the file's units: x, y, z points (e.g. from a
    coordinate-measuring machine) closed as the convex polyhedron through them (meant for convex parts,
    spheres and cylinders; a concave part's hollows would be bridged); directions and radii as the
    polyhedron through their fitted surface (measured_form, degree chosen by the data count)."""
    import trimesh

    from truepull.geometry.measured_form import fitted_shape, read_measured

    points = read_measured(path, 1.0, where, key)
    if points.columns != ("x", "y", "z"):
        shape = fitted_shape(points, None, where, key)
        return trimesh.Trimesh(vertices=np.array(shape.vertices), faces=np.array(shape.faces), process=False)
    return trimesh.convex.convex_hull(points.points)


def _measured_form(path, file_units, file, key, fit_degree, form="sphere"):
    """The fitted measured form of a CSV (a MeasuredMesh in metres), or None for x, y, z points of a sphere
    without `fit_degree` (their convex hull is then read as a mesh). `form` "cylinder": x, y, z points
    fitted as a measured cylinder (measured_cylinder.py)."""
    from truepull.geometry.measured_form import fitted_shape, read_measured

    path = Path(path)
    where = file if file is not None else str(path)
    if not path.is_file():
        raise InputError(where, key, f"mesh file '{path}' not found" if not path.exists()
                         else f"mesh file '{path}' is not a file")
    points = read_measured(path, si_factor(file_units, "length", file, key), where, key)
    if form == "cylinder":
        from truepull.geometry.measured_cylinder import fitted_cylinder

        if points.columns != ("x", "y", "z"):
            raise InputError(where, key, f"'{path.name}': a measured cylinder is read from x, y, z points; found "
                                         f"columns {', '.join(points.columns)}")
        shape = fitted_cylinder(points.points, str(path), fit_degree, where, key)
        _check_extent(np.asarray(shape.vertices), path.name, where, key)
        return shape
    if points.columns == ("x", "y", "z") and fit_degree is None:
        return None
    shape = fitted_shape(points, fit_degree, where, key)
    _check_extent(np.asarray(shape.vertices), path.name, where, key)
    return shape


def _read_trimesh(path, file=None, key=None, tolerance=None):
    """Load a file as one trimesh.Trimesh (scene files are concatenated), refusing what is not a mesh.
    A STEP file is tessellated at the relative chord `tolerance` (default the finer STEP_TOLERANCES)."""
    import trimesh

    path = Path(path)
    where = file if file is not None else str(path)
    if not path.exists():
        raise InputError(where, key, f"mesh file '{path}' not found")
    if not path.is_file():
        raise InputError(where, key, f"mesh file '{path}' is not a file")
    try:
        with warnings.catch_warnings(), np.errstate(all="ignore"):
            warnings.simplefilter("ignore")
            if is_step(path):
                mesh = _step_mesh(path, tolerance or STEP_TOLERANCES[-1], where, key)
            elif is_measured(path):
                mesh = _measured_hull(path, where, key)
            else:
                mesh = trimesh.load(str(path), force="mesh", process=False)
    except InputError:
        raise
    except Exception as exc:  # trimesh raises many types for unreadable files
        msg = " ".join(str(exc).split())[:200] or type(exc).__name__
        raise InputError(where, key, f"cannot read '{path.name}' as a mesh ({msg})") from None
    if not isinstance(mesh, trimesh.Trimesh):
        raise InputError(where, key, f"'{path.name}' holds no triangle mesh (found {type(mesh).__name__})")
    if len(mesh.faces) == 0 or len(mesh.vertices) == 0:
        raise InputError(where, key, f"'{path.name}' is an empty mesh (no triangles)")
    vertices = np.asarray(mesh.vertices, dtype=float)
    if not np.all(np.isfinite(vertices)):
        raise InputError(where, key, f"'{path.name}' has non-finite vertex coordinates")
    return _merged(trimesh, vertices, np.asarray(mesh.faces, dtype=np.int64))


def _merged(trimesh, vertices, faces):
    """trimesh.Trimesh with coincident vertices merged relative to the part's size (see module doc)."""
    low, high = vertices.min(axis=0), vertices.max(axis=0)
    centre = 0.5 * (low + high)
    extent = float(np.max(high - low))
    scale = 2.0 ** np.ceil(np.log2(extent)) if extent > 0 else 1.0
    with warnings.catch_warnings(), np.errstate(all="ignore"):
        warnings.simplefilter("ignore")
        work = trimesh.Trimesh(vertices=(vertices - centre) / scale, faces=faces, process=True)
        return trimesh.Trimesh(vertices=np.asarray(work.vertices) * scale + centre,
                               faces=np.asarray(work.faces), process=False)


def _check_shells(mesh, name, where, key):
    """Refuse a mesh whose closed shells overlap (or hold an inward-wound shell in no other shell):
    just inside each shell the whole mesh's winding number must be 1 (2 where two shells overlap)."""
    import trimesh

    from truepull.geometry.winding import winding_numbers

    labels = trimesh.graph.connected_component_labels(mesh.face_adjacency, node_count=len(mesh.faces))
    if labels.max(initial=0) == 0:
        return
    rng = np.random.default_rng(0)
    triangles = np.asarray(mesh.triangles)
    normals = np.asarray(mesh.face_normals)
    size = float(np.max(np.ptp(mesh.vertices, axis=0)))
    picks = []
    for c in range(labels.max() + 1):
        faces = np.flatnonzero(labels == c)
        picks.append(rng.choice(faces, size=min(len(faces), 400), replace=len(faces) < 400))
    picks = np.concatenate(picks)
    weights = rng.dirichlet(np.ones(3), size=len(picks))
    points = np.einsum("nk,nkj->nj", weights, triangles[picks]) - 1e-7 * size * normals[picks]
    w = winding_numbers(points, triangles)
    if np.any(w > 1.5):
        raise InputError(where, key, f"mesh '{name}' holds closed shells that overlap (the overlap would be "
                                     "counted twice); join them into one closed surface (a boolean union) first")
    if np.any(w < 0.5):
        raise InputError(where, key, f"mesh '{name}' holds a shell wound inside-out that lies in no other shell "
                                     "(it would count as negative mass); fix its face orientation")


def load_mesh(path, file_units: str = "m", file=None, key=None, tolerance=None, fit_degree=None,
              form: str = "sphere") -> MeshShape:
    """Load a closed mesh from `path` with coordinates in `file_units` (a length unit) as a MeshShape
    in metres. `file`/`key` name the scene file and key for error messages. A STEP file carries its
    own units (file_units is ignored) and is tessellated at each of STEP_TOLERANCES: the finest is the
    shape, the one before it its `coarse` (for the tessellation error). A CSV is a measured form
    (measured_form.py): fitted to degree `fit_degree` (None: by the data count) unless it holds x, y, z
    points and no `fit_degree` is given (then their convex hull); with `form` "cylinder" it is fitted as a
    measured cylinder (measured_cylinder.py)."""
    if is_measured(path):
        shape = _measured_form(path, file_units, file, key, fit_degree, form)
        if shape is not None:
            return shape
    if is_step(path) and tolerance is None:
        coarse = load_mesh(path, "m", file, key, STEP_TOLERANCES[0])
        fine = load_mesh(path, "m", file, key, STEP_TOLERANCES[-1])
        return MeshShape(fine.vertices, fine.faces, fine.file, fine.inverted, coarse)
    factor = 1.0 if is_step(path) else si_factor(file_units, "length", file, key)
    where = file if file is not None else str(path)
    mesh = _read_trimesh(path, file, key, tolerance)
    name = Path(path).name
    if not mesh.is_watertight:
        f = np.asarray(mesh.faces)
        collapsed = int(np.count_nonzero((f[:, 0] == f[:, 1]) | (f[:, 1] == f[:, 2]) | (f[:, 0] == f[:, 2])))
        why = (f"; {collapsed} of its triangles collapse to a line or point, as when a part far from its file's "
               "origin loses precision (STL stores about 7 significant digits): move it near its origin"
               if collapsed else "")
        raise InputError(where, key, f"mesh '{name}' is not watertight (it has holes or open edges); "
                                     f"a body must be a closed surface{why}")
    if not mesh.is_winding_consistent:
        raise InputError(where, key, f"mesh '{name}' is not consistently wound (its faces point inconsistently)")
    vertices = np.asarray(mesh.vertices, dtype=float) * factor
    _check_extent(vertices, name, where, key)
    faces = np.asarray(mesh.faces, dtype=np.int64)
    shape = MeshShape(vertices, faces, os.fspath(path))
    if shape.volume() < 0:
        shape = MeshShape(vertices, faces[:, ::-1], os.fspath(path), inverted=True)
    if not shape.volume() > 0:
        raise InputError(where, key, f"mesh '{name}' encloses no volume")
    _check_shells(shape.trimesh(), name, where, key)
    return shape


def _check_extent(vertices, name, where, key):
    """Coordinates (m) and the part's size within quantities.LIMITS["length"] (finite mass properties)."""
    largest, smallest = LIMITS["length"]
    reach = float(np.max(np.abs(vertices)))
    size = float(np.max(np.ptp(vertices, axis=0)))
    if not np.isfinite(reach) or reach > largest:
        raise InputError(where, key, f"mesh '{name}' reaches {reach:.3g} m from its origin after scaling to "
                                     f"metres, beyond the accepted {largest:g} m")
    if size < smallest:
        raise InputError(where, key, f"mesh '{name}' is {size:.3g} m across after scaling to metres, below "
                                     f"the accepted {smallest:g} m")


def mesh_report(path, units: str = "m") -> dict:
    """Facts about a mesh file, for inspection: counts, bounding box, watertightness, winding,
    and (when closed) volume, centroid and inertia about the centroid for density 1, all in SI
    after scaling from `units`. Raises InputError if the file is missing or not a mesh, and for a
    closed part out of the length range or with overlapping shells (its mass properties would be wrong)."""
    factor = 1.0 if is_step(path) else si_factor(units, "length", str(path), "units")
    mesh = _read_trimesh(path)
    v = np.asarray(mesh.vertices, dtype=float) * factor
    report = {
        "file": os.fspath(path),
        "units": units,
        "vertices": int(len(mesh.vertices)),
        "faces": int(len(mesh.faces)),
        "bounding_box": {"min": v.min(axis=0), "max": v.max(axis=0)},
        "extent": v.max(axis=0) - v.min(axis=0),
        "watertight": bool(mesh.is_watertight),
        "winding_consistent": bool(mesh.is_winding_consistent),
        "inside_out": False,
        "volume": None,
        "centroid": None,
        "inertia": None,
        "notes": [],
    }
    if is_step(path):
        coarse = _read_trimesh(path, tolerance=STEP_TOLERANCES[0])
        vf, vc = abs(float(mesh.volume)), abs(float(coarse.volume))
        report["units"] = "m"
        report["tessellation"] = {"chord_tolerances": list(STEP_TOLERANCES), "volumes": [vc, vf],
                                  "change": vf - vc}
        report["notes"].append(f"STEP tessellated at relative chord tolerances {STEP_TOLERANCES[0]:g} and "
                               f"{STEP_TOLERANCES[1]:g}: volume {vc:.9g} -> {vf:.9g} m^3 (change {vf - vc:.3g}, "
                               "the tessellation error); lengths in metres from the file's own units")
    if is_measured(path):
        report["notes"].append("a measured form (CSV): x, y, z points are closed as their convex hull; directions "
                               "and radii are fitted by spherical harmonics to the degree the point count gives and "
                               "tessellated (a scene's fit_degree sets the degree; `truepull check` states the fit)")
    if report["watertight"] and report["winding_consistent"]:
        name = Path(path).name
        _check_extent(v, name, str(path), None)
        shape = MeshShape(v, np.asarray(mesh.faces), os.fspath(path))
        if shape.volume() < 0:
            report["inside_out"] = True
            report["notes"].append("wound inside-out; truepull turns it right way out")
            shape = MeshShape(v, np.asarray(mesh.faces)[:, ::-1], os.fspath(path))
        _check_shells(shape.trimesh(), name, str(path), None)
        report["volume"] = shape.volume()
        report["centroid"] = shape.centroid()
        report["inertia"] = shape.inertia_unit_density()
    else:
        if not report["watertight"]:
            report["notes"].append("not watertight: volume and inertia are undefined; close the surface")
        if not report["winding_consistent"]:
            report["notes"].append("inconsistent winding: fix face orientation")
    return report
