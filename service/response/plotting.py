"""SVG figures of response and comparison results (matplotlib, Agg backend).

matplotlib is imported inside the functions, never at module import, so the
service starts without it and pays its import cost only on the first figure.
Figures are 8 inches wide at 100 dpi (800 px). Frequencies are in Hz, gains
and losses in dB, phase in degrees, delay and time in s (drawn in s, ms or us,
whichever suits the span).

How a response figure reads, top to bottom:

- a title block: the filter (family, response, order), the requirement (band
  edges, losses), the design (stages, topologies, op-amps), and the verdict of
  the one verifier (:mod:`service.response.verification`) with the worst
  margin and where -- the figure never decides pass or fail itself;
- a legend of everything drawn, the mask's shading included;
- the magnitude with the mask: each segment's forbidden region shaded, its
  limit drawn, and its worst point (the verifier's ``worst_hz``, at the loss
  the verifier found there) marked met or missed with the margin; the -3 dB
  frequencies as labelled marker lines;
- a passband detail panel whose gain axis is scaled to the passband's ripple
  (a 0.1 dB ripple fills a good part of it; a limit far below it is written
  out instead of squashing the ripple);
- group delay (scaled to the band within :data:`DELAY_WINDOW_DB` of the
  reference), phase, and the step response.

What a figure costs is mostly matplotlib artists, so the figures keep them
few: fixed margins (no layout engine), panel titles at a fixed height, at most
six ticks on a value axis (nine on a gain axis) and decade ticks on a
frequency axis (each tick is five artists), curves decimated to
:data:`MAX_DRAWN_POINTS`, and text written as text (``svg.fonttype =
'none'``), not as glyph paths. ``tests/bench/bench_figures.py`` measures one
figure (``service.workflows.costs.FIGURE_UNITS``).

The helpers without a leading underscore (:func:`draw_mask`,
:func:`passband_window`, :func:`detail_gain_range`, :func:`title_block`,
:func:`figure_legend`, ...) are shared with :mod:`service.tolerance.plotting`.
"""

from __future__ import annotations

import io
import math
from dataclasses import dataclass

import numpy as np

from service.response.figure_inputs import (frequency_view, half_power_band, in_bands, passband_window,
                                            reference_gain)

WIDTH_IN = 8.0
DPI = 100
#: Height of the response figure (in): title block, legend, three rows of panels.
RESPONSE_HEIGHT_IN = 9.6
#: Height of the comparison figure (in).
COMPARISON_HEIGHT_IN = 6.4

#: Colours of the figures (our own: a dark ink, a sand shading for what the mask forbids).
INK = "#1b1b1b"
CURVE = "#1d4e89"
PHASE = "#6c3483"
DELAY = "#9c4a1a"
STEP = "#00695c"
FORBIDDEN = "#efe6d0"
LIMIT = "#5b5b5b"
MET = "#2e7d32"
MISSED = "#c62828"
UNPROVED = "#d98200"
MARKER_LINE = "#707070"
GRID = "#d9d9d9"

#: Group delay is scaled to the frequencies where the gain is within this of the reference (dB): far in a
#: stopband the delay of a transmission zero swings without meaning for the signal.
DELAY_WINDOW_DB = 20.0
#: A passband limit more than this many times the passband's own swing is written out, not drawn to scale.
LIMIT_TO_SWING = 4.0
#: Smallest gain span (dB) of the passband detail axis (a flat passband still gets a readable axis).
MIN_DETAIL_SPAN_DB = 0.01
#: Headroom above and below the passband detail's content, as a fraction of its span.
DETAIL_PAD = 0.15


def _figure_class():
    """The Figure class; no pyplot state, no global backend switch."""
    from matplotlib.figure import Figure

    return Figure


#: Most points drawn per curve; longer curves keep the min and max of each
#: chunk, so peaks and notches survive (800 px cannot show more).
MAX_DRAWN_POINTS = 2000


def decimation_indices(y: np.ndarray, limit: int = MAX_DRAWN_POINTS) -> np.ndarray:
    """Indices (sorted) of a min/max-preserving decimation of ``y`` (N,) to at most ``limit + 2`` points.

    The samples are cut into ``limit // 2`` consecutive chunks; each chunk
    keeps its lowest and its highest sample, and the ends are kept.
    Vectorised: the chunks are padded into one (chunks, longest) array.
    """
    n = y.size
    if n <= limit:
        return np.arange(n)
    chunks = limit // 2
    edges = np.linspace(0, n, chunks + 1).astype(int)
    start, stop = edges[:-1], edges[1:]
    width = int(np.max(stop - start))
    cols = start[:, None] + np.arange(width)[None, :]
    inside = cols < stop[:, None]
    vals = y[np.minimum(cols, n - 1)]
    i = start + np.argmin(np.where(inside, vals, np.inf), axis=1)
    j = start + np.argmax(np.where(inside, vals, -np.inf), axis=1)
    return np.unique(np.concatenate([i, j, [0, n - 1]]))


