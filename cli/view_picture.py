"""The 3-D picture of a scene: bodies in group colours, the source field on a plane, force and torque.

Drawn in the scene's length unit (coordinates divided by the scene's length factor), so the axes
read in mm when the scene is written in mm. The colour map of |g| is drawn unlit, so its colours
match the colour bar; bodies are lit. Colours are fixed here so that pictures (and tests) can tell
the groups apart: pendulum vermillion, attractor reddish purple, other groups from a short list,
none of them in the blue-green colour map of the field.
"""

from __future__ import annotations

import numpy as np

GROUP_COLOURS = {"pendulum": "#D55E00", "attractor": "#CC79A7"}
OTHER_COLOURS = ("#A8A8A8", "#E69F00", "#F0E442", "#8C564B")
HOLE_COLOUR = "#505050"
FORCE_COLOUR = "#000000"
TORQUE_COLOUR = "#6A3D9A"
FIELD_ARROW_COLOUR = "#303030"
FIELD_CMAP = "GnBu"
BACKGROUND = "white"
ARROWS_PER_SIDE = 15
PLANE_OPACITY = 0.8
"""Slightly see-through, so what lies below the plane (a torque along -z, say) still shows."""
LOG_SCALE_RATIO = 20.0
"""Use a logarithmic colour scale when max |g| / min |g| on the plane exceeds this."""


