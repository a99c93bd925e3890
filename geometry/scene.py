"""The scene: bodies, the torsion frame, positions and the measurement, read strictly from TOML.

Every number is converted to SI once, here (m, kg, kg/m^3, rad, s). Any key the scene format does not
know is refused, so a typo cannot silently change a result. Bad input raises InputError naming the
file, the key (e.g. `body[bob-east].radius`) and the reason. Values must be finite and, in SI, within
the ranges of `quantities.LIMITS` (lengths 1e-12 .. 1e12 m, angles up to 1e6 rad, ...); directions
(`axis`, `rotate.axis`, `frame.axis`) are three plain numbers; a decrement is at most MAX_DECREMENT.

[measurement] may carry `angle_correlation = [[1, r], [r, 1]]`: the correlation coefficients of the
measured equilibrium angles, rows and columns in the order in which `angle`'s keys are written
(symmetric, unit diagonal, |r| <= 1, positive semi-definite). `truepull fit --into` writes it from the
one fit of the whole run; the uncertainty budget (GUM and Monte Carlo) uses it. Absent: independent.

Four methods, each with its own keys (any other key is refused, naming the method it belongs to):
deflection and swing (angle, period, decrement, fiber_q, amplitude, angle_correlation); acceleration
(harmonic m >= 1, acceleration: the amplitude of that harmonic of the turntable's angular acceleration,
optional group: the group whose relative turn makes the signal); servo (torque per position, or voltage
per position with torque_per_volt2 = c, the torque being c V^2). Several methods on one apparatus:
`[[measurement]]` tables (an array of tables), one method each; keys are then named
`measurement[#2].harmonic` and so on.
"""

from __future__ import annotations

import gc
import math
import os
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from truepull.geometry.bodies import Body, BodySpec, build_body
from truepull.geometry.errors import InputError
from truepull.geometry.materials import known_materials, material_key
from truepull.geometry.meshes import load_mesh
from truepull.geometry.placement import Placement
from truepull.geometry.quantities import Measured, check_range, parse_direction, parse_scalar, parse_vector, si_factor

DEFAULT_UNITS = {"length": "m", "mass": "kg", "density": "kg/m^3", "angle": "deg", "time": "s"}
SHAPE_NAMES = ("point", "sphere", "shell", "cylinder", "box", "cone", "ellipsoid", "mesh")
METHODS = ("deflection", "swing", "acceleration", "servo")
# largest logarithmic decrement per period accepted: at 10 the amplitude falls by e**10 (22 000 times)
# in one period, so no period or equilibrium could have been read from such a swing
MAX_DECREMENT = 10.0

TOP_KEYS = ("scene", "units", "frame", "conditions", "body", "position", "measurement")
CONDITIONS_KEYS = ("temperature", "reference_temperature", "fixed_point")
SCENE_KEYS = ("title", "G")
FRAME_KEYS = ("pivot", "axis")
POSITION_KEYS = ("name", "group", "turn", "shift")
MEASUREMENT_KEYS = ("method", "angle", "period", "decrement", "fiber_q", "amplitude", "angle_correlation")
# the keys each method accepts (deflection and swing share theirs; the reduction notes unused ones)
METHOD_KEYS = {"deflection": MEASUREMENT_KEYS, "swing": MEASUREMENT_KEYS,
               "acceleration": ("method", "harmonic", "acceleration", "group"),
               "servo": ("method", "torque", "voltage", "torque_per_volt2")}
# the largest harmonic of the turn an acceleration measurement may name
MAX_HARMONIC = 64
BODY_COMMON_KEYS = ("name", "group", "shape", "at", "axis", "rotate", "density", "material", "mass", "subtract",
                    "density_gradient", "expansion")
ROTATE_KEYS = ("axis", "angle")
# shape -> {scene key: required?}; box `size` and ellipsoid `radii` are 3-vectors
SHAPE_KEYS: dict[str, dict[str, bool]] = {
    "point": {},
    "sphere": {"radius": True},
    "shell": {"radius": True, "inner_radius": True},
    "cylinder": {"radius": True, "length": True, "inner_radius": False},
    "box": {"size": True},
    "cone": {"radius": True, "length": True, "radius_top": False},
    "ellipsoid": {"radii": True},
    "mesh": {"file": True, "file_units": False, "fit_degree": False, "form": False},
}


CODATA_2018_G = (6.67430e-11, 0.00015e-11)
"""G and its standard uncertainty (m^3 kg^-1 s^-2), CODATA 2018, as scipy.constants holds it; written
here because importing scipy.constants costs about 0.3 s of start-up (tested equal to scipy's)."""


def _default_G() -> Measured:
    return Measured(*CODATA_2018_G)


@dataclass(frozen=True, eq=False)
class Frame:
    """The torsion (fiber) axis: the line through `pivot` (3,) m along the unit vector `axis` (3,);
    `pivot_u` the pivot's stated standard uncertainties per component (m, None where none is stated)."""

    pivot: np.ndarray
    axis: np.ndarray
    pivot_u: tuple = (None, None, None)

    def __post_init__(self):
        p = np.array([float(c) for c in self.pivot], dtype=float)
        a = np.array([float(c) for c in self.axis], dtype=float)
        n = np.linalg.norm(a)
        if not n > 0:
            raise ValueError("frame axis must not be zero")
        a = a / n
        p.setflags(write=False)
        a.setflags(write=False)
        object.__setattr__(self, "pivot", p)
        object.__setattr__(self, "axis", a)

    def turn(self, angle: float) -> Placement:
        """A right-handed turn by `angle` (rad) about the frame axis through the pivot."""
        return Placement.turn_about(self.pivot, self.axis, angle)


