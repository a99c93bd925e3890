"""`truepull compare SCENE`: exact force, torque and stiffness beside the point-mass model."""

from __future__ import annotations


from truepull.cli.options import add_groups, add_position, add_rtol, add_scene
from truepull.cli.output import fmt, format_table, guarded_ratio, not_reached_exit, print_json

HELP = "exact force, torque and stiffness beside the point-mass model"


def add_arguments(parser) -> None:
    add_scene(parser)
    add_groups(parser)
    add_position(parser, default="every position", what="only this [[position]] of the scene")
    add_rtol(parser)
    parser.add_argument("--moments", type=int, default=None, metavar="L",
                        help="also list multipole moments up to degree L")


def _ratio_text(a: float, b: float, error: float) -> str:
    """exact / point, or '-' when both lie within the error estimate of zero (or point is zero)."""
    r = guarded_ratio(a, b, error)
    return "-" if r is None else fmt(r, 12)


def render(comparison) -> str:
    """One position's comparison as text (SI units)."""
    c = comparison
    e, p, err = c.exact, c.point, c.error
    where = f"position {c.position}" if c.position else "scene as drawn"
    lines = [f"{where}: test group '{c.test}', source group '{c.source}', G = {c.G:.6g} m^3 kg^-1 s^-2"]
    rows = []
    for i, axis in enumerate("xyz"):
        rows.append([f"force {axis} (N)", fmt(e.force[i], 12), fmt(p.force[i], 12),
                     _ratio_text(e.force[i], p.force[i], err.force[i]), fmt(err.force[i], 2)])
    for i, axis in enumerate("xyz"):
        rows.append([f"torque {axis} about pivot (N m)", fmt(e.torque[i], 12), fmt(p.torque[i], 12),
                     _ratio_text(e.torque[i], p.torque[i], err.torque[i]), fmt(err.torque[i], 2)])
    rows.append(["torque about axis (N m)", fmt(e.torque_axis, 12), fmt(p.torque_axis, 12),
                 _ratio_text(e.torque_axis, p.torque_axis, err.torque_axis), fmt(err.torque_axis, 2)])
    rows.append(["stiffness about axis (N m/rad)", fmt(e.stiffness_axis, 12), fmt(p.stiffness_axis, 12),
                 _ratio_text(e.stiffness_axis, p.stiffness_axis, err.stiffness_axis), fmt(err.stiffness_axis, 2)])
    rows.append(["energy (J)", fmt(e.energy, 12), fmt(p.energy, 12), _ratio_text(e.energy, p.energy, err.energy),
                 fmt(err.energy, 2)])
    lines.append(format_table(["quantity (unit)", "exact", "point model", "exact/point", "est. error"], rows,
                              align="lrrrr"))
    lines.append("exact/point is '-' where both values lie within the error estimate of zero; a pair's share is "
                 "'-' where the total lies within its error of zero")
    status = "reached" if c.reached else "NOT reached"
    lines.append(f"tolerance {c.rtol:g} {status}; error estimates from refinement (coarse against fine rule)")
    total = c.exact.torque_axis
    prow = []
    for k, pr in enumerate(c.pairs):
        t = pr.torque_axis(c.axis)
        i, j = divmod(k, c.point_pairs.shape[1])
        pt = float(c.point_pairs[i, j, 3:6] @ c.axis)
        # a share of a total that is zero within its error (a torque cancelling by symmetry) says nothing
        share = f"{100 * t / total:.3f} %" if abs(total) > abs(c.error.torque_axis) else "-"
        prow.append([pr.test, pr.source, fmt(t, 10), fmt(pt, 10), share, pr.method])
    lines.append("")
    lines.append(format_table(["test body", "source body", "torque about axis (N m)", "point model (N m)",
                               "share", "method"], prow, align="llrrrl"))
    for n in c.notes:
        lines.append(f"note: {n}")
    return "\n".join(lines)


def run(args) -> int:
    from truepull.api import compare, load_scene

    scene = load_scene(args.scene)
    result = compare(scene, args.test, args.source, args.position, args.rtol)
    results = result.comparisons
    moments = None
    if args.moments is not None:
        from truepull.cli.moments import format_moments, moments_json

        moments = (moments_json if args.json else format_moments)(scene, args.moments, args.test, args.source,
                                                                   args.position)
    if args.json:
        out = result.to_json()
        if moments is not None:
            out["moments"] = moments
        print_json(out)
        return not_reached_exit("compare", all(r.reached for r in results))
    title = f" - {scene.title}" if scene.title else ""
    print(f"scene {scene.path}{title}")
    for r in results:
        print()
        print(render(r))
    if moments is not None:
        print()
        print(moments)
    return not_reached_exit("compare", all(r.reached for r in results))
