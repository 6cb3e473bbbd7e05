"""Symmetry labels (Γ25′, X1, …) written next to the levels at the labelled points of a band plot.

Each conventional label (:mod:`bandpert.symmetry`) is placed just beside its level, on the side
of the point that stays inside the axes; where it would touch another text (a tick label, the
gap annotation, another label) it is nudged up or down a few points, and left out when no
nearby place is free, so the figure never carries overlapping text. Neutral labels
(``W#1(2)``) are left to the JSON and the terminal table.
"""

from __future__ import annotations

from matplotlib.axes import Axes

from ...symmetry.labels import PointSymmetry
from .. import style

__all__ = ["draw_level_labels"]

#: Vertical nudges tried, in points.
NUDGES_PT = (0.0, 5.0, -5.0, 10.0, -10.0)

#: A light backing so that a label stays readable where band lines leave the point.
LABEL_BOX = {"boxstyle": "square,pad=0.08", "facecolor": "white", "edgecolor": "none",
             "alpha": 0.85}


def _overlaps(a, b, pad: float = 1.0) -> bool:
    return (min(a.x1, b.x1) - max(a.x0, b.x0) > -pad
            and min(a.y1, b.y1) - max(a.y0, b.y0) > -pad)


def draw_level_labels(ax: Axes, distance_invA, label_indices, labels, energy_zero_eV: float,
                      points: tuple[PointSymmetry, ...]) -> int:
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
    by_name = {p.point: p for p in points}
    drawn = 0
    for index, name in zip(label_indices, labels, strict=True):
        x = float(distance_invA[index])
        right_side = x < x_lo + 0.9 * (x_hi - x_lo)
        for part in name.split("|"):
            p = by_name.get(part)
            if p is None:
                continue
            for lv in p.levels:
                e = lv.energy_eV - energy_zero_eV
                if "#" in lv.label or lv.label == p.note or not lo < e < hi:
                    continue
                for nudge in NUDGES_PT:
                    t = ax.annotate(lv.label, (x, e), xytext=(4 if right_side else -4, nudge),
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