@dataclass(frozen=True)
class Position:
    """A state of the apparatus: group `group` turned by `turn` (rad) about the frame axis, then
    shifted by `shift` (m)."""

    name: str
    group: str
    turn: Measured = Measured(0.0)
    shift: tuple[Measured, Measured, Measured] = (Measured(0.0), Measured(0.0), Measured(0.0))

    def placement(self, frame: Frame) -> Placement:
        return frame.turn(self.turn.value).then(Placement.shift([s.value for s in self.shift]))


@dataclass(frozen=True, eq=False)
class Measurement:
    """What was measured. `angle`: position name -> pendulum equilibrium angle (rad).
    `period` (s): deflection -> one Measured (the free period at the first position in `angle`);
    swing -> position name -> Measured. `decrement`: logarithmic decrement per period or None.
    `extra`: optional keys also accepted: "fiber_q" (Measured, dimensionless quality factor of the
    fiber), "amplitude" (Measured rad, or position name -> Measured rad: swing amplitude) and
    "angle_correlation" (tuple of tuples: the correlation coefficients r_ij of the measured angles, in
    the order of `angle`'s keys as written; symmetric, ones on the diagonal, positive semi-definite;
    written by `truepull fit --into` from the one fit of the whole run, used by the budget's GUM and
    Monte Carlo). In the file: angle_correlation = [[1, r], [r, 1]]."""

    method: str
    angle: dict[str, Measured]
    period: Measured | dict[str, Measured] | None
    decrement: Measured | None = None
    extra: dict = field(default_factory=dict)
    where: str = "measurement"

    @property
    def positions(self) -> tuple[str, ...]:
        """The measured positions in the order written: deflection the angles', swing the periods',
        servo the torques' (or voltages'); none for acceleration (the scene as drawn, turning)."""
        if self.method == "deflection":
            return tuple(self.angle)
        if self.method == "swing":
            return tuple(self.period)
        if self.method == "servo":
            return tuple(self.extra.get("torque") or self.extra.get("voltage") or ())
        return ()


@dataclass(frozen=True, eq=False)
class Scene:
    """A loaded scene, all in SI. Units record what the file used (for display)."""

    title: str
    G: Measured
    frame: Frame
    bodies: tuple[Body, ...]
    positions: tuple[Position, ...] = ()
    measurement: Measurement | None = None
    path: str | None = None
    measurements: tuple[Measurement, ...] = ()
    """Every measurement of the scene in file order (one [measurement] or several [[measurement]]);
    `measurement` is the first (or the one chosen with `with_measurement`)."""
    length_unit: str = "m"
    length_factor: float = 1.0
    angle_unit: str = "deg"
    angle_factor: float = math.pi / 180.0
    mass_unit: str = "kg"
    density_unit: str = "kg/m^3"
    time_unit: str = "s"
    base_dir: str | None = None
    position: str | None = None

    def groups(self) -> tuple[str, ...]:
        """Group names in the order they first appear in the file."""
        return tuple(dict.fromkeys(b.group for b in self.bodies))

    def group(self, name: str) -> tuple[Body, ...]:
        return tuple(b for b in self.bodies if b.group == name)

    def body(self, name: str) -> Body:
        for b in self.bodies:
            if b.name == name:
                return b
        raise KeyError(f"no body named '{name}'")

    def with_body(self, name: str, new_body: Body) -> "Scene":
        """A copy with the body called `name` replaced by `new_body`."""
        self.body(name)
        return replace(self, bodies=tuple(new_body if b.name == name else b for b in self.bodies))

    def with_bodies(self, bodies) -> "Scene":
        return replace(self, bodies=tuple(bodies))

    def with_measurement(self, method: str) -> "Scene":
        """The scene whose `measurement` is the one of this method (InputError naming the choices
        when the scene has none)."""
        for m in self.measurements or ((self.measurement,) if self.measurement is not None else ()):
            if m.method == method:
                return replace(self, measurement=m)
        known = ", ".join(m.method for m in self.measurements) or "none"
        raise InputError(self.path, "--method", f"the scene has no measurement by method '{method}' "
                         f"(its measurements: {known})")

    def get_position(self, name: str) -> Position:
        for p in self.positions:
            if p.name == name:
                return p
        known = ", ".join(p.name for p in self.positions) or "none"
        raise InputError(self.path, "position", f"no position named '{name}' (positions: {known})")

    def at_position(self, position=None) -> "Scene":
        """The scene with a position applied: its group turned by `turn` about the frame axis through
        the pivot, then shifted by `shift`. None returns the scene as drawn."""
        if position is None:
            return self
        if isinstance(position, str):
            position = self.get_position(position)
        move = position.placement(self.frame)
        bodies = tuple(b.moved(move) if b.group == position.group else b for b in self.bodies)
        return replace(self, bodies=bodies, position=position.name)


