"""The SVG figure of a tolerance run: the Monte Carlo envelope against the mask, and its passband detail.

Frequencies are in Hz, gains and losses in dB. How it reads, top to bottom:

- a title block: the filter (family, response, order), the requirement, the
  design (stages, topologies, op-amps), how the boards were drawn (trials,
  distributions, temperature), and the yield with its 95 % Wilson interval
  (E. B. Wilson, JASA 22 (1927) 209-212) as the run computed it;
- a legend of the percentile bands, the median, the nominal, the mask's
  shading and the markers;
- the magnitude envelope: the bands min-max, 0.135-99.865 % (the +-3 sigma
  span of a normal distribution) and 2.5-97.5 % of the trials' gain at each
  frequency, the median and the nominal design; the mask relative to the
  nominal's reference gain; on each segment a marker at the worst point the
  verifier located among the trials (else the nominal design's worst point),
  met when no stable trial fails that segment, missed otherwise -- counts
  read from the run's ``failures_by_criterion``, never re-judged here;
- a passband detail of the same bands with its gain axis scaled to the
  envelope's swing in the passband (see
  :func:`service.response.plotting.detail_gain_range`).

Drawing helpers, palette and cost notes are those of
:mod:`service.response.plotting`; ``tests/bench/bench_figures.py`` measures it.
"""

from __future__ import annotations

import math

import numpy as np

from service.response.figure_inputs import frequency_view, half_power_band, in_bands, passband_window
from service.response.plotting import (CURVE, INK, MET, MISSED, SegmentMark, decimation_indices, detail_gain_range,
                                       draw_mask, draw_worst_points, figure_legend, gain_axis, legend_handles,
                                       linear_frequency_axis, log_frequency_axis, new_figure, render_svg,
                                       signed_db, sparse_value_axis, style_axes, title_block)

#: Height of the tolerance figure (in): title block, legend, the envelope and its passband detail.
TOLERANCE_HEIGHT_IN = 8.4
#: Fill colours of the percentile bands, widest (lightest) first, and their legend labels.
BANDS = (
    ((0, 6), "#cfdcee", "min – max"),
    ((1, 5), "#9ab8de", "0.135 – 99.865 % (±3σ)"),
    ((2, 4), "#5f8fcb", "2.5 – 97.5 % (±2σ)"),
)
MEDIAN_ROW = 3
#: Under a figure with a mask: the bands are gains, the verdict of a board is on its own losses.
REFERENCE_NOTE = ("The mask is drawn from the nominal design's reference gain; each board's loss is measured "
                  "from its own (its largest passband gain), as the verifier does.")
NOMINAL = INK


def _reference(result) -> float:
    """The gain (dB) the mask is drawn from: the criteria's fixed reference, else the nominal design's."""
    crit = result.criteria
    if crit is not None and crit.reference_gain_db is not None:
        return float(crit.reference_gain_db)
    return float(result.notes.get("nominal_reference_gain_db", 0.0))


def tolerance_marks(result) -> list[SegmentMark]:
    """Each mask segment with its worst point and its state from the run's failure counts.

    The point is the worst one the verifier located among the trials (``failures_by_criterion[..]
    ["worst_trial"]``), else the nominal design's worst point (``result.nominal_verdict``). The state is
    ``"met"`` when no stable trial fails the segment and ``"missed"`` otherwise (an unstable trial meets
    nothing: the yield line counts those); the label says how many of the trials fail and the smallest
    margin (dB) over all trials.
    """
    crit, yld = result.criteria, result.yield_
    if crit is None:
        return []
    rows = {} if yld is None else {r["segment"]: r for r in yld.get("failures_by_criterion", ())
                                   if r.get("segment") is not None}
    nominal = result.nominal_verdict
    nominal_segments = nominal.segments if nominal is not None and nominal.stable else ()
    trials = result.trial_count
    marks = []
    for j, lim in enumerate(crit.limits):
        row = rows.get(j)
        if row is None:
            marks.append(SegmentMark(lim, None, None, None, "", lim.stop_hz, j + 1))
            continue
        worst = row.get("worst_trial")
        if worst is not None:
            where, loss = worst["frequency_hz"], worst["loss_db"]
        elif j < len(nominal_segments):
            where, loss = nominal_segments[j].worst_hz, nominal_segments[j].loss_db
        else:
            where = loss = None
        failures, unstable = int(row["failures"]), int(yld.get("unstable") or 0)
        state = "met" if failures == 0 else "missed"
        if failures == 0:
            count = f"all {trials:,} pass" if not unstable else f"all {trials - unstable:,} stable boards pass"
        else:
            count = f"{failures:,} of {trials:,} fail"
        margin = row.get("worst_margin_db")
        label = count if margin is None else f"{count}, worst {signed_db(margin)} dB"
        marks.append(SegmentMark(lim, state, where, loss, label, lim.stop_hz, j + 1))
    return marks


