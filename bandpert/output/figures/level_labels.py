"""Symmetry labels (Γ25′, X1, …) written next to the levels at the labelled points of a band plot.

Each conventional label (:mod:`bandpert.symmetry`) is placed just beside its level, on the side
of the point that stays inside the axes; where it would touch another text (a tick label, the
gap annotation, another label) it is nudged up or down a few points, and left out when no
nearby place is free, so the figure never carries overlapping text. Neutral labels
(``W#1(2)``) are left to the JSON and the terminal table.

On request the van Hove type of each level (:mod:`bandpert.physics.van_hove`) is marked on the
level itself: ▲ M0, ▶ M1, ◀ M2, ▼ M3, ◇ a warped saddle, × a crossing; filled where the band's
Hessian decided, open where the degenerate block did; a level whose bands differ carries one
marker per type, side by side. Non-stationary levels (K, U) carry none. The legend beside the
axes names the types drawn.
"""

from __future__ import annotations

from matplotlib.axes import Axes
from matplotlib.legend import Legend
from matplotlib.lines import Line2D
from matplotlib.transforms import offset_copy

from ...physics.van_hove import PointCriticalPoints
from ...symmetry.labels import PointSymmetry
from .. import style

__all__ = ["VAN_HOVE_MARKERS", "draw_critical_points", "draw_level_labels"]

#: Marker, colour and legend text of each van Hove type.
VAN_HOVE_MARKERS: dict[str, tuple[str, str, str]] = {
    "M0": ("^", "#1b7837", "M0 minimum"),
    "M1": (">", "#d95f02", "M1 saddle"),
    "M2": ("<", "#7570b3", "M2 saddle"),
    "M3": ("v", "#b2182b", "M3 maximum"),
    "warped saddle": ("D", "#666666", "saddle without index (warped)"),
    "crossing": ("x", "#333333", "crossing (no critical point)"),
}

#: Characters per line of the axes title once the van Hove legend beside the axes narrows them.
NARROW_TITLE_WIDTH = 56

#: Horizontal spacing (points) of the markers of one level with several types.
MARKER_STEP_PT = 5.5

#: Vertical nudges tried, in points.
NUDGES_PT = (0.0, 5.0, -5.0, 10.0, -10.0)

#: A light backing so that a label stays readable where band lines leave the point.
LABEL_BOX = {"boxstyle": "square,pad=0.08", "facecolor": "white", "edgecolor": "none",
             "alpha": 0.85}


def _overlaps(a, b, pad: float = 1.0) -> bool:
    return (min(a.x1, b.x1) - max(a.x0, b.x0) > -pad
            and min(a.y1, b.y1) - max(a.y0, b.y0) > -pad)


def draw_level_labels(ax: Axes, distance_invA, label_indices, labels, energy_zero_eV: float,
                      points: tuple[PointSymmetry, ...], offset_pt: float = 4.0) -> int:
    """Write the conventional label of each level beside it at the labelled points.

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        The bands panel, already drawn (limits and other texts in place).
    distance_invA, label_indices, labels
        The path (:class:`bandpert.crystal.lattice.KPath` fields).
    energy_zero_eV : float
        The display zero (absolute); the panel shows energies from it.
    points : tuple of PointSymmetry
        Labels per point (:func:`bandpert.symmetry.label_points`).
    offset_pt : float
        Horizontal distance of a label from its point (more when van Hove markers sit there).

    Returns
    -------
    int
        Number of labels drawn.
    """
    if not points:
        return 0
    fig = ax.figure
    renderer = style.renderer_of(fig)
    taken = [b for _, b in style.text_boxes(fig)]
    frame = ax.get_window_extent(renderer)
    lo, hi = ax.get_ylim()
    x_lo, x_hi = distance_invA[0], distance_invA[-1]
    drawn = 0
    for x, p, lv, e in _levels_at_points(distance_invA, label_indices, labels, points,
                                         energy_zero_eV):
        right_side = x < x_lo + 0.9 * (x_hi - x_lo)
        if "#" in lv.label or lv.label == p.note or not lo < e < hi:
            continue
        for nudge in NUDGES_PT:
            dx = offset_pt if right_side else -offset_pt
            t = ax.annotate(lv.label, (x, e), xytext=(dx, nudge),
                            textcoords="offset points",
                            ha="left" if right_side else "right", va="center",
                            fontsize=style.ANNOTATION_SIZE - 1, color="0.2", zorder=7,
                            annotation_clip=False, bbox=LABEL_BOX)
            box = t.get_window_extent(renderer)
            inside = (box.x0 >= frame.x0 and box.x1 <= frame.x1
                      and box.y0 >= frame.y0 and box.y1 <= frame.y1)
            if inside and not any(_overlaps(box, b) for b in taken):
                taken.append(box)
                drawn += 1
                break
            t.remove()
    return drawn