# ------------------------------------------------------------------------------------------
# loading
# ------------------------------------------------------------------------------------------

class _Reader:
    """Shared state while reading one scene file."""

    def __init__(self, file: str, base_dir: str):
        self.file = file
        self.base_dir = base_dir
        self.units = dict(DEFAULT_UNITS)
        self.fixed_units = {"gravitational_constant": "m^3/(kg*s^2)", "dimensionless": "",
                            "angular_acceleration": "rad/s^2", "torque": "N*m", "voltage": "V",
                            "torque_per_volt2": "N*m/V^2", "expansion": "1/K"}
        self.conditions = {"temperature": None, "reference_temperature": 20.0, "fixed_point": (0.0, 0.0, 0.0)}

    def fail(self, key, reason):
        raise InputError(self.file, key, reason)

    def table(self, raw, key) -> dict:
        if not isinstance(raw, dict):
            self.fail(key, f"expected a table, got {_type_name(raw)}")
        return raw

    def check_keys(self, table: dict, allowed, where: str, what: str):
        for k in table:
            if k not in allowed:
                self.fail(f"{where}.{k}" if where else k,
                          f"unknown key '{k}' in {what} (allowed: {', '.join(allowed)})")

    def string(self, raw, key, allow_empty=False) -> str:
        if not isinstance(raw, str):
            self.fail(key, f"expected a string, got {_type_name(raw)}")
        if not allow_empty and not raw.strip():
            self.fail(key, "must not be empty")
        return raw

    def scalar(self, raw, kind, key, **kw) -> Measured:
        unit = self.units[kind] if kind in self.units else self.fixed_units[kind]
        return parse_scalar(raw, kind, unit, self.file, key, **kw)

    def vector(self, raw, kind, key, nonzero=False) -> tuple[Measured, ...]:
        unit = self.units[kind] if kind in self.units else self.fixed_units[kind]
        return parse_vector(raw, kind, unit, self.file, key, 3, nonzero=nonzero)

    def direction(self, raw, key) -> tuple[float, float, float]:
        """A unit vector from three plain numbers (a direction takes no unit and no '+-': the
        uncertainty of a tilt is stated as rotate = { axis = [...], angle = "0 +- u deg" })."""
        return parse_direction(raw, self.file, key)


def _type_name(raw) -> str:
    return {dict: "a table", list: "a list", str: "a string", bool: "true/false", int: "a number",
            float: "a number"}.get(type(raw), type(raw).__name__)


def load_scene(path) -> Scene:
    """Read and validate a scene file (TOML). Mesh files are found relative to it."""
    p = Path(path)
    if not p.exists():
        raise InputError(str(path), None, "scene file not found")
    if not p.is_file():
        raise InputError(str(path), None, "not a file")
    try:
        text = p.read_bytes().decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(str(path), None, "not a text (UTF-8) file") from None
    except OSError as exc:
        raise InputError(str(path), None, f"cannot read the file ({exc.strerror})") from None
    return load_scene_text(text, str(path), str(p.resolve().parent))


def load_scene_text(text: str, path_for_messages: str = "-", base_dir: str | None = None) -> Scene:
    """Read and validate a scene from TOML text; `base_dir` is where relative mesh paths start.
    The cyclic garbage collector is paused meanwhile (reading makes many objects and no cycles; on
    10 000 bodies its passes took a fifth of the time)."""
    enabled = gc.isenabled()
    gc.disable()
    try:
        return _load_scene_text(text, path_for_messages, base_dir)
    finally:
        if enabled:
            gc.enable()


def _load_scene_text(text: str, path_for_messages: str, base_dir: str | None) -> Scene:
    base_dir = base_dir if base_dir is not None else os.getcwd()
    r = _Reader(path_for_messages, base_dir)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        r.fail(None, f"not valid TOML: {exc}")
    except RecursionError:
        r.fail(None, "not a usable scene: tables or lists are nested too deeply")
    r.check_keys(data, TOP_KEYS, "", "the scene file")

    _read_units(r, data.get("units", {}))
    title, G = _read_scene_section(r, data.get("scene", {}))
    frame = _read_frame(r, data.get("frame", {}))
    r.conditions = _read_conditions(r, data.get("conditions", {}), frame)

    raw_bodies = data.get("body")
    if raw_bodies is None:
        r.fail("body", "the scene has no [[body]] tables")
    if not isinstance(raw_bodies, list):
        r.fail("body", "write bodies as [[body]] tables (an array of tables)")
    if not raw_bodies:
        r.fail("body", "the scene has no bodies")
    bodies = []
    for spec in read_body_specs(r, raw_bodies):
        body = build_body(spec)
        if body.has_gradient:
            _check_density_stays_positive(r, body)
        bodies.append(body)
    groups = tuple(dict.fromkeys(b.group for b in bodies))

    positions = _read_positions(r, data.get("position", []), groups)
    measurements = _read_measurements(r, data["measurement"], positions, groups) if "measurement" in data else ()

    return Scene(
        title=title, G=G, frame=frame, bodies=tuple(bodies), positions=positions,
        measurement=measurements[0] if measurements else None, measurements=measurements,
        path=path_for_messages, length_unit=r.units["length"],
        length_factor=si_factor(r.units["length"], "length", r.file, "units.length"),
        angle_unit=r.units["angle"], angle_factor=si_factor(r.units["angle"], "angle", r.file, "units.angle"),
        mass_unit=r.units["mass"], density_unit=r.units["density"], time_unit=r.units["time"], base_dir=base_dir,
    )


