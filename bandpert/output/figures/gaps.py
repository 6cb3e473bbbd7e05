"""Gaps at free-electron degeneracies drawn on the exact bands: predicted beside exact."""

from __future__ import annotations

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.transforms import Bbox

from ...physics.bands import BandStructure
from ...physics.nfe_gaps import KIND_CROSSING
from .. import style
from .bands import draw_bands_panel, source_note

FIRST_ORDER_COLOUR = "#D55E00"
SECOND_ORDER_COLOUR = "#009E73"
EXACT_GAP_COLOUR = "#b23a48"


def annotate_gaps(ax: Axes, report, energy_zero_eV: float = 0.0, *,
                  crossings: bool | None = None, label_fraction: float = 0.01) -> bool:
    """Mark predicted against exact gaps at the examined points of a band plot.

    For every splitting of a free-electron degeneracy that is open in the exact levels
    (:class:`bandpert.physics.nfe_gaps.GapReport`; degenerate perturbation theory, Ashcroft &
    Mermin, *Solid State Physics*, 1976, ch. 9): a bar at the point spanning the exact gap,
    and short ticks with a thin connector beside it for the first-order (left) and
    second-order Löwdin (right) levels bounding the same gap. Exact gaps larger than
    ``label_fraction`` of the energy axis are labelled ``exact (2nd order)`` in eV where the
    label fits: inside the axes, off the band lines (lines with gid ``"band"``) and off the
    labels already placed; the largest gaps are placed first, the others stay unlabelled.
    Crossings between labelled points are drawn thinner and unlabelled. Where the group
    carries verdicts (``verdicts``: one per order, ``holds``), a failing order is drawn
    dotted with crosses and its label says "fails".

    Parameters
    ----------
    ax : matplotlib.axes.Axes
        A band plot whose x axis is the path distance (Å⁻¹) of the same path.
    report : bandpert.physics.nfe_gaps.GapReport
    energy_zero_eV : float
        Subtracted from the (absolute) energies of the report, as in the band plot.
    crossings : bool, optional
        Draw the crossings of the report (default: every point the report holds).
    label_fraction : float
        Smallest exact gap labelled, as a fraction of the energy axis.

    Returns
    -------
    bool
        Whether any order failed its verdict.
    """
    x_lo, x_hi = ax.get_xlim()
    y_lo, y_hi = ax.get_ylim()
    dx = 0.012 * (x_hi - x_lo)
    candidates = []
    failing = False
    for p in report.points:
        crossing = p.kind == KIND_CROSSING
        if crossing and crossings is False:
            continue
        scale = 0.6 if crossing else 1.0
        for x in p.path_distance_invA:
            # keep the ticks inside the axes at the ends of the path
            left, right = x - dx, x + dx
            if left < x_lo:
                left, right = x + dx, x + 2 * dx
            elif right > x_hi:
                left, right = x - 2 * dx, x - dx
            for g in p.groups:
                verdicts = getattr(g, "verdicts", None)
                holds = (True, True) if verdicts is None else tuple(v.holds for v in verdicts)
                failing |= not all(holds)
                for j in np.flatnonzero(g.open_gaps):
                    ex = g.exact_eV[j:j + 2] - energy_zero_eV
                    ax.plot([x, x], ex, color=EXACT_GAP_COLOUR, lw=2.4 * scale, alpha=0.75,
                            solid_capstyle="butt", zorder=6)
                    for xs, lev, colour, ok in (
                            (left, g.first_order_eV, FIRST_ORDER_COLOUR, holds[0]),
                            (right, g.second_order_eV, SECOND_ORDER_COLOUR, holds[1])):
                        e = lev[j:j + 2] - energy_zero_eV
                        # an order whose verdict fails: dotted, with crosses at its levels
                        ax.plot([xs, xs], e, color=colour, lw=0.7 * scale, zorder=6,
                                ls="-" if ok else ":")
                        ax.plot([xs, xs], e, ls="none", marker="_" if ok else "x",
                                ms=(6 if ok else 4) * scale, mew=1.2, color=colour, zorder=6)
                    gap = ex[1] - ex[0]
                    if not crossing and gap > label_fraction * (y_hi - y_lo) \
                            and y_lo < ex.mean() < y_hi:
                        pred = g.second_order_eV[j + 1] - g.second_order_eV[j]
                        candidates.append((gap, x, left, right, ex.mean(),
                                           f"{gap:.2f} ({pred:.2f}"
                                           + (")" if holds[1] else ", fails)")))
    ax.set_xlim(x_lo, x_hi)
    ax.set_ylim(y_lo, y_hi)
    _place_labels(ax, sorted(candidates, key=lambda c: -c[0]), dx)
    return failing