def group_colours(groups) -> dict[str, str]:
    """A colour (hex) per group name, in the order given."""
    out, spare = {}, iter(OTHER_COLOURS * (1 + len(tuple(groups)) // len(OTHER_COLOURS)))
    for g in groups:
        out[g] = GROUP_COLOURS.get(g) or next(spare)
    return out


def _scaled(surface, factor: float):
    s = surface.copy()
    s.points = np.asarray(s.points) / factor
    return s


def _touches(a, b) -> bool:
    (ca, ra), (cb, rb) = a.bounding_sphere(), b.bounding_sphere()
    return float(np.linalg.norm(ca - cb)) <= ra + rb


def add_bodies(plotter, bodies, surfaces, colours, factor: float) -> None:
    """Bodies in their group colour; holes translucent grey, and bodies that may hold a hole half
    translucent so the hole shows through."""
    holes = [b for b in bodies if b.is_hole]
    for body, surf in zip(bodies, surfaces):
        s = _scaled(surf, factor)
        if body.is_hole:
            plotter.add_mesh(s, color=HOLE_COLOUR, opacity=0.45, smooth_shading=True, split_sharp_edges=True)
            plotter.add_mesh(s.extract_feature_edges(30.0), color="black", line_width=1)
            continue
        hosts_hole = any(h.group == body.group and _touches(h, body) for h in holes)
        plotter.add_mesh(s, color=colours[body.group], opacity=0.5 if hosts_hole else 1.0,
                         smooth_shading=True, split_sharp_edges=True)


TICK_OVERSHOOT = 0.1
"""The axes may reach this fraction of their span past what is drawn, to end on a round tick."""


def nice_ticks(lo: float, hi: float, most: int = 6) -> tuple[float, float, int]:
    """(first, last, count) of round tick values (1, 2, 2.5 or 5 times a power of ten apart, from
    matplotlib's tick locator) for an axis over [lo, hi]: the coarsest such step, with at most
    most + 2 intervals, whose ticks reach past both ends by no more than TICK_OVERSHOOT of the span;
    failing that, the coarsest one's ticks inside [lo, hi]. So the axes hug what is drawn and carry
    only round labels."""
    from matplotlib.ticker import MaxNLocator

    if not hi > lo:
        return float(lo), float(lo), 1
    slack = TICK_OVERSHOOT * (hi - lo)
    steps = []
    for nbins in range(most, most + 3):
        ticks = MaxNLocator(nbins=nbins, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
        step = float(ticks[1] - ticks[0])
        steps.append(step)
        first, last = np.floor(lo / step) * step, np.ceil(hi / step) * step
        if lo - first <= slack and last - hi <= slack:
            return float(first), float(last), int(round((last - first) / step)) + 1
    step = steps[0]
    first, last = np.ceil(lo / step) * step, np.floor(hi / step) * step
    return float(first), float(last), int(round((last - first) / step)) + 1


def add_field(plotter, shown, fp, factor: float) -> dict:
    """The |g| colour map of the plane as clipped along the source bodies (`field_plane.shown_plane`,
    in metres) with a labelled colour bar whose scale spans exactly the values drawn, and arrows
    along g. Returns the colour scale used and which items were drawn."""
    import pyvista as pv

    info = {"log_scale": False, "drawn": []}
    mag = np.asarray(shown.point_data["g_magnitude"]) if shown.n_points else np.zeros(0)
    mag = mag[np.isfinite(mag)]
    if mag.size and shown.n_cells > 0:
        lo, hi = float(mag.min()), float(mag.max())
        log = lo > 0 and hi / lo > LOG_SCALE_RATIO
        info.update(log_scale=bool(log), min=lo, max=hi)
        plotter.add_mesh(_scaled(shown, factor), scalars="g_magnitude", cmap=FIELD_CMAP, log_scale=log,
                         clim=(lo, hi), lighting=False, show_scalar_bar=True, opacity=PLANE_OPACITY,
                         scalar_bar_args={"title": "magnitude of g (m/s^2)", "fmt": "%.1e", "n_labels": 5,
                                          "color": "black", "vertical": True, "position_x": 0.88,
                                          "position_y": 0.10, "height": 0.66, "width": 0.06})
        info["drawn"].append("field")
    n = fp.n
    step = max(1, int(round((n - 1) / (ARROWS_PER_SIDE - 1))))
    idx = np.arange(n)[::step]
    ii, jj = np.meshgrid(idx, idx)
    pick = (jj * n + ii).ravel()
    pick = pick[~fp.masked[pick]]
    if pick.size:
        g = fp.g[pick]
        direction = g / np.maximum(np.linalg.norm(g, axis=1, keepdims=True), 1e-300)
        cloud = pv.PolyData(fp.points[pick] / factor)
        cloud["direction"] = direction
        length = 0.8 * step * fp.spacing / factor
        arrow = pv.Arrow(start=(-0.5, 0.0, 0.0), tip_length=0.35, tip_radius=0.12, shaft_radius=0.04)
        plotter.add_mesh(cloud.glyph(orient="direction", scale=False, factor=length, geom=arrow),
                         color=FIELD_ARROW_COLOUR)
        info["drawn"].append("field arrows")
    return info


def add_arrow(plotter, start, vector, length: float, colour: str, label: str) -> bool:
    """A labelled arrow of display length `length` from `start` along `vector`; nothing when the
    vector is zero. Returns whether it was drawn."""
    import pyvista as pv

    v = np.asarray(vector, float)
    norm = np.linalg.norm(v)
    if not norm > 0:
        return False
    d = v / norm
    plotter.add_mesh(pv.Arrow(start=start, direction=d, scale=length, tip_length=0.25, tip_radius=0.07,
                              shaft_radius=0.025), color=colour)
    plotter.add_point_labels(np.asarray([np.asarray(start) + d * length * 1.05]), [label], font_size=14,
                             text_color=colour, shape="rounded_rect", shape_color="white", shape_opacity=0.75,
                             show_points=False, always_visible=True)
    return True


def zero_within_error(vector, error) -> bool:
    """True when |vector| is no larger than the bound on its error (the error vector's length)."""
    return bool(np.linalg.norm(np.asarray(vector, float)) <= np.linalg.norm(np.asarray(error, float)))


def legend_entries(colours, bodies, drawn) -> list[list[str]]:
    """[label, colour] for each group with a body drawn, holes if any, and each item in `drawn`
    (a list of 'force', 'torque', 'field arrows' names with their labels) — nothing that is not
    in the picture."""
    shown_groups = {b.group for b in bodies if not b.is_hole}
    out = [[f"{g} (group)", col] for g, col in colours.items() if g in shown_groups]
    if any(b.is_hole for b in bodies):
        out.append(["hole / void", HOLE_COLOUR])
    return out + [[label, colour] for label, colour in drawn]


def draw(plotter, scene, bodies, surfaces, fp, shown, comparison, centre, title: str) -> dict:
    """Everything on one plotter; `shown` is the clipped field plane (`field_plane.shown_plane`).
    Returns facts about what was drawn, the legend's entries among them."""
    f = scene.length_factor
    unit = scene.length_unit
    plotter.set_background(BACKGROUND)
    colours = group_colours(dict.fromkeys(b.group for b in bodies))
    add_bodies(plotter, bodies, surfaces, colours, f)
    info = add_field(plotter, shown, fp, f)
    reach = 0.45 * fp.half_size / f
    c = comparison
    items = []
    force, force_err = np.linalg.norm(c.exact.force), np.linalg.norm(c.error.force)
    if zero_within_error(c.exact.force, c.error.force):
        plotter.add_text(f"net force on {c.test}: zero within its error ({force:.1e} N, error {force_err:.1e} N)",
                         position="lower_edge", font_size=10, color=FORCE_COLOUR)
        info["force_zero"] = True
    else:
        info["force_zero"] = False
        if add_arrow(plotter, np.asarray(centre) / f, c.exact.force, reach, FORCE_COLOUR,
                     f"net force {force:.3e} N"):
            items.append([f"net force on {c.test}", FORCE_COLOUR])
    if add_arrow(plotter, np.asarray(scene.frame.pivot) / f, c.exact.torque, 0.8 * reach, TORQUE_COLOUR,
                 f"torque {np.linalg.norm(c.exact.torque):.3e} N m (axis {c.exact.torque_axis:.3e})"):
        items.append(["torque about pivot", TORQUE_COLOUR])
    if "field arrows" in info["drawn"]:
        items.append([f"direction of g ({c.source})", FIELD_ARROW_COLOUR])
    legend = legend_entries(colours, bodies, items)
    plotter.add_legend(legend, bcolor="white", border=True, loc="upper left", size=(0.26, 0.032 * len(legend)),
                       face="rectangle")
    plotter.add_text(title, position="upper_edge", font_size=11, color="black")
    bounds = []
    for k, (lo, hi) in enumerate(np.reshape(plotter.bounds, (3, 2))):
        t0, t1, count = nice_ticks(lo, hi, 6 if k < 2 else 3)  # z: the axis is short on screen
        bounds += [t0, t1]
        info.setdefault("tick_counts", []).append(count)
    nx, ny, nz = info["tick_counts"]
    plotter.show_bounds(bounds=bounds, n_xlabels=nx, n_ylabels=ny, n_zlabels=nz, fmt="%g",
                        xtitle=f"x ({unit})", ytitle=f"y ({unit})", ztitle=f"z ({unit})", color="black",
                        grid=False, location="outer", ticks="outside", font_size=12)
    plotter.add_axes(color="black")
    plotter.view_isometric()
    plotter.camera.zoom(1.1)
    info["colours"] = colours
    info["legend"] = [label for label, _ in legend]
    info["tick_ranges"] = bounds
    return info
