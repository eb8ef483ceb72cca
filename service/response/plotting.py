"""SVG figures of response and comparison results (matplotlib, Agg backend).

matplotlib is imported inside the functions, never at module import, so the
service starts without it and pays its import cost only on the first figure.
Figures are 8 x 6.4 inches at 100 dpi (800 px wide).

What a figure costs is mostly matplotlib artists, so the figures keep them
few: fixed margins (no layout engine), titles at a fixed height (an automatic
title position measures every tick label of the axes), at most six ticks on a
value axis (nine on a gain axis) and decade ticks on a frequency axis (each tick is five artists),
curves decimated to :data:`MAX_DRAWN_POINTS`, and text written as text
(``svg.fonttype = 'none'``), not as glyph paths.
"""

from __future__ import annotations

import io
import math

import numpy as np

WIDTH_IN = 8.0
DPI = 100


def _pyplot():
    """The Figure class; no pyplot state, no global backend switch."""
    from matplotlib.figure import Figure

    return Figure


#: Most points drawn per curve; longer curves keep the min and max of each
#: chunk, so peaks and notches survive (800 px cannot show more).
MAX_DRAWN_POINTS = 2000


def decimate(x: np.ndarray, y: np.ndarray, limit: int = MAX_DRAWN_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """Min/max-preserving decimation of a curve to at most ``limit`` points.

    The samples are cut into ``limit // 2`` consecutive chunks; each chunk
    keeps its lowest and its highest sample (in order), and the ends are kept.
    Vectorised: the chunks are padded into one (chunks, longest) array.

    Parameters
    ----------
    x, y : ndarray, shape (N,)

    Returns
    -------
    x, y : ndarray, shape (<= limit + 2,)
    """
    n = x.size
    if n <= limit:
        return x, y
    chunks = limit // 2
    edges = np.linspace(0, n, chunks + 1).astype(int)
    start, stop = edges[:-1], edges[1:]
    width = int(np.max(stop - start))
    cols = start[:, None] + np.arange(width)[None, :]
    inside = cols < stop[:, None]
    vals = y[np.minimum(cols, n - 1)]
    i = start + np.argmin(np.where(inside, vals, np.inf), axis=1)
    j = start + np.argmax(np.where(inside, vals, -np.inf), axis=1)
    idx = np.unique(np.concatenate([np.minimum(i, j), np.maximum(i, j), [0, n - 1]]))
    return x[idx], y[idx]


def _render(fig) -> bytes:
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    FigureCanvasAgg(fig)
    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.fonttype": "none"}):  # text as text: small and fast
        fig.savefig(buf, format="svg", metadata={"Date": None})
    return buf.getvalue()


def _log_frequency_axis(ax) -> None:
    """Log frequency axis with decade ticks labelled in engineering notation (1k, 10k)."""
    from matplotlib.ticker import EngFormatter, LogLocator, NullLocator

    ax.set_xscale("log")
    ax.xaxis.set_major_locator(LogLocator(base=10.0, numticks=8))
    ax.xaxis.set_minor_locator(NullLocator())
    ax.xaxis.set_major_formatter(EngFormatter(sep=""))


def _sparse_value_axis(ax, nbins: int = 5, steps=(1, 2, 2.5, 5, 10)) -> None:
    """At most ``nbins + 1`` round-valued major ticks on the value (y) axis: each tick is five artists."""
    from matplotlib.ticker import MaxNLocator

    ax.yaxis.set_major_locator(MaxNLocator(nbins=nbins, steps=list(steps)))


def _gain_axis(ax) -> None:
    """Gain (dB) axis ticked in 10, 20 or 50 dB steps (20 dB over the usual 150 dB span)."""
    _sparse_value_axis(ax, nbins=8, steps=(1, 2, 5, 10))


def _draw_limits(ax, limits, ref: float, f_lo: float, f_hi: float, y_lo: float, met=None, worst_hz=None) -> None:
    """Shade the forbidden regions of requirement segments (LossLimit) on a magnitude (dB) axis.

    ``ref`` is the reference gain (dB); ``met`` (one bool per segment) colours them.
    """
    from service.response.verification import Band

    for i, lim in enumerate(limits):
        a = max(lim.start_hz, f_lo)
        b = min(lim.stop_hz, f_hi) if math.isfinite(lim.stop_hz) else f_hi
        if not b > a:
            continue
        colour = "tab:green" if (met is None or met[i]) else "tab:red"
        level = ref - lim.limit_db
        if lim.band is Band.PASSBAND:
            ax.fill_between([a, b], [level] * 2, [y_lo] * 2, color=colour, alpha=0.12, lw=0)
        else:
            ax.fill_between([a, b], [level] * 2, [ref + 10.0] * 2, color=colour, alpha=0.12, lw=0)
        ax.plot([a, b], [level] * 2, color=colour, lw=1.0)
    if worst_hz and math.isfinite(worst_hz) and f_lo <= worst_hz <= f_hi:
        ax.axvline(worst_hz, color="0.4", ls=":", lw=0.8)


def _draw_verdict(ax, verdict, f_lo: float, f_hi: float, y_lo: float) -> None:
    """Shade a verdict's segments, coloured by whether each is met, and mark its worst point."""
    if not verdict.stable or not verdict.segments:
        return
    worst = verdict.worst
    _draw_limits(ax, [s.limit for s in verdict.segments], verdict.reference_gain_db, f_lo, f_hi, y_lo,
                 met=[s.met for s in verdict.segments], worst_hz=None if worst is None else worst.worst_hz)


def response_figure_svg(result) -> bytes:
    """Four panels: magnitude (dB, with the mask), phase (deg), group delay, step response.

    Parameters
    ----------
    result : ResponseResult

    Returns
    -------
    bytes
        An SVG document.
    """
    Figure = _pyplot()
    fig = Figure(figsize=(WIDTH_IN, 6.4), dpi=DPI)
    axs = fig.subplots(2, 2)
    fig.subplots_adjust(left=0.09, right=0.98, bottom=0.08, top=0.95, wspace=0.28, hspace=0.38)
    f = result.frequency_hz
    log_x = bool(f.size > 1 and f[0] > 0 and f[-1] / f[0] > 20)
    pos = f > 0 if log_x else np.ones(f.shape, dtype=bool)
    fx = f[pos]
    ax = axs[0, 0]
    mag = result.magnitude_db[pos]
    ax.plot(*decimate(fx, mag), color="tab:blue", lw=1.2)
    top = float(np.max(mag)) if mag.size else 0.0
    y_lo = max(float(np.min(mag)) if mag.size else -100.0, top - 140.0)
    if result.verdict is not None and fx.size:
        _draw_verdict(ax, result.verdict, float(fx[0]), float(fx[-1]), y_lo - 10.0)
    ax.set_ylim(y_lo - 5.0, top + 5.0)
    ax.set_title("Magnitude", y=1.0)
    ax.set_ylabel("gain (dB)")
    ax = axs[0, 1]
    ax.plot(*decimate(fx, result.phase_deg[pos]), color="tab:purple", lw=1.2)
    ax.set_title("Phase", y=1.0)
    ax.set_ylabel("phase (deg)")
    ax = axs[1, 0]
    ax.plot(*decimate(fx, result.group_delay_s[pos] * 1e3), color="tab:orange", lw=1.2)
    ax.set_title("Group delay", y=1.0)
    ax.set_ylabel("group delay (ms)")
    for a in (axs[0, 0], axs[0, 1], axs[1, 0]):
        if log_x:
            _log_frequency_axis(a)
        a.set_xlabel("frequency (Hz)")
        a.grid(True, lw=0.3, alpha=0.6)
    _gain_axis(axs[0, 0])
    for a in (axs[0, 1], axs[1, 0], axs[1, 1]):
        _sparse_value_axis(a)
    ax = axs[1, 1]
    if result.step is not None:
        ax.plot(*decimate(result.step.time_s * 1e3, result.step.value), color="tab:green", lw=1.2)
        ax.set_xlabel("time (ms)")
        ax.set_ylabel("step response (V/V)")
    else:
        ax.text(0.5, 0.5, "time response unavailable", ha="center", va="center", transform=ax.transAxes)
    ax.set_title("Step response", y=1.0)
    ax.grid(True, lw=0.3, alpha=0.6)
    return _render(fig)


def comparison_figure_svg(comparison) -> bytes:
    """Two panels: magnitude of every designed family with the mask, and their step responses.

    Parameters
    ----------
    comparison : Comparison

    Returns
    -------
    bytes
        An SVG document.
    """
    Figure = _pyplot()
    fig = Figure(figsize=(WIDTH_IN, 6.4), dpi=DPI)
    ax_m, ax_s = fig.subplots(2, 1)
    fig.subplots_adjust(left=0.09, right=0.98, bottom=0.08, top=0.95, hspace=0.35)
    curves = comparison.curves()
    for name, (f, mag, t, y) in curves.items():
        ax_m.plot(f, mag, lw=1.1, label=name)
        if t is not None:
            ax_s.plot(t * 1e3, y, lw=1.1, label=name)
    if comparison.criteria is not None and curves:
        f0 = min(float(c[0][0]) for c in curves.values())
        f1 = max(float(c[0][-1]) for c in curves.values())
        att = max((lim.limit_db for lim in comparison.criteria.limits if lim.band.value == "stopband"), default=0.0)
        _draw_limits(ax_m, comparison.criteria.limits, 0.0, f0, f1, -(att + 50.0))
        ax_m.set_ylim(-(att + 40.0), 5.0)
    _log_frequency_axis(ax_m)
    ax_m.set_xlabel("frequency (Hz)")
    ax_m.set_ylabel("gain (dB)")
    ax_m.set_title("Magnitude of each family", y=1.0)
    ax_m.grid(True, lw=0.3, alpha=0.6)
    ax_s.set_xlabel("time (ms)")
    ax_s.set_ylabel("step response (V/V)")
    ax_s.set_title("Step response of each family", y=1.0)
    ax_s.grid(True, lw=0.3, alpha=0.6)
    _gain_axis(ax_m)
    _sparse_value_axis(ax_s)
    if curves:
        ax_m.legend(fontsize=8, ncols=2)
    return _render(fig)