def _run_line(result) -> str:
    """How the boards were drawn: trials, distributions by part kind, temperature range (°C)."""
    dist = dict(result.distribution or {})
    names = sorted(set(dist.values()))
    if len(names) == 1:
        how = names[0]
    else:
        how = ", ".join(f"{kind} {name}" for kind, name in dist.items())
    how = how.replace("gaussian", "Gaussian (tolerance = 3σ)")
    text = f"Monte Carlo: {result.trial_count:,} boards, parts {how}"
    if result.temperature:
        t = result.temperature
        text += f", {t['min_c']:g} to {t['max_c']:g} °C".replace("-", "−")
    return text + f", seed {result.seed}"


def _yield_line(result) -> tuple[str, str]:
    """The yield with its interval, as the run computed it, and its colour."""
    y = result.yield_
    if y is None:
        return "No requirement or mask: yield not computed", "#5b5b5b"
    text = (f"Yield {100 * y['fraction']:.1f} % (95 % interval {100 * y['ci95_low']:.1f}–"
            f"{100 * y['ci95_high']:.1f} %): {y['passed']:,} of {y['trials']:,} boards meet the requirement")
    if y.get("unstable"):
        text += f" · {y['unstable']:,} unstable"
    colour = MET if y["passed"] == y["trials"] else (MISSED if y["passed"] == 0 else INK)
    return text, colour


def _bands(ax, x, m, nominal, idx):
    """Draw the percentile bands, median and nominal at the columns ``idx``; returns the legend handles."""
    from matplotlib.patches import Patch

    handles = []
    for (lo, hi), colour, label in BANDS:
        ax.fill_between(x[idx], m[lo, idx], m[hi, idx], color=colour, lw=0, zorder=2)
        handles.append(Patch(facecolor=colour, edgecolor="none", label=label))
    med, = ax.plot(x[idx], m[MEDIAN_ROW, idx], color=CURVE, lw=1.3, zorder=3, label="median")
    nom, = ax.plot(x[idx], nominal[idx], color=NOMINAL, lw=0.9, ls=(0, (5, 2)), zorder=3.5, label="nominal design")
    return handles + [med, nom]


def _columns(m: np.ndarray, sel: np.ndarray) -> np.ndarray:
    """The columns (indices into ``sel``'s True entries) to draw: the min/max-preserving decimation of the
    lowest and highest bands, together."""
    lo = decimation_indices(m[0, sel])
    hi = decimation_indices(m[6, sel])
    return np.union1d(lo, hi)