def read_body_specs(r: _Reader, raw_bodies: list):
    """The [[body]] tables read and checked, one spec at a time in file order (a generator, so that
    the caller builds each body before the next is read and the first problem in the file is the one
    reported); a duplicate name is refused."""
    seen = set()
    for i, raw in enumerate(raw_bodies):
        spec = _read_body(r, raw, i)
        if spec.name in seen:
            r.fail(f"body[{spec.name}].name", f"duplicate body name '{spec.name}'")
        seen.add(spec.name)
        yield spec


def _read_units(r: _Reader, raw):
    t = r.table(raw, "units")
    r.check_keys(t, tuple(DEFAULT_UNITS), "units", "[units]")
    for kind, value in t.items():
        unit = r.string(value, f"units.{kind}")
        si_factor(unit, kind, r.file, f"units.{kind}")  # checks the unit exists and has the right dimension
        r.units[kind] = unit.strip()


def _read_scene_section(r: _Reader, raw):
    t = r.table(raw, "scene")
    r.check_keys(t, SCENE_KEYS, "scene", "[scene]")
    title = r.string(t["title"], "scene.title", allow_empty=True) if "title" in t else ""
    G = r.scalar(t["G"], "gravitational_constant", "scene.G", positive=True) if "G" in t else _default_G()
    return title, G


def _read_frame(r: _Reader, raw) -> Frame:
    t = r.table(raw, "frame")
    r.check_keys(t, FRAME_KEYS, "frame", "[frame]")
    pivot = r.vector(t["pivot"], "length", "frame.pivot") if "pivot" in t else (Measured(0.0),) * 3
    axis = r.direction(t["axis"], "frame.axis") if "axis" in t else (0.0, 0.0, 1.0)
    return Frame(np.array([float(c) for c in pivot]), np.array(axis), tuple(c.u or None for c in pivot))


def _read_body(r: _Reader, raw, index: int) -> BodySpec:
    t = r.table(raw, f"body[#{index + 1}]")
    if "name" not in t:
        r.fail(f"body[#{index + 1}].name", "every body needs a name")
    name = r.string(t["name"], f"body[#{index + 1}].name").strip()
    where = f"body[{name}]"

    if "shape" not in t:
        r.fail(f"{where}.shape", f"missing shape (one of: {', '.join(SHAPE_NAMES)})")
    kind = r.string(t["shape"], f"{where}.shape").strip().lower()
    if kind not in SHAPE_NAMES:
        r.fail(f"{where}.shape", f"unknown shape '{t['shape']}' (one of: {', '.join(SHAPE_NAMES)})")
    shape_keys = SHAPE_KEYS[kind]
    allowed = BODY_COMMON_KEYS + tuple(shape_keys)
    for k in t:
        if k not in allowed:
            other = [s for s, keys in SHAPE_KEYS.items() if k in keys]
            hint = f"; '{k}' belongs to {', '.join(other)} bodies" if other else ""
            r.fail(f"{where}.{k}", f"unknown key '{k}' for a {kind} body{hint} (allowed: {', '.join(allowed)})")

    if "group" not in t:
        r.fail(f"{where}.group", "every body needs a group (e.g. pendulum or attractor)")
    group = r.string(t["group"], f"{where}.group").strip()

    at = r.vector(t["at"], "length", f"{where}.at") if "at" in t else (Measured(0.0),) * 3
    axis = r.direction(t["axis"], f"{where}.axis") if "axis" in t else None
    rotate_axis, rotate_angle = None, Measured(0.0)
    if "rotate" in t:
        rt = r.table(t["rotate"], f"{where}.rotate")
        r.check_keys(rt, ROTATE_KEYS, f"{where}.rotate", "rotate")
        for k in ROTATE_KEYS:
            if k not in rt:
                r.fail(f"{where}.rotate.{k}", f"rotate needs both axis and angle (missing {k})")
        rotate_axis = r.direction(rt["axis"], f"{where}.rotate.axis")
        rotate_angle = r.scalar(rt["angle"], "angle", f"{where}.rotate.angle")

    subtract = False
    if "subtract" in t:
        if not isinstance(t["subtract"], bool):
            r.fail(f"{where}.subtract", "expected true or false")
        subtract = t["subtract"]

    size, mesh, file, file_units = _read_size(r, t, kind, where)
    density, material, mass = _read_matter(r, t, kind, where)
    gradient = _read_gradient(r, t, kind, where)
    thermal = _read_thermal(r, t, material, where)

    return BodySpec(density_gradient=gradient, **thermal, name=name, group=group, shape_kind=kind, size=size, at=tuple(at), axis=axis,
                    rotate_axis=rotate_axis, rotate_angle=rotate_angle, density=density, material=material,
                    mass=mass, subtract=subtract, mesh=mesh, file=file, file_units=file_units,
                    scene_file=r.file)