def _levels_at_points(distance_invA, label_indices, labels, points, energy_zero_eV: float):
    """Yield (x, point, level, energy from the zero) for every level at every labelled point
    of the path (a jump "U|K" names two points at one x)."""
    by_name = {p.point: p for p in points}
    for index, name in zip(label_indices, labels, strict=True):
        x = float(distance_invA[index])
        for part in name.split("|"):
            p = by_name.get(part)
            if p is None:
                continue
            for lv in p.levels:
                yield x, p, lv, lv.energy_eV - energy_zero_eV


def _types(level) -> list[str]:
    """Distinct van Hove types of a level's bands, in band order."""
    if level.method == "crossing":
        return ["crossing"]
    out = []
    for b in level.bands:
        t = b.van_hove or ("warped saddle" if b.kind == "saddle" else None)
        if t is not None and t not in out:
            out.append(t)
    return out


def draw_critical_points(ax: Axes, distance_invA, label_indices, labels, energy_zero_eV: float,
                         points: tuple[PointCriticalPoints, ...]) -> Legend | None:
    """Mark the van Hove type of each level at the labelled points (module docstring).

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        The bands panel, limits set.
    distance_invA, label_indices, labels
        The path (:class:`bandpert.crystal.lattice.KPath` fields).
    energy_zero_eV : float
        The display zero (absolute).
    points : tuple of PointCriticalPoints
        :func:`bandpert.physics.van_hove.label_and_classify`.

    Returns
    -------
    matplotlib.legend.Legend or None
        The legend of the types drawn (beside the axes, under any legend already there), or
        None when nothing was drawn.
    """
    lo, hi = ax.get_ylim()
    seen: dict[tuple[str, bool], None] = {}
    for x, _, lv, e in _levels_at_points(distance_invA, label_indices, labels, points,
                                         energy_zero_eV):
        types = _types(lv)
        if not lo <= e <= hi or not types:
            continue
        block = lv.method == "degenerate block"
        for n, t in enumerate(types):
            marker, colour, _ = VAN_HOVE_MARKERS[t]
            dx = (n - (len(types) - 1) / 2) * MARKER_STEP_PT
            shift = offset_copy(ax.transData, fig=ax.figure, x=dx, y=0.0,
                                units="points")
            filled = not block and t != "crossing"
            ax.plot([x], [e], marker=marker, ms=5.5 if t != "crossing" else 5,
                    mec=colour, mfc=colour if filled else "white", mew=1.1,
                    ls="none", transform=shift, zorder=6, clip_on=False)
            seen[(t, block)] = None
    if not seen:
        return None
    handles = []
    for t, (marker, colour, text) in VAN_HOVE_MARKERS.items():
        if any(k[0] == t for k in seen):
            handles.append(Line2D([], [], marker=marker, ls="none", ms=5.5, mec=colour,
                                  mfc=colour if t != "crossing" and (t, False) in seen
                                  else "white", mew=1.1, label=text))
    if any(b for _, b in seen):
        handles.append(Line2D([], [], marker="o", ls="none", ms=5.5, mec="0.3", mfc="white",
                              mew=1.1, label="open: a degenerate level,\nits second-order block"))
    old = ax.get_legend()
    if old is None:
        # the legend narrows the axes: their title (a long material name) wraps to fit them
        ax.title.set_text(style.wrap(ax.get_title().replace("\n", " "), NARROW_TITLE_WIDTH))
        return style.legend_outside(ax, handles, title="van Hove type")
    # one legend beside the axes (the layout makes room for one): the one already there, then
    # a heading line and the van Hove types
    title = old.get_title().get_text() or None
    kept = list(zip(old.legend_handles, (t.get_text() for t in old.get_texts()), strict=True))
    for h, text in kept:
        h.set_label(text)
    heading = Line2D([], [], ls="none", label="van Hove type:")
    old.remove()
    return style.legend_outside(ax, [h for h, _ in kept] + [heading] + handles, title=title)
