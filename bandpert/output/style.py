"""The house style of every figure, and the one function that writes a figure to a file.

Figures are built with matplotlib's object API (:class:`matplotlib.figure.Figure`), never
with pyplot: the library keeps no global figure registry and never selects a backend, so a
notebook keeps its own backend and a long run does not accumulate open figures.

Colours are colour-blind safe: the Okabe–Ito palette (Okabe & Ito, *Color Universal Design*,
2008) for categories, and a blue/orange pair with grey for the three states of the validity
map (trusted, not trusted, undetermined). Legends sit outside the data, to the right of the
axes; the sizes below are the only font sizes used.
"""

from __future__ import annotations

import textwrap
from collections.abc import Sequence
from pathlib import Path

import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.legend import Legend
from matplotlib.text import Text
from matplotlib.ticker import MaxNLocator

from ..io import write_with

#: Okabe–Ito palette without black: categories (models, band groups, swept quantities).
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#882255",
           "#000000")
#: Colours of band groups in error panels (apart from the trust pair below).
GROUP_COLOURS = ("#009E73", "#CC79A7", "#56B4E9", "#000000")
#: Line styles cycled after the palette, so that more than eight lines stay distinguishable.
LINE_STYLES = ("-", "--", ":", "-.")
MARKERS = ("o", "s", "^", "v", "D", "P", "X", "*")

EXACT_COLOUR = "#1f3a5f"
GAP_COLOUR = "#f2c14e"
VALENCE_EDGE_COLOUR = "#b23a48"
CONDUCTION_EDGE_COLOUR = "#2e8b57"
TRUSTED_COLOUR = "#0072B2"
UNTRUSTED_COLOUR = "#E69F00"
UNDETERMINED_COLOUR = "#BBBBBB"
REFERENCE_LINE_COLOUR = "0.35"
GUIDE_COLOUR = "0.6"
NOTE_COLOUR = "0.3"
WARNING_COLOUR = "#B2182B"

TITLE_SIZE = 10
LABEL_SIZE = 9
TICK_SIZE = 8
LEGEND_SIZE = 7
ANNOTATION_SIZE = 7
NOTE_SIZE = 6.5

#: Resolution of raster figures: sharp on screen and in print at column width, and a PNG of
#: a few hundred kB at most.
PNG_DPI = 150

#: Markers drawn per band along a path at most: denser paths are thinned.
MAX_MARKERS_PER_BAND = 40

ZERO_NAMES = {"valence-band maximum": "valence-band maximum", "Fermi level": r"$E_\mathrm{F}$",
              "absolute": "model zero"}


def new_figure(width_in: float, height_in: float) -> Figure:
    """An empty figure with constrained layout, not registered with pyplot.

    It carries a non-interactive Agg canvas, so its texts can be measured (the label
    placement needs the renderer) without selecting a backend.
    """
    fig = Figure(figsize=(width_in, height_in), layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def style_axes(ax: Axes, *, grid: bool = False) -> None:
    """Tick label sizes of the house style; a light grid on request."""
    ax.tick_params(labelsize=TICK_SIZE)
    if grid:
        ax.grid(alpha=0.3, lw=0.5)


def energy_ticks(ax: Axes) -> None:
    """Energy ticks at 1, 2, 2.5 or 5 times a power of ten, at most seven of them."""
    ax.yaxis.set_major_locator(MaxNLocator(nbins=7, steps=[1, 2, 2.5, 5, 10]))


def energy_label(kind: str, quantity: str = "Energy") -> str:
    """Axis label of an energy measured from the run's energy zero ``kind``."""
    if kind == "absolute":
        return f"{quantity} (eV, model zero)"
    return f"{quantity} − {ZERO_NAMES.get(kind, kind)} (eV)"


def energy_limits(energies: np.ndarray,
                  window: tuple[float | None, float | None] | None,
                  margin: float = 0.04) -> tuple[float, float]:
    """Limits of an energy axis: ``window`` where given, else the finite range of ``energies``
    widened by ``margin`` (either end of ``window`` may be None: that end follows the data;
    an end beyond the data's other end opens a 1 eV window from it)."""
    e = np.asarray(energies, dtype=float)
    e = e[np.isfinite(e)]
    lo, hi = (float(e.min()), float(e.max())) if e.size else (0.0, 1.0)
    span = hi - lo if hi > lo else 1.0
    lo, hi = lo - margin * span, hi + margin * span
    w_lo, w_hi = window if window is not None else (None, None)
    if w_lo is not None and w_hi is not None:
        return float(w_lo), float(w_hi)
    if w_lo is not None:
        return float(w_lo), max(hi, float(w_lo) + 1.0)
    if w_hi is not None:
        return min(lo, float(w_hi) - 1.0), float(w_hi)
    return lo, hi


def draw_path_axes(ax: Axes, distance: np.ndarray, label_indices: np.ndarray,
                   labels: Sequence[str], *, tick_labels: bool = True) -> None:
    """Vertical guides and tick labels at the high-symmetry points of a path.

    Where two labels share one position (a jump between legs, e.g. "U|K") they are already
    joined by the path; labels closer than 3 % of the path are joined here with "|".
    """
    xs = np.asarray(distance)[np.asarray(label_indices)]
    for x in xs[1:-1]:
        ax.axvline(x, color=GUIDE_COLOUR, lw=0.6, zorder=0)
    ticks: list[float] = []
    names: list[str] = []
    span = float(distance[-1] - distance[0]) or 1.0
    for x, name in zip(xs, labels, strict=True):
        if ticks and abs(x - ticks[-1]) < 0.03 * span:
            if name != names[-1]:
                names[-1] = f"{names[-1]}|{name}"
            continue
        ticks.append(float(x))
        names.append(name)
    ax.set_xticks(ticks, names if tick_labels else [""] * len(ticks))
    ax.set_xlim(distance[0], distance[-1])


def draw_leg_lines(ax: Axes, distance: np.ndarray, energies: np.ndarray,
                   leg_starts: np.ndarray, label: str | None = None, **style) -> None:
    """Plot each band as lines, broken where the path jumps between legs; one legend entry."""
    bounds = list(leg_starts) + [len(distance)]
    first = True
    for s, e in zip(bounds[:-1], bounds[1:], strict=True):
        lines = ax.plot(distance[s:e], energies[s:e], **style)
        for i, line in enumerate(lines):
            line.set_label(label if first and i == 0 and label else "_nolegend_")
        first = False


def marker_stride(n_points: int, maximum: int = MAX_MARKERS_PER_BAND) -> int:
    """Every how many points a marker is drawn so that at most ``maximum`` are drawn."""
    return max(1, -(-n_points // maximum))


def legend_outside(ax: Axes, handles=None, *, title: str | None = None, ncol: int = 1,
                   where: str = "right") -> Legend:
    """A legend beside the axes (``right``) or under them (``below``), never on the data."""
    kw = {"fontsize": LEGEND_SIZE, "frameon": False, "ncol": ncol, "borderaxespad": 0.3,
          "handlelength": 2.2}
    if title:
        kw.update(title=title, title_fontsize=LEGEND_SIZE)
    if handles is not None:
        kw["handles"] = handles
    if where == "below":
        return ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), **kw)
    return ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), **kw)