def decimate(x: np.ndarray, y: np.ndarray, limit: int = MAX_DRAWN_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """Min/max-preserving decimation of a curve to at most ``limit + 2`` points (see :func:`decimation_indices`).

    Parameters
    ----------
    x, y : ndarray, shape (N,)

    Returns
    -------
    x, y : ndarray, shape (<= limit + 2,)
    """
    if x.size <= limit:
        return x, y
    idx = decimation_indices(y, limit)
    return x[idx], y[idx]


def render_svg(fig) -> bytes:
    """The SVG document of a matplotlib Figure (text as text, no date, fixed ids: same figure, same bytes)."""
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    # text as text (small and fast); a fixed salt for the ids matplotlib gives clip paths and markers
    with matplotlib.rc_context({"svg.fonttype": "none", "svg.hashsalt": "rolloff"}):
        fig.savefig(buf, format="svg", metadata={"Date": None})
    return buf.getvalue()


def new_figure(height_in: float):
    """A Figure ``WIDTH_IN`` x ``height_in`` inches, white, with the canvas attached."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = _figure_class()(figsize=(WIDTH_IN, height_in), dpi=DPI, facecolor="white")
    FigureCanvasAgg(fig)
    return fig


# --- axes ------------------------------------------------------------------------------------------------


def log_frequency_axis(ax) -> None:
    """Log frequency axis with decade ticks labelled in engineering notation (1k, 10k)."""
    from matplotlib.ticker import EngFormatter, LogLocator, NullLocator

    ax.set_xscale("log")
    ax.xaxis.set_major_locator(LogLocator(base=10.0, numticks=8))
    ax.xaxis.set_minor_locator(NullLocator())
    ax.xaxis.set_major_formatter(EngFormatter(sep=""))


def linear_frequency_axis(ax) -> None:
    """Linear frequency axis with at most six ticks in engineering notation (35k, 40k)."""
    from matplotlib.ticker import EngFormatter

    sparse_value_axis(ax, axis="x")
    ax.xaxis.set_major_formatter(EngFormatter(sep=""))


def sparse_value_axis(ax, nbins: int = 5, steps=(1, 2, 2.5, 5, 10), axis: str = "y") -> None:
    """At most ``nbins + 1`` round-valued major ticks on a value axis: each tick is five artists."""
    from matplotlib.ticker import MaxNLocator

    (ax.yaxis if axis == "y" else ax.xaxis).set_major_locator(MaxNLocator(nbins=nbins, steps=list(steps)))


def gain_axis(ax) -> None:
    """Gain (dB) axis ticked in 10, 20 or 50 dB steps (20 dB over the usual 150 dB span)."""
    sparse_value_axis(ax, nbins=8, steps=(1, 2, 5, 10))


def style_axes(ax, title: str) -> None:
    """The house style of a panel: a left-aligned title, light grid, no top and right frame; the panel's
    SVG group is named after its title (``gid`` ``"passband-detail"``)."""
    ax.set_gid(title.split(",")[0].lower().replace(" ", "-"))
    ax.set_title(title, loc="left", fontsize=9.5, fontweight="bold", color=INK, y=1.0, pad=4)
    ax.grid(True, lw=0.4, color=GRID)
    ax.spines["top"].set_visible(False)
    ax.spines["right"].set_visible(False)
    ax.tick_params(labelsize=8, colors=INK, length=3)
    ax.set_axisbelow(True)


def time_scale(span_s: float) -> tuple[float, str]:
    """(factor, unit) to draw a duration of ``span_s`` seconds in s, ms or us."""
    span_s = abs(span_s)
    if span_s >= 1.0 or span_s == 0 or not math.isfinite(span_s):
        return 1.0, "s"
    if span_s >= 1e-3:
        return 1e3, "ms"
    return 1e6, "µs"


# --- the mask and its verdict --------------------------------------------------------------------------


@dataclass(frozen=True)
class SegmentMark:
    """One mask segment as a figure draws it.

    Attributes
    ----------
    limit : LossLimit
        The segment (Hz, dB).
    state : str or None
        ``"met"``, ``"missed"`` or ``"unproved"`` as the verifier found it; None: not verified.
    worst_hz : float or None
        Where the verifier found the worst margin (Hz).
    worst_loss_db : float or None
        The loss there (dB below the reference).
    label : str
        What is written beside the worst point (the margin, or how many boards fail).
    stop_hz : float
        Where the segment is drawn to (Hz): its ``stop_hz``, or where a roll-off ended it.
    number : int
        The segment's number, from 1 in the order of the criteria (the ``gid`` of its marks).
    """

    limit: object
    state: str | None
    worst_hz: float | None
    worst_loss_db: float | None
    label: str
    stop_hz: float
    number: int = 0


STATE_STYLE = {
    "met": (MET, "o", "worst point, met"),
    "missed": (MISSED, "X", "worst point, missed"),
    "unproved": (UNPROVED, "D", "worst point, not proved"),
}


def signed_db(value: float) -> str:
    """A margin (dB) with its sign and a true minus: ``"+0.012"``, ``"−0.05"``, ``"0"`` (within 0.5 mdB)."""
    if abs(value) < 5e-4:
        return "0"
    return f"{value:+.3g}".replace("-", "−")


def verdict_marks(verdict) -> list[SegmentMark]:
    """The segments of a :class:`~service.response.verification.Verdict` with their worst points.

    The state of each is read from the verdict (``met``; a negative margin the verifier did not prove is
    ``unproved``): nothing is re-judged here.
    """
    if verdict is None or not verdict.stable:
        return []
    marks = []
    for i, s in enumerate(verdict.segments):
        state = "met" if s.met else ("missed" if s.proved else "unproved")
        word = {"met": "met", "missed": "missed", "unproved": "not proved"}[state]
        stop = s.ended_hz if s.ended_hz is not None else s.limit.stop_hz
        marks.append(SegmentMark(s.limit, state, s.worst_hz, s.loss_db, f"{word}, {signed_db(s.margin_db)} dB",
                                 stop, i + 1))
    return marks


def limit_marks(limits) -> list[SegmentMark]:
    """Segments drawn without a verdict (a comparison's requirement)."""
    return [SegmentMark(lim, None, None, None, "", lim.stop_hz, i + 1) for i, lim in enumerate(limits)]


def draw_mask(ax, marks: list[SegmentMark], ref_db: float, f_lo: float, f_hi: float, y_lo: float,
              y_hi: float) -> set[str]:
    """Shade each segment's forbidden region and draw its limit on a gain (dB) axis.

    Parameters
    ----------
    ax : Axes
    marks : list of SegmentMark
    ref_db : float
        The reference gain (dB) the losses are measured from.
    f_lo, f_hi : float
        The drawn frequency range (Hz).
    y_lo, y_hi : float
        The gain range (dB) the shading runs to (at least the axis range).

    Returns
    -------
    set of str
        What was drawn, for the legend: ``"forbidden"``, ``"limit"``, ``"limit_missed"``.
    """
    from service.response.verification import Band

    drawn = set()
    for mk in marks:
        lim = mk.limit
        a = max(lim.start_hz, f_lo)
        b = min(mk.stop_hz, f_hi) if math.isfinite(mk.stop_hz) else f_hi
        if not b > a:
            continue
        level = ref_db - lim.limit_db
        lo, hi = (y_lo, level) if lim.band is Band.PASSBAND else (level, y_hi)
        ax.fill_between([a, b], [lo, lo], [hi, hi], color=FORBIDDEN, lw=0, zorder=0.5)
        missed = mk.state in ("missed", "unproved")
        ax.plot([a, b], [level, level], color=MISSED if missed else LIMIT, lw=1.1, zorder=2.8,
                solid_capstyle="butt")
        drawn |= {"forbidden", "limit_missed" if missed else "limit"}
    return drawn


def draw_worst_points(ax, marks: list[SegmentMark], ref_db: float, f_lo: float, f_hi: float, y_lo: float,
                      y_hi: float, *, log_x: bool, text: bool = True, panel: str = "magnitude") -> set[str]:
    """Mark each segment's worst point (the verifier's frequency and loss) as met, missed or not proved.

    Parameters
    ----------
    ax : Axes
    marks : list of SegmentMark
    ref_db : float
        Reference gain (dB): a worst point is drawn at ``ref_db - worst_loss_db``.
    f_lo, f_hi : float
        The drawn frequency range (Hz). A worst point outside it sits on the nearest edge with its
        frequency written (``"at DC"`` for 0 Hz on a log axis).
    y_lo, y_hi : float
        The drawn gain range (dB); a worst point outside it is left out.
    log_x : bool
        The frequency axis is logarithmic.
    text : bool
        Write each point's label beside it: toward the inside of its segment, on the side of the
        forbidden region (below a passband limit, above a stopband limit) where there is room.
    panel : str
        Names the marks: each marker's ``gid`` (its SVG ``id``) is ``"<panel>-worst-<number>-<state>"``.

    Returns
    -------
    set of str
        The states drawn (``"met"``, ``"missed"``, ``"unproved"``), for the legend.
    """
    drawn = set()
    for mk in marks:
        if mk.state is None or mk.worst_hz is None or mk.worst_loss_db is None:
            continue
        if not (math.isfinite(mk.worst_hz) and math.isfinite(mk.worst_loss_db)):
            continue
        y = ref_db - mk.worst_loss_db
        if not y_lo <= y <= y_hi:
            continue
        x, note = mk.worst_hz, ""
        if f_lo * (1 - 1e-9) <= x < f_lo or f_hi < x <= f_hi * (1 + 1e-9):   # an edge, to rounding
            x = min(max(x, f_lo), f_hi)
        if x < f_lo or (log_x and x <= 0):
            note = " at DC" if x <= 0 else (" at ≈DC" if x < 1e-3 * f_lo else f" at {_hz(x)}")
            x = f_lo
        elif x > f_hi:
            note = f" at {_hz(x)}"
            x = f_hi
        colour, marker, _ = STATE_STYLE[mk.state]
        ax.plot([x], [y], marker=marker, ms=8 if marker == "X" else 7, mfc=colour, mec="white", mew=0.8,
                ls="none", zorder=4, clip_on=False, gid=f"{panel}-worst-{mk.number}-{mk.state}")
        drawn.add(mk.state)
        if not text:
            continue
        a = max(mk.limit.start_hz, f_lo)
        b = min(mk.stop_hz, f_hi) if math.isfinite(mk.stop_hz) else f_hi
        inside = _axis_fraction(x, a, b, log_x) if b > a else 0.5
        across = _axis_fraction(x, f_lo, f_hi, log_x)
        width = _text_width_fraction(ax, mk.label + note, LABEL_SIZE)
        left = inside > 0.5
        if left and across - width < 0.01:
            left = False
        elif not left and across + width > 0.99:
            left = across - width >= 0.01 or across > 0.5
        room = (y - y_lo) / max(y_hi - y_lo, 1e-300)
        below = mk.limit.band.value == "passband"
        if below and room < 0.35:
            below = False
        elif not below and room > 0.85:
            below = True
        ax.annotate(mk.label + note, (x, y), xytext=(-8 if left else 8, -7 if below else 7),
                    textcoords="offset points", ha="right" if left else "left", va="top" if below else "bottom",
                    fontsize=LABEL_SIZE, color=colour, fontweight="bold", zorder=5,
                    bbox=dict(boxstyle="square,pad=0.15", fc="white", ec="none", alpha=0.8))
    return drawn


#: Font size (pt) of the worst-point labels; their width is estimated at :data:`CHAR_WIDTH_EM` of it per
#: character (bold DejaVu Sans averages a little over 0.6 em) to keep them inside the panel without
#: measuring the text (a renderer pass per label).
LABEL_SIZE = 7.5
CHAR_WIDTH_EM = 0.64


def _text_width_fraction(ax, text: str, size_pt: float) -> float:
    """Estimated width of ``text`` at ``size_pt`` as a fraction of the axes' width, plus the 8 pt offset."""
    width_pt = ax.get_position().width * ax.figure.get_figwidth() * 72.0
    return (len(text) * CHAR_WIDTH_EM * size_pt + 8.0) / max(width_pt, 1.0)


def _axis_fraction(x: float, lo: float, hi: float, log_x: bool) -> float:
    if log_x and lo > 0 and x > 0:
        return (math.log(x) - math.log(lo)) / max(math.log(hi) - math.log(lo), 1e-300)
    return (x - lo) / max(hi - lo, 1e-300)


def _hz(x: float) -> str:
    """A frequency (Hz) as ``"25.6 kHz"``."""
    from service.units import format_quantity

    text = format_quantity(float(x), significant=3, micro="µ")
    return f"{text[:-1]} {text[-1]}Hz" if text[-1].isalpha() else f"{text} Hz"


def marker_line(ax, x: float, label: str, *, side: str = "auto", f_lo: float = 0.0, f_hi: float = 0.0,
                log_x: bool = False) -> None:
    """A dashed vertical marker line at ``x`` (Hz) labelled just above the axes.

    ``side`` is where the label extends from the line (``"left"``, ``"right"``); ``"auto"`` keeps it
    clear of the panel's title (right of a line in the left fifth of [f_lo, f_hi], else left).
    """
    ax.axvline(x, color=MARKER_LINE, ls=(0, (4, 3)), lw=0.9, zorder=1.8, gid="marker-line")
    if side == "auto":
        side = "right" if f_hi > f_lo and _axis_fraction(x, f_lo, f_hi, log_x) < 0.2 else "left"
    ax.annotate(label, (x, 1.0), xycoords=("data", "axes fraction"), xytext=(2 if side == "right" else -2, 2),
                textcoords="offset points", ha="left" if side == "right" else "right", va="bottom", fontsize=7.5,
                color=MARKER_LINE)


# --- the passband detail ------------------------------------------------------------------------------------


def detail_gain_range(ref_db: float, low_db: float, high_db: float, limit_db: float | None
                      ) -> tuple[float, float, bool]:
    """Gain range (dB) of a passband detail, scaled to the passband's own swing.

    Parameters
    ----------
    ref_db : float
        Reference gain (dB).
    low_db, high_db : float
        Lowest and highest gain (dB) drawn inside the passband(s).
    limit_db : float or None
        The largest passband loss the mask allows (dB), if any.

    Returns
    -------
    (y_lo, y_hi, limit_shown) : (float, float, bool)
        The axis range (dB); whether the limit line ``ref - limit`` is inside it. The limit is drawn to
        scale when it is at most :data:`LIMIT_TO_SWING` times the swing; otherwise the swing fills the axis.
    """
    high = max(high_db, ref_db)
    swing = max(high - low_db, MIN_DETAIL_SPAN_DB)
    low = high - swing
    shown = False
    if limit_db is not None and math.isfinite(limit_db):
        if ref_db - limit_db >= high - LIMIT_TO_SWING * swing:
            low = min(low, ref_db - limit_db)
            shown = True
    pad = DETAIL_PAD * (high - low)
    return low - pad, high + pad, shown


# --- title block and legend ---------------------------------------------------------------------------------


def title_block(fig, height_in: float, subject, lines: list[tuple[str, str, str]]) -> float:
    """Write the title block at the top of ``fig`` and return where it ends (inches from the top).

    ``subject`` (a :class:`~service.response.figure_inputs.FigureSubject` or None) gives the bold filter
    line and the requirement and design lines (SVG ids ``title``, ``title-requirement``, ``title-design``);
    ``lines`` adds ``(text, colour, id)`` lines below (the verdict, the yield).
    """
    y = 0.22
    headline = subject.filter if subject is not None else "Filter response"
    fig.text(0.02, 1 - y / height_in, headline, fontsize=12.5, fontweight="bold", color=INK, va="top",
             gid="title")
    y += 0.27
    for text, gid in ((getattr(subject, "requirement", None), "title-requirement"),
                      (getattr(subject, "design", None), "title-design")):
        if text:
            fig.text(0.02, 1 - y / height_in, text, fontsize=8.5, color="#3c3c3c", va="top", gid=gid)
            y += 0.18
    for text, colour, gid in lines:
        fig.text(0.02, 1 - y / height_in, text, fontsize=9, fontweight="bold", color=colour, va="top", gid=gid)
        y += 0.2
    return y


LEGEND_LABELS = {
    "forbidden": "mask: forbidden region",
    "limit": "mask limit",
    "limit_missed": "mask limit, missed",
    "f3db": "−3 dB frequency",
}


def legend_handles(drawn: set[str], first: list) -> list:
    """Legend handles: ``first`` (curves, bands), then the mask and markers in ``drawn``."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles = list(first)
    if "forbidden" in drawn:
        handles.append(Patch(facecolor=FORBIDDEN, edgecolor="none", label=LEGEND_LABELS["forbidden"]))
    if "limit" in drawn:
        handles.append(Line2D([], [], color=LIMIT, lw=1.1, label=LEGEND_LABELS["limit"]))
    if "limit_missed" in drawn:
        handles.append(Line2D([], [], color=MISSED, lw=1.1, label=LEGEND_LABELS["limit_missed"]))
    for state, (colour, marker, label) in STATE_STYLE.items():
        if state in drawn:
            handles.append(Line2D([], [], marker=marker, ms=7, mfc=colour, mec="white", ls="none", label=label))
    if "f3db" in drawn:
        handles.append(Line2D([], [], color=MARKER_LINE, ls=(0, (4, 3)), lw=0.9, label=LEGEND_LABELS["f3db"]))
    return handles


#: Height of one legend row (in), and the room between the legend and the top of the panels (in) that
#: their titles and the marker-line labels take.
LEGEND_ROW_IN = 0.19
PANEL_HEAD_IN = 0.42


def figure_legend(fig, grid, handles: list, top_in: float, height_in: float, columns: int = 5) -> None:
    """A frameless legend across the figure below the title block (``top_in`` inches from the top), and the
    panels of ``grid`` (a GridSpec) moved to start below it."""
    legend = fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.015, 1 - top_in / height_in),
                        ncols=columns, fontsize=8, frameon=False, handlelength=2.2, columnspacing=1.4,
                        borderaxespad=0.0, labelspacing=0.35)
    legend.set_gid("legend")
    rows = max(1, math.ceil(len(handles) / columns))
    grid.update(top=1 - (top_in + rows * LEGEND_ROW_IN + PANEL_HEAD_IN) / height_in)
    for ax in fig.axes:     # the GridSpec's new top reaches axes already made only this way
        spec = ax.get_subplotspec()
        if spec is not None and spec.get_gridspec() is grid:
            ax.set_position(spec.get_position(fig))


# --- the response figure ---------------------------------------------------------------------------------


def _status_line(verdict, staged: bool = False) -> tuple[str, str]:
    """The verifier's verdict in one line, and its colour; ``staged``: the system is a design (an unstable
    pole is named by its stage, from 1)."""
    if verdict is None:
        return "No mask given: nothing verified", "#5b5b5b"
    if not verdict.stable:
        poles = verdict.unstable_poles
        where = ""
        if poles:
            where = f": pole at {_hz(poles[0].frequency_hz)} in the right half-plane"
            where += f" (stage {poles[0].group + 1})" if staged else ""
        return "Unstable" + where + " — meets nothing", MISSED
    worst = verdict.worst
    text = {"meets": "Meets the mask", "misses": "Misses the mask",
            "unproved": "Not proved to meet the mask"}[verdict.status]
    colour = {"meets": MET, "misses": MISSED, "unproved": UNPROVED}[verdict.status]
    if worst is not None:
        text += (f" · worst margin {signed_db(worst.margin_db)} dB at {_hz(worst.worst_hz)} "
                 f"({worst.limit.band.value})")
    if verdict.delay is not None:
        d = verdict.delay
        text += (f" · group delay {d.deviation_pct:.3g} % from DC to {_hz(d.limit.stop_hz)} "
                 f"(limit {d.limit.max_deviation_pct:g} %, {'met' if d.met else 'missed'})")
    return text, colour


def _gain_range(mag: np.ndarray, ref: float, marks: list[SegmentMark]) -> tuple[float, float]:
    """The magnitude axis range (dB): the curve (at most 140 dB below its top) and every stopband limit."""
    top = float(np.max(mag)) if mag.size else 0.0
    bottom = max(float(np.min(mag)) if mag.size else -100.0, top - 140.0)
    for mk in marks:
        if mk.limit.band.value == "stopband":
            bottom = min(bottom, ref - mk.limit.limit_db - 10.0)
    bottom = max(bottom, top - 160.0)
    return bottom - 5.0, top + 5.0


def _f3db_lines(ax, f3db, f_lo: float, f_hi: float, log_x: bool) -> bool:
    """The -3 dB frequencies (Hz) as labelled marker lines; two of them label outward."""
    values = [v for v in (f3db if isinstance(f3db, (list, tuple)) else [f3db])
              if v is not None and math.isfinite(v) and f_lo <= v <= f_hi]
    for i, v in enumerate(values):
        side = "auto" if len(values) == 1 else ("left" if i == 0 else "right")
        marker_line(ax, v, f"−3 dB: {_hz(v)}", side=side, f_lo=f_lo, f_hi=f_hi, log_x=log_x)
    return bool(values)


def _detail_panel(ax, result, fx, mag, ref, marks, f_lo, f_hi, log_x) -> set[str]:
    """The passband detail of a response (see the module notes); returns what it drew for the legend.

    Draws ``result.detail`` (the passband sampled densely by the workflow) when there is one, else the
    result's own points over its passbands (or the half-power band).
    """
    style_axes(ax, "Passband detail")
    ax.set_ylabel("gain (dB)", fontsize=8.5)
    ax.set_xlabel("frequency (Hz)", fontsize=8.5)
    detail = getattr(result, "detail", None)
    if detail is not None and detail.frequency_hz.size > 1:
        fd, md, bands, detail_log = detail.frequency_hz, detail.magnitude_db, list(detail.bands_hz), detail.log
        window = (float(fd[0]), float(fd[-1]))
    else:
        bands = [(mk.limit.start_hz, mk.stop_hz) for mk in marks if mk.limit.band.value == "passband"]
        bands = bands or list(result.passbands_hz or ()) or half_power_band(fx, mag, ref)
        window = passband_window(bands, f_lo, f_hi)
        fd, md = fx, mag
        detail_log = bool(window and log_x and window[1] / window[0] > 5)
    inside = in_bands(fd, bands) if window is not None else np.zeros(0, dtype=bool)
    if not inside.any():
        ax.text(0.5, 0.5, "no passband in the plotted range", ha="center", va="center", fontsize=8,
                transform=ax.transAxes)
        return set()
    lo, hi = window
    pb = [mk for mk in marks if mk.limit.band.value == "passband"]
    limit = max((mk.limit.limit_db for mk in pb), default=None)
    low, high = float(np.min(md[inside])), float(np.max(md[inside]))
    for mk in pb:  # the verifier's worst point stays on the axis even between the drawn points
        if mk.worst_loss_db is not None and math.isfinite(mk.worst_loss_db):
            low = min(low, ref - mk.worst_loss_db)
    y_lo, y_hi, shown = detail_gain_range(ref, low, high, limit)
    idx = np.flatnonzero((fd >= lo) & (fd <= hi))
    idx = np.arange(max(idx[0] - 1, 0), min(idx[-1] + 2, fd.size))   # one point beyond each end
    ax.plot(*decimate(fd[idx], md[idx]), color=CURVE, lw=1.4, zorder=3)
    drawn = draw_mask(ax, marks, ref, lo, hi, y_lo - 1.0, y_hi + 1.0)
    drawn |= draw_worst_points(ax, marks, ref, lo, hi, y_lo, y_hi, log_x=detail_log, panel="detail")
    ax.set_xlim(lo, hi)
    ax.set_ylim(y_lo, y_hi)
    if detail_log:
        log_frequency_axis(ax)
    else:
        linear_frequency_axis(ax)
    sparse_value_axis(ax)
    notes = []
    ripple = result.metrics.passband_ripple_db
    if ripple is not None and math.isfinite(ripple):
        notes.append(f"ripple {ripple:.3g} dB")
    if limit is not None and not shown:
        notes.append(f"limit −{limit:g} dB: below this axis")
    if notes:
        ax.set_title(" · ".join(notes), loc="right", fontsize=7.5, color=INK, y=1.0, pad=4)
    return drawn


def signal_window(fx: np.ndarray, mag: np.ndarray, ref: float, log_x: bool) -> np.ndarray:
    """bool (F,): the frequencies (Hz) the phase and delay panels draw: from a little below the lowest to a
    little above the highest frequency where the gain (dB) is within :data:`DELAY_WINDOW_DB` of ``ref``
    (all of them when that is everywhere or nowhere)."""
    sel = mag >= ref - DELAY_WINDOW_DB
    if not sel.any() or sel.all() or fx.size < 2:
        return np.ones(fx.shape, dtype=bool)
    a, b = float(fx[sel][0]), float(fx[sel][-1])
    if log_x:
        a, b = a / 1.5, b * 1.5
    else:
        a, b = a - 0.1 * (b - a), b + 0.1 * (b - a)
    keep = (fx >= a) & (fx <= b)
    idx = np.flatnonzero(keep)
    keep[max(idx[0] - 1, 0):min(idx[-1] + 2, fx.size)] = True     # one point beyond each end
    return keep


def _window_note(ax, windowed: bool) -> None:
    if windowed:
        ax.set_title(f"where gain > reference − {DELAY_WINDOW_DB:g} dB", loc="right", fontsize=7,
                     color=MARKER_LINE, y=1.0, pad=4)


def _delay_panel(ax, fx, gd, mag, ref, keep, log_x) -> None:
    """Group delay (s, drawn in s, ms or us) against frequency (Hz) over ``keep``; the delay axis spans the
    delay where the gain is within :data:`DELAY_WINDOW_DB` of the reference (a transmission zero's swing of
    delay, deep in a stopband, runs off it)."""
    style_axes(ax, "Group delay")
    ax.set_xlabel("frequency (Hz)", fontsize=8.5)
    near = (mag >= ref - DELAY_WINDOW_DB) & np.isfinite(gd)
    seen = gd[near] if near.any() else gd[np.isfinite(gd)]
    lo, hi = (float(np.min(seen)), float(np.max(seen))) if seen.size else (0.0, 0.0)
    scale, unit = time_scale(max(abs(lo), abs(hi)))
    ax.plot(*decimate(fx[keep], gd[keep] * scale), color=DELAY, lw=1.2)
    if near.any() and not near.all():
        pad = 0.12 * max(hi - lo, 1e-3 * max(abs(hi), 1e-15))
        ax.set_ylim((lo - pad) * scale, (hi + pad) * scale)
    ax.set_xlim(float(fx[keep][0]), float(fx[keep][-1]))
    _window_note(ax, not keep.all())
    ax.set_ylabel(f"group delay ({unit})", fontsize=8.5)
    if log_x:
        log_frequency_axis(ax)
    sparse_value_axis(ax)


def _phase_panel(ax, fx, phase, keep, log_x) -> None:
    """Unwrapped phase (deg) against frequency (Hz) over ``keep``."""
    style_axes(ax, "Phase")
    ax.plot(*decimate(fx[keep], phase[keep]), color=PHASE, lw=1.2)
    ax.set_xlim(float(fx[keep][0]), float(fx[keep][-1]))
    _window_note(ax, not keep.all())
    ax.set_ylabel("phase (deg)", fontsize=8.5)
    ax.set_xlabel("frequency (Hz)", fontsize=8.5)
    if log_x:
        log_frequency_axis(ax)
    sparse_value_axis(ax)


def response_figure(result, subject=None):
    """The response figure of ``result`` as a matplotlib Figure (see the module notes for what it shows).

    Parameters
    ----------
    result : ResponseResult
        Frequencies (Hz), magnitude (dB), phase (deg), group delay (s), step response (V/V against s),
        metrics, the verifier's ``verdict`` (or None) and the passbands (Hz) its metrics used.
    subject : FigureSubject, optional
        The title's filter, requirement and design lines; default ``result.subject``.

    Returns
    -------
    matplotlib.figure.Figure
        ``WIDTH_IN`` x :data:`RESPONSE_HEIGHT_IN` inches, Agg canvas attached.
    """
    subject = subject if subject is not None else getattr(result, "subject", None)
    H = RESPONSE_HEIGHT_IN
    fig = new_figure(H)
    verdict = result.verdict
    status = _status_line(verdict, staged=subject is not None and subject.design is not None)
    head = title_block(fig, H, subject, [(*status, "title-status")])
    legend_top = head + 0.04
    grid = fig.add_gridspec(3, 2, left=0.085, right=0.975, bottom=0.055, hspace=0.42, wspace=0.24,
                            height_ratios=[1.45, 1.0, 1.0])
    ax_mag = fig.add_subplot(grid[0, :])
    ax_pb, ax_gd = fig.add_subplot(grid[1, 0]), fig.add_subplot(grid[1, 1])
    ax_ph, ax_st = fig.add_subplot(grid[2, 0]), fig.add_subplot(grid[2, 1])

    f = np.asarray(result.frequency_hz, dtype=float)
    log_x, pos = frequency_view(f)
    fx, mag = f[pos], np.asarray(result.magnitude_db, dtype=float)[pos]
    f_lo, f_hi = (float(fx[0]), float(fx[-1])) if fx.size else (1.0, 10.0)
    metrics = result.metrics
    marks = verdict_marks(verdict)
    ref = reference_gain(verdict, metrics.passband_gain_db, mag)

    # magnitude with the mask
    style_axes(ax_mag, "Magnitude")
    curve, = ax_mag.plot(*decimate(fx, mag), color=CURVE, lw=1.4, zorder=3, label="gain")
    y_lo, y_hi = _gain_range(mag, ref, marks)
    drawn = draw_mask(ax_mag, marks, ref, f_lo, f_hi, y_lo - 10.0, y_hi + 10.0)
    drawn |= draw_worst_points(ax_mag, marks, ref, f_lo, f_hi, y_lo, y_hi, log_x=log_x)
    if _f3db_lines(ax_mag, metrics.f3db_hz, f_lo, f_hi, log_x):
        drawn.add("f3db")
    ax_mag.set_ylim(y_lo, y_hi)
    ax_mag.set_xlim(f_lo, f_hi)
    ax_mag.set_ylabel("gain (dB)", fontsize=8.5)
    ax_mag.set_xlabel("frequency (Hz)", fontsize=8.5)
    if log_x:
        log_frequency_axis(ax_mag)
    gain_axis(ax_mag)

    # passband detail
    drawn |= _detail_panel(ax_pb, result, fx, mag, ref, marks, f_lo, f_hi, log_x)

    if fx.size:
        keep = signal_window(fx, mag, ref, log_x)
        _delay_panel(ax_gd, fx, np.asarray(result.group_delay_s, dtype=float)[pos], mag, ref, keep, log_x)
        _phase_panel(ax_ph, fx, np.asarray(result.phase_deg, dtype=float)[pos], keep, log_x)

    style_axes(ax_st, "Step response")
    if result.step is not None and result.step.time_s.size:
        scale, unit = time_scale(float(result.step.time_s[-1]))
        ax_st.plot(*decimate(result.step.time_s * scale, result.step.value), color=STEP, lw=1.2)
        ax_st.set_xlabel(f"time ({unit})", fontsize=8.5)
        ax_st.set_ylabel("step response (V/V)", fontsize=8.5)
        sparse_value_axis(ax_st, axis="x")
    else:
        ax_st.text(0.5, 0.5, "time response unavailable", ha="center", va="center", fontsize=8,
                   transform=ax_st.transAxes)
    sparse_value_axis(ax_st)

    figure_legend(fig, grid, legend_handles(drawn, [curve]), legend_top, H)
    return fig


def response_figure_svg(result, subject=None) -> bytes:
    """The response figure of ``result`` (see :func:`response_figure`) as an SVG document (bytes)."""
    return render_svg(response_figure(result, subject))


# --- the comparison figure ---------------------------------------------------------------------------------


def comparison_figure_svg(comparison) -> bytes:
    """Two panels: magnitude (dB against Hz) of every designed family with the mask, and their step
    responses (V/V against ms).

    Parameters
    ----------
    comparison : Comparison

    Returns
    -------
    bytes
        An SVG document.
    """
    H = COMPARISON_HEIGHT_IN
    fig = new_figure(H)
    ax_m, ax_s = fig.subplots(2, 1)
    fig.subplots_adjust(left=0.09, right=0.975, bottom=0.08, top=0.95, hspace=0.35)
    curves = comparison.curves()
    for name, (f, mag, t, y) in curves.items():
        ax_m.plot(f, mag, lw=1.1, label=name)
        if t is not None:
            ax_s.plot(t * 1e3, y, lw=1.1, label=name)
    if comparison.criteria is not None and curves:
        f0 = min(float(c[0][0]) for c in curves.values())
        f1 = max(float(c[0][-1]) for c in curves.values())
        att = max((lim.limit_db for lim in comparison.criteria.limits if lim.band.value == "stopband"), default=0.0)
        draw_mask(ax_m, limit_marks(comparison.criteria.limits), 0.0, f0, f1, -(att + 50.0), 20.0)
        ax_m.set_ylim(-(att + 40.0), 5.0)
    log_frequency_axis(ax_m)
    style_axes(ax_m, "Magnitude of each family")
    ax_m.set_xlabel("frequency (Hz)", fontsize=8.5)
    ax_m.set_ylabel("gain (dB)", fontsize=8.5)
    style_axes(ax_s, "Step response of each family")
    ax_s.set_xlabel("time (ms)", fontsize=8.5)
    ax_s.set_ylabel("output (V/V)", fontsize=8.5)
    gain_axis(ax_m)
    sparse_value_axis(ax_s)
    if curves:
        ax_m.legend(fontsize=8, ncols=2, frameon=False)
    return render_svg(fig)