def _measured_as(r: _Reader, t: dict, mesh_path, where: str) -> str:
    """A mesh body's optional `form`: what a measured-form CSV was measured as, "sphere" (default) or
    "cylinder" (geometry/measured_form.py, geometry/measured_cylinder.py)."""
    if "form" not in t:
        return "sphere"
    v = t["form"]
    if v not in ("sphere", "cylinder"):
        r.fail(f"{where}.form", f"expected \"sphere\" or \"cylinder\", got {v!r}")
    if mesh_path.suffix.lower() != ".csv":
        r.fail(f"{where}.form", "a measured form applies to a .csv file of measured points only")
    return v


def _fit_degree(r: _Reader, t: dict, mesh_path, where: str, form: str = "sphere"):
    """A mesh body's optional `fit_degree` (measured-form CSV only; geometry/measured_form.py), or None;
    for a measured cylinder a whole number or a pair [M, K] (geometry/measured_cylinder.py)."""
    from truepull.geometry import measured_cylinder
    from truepull.geometry.measured_form import MAX_DEGREE

    if "fit_degree" not in t:
        return None
    v = t["fit_degree"]
    top = measured_cylinder.MAX_DEGREE if form == "cylinder" else MAX_DEGREE

    def whole(x):
        return not isinstance(x, bool) and isinstance(x, int) and 0 <= x <= top

    if form == "cylinder":
        if not (whole(v) or (isinstance(v, list) and len(v) == 2 and all(whole(x) for x in v))):
            r.fail(f"{where}.fit_degree", f"expected a whole number or a pair [order in phi, degree in z], each "
                                          f"from 0 to {top}, got {v!r}")
    elif not whole(v):
        r.fail(f"{where}.fit_degree", f"expected a whole number from 0 to {top}, got {v!r}")
    if mesh_path.suffix.lower() != ".csv":
        r.fail(f"{where}.fit_degree", "a fit degree applies to a measured form (a .csv file) only")
    return tuple(v) if isinstance(v, list) else v


def _read_size(r: _Reader, t: dict, kind: str, where: str):
    """Size keys of the shape -> (size dict of Measured, mesh, file, file_units)."""
    spec = SHAPE_KEYS[kind]
    for k, required in spec.items():
        if required and k not in t:
            r.fail(f"{where}.{k}", f"a {kind} needs '{k}'")
    size: dict[str, Measured] = {}
    mesh = file = file_units = None
    if kind == "mesh":
        file = r.string(t["file"], f"{where}.file")
        file_units = r.string(t["file_units"], f"{where}.file_units").strip() if "file_units" in t \
            else r.units["length"]
        si_factor(file_units, "length", r.file, f"{where}.file_units")
        mesh_path = Path(file)
        if not mesh_path.is_absolute():
            mesh_path = Path(r.base_dir) / mesh_path
        form = _measured_as(r, t, mesh_path, where)
        degree = _fit_degree(r, t, mesh_path, where, form)
        mesh = load_mesh(mesh_path, file_units, file=r.file, key=f"{where}.file", fit_degree=degree, form=form)
        return size, mesh, file, file_units
    if kind == "box":
        v = r.vector(t["size"], "length", f"{where}.size")
        for i, (c, m) in enumerate(zip("xyz", v)):
            if not m.value > 0:
                r.fail(f"{where}.size", f"every edge must be greater than zero (size.{c} = {m.value:g} m)")
            check_range(m.value, "length", r.file, f"{where}.size[{i}]", t["size"][i])
            size[f"size.{c}"] = m
        return size, mesh, file, file_units
    if kind == "ellipsoid":
        v = r.vector(t["radii"], "length", f"{where}.radii")
        for i, (c, m) in enumerate(zip("abc", v)):
            if not m.value > 0:
                r.fail(f"{where}.radii", f"every semi-axis must be greater than zero (radii.{c} = {m.value:g} m)")
            check_range(m.value, "length", r.file, f"{where}.radii[{i}]", t["radii"][i])
            size[f"radii.{c}"] = m
        return size, mesh, file, file_units
    for k in spec:
        if k in t:
            positive = k in ("radius", "length")
            size[k] = r.scalar(t[k], "length", f"{where}.{k}", positive=positive, nonnegative=not positive)
            if not positive:  # a positive value's range, the smallest size too, was checked just now
                check_range(size[k].value, "length", r.file, f"{where}.{k}", t[k])
    if "inner_radius" in size and size["inner_radius"].value >= size["radius"].value:
        what = "shell" if kind == "shell" else "tube"
        r.fail(f"{where}.inner_radius", f"inner_radius must be smaller than radius (an inverted {what})")
    return size, mesh, file, file_units


