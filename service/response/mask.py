"""Requirement masks: passband and stopband bounds on the loss, and their check.

A mask is a list of frequency segments, each with a largest allowed loss
(passband) and/or a smallest required loss (stopband). Loss is measured in dB
below a reference gain: by default the largest gain inside the passband
segments (so a unity-gain filter's loss is just -20*log10|H|, and a filter with
gain is judged on its shape), or a fixed ``reference_gain_db``.

The check is made on the dense internal grid of
:func:`service.response.refine.analysis_grid_hz` restricted to each segment,
plus the segment edges and the caller's own grid points. On a segment the
margin is min(max_loss_db - loss, loss - min_loss_db), so its worst value
sits where the gain is smallest or largest: those extremes (and the largest
passband gain, the default reference) are refined for every segment at once
by one bracketed minimisation (nested uniform search with a final parabolic
step, see :func:`service.response.refine.refine_extrema`) around every
sampled local extremum that can hold the segment's extreme (segment edges
included). A ripple peak between two display-grid samples therefore cannot
hide a failure.

The margin of a passband point is ``max_loss_db - loss``; of a stopband point
``loss - min_loss_db``; a segment passes when its worst margin is >= -tol,
with tol = :data:`MARGIN_TOLERANCE_DB` (absorbs rounding at a design's exact
ripple edge).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np

from service.approximation.types import ResponseType
from service.response.errors import InvalidMask
from service.response.refine import GAIN_TOLERANCE_DB, analysis_grid_hz, refine_extrema

#: Margins above -1e-6 dB count as meeting the mask.
MARGIN_TOLERANCE_DB = 1e-6
#: Where a segment runs to infinity, the check stops this many decades above
#: the highest critical frequency; beyond it a rational response is monotonic,
#: and the value at the stop is also checked.
INFINITE_EDGE_DECADES = 4.0


@dataclass(frozen=True)
class MaskSegment:
    """One band of a mask.

    Attributes
    ----------
    start_hz, stop_hz : float
        Band edges (Hz), 0 <= start < stop; ``stop_hz`` may be ``math.inf``.
    max_loss_db : float or None
        Largest allowed loss (dB) in the band (a passband bound).
    min_loss_db : float or None
        Smallest required loss (dB) in the band (a stopband bound).
    """

    start_hz: float
    stop_hz: float
    max_loss_db: float | None = None
    min_loss_db: float | None = None

    def __post_init__(self):
        s, e = float(self.start_hz), float(self.stop_hz)
        if not (math.isfinite(s) and s >= 0):
            raise InvalidMask("mask segment start_hz must be a finite frequency >= 0", field="mask.start_hz")
        if not (e > s) or math.isnan(e):
            raise InvalidMask("mask segment stop_hz must be above start_hz", field="mask.stop_hz")
        if self.max_loss_db is None and self.min_loss_db is None:
            raise InvalidMask("a mask segment needs max_loss_db or min_loss_db", field="mask.max_loss_db")
        for name in ("max_loss_db", "min_loss_db"):
            v = getattr(self, name)
            if v is not None and not math.isfinite(v):
                raise InvalidMask(f"mask segment {name} must be finite", field=f"mask.{name}")
        if (self.max_loss_db is not None and self.min_loss_db is not None
                and self.min_loss_db > self.max_loss_db):
            raise InvalidMask("mask segment min_loss_db exceeds max_loss_db", field="mask.min_loss_db")
        object.__setattr__(self, "start_hz", s)
        object.__setattr__(self, "stop_hz", e)

    @property
    def is_passband(self) -> bool:
        return self.max_loss_db is not None

    def as_dict(self) -> dict:
        return {"start_hz": self.start_hz, "stop_hz": None if math.isinf(self.stop_hz) else self.stop_hz,
                "max_loss_db": self.max_loss_db, "min_loss_db": self.min_loss_db}


def _edges(value: Any, band: bool, name: str) -> tuple[float, ...]:
    arr = np.atleast_1d(np.asarray(value, dtype=float)).ravel()
    want = 2 if band else 1
    if arr.size != want:
        kind = "a pair [low, high]" if band else "a single number"
        raise InvalidMask(f"{name} must be {kind} for this response type", field=name)
    if not np.all(np.isfinite(arr)) or np.any(arr <= 0):
        raise InvalidMask(f"{name} must be positive frequencies (Hz)", field=name)
    if band and not arr[0] < arr[1]:
        raise InvalidMask(f"{name} must be increasing [low, high]", field=name)
    return tuple(float(x) for x in arr)


@dataclass(frozen=True)
class Mask:
    """A requirement mask: segments and the loss reference.

    Parameters
    ----------
    segments : sequence of MaskSegment
    reference_gain_db : float, optional
        Gain (dB) that loss is measured from; None: the largest gain inside
        the passband segments (or the peak gain when there are none).
    """

    segments: tuple[MaskSegment, ...]
    reference_gain_db: float | None = None

    def __post_init__(self):
        segs = tuple(self.segments)
        if not segs:
            raise InvalidMask("a mask needs at least one segment", field="mask")
        object.__setattr__(self, "segments", segs)

    @classmethod
    def from_requirement(cls, response: ResponseType | str, passband_hz, stopband_hz,
                         passband_ripple_db: float, stopband_attenuation_db: float) -> "Mask":
        """The mask of a classic requirement (edges in Hz, loss bounds in dB).

        lowpass: loss <= ripple on [0, fp], >= attenuation on [fs, inf);
        highpass: >= attenuation on [0, fs], <= ripple on [fp, inf);
        bandpass: <= ripple on [fp1, fp2], >= attenuation on [0, fs1] and [fs2, inf);
        bandstop: <= ripple on [0, fp1] and [fp2, inf), >= attenuation on [fs1, fs2].

        Raises
        ------
        InvalidMask
            Edges of the wrong shape or order, ripple <= 0, attenuation <= ripple.
        """
        rt = ResponseType(response)
        if not (math.isfinite(passband_ripple_db) and passband_ripple_db > 0):
            raise InvalidMask("passband_ripple_db must be a positive number of dB", field="passband_ripple_db")
        if not (math.isfinite(stopband_attenuation_db) and stopband_attenuation_db > passband_ripple_db):
            raise InvalidMask("stopband_attenuation_db must be larger than passband_ripple_db",
                              field="stopband_attenuation_db")
        band = rt in (ResponseType.BANDPASS, ResponseType.BANDSTOP)
        fp = _edges(passband_hz, band, "passband_hz")
        fs = _edges(stopband_hz, band, "stopband_hz")
        rip, att = float(passband_ripple_db), float(stopband_attenuation_db)
        inf = math.inf

        def order_error(msg):
            return InvalidMask(msg, field="stopband_hz")

        if rt is ResponseType.LOWPASS:
            if not fs[0] > fp[0]:
                raise order_error("a lowpass needs stopband_hz above passband_hz")
            segs = [MaskSegment(0.0, fp[0], max_loss_db=rip), MaskSegment(fs[0], inf, min_loss_db=att)]
        elif rt is ResponseType.HIGHPASS:
            if not fs[0] < fp[0]:
                raise order_error("a highpass needs stopband_hz below passband_hz")
            segs = [MaskSegment(0.0, fs[0], min_loss_db=att), MaskSegment(fp[0], inf, max_loss_db=rip)]
        elif rt is ResponseType.BANDPASS:
            if not (fs[0] < fp[0] and fp[1] < fs[1]):
                raise order_error("a bandpass needs stopband_hz outside passband_hz")
            segs = [MaskSegment(0.0, fs[0], min_loss_db=att), MaskSegment(fp[0], fp[1], max_loss_db=rip),
                    MaskSegment(fs[1], inf, min_loss_db=att)]
        else:
            if not (fp[0] < fs[0] and fs[1] < fp[1]):
                raise order_error("a bandstop needs stopband_hz inside passband_hz")
            segs = [MaskSegment(0.0, fp[0], max_loss_db=rip), MaskSegment(fs[0], fs[1], min_loss_db=att),
                    MaskSegment(fp[1], inf, max_loss_db=rip)]
        return cls(tuple(segs))

    @property
    def passbands(self) -> list[tuple[float, float]]:
        return [(s.start_hz, s.stop_hz) for s in self.segments if s.is_passband]

    def as_dict(self) -> dict:
        return {"segments": [s.as_dict() for s in self.segments], "reference_gain_db": self.reference_gain_db}


@dataclass(frozen=True)
class SegmentResult:
    """Check of one mask segment: worst margin (dB) and where (Hz)."""

    segment: MaskSegment
    worst_margin_db: float
    worst_frequency_hz: float
    passed: bool

    def as_dict(self) -> dict:
        d = self.segment.as_dict()
        d.update(worst_margin_db=self.worst_margin_db, worst_frequency_hz=self.worst_frequency_hz,
                 **{"pass": self.passed})
        return d


@dataclass(frozen=True)
class MaskResult:
    """Outcome of a mask check.

    Attributes
    ----------
    passed : bool
        Every segment passes (public name ``pass``).
    worst_margin_db : float
        Smallest margin over all segments (dB; negative: fails).
    worst_frequency_hz : float
        Where it occurs (Hz).
    reference_gain_db : float
        The gain (dB) loss was measured from.
    segments : list of SegmentResult
    """

    passed: bool
    worst_margin_db: float
    worst_frequency_hz: float
    reference_gain_db: float
    segments: list[SegmentResult] = field(default_factory=list)
    mask: Mask | None = None

    def as_dict(self) -> dict:
        return {"pass": self.passed, "worst_margin_db": self.worst_margin_db,
                "worst_frequency_hz": self.worst_frequency_hz, "reference_gain_db": self.reference_gain_db,
                "segments": [s.as_dict() for s in self.segments]}


def _segment_span(seg: MaskSegment, top_hz: float) -> tuple[float, float]:
    stop = seg.stop_hz if math.isfinite(seg.stop_hz) else max(top_hz, seg.start_hz * 10.0)
    return seg.start_hz, stop


def check_mask(mask: Mask, gain_db, zeros, poles, extra_hz=(), peak_gain_db: float | None = None) -> MaskResult:
    """Check a response against a mask.

    Parameters
    ----------
    mask : Mask
    gain_db : callable
        Vectorised gain in dB of frequency in Hz (floats >= 0).
    zeros, poles : ndarray of complex (rad/s)
        The system's roots, which place the dense internal grid.
    extra_hz : array_like
        More frequencies to include (the caller's display grid).
    peak_gain_db : float, optional
        Reference when the mask has no passband segment.

    Returns
    -------
    MaskResult
    """
    from service.response.refine import critical_frequencies_hz

    crit = critical_frequencies_hz(zeros, poles)
    top = (crit[-1] if crit.size else 1.0) * 10.0 ** INFINITE_EDGE_DECADES
    edges = [e for s in mask.segments for e in (s.start_hz, s.stop_hz) if math.isfinite(e) and e > 0]
    base = analysis_grid_hz(zeros, poles, extra_hz=edges)
    extra = np.asarray(extra_hz, dtype=float).ravel()
    base = np.unique(np.concatenate([base, extra[np.isfinite(extra) & (extra > 0)]]))

    spans = [_segment_span(seg, top) for seg in mask.segments]
    grids = []
    for a, b in spans:
        g = base[(base > a) & (base < b)]
        grids.append(np.concatenate([[a] if a > 0 else [], g, [b]]))
    # every sample of every segment in one evaluation
    sizes = np.cumsum([g.size for g in grids])[:-1]
    gains = np.split(np.asarray(gain_db(np.concatenate(grids)), dtype=float), sizes)
    at_dc = any(a == 0.0 for a, _ in spans)
    g_dc = float(gain_db(np.zeros(1))[0]) if at_dc else None

    # The margin of a segment is min(max_loss - (ref - g), (ref - g) - min_loss), so its
    # worst value needs only the smallest and the largest gain g on the segment, and the
    # reference is the largest gain on the passbands: all of them are refined in one search.
    curves, where = [], []
    need_ref = mask.reference_gain_db is None
    for i, seg in enumerate(mask.segments):
        want_max = seg.min_loss_db is not None or (need_ref and seg.is_passband)
        if seg.max_loss_db is not None:
            curves.append((grids[i], gains[i], 1.0))
            where.append((i, "min"))
        if want_max:
            curves.append((grids[i], gains[i], -1.0))
            where.append((i, "max"))
    found = dict(zip(where, refine_extrema(gain_db, curves, log_axis=True, tolerance=GAIN_TOLERANCE_DB)))

    if not need_ref:
        ref = float(mask.reference_gain_db)
    else:
        peaks = []
        for i, seg in enumerate(mask.segments):
            if seg.is_passband:
                peaks.append(found[(i, "max")][1])
                if spans[i][0] == 0.0:
                    peaks.append(g_dc)
        if peaks:
            ref = max(peaks)
        elif peak_gain_db is not None:
            ref = float(peak_gain_db)
        else:
            ref = float(np.max(gain_db(base)))

    def margin(seg, g):
        loss = ref - g
        m = math.inf
        if seg.max_loss_db is not None:
            m = min(m, seg.max_loss_db - loss)
        if seg.min_loss_db is not None:
            m = min(m, loss - seg.min_loss_db)
        return m

    results = []
    for i, seg in enumerate(mask.segments):
        # any sampled point's margin is >= the worst, so an extra candidate never misleads
        cands = [found[key] for key in ((i, "min"), (i, "max")) if key in found]
        if spans[i][0] == 0.0:
            cands.append((0.0, g_dc))
        f_worst, m_worst = math.nan, math.inf
        for f_c, g_c in cands:
            m_c = margin(seg, g_c)
            if m_c < m_worst:
                f_worst, m_worst = f_c, m_c
        results.append(SegmentResult(seg, float(m_worst), float(f_worst), bool(m_worst >= -MARGIN_TOLERANCE_DB)))
    worst = min(results, key=lambda r: r.worst_margin_db)
    return MaskResult(all(r.passed for r in results), worst.worst_margin_db, worst.worst_frequency_hz,
                      ref, results, mask)