def tolerance_figure(result, subject=None):
    """The tolerance figure of ``result`` as a matplotlib Figure (see the module notes for what it shows).

    Parameters
    ----------
    result : ToleranceResult
        Frequencies (Hz), magnitude percentiles (dB, rows min ... max), the nominal magnitude (dB), the
        criteria the trials were verified against, the yield and its failures by criterion.
    subject : FigureSubject, optional
        The title's filter, requirement and design lines; default ``result.subject``.

    Returns
    -------
    matplotlib.figure.Figure
        8 x :data:`TOLERANCE_HEIGHT_IN` inches, Agg canvas attached.
    """
    subject = subject if subject is not None else result.subject
    H = TOLERANCE_HEIGHT_IN
    fig = new_figure(H)
    head = title_block(fig, H, subject, [(_run_line(result), INK, "title-run"), (*_yield_line(result), "title-yield")])
    legend_top = head + 0.04
    grid = fig.add_gridspec(2, 1, left=0.085, right=0.975, bottom=0.09, hspace=0.34,
                            height_ratios=[1.4, 1.0])
    ax_m, ax_d = fig.add_subplot(grid[0]), fig.add_subplot(grid[1])

    f = np.asarray(result.frequency_hz, dtype=float)
    log_x, keep = frequency_view(f)
    x = f[keep]
    m = np.asarray(result.magnitude_db, dtype=float)[:, keep]
    nominal = np.asarray(result.nominal_magnitude_db, dtype=float)[keep]
    f_lo, f_hi = (float(x[0]), float(x[-1])) if x.size else (1.0, 10.0)
    ref = _reference(result)
    marks = tolerance_marks(result)

    # the envelope with the mask
    style_axes(ax_m, "Magnitude, Monte Carlo envelope")
    handles = _bands(ax_m, x, m, nominal, _columns(m, np.ones(x.shape, dtype=bool))) if x.size else []
    top_db = float(np.max(m[6])) if m.size else 0.0
    bottom = max(float(np.min(m[0])) if m.size else -100.0, top_db - 140.0)
    for mk in marks:
        if mk.limit.band.value == "stopband":
            bottom = min(bottom, ref - mk.limit.limit_db - 10.0)
    y_lo, y_hi = max(bottom, top_db - 160.0) - 5.0, top_db + 5.0
    drawn = draw_mask(ax_m, marks, ref, f_lo, f_hi, y_lo - 10.0, y_hi + 10.0)
    drawn |= draw_worst_points(ax_m, marks, ref, f_lo, f_hi, y_lo, y_hi, log_x=log_x)
    ax_m.set_xlim(f_lo, f_hi)
    ax_m.set_ylim(y_lo, y_hi)
    ax_m.set_ylabel("gain (dB)", fontsize=8.5)
    ax_m.set_xlabel("frequency (Hz)", fontsize=8.5)
    if log_x:
        log_frequency_axis(ax_m)
    gain_axis(ax_m)

    # the passband detail
    style_axes(ax_d, "Passband detail")
    ax_d.set_ylabel("gain (dB)", fontsize=8.5)
    ax_d.set_xlabel("frequency (Hz)", fontsize=8.5)
    bands = [(mk.limit.start_hz, mk.stop_hz) for mk in marks if mk.limit.band.value == "passband"]
    if not bands and x.size:
        bands = half_power_band(x, nominal, ref)
    window = passband_window(bands, f_lo, f_hi)
    inside = in_bands(x, bands) if window is not None else np.zeros(x.shape, dtype=bool)
    if inside.any():
        lo, hi = window
        limit = max((mk.limit.limit_db for mk in marks if mk.limit.band.value == "passband"), default=None)
        d_lo, d_hi, shown = detail_gain_range(ref, float(np.min(m[0, inside])), float(np.max(m[6, inside])), limit)
        sel = np.zeros(x.shape, dtype=bool)
        idx = np.flatnonzero((x >= lo) & (x <= hi))
        sel[max(idx[0] - 1, 0):min(idx[-1] + 2, x.size)] = True          # one point beyond each end
        cols = np.flatnonzero(sel)[_columns(m, sel)]
        _bands(ax_d, x, m, nominal, cols)
        drawn |= draw_mask(ax_d, marks, ref, lo, hi, d_lo - 1.0, d_hi + 1.0)
        detail_log = bool(log_x and hi / lo > 5)
        drawn |= draw_worst_points(ax_d, marks, ref, lo, hi, d_lo, d_hi, log_x=detail_log)
        ax_d.set_xlim(lo, hi)
        ax_d.set_ylim(d_lo, d_hi)
        if detail_log:
            log_frequency_axis(ax_d)
        else:
            linear_frequency_axis(ax_d)
        sparse_value_axis(ax_d)
        notes = []
        ripple = (result.metrics or {}).get("passband_ripple_db")
        if ripple and ripple.get("p50") is not None and math.isfinite(ripple["p50"]):
            notes.append(f"ripple: median {ripple['p50']:.3g} dB, largest {ripple['max']:.3g} dB")
        if limit is not None and not shown:
            notes.append(f"limit −{limit:g} dB: below this axis")
        if notes:
            ax_d.set_title(" · ".join(notes), loc="right", fontsize=7.5, color=INK, y=1.0, pad=4)
    else:
        ax_d.text(0.5, 0.5, "no passband in the plotted range", ha="center", va="center", fontsize=8,
                  transform=ax_d.transAxes)

    if marks:
        fig.text(0.02, 0.012, REFERENCE_NOTE, fontsize=7.5, color="#5b5b5b", va="bottom", gid="footnote")
    figure_legend(fig, grid, legend_handles(drawn, handles), legend_top, H, columns=4)
    return fig


def tolerance_figure_svg(result, subject=None) -> bytes:
    """The tolerance figure of ``result`` (see :func:`tolerance_figure`) as an SVG document (bytes)."""
    return render_svg(tolerance_figure(result, subject))


__all__ = ["tolerance_figure", "tolerance_figure_svg", "tolerance_marks"]