def _read_matter(r: _Reader, t: dict, kind: str, where: str):
    """-> (density, material, mass): exactly one of them is set."""
    given = [k for k in ("density", "material", "mass") if k in t]
    if kind == "point":
        if given != ["mass"]:
            r.fail(f"{where}.{given[0] if given and given[0] != 'mass' else 'mass'}",
                   "a point body has no volume: state its mass (and neither density nor material)")
    if len(given) == 0:
        r.fail(f"{where}.density", "state exactly one of density, material or mass (none given)")
    if len(given) > 1:
        r.fail(f"{where}.{given[1]}", f"state exactly one of density, material or mass (got {' and '.join(given)})")
    density = material = mass = None
    if "density" in t:
        density = r.scalar(t["density"], "density", f"{where}.density")
        if density.value == 0:
            r.fail(f"{where}.density", "must not be zero")
    elif "material" in t:
        name = r.string(t["material"], f"{where}.material")
        key = material_key(name)
        if key is None:
            common = ["tungsten", "tungsten-alloy", "lead", "brass", "copper", "stainless-steel", "steel",
                      "aluminium", "titanium", "glass"]
            r.fail(f"{where}.material", f"unknown material '{name}' (known include: {', '.join(common)}; "
                                        f"{len(known_materials())} in all; or give density)")
        material = key
    else:
        mass = r.scalar(t["mass"], "mass", f"{where}.mass")
        if not mass.value > 0:
            r.fail(f"{where}.mass", "mass must be greater than zero (for a hole use subtract = true)")
    return density, material, mass


def _check_density_stays_positive(r: _Reader, body) -> None:
    """Refuse a density gradient that takes the density through zero inside the body: the lowest
    density is |rho0| - |g| (h(-g/|g|) + (g/|g|) . at), h the body's support function (m)."""
    from truepull.geometry.support import support

    sign = -1.0 if body.density < 0 else 1.0
    g = sign * (body.placement.rotation @ body.gradient)
    size = float(np.linalg.norm(g))
    n = g / size
    reach = float(support(body, -n)[0] + n @ body.placement.translation)
    lowest = abs(body.density) - size * reach
    if lowest < 0:
        r.fail(f"body[{body.name}].density_gradient",
               f"takes the density below zero inside the body ({lowest:.4g} kg/m^3 at its far side, "
               f"{abs(body.density):.6g} kg/m^3 at its reference point): a linear density must stay positive")


def _read_gradient(r: _Reader, t: dict, kind: str, where: str):
    """density_gradient = [gx, gy, gz] in units.density per units.length (kg/m^4 in SI), or None."""
    if "density_gradient" not in t:
        return None
    key = f"{where}.density_gradient"
    if kind == "point":
        r.fail(key, "a point body has no volume, so no density to vary")
    unit = f"({r.units['density']})/({r.units['length']})"
    return tuple(parse_vector(t["density_gradient"], "density_gradient", unit, r.file, key))


def read_temperature(raw, file, key) -> Measured:
    """A temperature in degC: a number, or "21.3 +- 0.1 degC" (also "K", converted; u unchanged)."""
    from truepull.geometry.quantities import _read_text

    if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
        raise InputError(file, key, "expected a temperature such as \"21.3 +- 0.1 degC\"")
    if isinstance(raw, str):
        value, u, unit = _read_text(raw, file, key)
    else:
        value, u, unit = float(raw), None, ""
    unit = unit.strip()
    if unit in ("K", "kelvin"):
        value -= 273.15
    elif unit not in ("", "degC", "°C", "C", "celsius"):
        raise InputError(file, key, f"unknown temperature unit '{unit}' (use degC or K)")
    if not (math.isfinite(value) and -273.15 <= value <= 1e4) or (u is not None and not (0 <= u < 1e4)):
        raise InputError(file, key, f"not a usable temperature: {raw!r}")
    return Measured(value, u)


def _read_conditions(r: _Reader, raw, frame) -> dict:
    """[conditions]: temperature (degC, +- allowed), reference_temperature (degC, default 20: the
    temperature the scene's sizes and the material table refer to), fixed_point (units.length; the
    point that stays put as parts expand; default the frame's pivot)."""
    t = r.table(raw, "conditions")
    r.check_keys(t, CONDITIONS_KEYS, "conditions", "[conditions]")
    out = {"temperature": None, "reference_temperature": 20.0, "fixed_point": tuple(float(c) for c in frame.pivot)}
    if "temperature" in t:
        out["temperature"] = read_temperature(t["temperature"], r.file, "conditions.temperature")
    if "reference_temperature" in t:
        out["reference_temperature"] = read_temperature(t["reference_temperature"], r.file,
                                                        "conditions.reference_temperature").value
    if "fixed_point" in t:
        out["fixed_point"] = tuple(c.value for c in r.vector(t["fixed_point"], "length", "conditions.fixed_point"))
    return out


def _read_thermal(r: _Reader, t: dict, material, where: str) -> dict:
    """The body's expansion coefficient (its `expansion`, else its material's) and the conditions."""
    c = r.conditions
    expansion = None
    if "expansion" in t:
        expansion = r.scalar(t["expansion"], "expansion", f"{where}.expansion")
    elif material is not None:
        from truepull.geometry.materials import MATERIALS

        m = MATERIALS[material]
        expansion = Measured(m.alpha, m.u_alpha)
    return {"expansion": expansion, "temperature": c["temperature"],
            "reference_temperature": c["reference_temperature"], "fixed_point": c["fixed_point"]}