#: Characters per line of a figure title (a long material name wraps instead of running past the
#: figure's edges).
TITLE_WIDTH = 80


def title(text: str) -> str:
    """A figure title wrapped at :data:`TITLE_WIDTH` characters (each given line apart)."""
    return "\n".join(wrap(line, TITLE_WIDTH) for line in text.split("\n"))


def wrap(text: str, width: int = 130) -> str:
    """Break a long note into lines of at most ``width`` characters."""
    return "\n".join(textwrap.wrap(text, width))


#: Longest source quoted in a figure's note (characters, about four lines of the note): a
#: fitted file's source names every target and its reference, and whole it pushed the axes
#: and their labels off a 640 × 480 figure.
SOURCE_NOTE_CHARS = 420


def short_source(source: str, limit: int = SOURCE_NOTE_CHARS) -> str:
    """A material's source for a figure note: whole up to ``limit`` characters, else cut at the
    last word before it and said to be cut (the whole text stays in the file and the JSON)."""
    if len(source) <= limit:
        return source
    cut = source[:limit].rsplit(" ", 1)[0].rstrip(" ;,")
    return f"{cut} … (cut here; the whole source is in the material file)"


def footer(fig: Figure, text: str, width: int = 130) -> None:
    """A small note under the axes (the parameters' source, how a run was made).

    The note is placed as the x label of an invisible strip at the bottom of the figure, so
    the constrained layout keeps it inside the figure and off the axes.
    """
    fig.supxlabel(wrap(text, width), fontsize=NOTE_SIZE, color=NOTE_COLOUR, x=0.01, ha="left")


def save_figure(fig: Figure, path: Path, image_format: str = "png", dpi: int = PNG_DPI) -> None:
    """Write ``fig`` atomically (temporary file, then rename) in ``image_format``.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : pathlib.Path
        Destination file.
    image_format : str
        A format matplotlib writes without a GUI ("png", "pdf", "svg").
    dpi : int
        Resolution of raster formats.
    """
    write_with(path, lambda p: fig.savefig(p, format=image_format, dpi=dpi))


def renderer_of(fig: Figure):
    """The renderer of a figure after its layout is done (an Agg canvas is attached when the
    figure has none that renders)."""
    if not hasattr(fig.canvas, "get_renderer"):
        FigureCanvasAgg(fig)
    fig.draw_without_rendering()
    return fig.canvas.get_renderer()


def text_boxes(fig: Figure) -> list:
    """Every visible, non-empty text of a drawn figure with its box in display pixels.

    Tick labels, axis labels, titles, legend texts, annotations and figure texts are
    included. Used to keep labels from colliding (:func:`drop_colliding`) and by the tests.

    Returns
    -------
    list of (matplotlib.text.Text, matplotlib.transforms.Bbox)
    """
    renderer = renderer_of(fig)
    hidden: set[int] = set()  # labels of ticks outside the view are not drawn
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            lo, hi = sorted(axis.get_view_interval())
            tol = 1e-9 * (hi - lo)
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                if not lo - tol <= tick.get_loc() <= hi + tol or not ax.get_visible():
                    hidden.update((id(tick.label1), id(tick.label2)))
    out = []
    for t in fig.findobj(Text):
        if id(t) in hidden or not t.get_visible() or not t.get_text().strip():
            continue
        if t.axes is not None and not t.axes.get_visible():
            continue
        out.append((t, t.get_window_extent(renderer)))
    return out