def _place_labels(ax: Axes, candidates: list, dx: float) -> None:
    """Put each label beside its bar where it collides with nothing; skip it otherwise."""
    renderer = style.renderer_of(ax.figure)
    frame = ax.get_window_extent(renderer)
    taken: list[Bbox] = [t.get_window_extent(renderer) for t in ax.texts if t.get_text()]
    bands = [ln for ln in ax.lines if ln.get_gid() == "band"]
    to_display = ax.transData.transform
    to_data = ax.transData.inverted().transform
    for _, _, left, right, y, text in candidates:
        for xs, ha in ((right + 0.5 * dx, "left"), (left - 0.5 * dx, "right")):
            t = ax.text(xs, y, text, fontsize=style.ANNOTATION_SIZE - 1.5,
                        color=EXACT_GAP_COLOUR, va="center", ha=ha, zorder=7,
                        bbox={"boxstyle": "round,pad=0.1", "fc": "white", "ec": "none",
                              "alpha": 0.8})
            t.set_in_layout(False)
            box = t.get_window_extent(renderer).padded(1.0)
            ok = (frame.x0 <= box.x0 and box.x1 <= frame.x1 and frame.y0 <= box.y0
                  and box.y1 <= frame.y1 and not any(box.overlaps(b) for b in taken)
                  and not _crosses_lines(box, bands, to_display, to_data))
            if ok:
                taken.append(box)
                break
            t.remove()


def _crosses_lines(box: Bbox, lines: list, to_display, to_data) -> bool:
    """Whether any of ``lines`` passes through ``box`` (display coordinates)."""
    (x0, _), (x1, _) = to_data([(box.x0, box.y0), (box.x1, box.y1)])
    for ln in lines:
        xd, yd = (np.asarray(v, dtype=float) for v in ln.get_data())
        if xd.size < 2 or xd[-1] < x0 or xd[0] > x1:
            continue
        xs = np.linspace(max(x0, xd[0]), min(x1, xd[-1]), 12)
        ys = np.interp(xs, xd, yd)
        pts = to_display(np.column_stack([xs, ys]))
        # a line crosses the box when its points lie inside, or on both sides of it
        inside = (pts[:, 1] >= box.y0) & (pts[:, 1] <= box.y1)
        if inside.any() or ((pts[:, 1] < box.y0).any() and (pts[:, 1] > box.y1).any()):
            return True
    return False


def gap_figure(bs: BandStructure, report,
               energy_window_eV: tuple[float, float] | None = None, *,
               crossings: bool | None = None) -> Figure:
    """Exact bands with the gaps at free-electron degeneracies, predicted beside exact.

    The exact band plot with :func:`annotate_gaps`: bars for the exact gaps, first-order
    ticks on the left and second-order (Löwdin) ticks on the right of each examined point
    (the crossings of the report too), the legend beside the axes.

    Parameters
    ----------
    bs : BandStructure
        Exact bands along the same path and model as ``report``.
    report : bandpert.physics.nfe_gaps.GapReport
    energy_window_eV : (float, float), optional
        Limits of the energy axis (energies from the energy zero).
    crossings : bool, optional
        Draw the crossings of the report (default: every point the report holds).

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig = style.new_figure(8.0, 5.2)
    ax = fig.subplots()
    draw_bands_panel(ax, bs, energy_window_eV, gap_label=False)
    if energy_window_eV is None:  # keep every bar and tick of the open gaps inside the axes
        levels = [lev[j:j + 2] - bs.energy_zero_eV for p in report.points
                  if crossings is not False or p.kind != KIND_CROSSING for g in p.groups
                  for j in np.flatnonzero(g.open_gaps)
                  for lev in (g.exact_eV, g.first_order_eV, g.second_order_eV)]
        if levels:
            lo, hi = ax.get_ylim()
            every = np.concatenate(levels)
            margin = 0.03 * (hi - lo)
            ax.set_ylim(min(lo, every.min() - margin), max(hi, every.max() + margin))
    ax.set_xlabel("Wave vector along the path", fontsize=style.LABEL_SIZE)
    style.footer(fig, source_note(bs), width=150)
    handles = [
        Line2D([], [], color=style.EXACT_COLOUR, lw=1.3, label="exact bands"),
        Line2D([], [], color=EXACT_GAP_COLOUR, lw=2.4, alpha=0.75,
               label="exact gap at a\ndegeneracy"),
        Line2D([], [], color=EXACT_GAP_COLOUR, lw=1.4, alpha=0.75,
               label="the same at a crossing\nbetween labelled points"),
        Line2D([], [], color=FIRST_ORDER_COLOUR, marker="_", ms=6, mew=1.2, lw=0.7,
               label="first order (V block)"),
        Line2D([], [], color=SECOND_ORDER_COLOUR, marker="_", ms=6, mew=1.2, lw=0.7,
               label="second order (Löwdin)"),
    ]
    if crossings is False or not any(p.kind == KIND_CROSSING for p in report.points):
        del handles[2]
    ax.set_title(style.wrap(f"{bs.material.name}: gaps at free-electron degeneracies", 90),
                 fontsize=style.TITLE_SIZE)
    if any(not v.holds for p in report.points for g in p.groups
           for v in getattr(g, "verdicts", ())):
        handles.append(Line2D([], [], color="0.3", marker="x", ms=4, mew=1.2, lw=0.7, ls=":",
                              label="an order that fails\nits verdict"))
    style.legend_outside(ax, handles, title="labels: exact (second-order)\ngap in eV, "
                         "where they fit")
    annotate_gaps(ax, report, bs.energy_zero_eV, crossings=crossings)
    return fig