def _read_positions(r: _Reader, raw, groups) -> tuple[Position, ...]:
    if not isinstance(raw, list):
        r.fail("position", "write positions as [[position]] tables (an array of tables)")
    out = []
    seen = set()
    for i, item in enumerate(raw):
        t = r.table(item, f"position[#{i + 1}]")
        if "name" not in t:
            r.fail(f"position[#{i + 1}].name", "every position needs a name")
        name = r.string(t["name"], f"position[#{i + 1}].name").strip()
        where = f"position[{name}]"
        r.check_keys(t, POSITION_KEYS, where, "a position")
        if name in seen:
            r.fail(f"{where}.name", f"duplicate position name '{name}'")
        seen.add(name)
        if "group" not in t:
            r.fail(f"{where}.group", "a position needs the group it moves")
        group = r.string(t["group"], f"{where}.group").strip()
        if group not in groups:
            r.fail(f"{where}.group", f"no body is in group '{group}' (groups: {', '.join(groups)})")
        turn = r.scalar(t["turn"], "angle", f"{where}.turn") if "turn" in t else Measured(0.0)
        shift = r.vector(t["shift"], "length", f"{where}.shift") if "shift" in t else (Measured(0.0),) * 3
        out.append(Position(name, group, turn, tuple(shift)))
    return tuple(out)


def _per_position(r: _Reader, raw, kind, key, names, positive=False) -> dict[str, Measured]:
    t = r.table(raw, key)
    if not names:
        r.fail(key, "needs [[position]] tables to refer to")
    out = {}
    for k, v in t.items():
        if k not in names:
            r.fail(f"{key}.{k}", f"'{k}' is not a position name (positions: {', '.join(names)})")
        out[k] = r.scalar(v, kind, f"{key}.{k}", positive=positive)
    return out


def _read_measurements(r: _Reader, raw, positions, groups) -> tuple[Measurement, ...]:
    """One [measurement] table, or several [[measurement]] tables with one method each."""
    if isinstance(raw, list):
        if not raw:
            r.fail("measurement", "the [[measurement]] array is empty")
        out = [_read_measurement(r, item, positions, groups, f"measurement[#{i + 1}]") for i, item in enumerate(raw)]
        seen = {}
        for m in out:
            if m.method in seen:
                r.fail(f"{m.where}.method", f"a second measurement by method '{m.method}' (the first is "
                                            f"{seen[m.method]}): give each method once, so `reduce --method` can "
                                            "name it")
            seen[m.method] = m.where
        return tuple(out)
    return (_read_measurement(r, raw, positions, groups, "measurement"),)


def _read_measurement(r: _Reader, raw, positions, groups=(), where: str = "measurement") -> Measurement:
    t = r.table(raw, where)
    names = [p.name for p in positions]
    if "method" not in t:
        r.fail(f"{where}.method", f"missing method (one of: {', '.join(METHODS)})")
    method = r.string(t["method"], f"{where}.method").strip().lower()
    if method not in METHODS:
        r.fail(f"{where}.method", f"unknown method '{t['method']}' (one of: {', '.join(METHODS)})")
    allowed = METHOD_KEYS[method]
    for k in t:
        if k not in allowed:
            owners = [m for m, keys in METHOD_KEYS.items() if k in keys]
            hint = f"; '{k}' belongs to the {' and '.join(dict.fromkeys(owners))} method" if owners else ""
            r.fail(f"{where}.{k}", f"unknown key '{k}' for a {method} measurement{hint} "
                                   f"(allowed: {', '.join(allowed)})")
    if method == "acceleration":
        return _read_acceleration(r, t, groups, where)
    if not names:
        r.fail(where, "a measurement needs [[position]] tables (the states it switches between)")
    if method == "servo":
        return _read_servo(r, t, names, where)
    angle = _per_position(r, t["angle"], "angle", f"{where}.angle", names) if "angle" in t else {}
    if "period" not in t:
        r.fail(f"{where}.period", "missing period")
    if method == "deflection":
        if len(angle) < 2:
            r.fail(f"{where}.angle", "a deflection measurement needs the angle at two or more positions")
        if isinstance(t["period"], dict):
            r.fail(f"{where}.period", "a deflection measurement takes one period (the free period), not a table")
        period = r.scalar(t["period"], "time", f"{where}.period", positive=True)
    else:
        if not isinstance(t["period"], dict):
            r.fail(f"{where}.period", "a swing measurement takes one period per position, "
                                      "e.g. period = { near = ..., far = ... }")
        period = _per_position(r, t["period"], "time", f"{where}.period", names, positive=True)
        if len(period) < 2:
            r.fail(f"{where}.period", "a swing measurement needs periods at two or more positions")
    decrement = None
    if "decrement" in t:
        decrement = r.scalar(t["decrement"], "dimensionless", f"{where}.decrement", nonnegative=True)
        if decrement.value > MAX_DECREMENT:
            r.fail(f"{where}.decrement", f"a logarithmic decrement of {decrement.value:.3g} per period is beyond "
                                         f"{MAX_DECREMENT:g} (the swing would die out within a period: no "
                                         "period could be measured)")
    extra = {}
    if "fiber_q" in t:
        extra["fiber_q"] = r.scalar(t["fiber_q"], "dimensionless", f"{where}.fiber_q", positive=True)
    if "amplitude" in t:
        if isinstance(t["amplitude"], dict):
            extra["amplitude"] = _per_position(r, t["amplitude"], "angle", f"{where}.amplitude", names,
                                               positive=True)
        else:
            extra["amplitude"] = r.scalar(t["amplitude"], "angle", f"{where}.amplitude", positive=True)
    if "angle_correlation" in t:
        extra["angle_correlation"] = _read_correlation(r, t["angle_correlation"], len(angle),
                                                       f"{where}.angle_correlation")
    return Measurement(method, angle, period, decrement, extra, where)


def _read_acceleration(r: _Reader, t: dict, groups, where: str) -> Measurement:
    """harmonic (a whole number m >= 1), acceleration (rad/s^2, > 0), optional group (a known group)."""
    for k in ("harmonic", "acceleration"):
        if k not in t:
            r.fail(f"{where}.{k}", f"an acceleration measurement needs '{k}' (keys: harmonic, acceleration, "
                                   "optional group)")
    m = t["harmonic"]
    if isinstance(m, bool) or not isinstance(m, int):
        r.fail(f"{where}.harmonic", f"expected a whole number (the harmonic m of the turn), got {_type_name(m)}")
    if not 1 <= m <= MAX_HARMONIC:
        r.fail(f"{where}.harmonic", f"the harmonic must be between 1 and {MAX_HARMONIC}, got {m}")
    acc = r.scalar(t["acceleration"], "angular_acceleration", f"{where}.acceleration", positive=True)
    extra = {"harmonic": int(m), "acceleration": acc}
    if "group" in t:
        group = r.string(t["group"], f"{where}.group").strip()
        if groups and group not in groups:
            r.fail(f"{where}.group", f"no body is in group '{group}' (groups: {', '.join(groups)})")
        extra["group"] = group
    return Measurement("acceleration", {}, None, None, extra, where)


def _read_servo(r: _Reader, t: dict, names, where: str) -> Measurement:
    """torque per position (N m), or voltage per position (V) with torque_per_volt2 (N m/V^2)."""
    has_t, has_v, has_c = "torque" in t, "voltage" in t, "torque_per_volt2" in t
    if has_t and (has_v or has_c):
        other = "voltage" if has_v else "torque_per_volt2"
        r.fail(f"{where}.{other}", f"give the servo torque either directly (torque) or as c V^2 (voltage with "
                                   f"torque_per_volt2), not both (got torque and {other})")
    if not has_t and not has_v:
        key = "torque_per_volt2" if has_c else "torque"
        r.fail(f"{where}.torque", "a servo measurement needs torque = { A = ..., B = ... }, or voltage = { ... } "
                                  "with torque_per_volt2" + (" (got torque_per_volt2 alone)" if key != "torque" else ""))
    if has_v and not has_c:
        r.fail(f"{where}.torque_per_volt2", "voltages need torque_per_volt2 = \"c +- u N m/V^2\" (torque = c V^2)")
    extra = {}
    if has_t:
        extra["torque"] = _per_position(r, t["torque"], "torque", f"{where}.torque", names)
        count, key = len(extra["torque"]), "torque"
    else:
        extra["voltage"] = _per_position(r, t["voltage"], "voltage", f"{where}.voltage", names)
        c = r.scalar(t["torque_per_volt2"], "torque_per_volt2", f"{where}.torque_per_volt2")
        if c.value == 0:
            r.fail(f"{where}.torque_per_volt2", "must not be zero")
        extra["torque_per_volt2"] = c
        count, key = len(extra["voltage"]), "voltage"
    if count < 2:
        r.fail(f"{where}.{key}", f"a servo measurement needs the {key} at two or more positions")
    return Measurement("servo", {}, None, None, extra, where)


def _read_correlation(r: _Reader, raw, n: int, key: str = "measurement.angle_correlation"):
    """An n x n correlation matrix (tuple of tuples): numbers in [-1, 1], ones on the diagonal,
    symmetric, positive semi-definite (smallest eigenvalue above -1e-9)."""
    if n < 2:
        r.fail(key, "needs angles at two or more positions")
    if not (isinstance(raw, list) and len(raw) == n and all(isinstance(row, list) and len(row) == n for row in raw)):
        r.fail(key, f"must be a {n} x {n} matrix of numbers (one row per angle, in the order of angle's keys)")
    # whole numbers first (a huge TOML integer does not convert to a float), then the range
    if not all(isinstance(v, (int, float)) and not isinstance(v, bool) and (isinstance(v, int) or math.isfinite(v))
               for row in raw for v in row):
        r.fail(key, "every entry must be a finite number")
    if any(abs(v) > 1 for row in raw for v in row):
        r.fail(key, "correlation coefficients must lie between -1 and 1")
    m = np.array(raw, dtype=float)
    if not np.allclose(np.diag(m), 1.0, rtol=0, atol=1e-12):
        r.fail(key, "the diagonal must be 1")
    if not np.allclose(m, m.T, rtol=0, atol=1e-12):
        r.fail(key, "the matrix must be symmetric (r_ij = r_ji)")
    if np.linalg.eigvalsh(m)[0] < -1e-9:
        r.fail(key, "not positive semi-definite: no set of angles can have these correlations")
    return tuple(tuple(float(v) for v in row) for row in m)
