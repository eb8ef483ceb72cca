"""The verifier: does a transfer function (or every trial of a circuit) meet a requirement?

One definition of "meets", used for designs, edited documents, response masks
and every Monte Carlo trial:

- **Reference.** Loss is measured in dB below one reference gain: the largest
  gain over the passband segments (DC included where a passband starts at
  0 Hz), or a fixed ``reference_gain_db``.
- **Whole bands.** Every segment is checked on the whole of it, not on sample
  points: a branch-and-bound over sub-intervals (R. E. Moore, R. B. Kearfott
  and M. J. Cloud, *Introduction to Interval Analysis*, SIAM, 2009, ch. 6)
  with the gain bounds of :mod:`service.response.bounds`.  An interval is
  retired when its bound proves it cannot hold the segment's worst margin
  (nor, for a passband, the reference); otherwise it is halved and the exact
  gain evaluated at the new point.  The search ends when the worst margin is
  located to ``precision_db`` and, near zero, proved to ``tolerance_db``.
- **Open bands** are checked up to their stated ``stop_hz``.  A segment marked
  ``ends_with_rolloff`` (an open passband whose upper limit was not stated,
  realized with finite-bandwidth op-amps) may *end* earlier: when its loss
  exceeds the limit everywhere from some frequency up to ``stop_hz``, that
  frequency is reported (``ended_hz``) and the segment is checked up to it.
- **Group delay**: ``|tau(w) - tau(0)| / tau(0)`` stays within the limit on
  ``[0, stop_hz]``, proved the same way with the delay bounds.
- **Stability**: a trial with a pole in the closed right half-plane (within
  1e-12 relative) is unstable; it meets nothing and its band figures are not
  computed.
- **Numerical tolerance**: a margin within ``tolerance_db`` of 0 is 0; a
  trial meets when it is stable and every margin is >= 0 after that rounding.
  When the search budget ends before a margin is proved, the reported margin
  is its proved lower bound (so "meets" stays exactly "worst margin >= 0") and
  ``unresolved_db`` says how large the unproved part is.

Frequencies are in Hz at this surface and rad/s inside.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from service.circuit.roots import RootSet
from service.response.criteria import (DELAY_PRECISION_PCT, DELAY_TOLERANCE_PCT, NEPER_DB, PRECISION_DB, TOLERANCE_DB,
                                       TWO_PI, Band, Criteria, DelayLimit, LossLimit)
from service.response.search import MAX_ROUNDS, verify_delay, verify_losses


@dataclass(frozen=True)
class SegmentVerdict:
    """One segment of one trial.

    ``margin_db`` is positive when met: passband ``limit - loss``, stopband
    ``loss - limit``, at its worst over the (checked part of the) segment,
    found at ``worst_hz``.
    """

    limit: LossLimit
    margin_db: float
    worst_hz: float
    loss_db: float
    proved: bool
    unresolved_db: float
    checked_to_hz: float
    ended_hz: float | None

    @property
    def met(self) -> bool:
        return self.margin_db >= 0.0

    def as_dict(self) -> dict:
        lim = self.limit
        return {"band": lim.band.value, "start_hz": lim.start_hz, "stop_hz": lim.stop_hz,
                "limit_db": lim.limit_db, "open_end": lim.open_end, "margin_db": self.margin_db,
                "worst_hz": self.worst_hz, "loss_db": self.loss_db, "met": self.met, "proved": self.proved,
                "unresolved_db": self.unresolved_db, "checked_to_hz": self.checked_to_hz,
                "ended_hz": self.ended_hz}


@dataclass(frozen=True)
class DelayVerdict:
    """The group-delay limit of one trial (percent of the DC delay)."""

    limit: DelayLimit
    margin_pct: float
    worst_hz: float
    deviation_pct: float
    dc_delay_s: float
    proved: bool

    @property
    def met(self) -> bool:
        return self.margin_pct >= 0.0

    def as_dict(self) -> dict:
        return {"stop_hz": self.limit.stop_hz, "limit_pct": self.limit.max_deviation_pct,
                "margin_pct": self.margin_pct, "worst_hz": self.worst_hz, "deviation_pct": self.deviation_pct,
                "dc_delay_s": self.dc_delay_s, "met": self.met, "proved": self.proved}


@dataclass(frozen=True)
class UnstablePole:
    """A pole in the closed right half-plane: its group (stage index from 0) and frequency."""

    group: int
    pole_rad_s: complex

    @property
    def frequency_hz(self) -> float:
        return abs(self.pole_rad_s) / TWO_PI


@dataclass(frozen=True)
class Verdict:
    """The verification of one trial.

    Attributes
    ----------
    stable : bool
    unstable_poles : tuple of UnstablePole
    reference_gain_db : float or None
        None when unstable.
    segments : tuple of SegmentVerdict
        Empty when unstable.
    delay : DelayVerdict or None
    """

    stable: bool
    unstable_poles: tuple[UnstablePole, ...]
    reference_gain_db: float | None
    segments: tuple[SegmentVerdict, ...]
    delay: DelayVerdict | None

    @property
    def worst_margin_db(self) -> float | None:
        """Smallest segment margin (dB); None when unstable or without segments."""
        if not self.stable or not self.segments:
            return None
        return min(s.margin_db for s in self.segments)

    @property
    def meets(self) -> bool:
        return (self.stable and all(s.met for s in self.segments)
                and (self.delay is None or self.delay.met))

    @property
    def proved(self) -> bool:
        return all(s.proved for s in self.segments) and (self.delay is None or self.delay.proved)

    @property
    def worst(self) -> SegmentVerdict | None:
        """The segment with the smallest margin (None when unstable or without segments)."""
        if not self.stable or not self.segments:
            return None
        return min(self.segments, key=lambda s: s.margin_db)

    def as_dict(self) -> dict:
        """Plain JSON: meets, status, worst margin and where, reference, segments, delay, stability."""
        worst = self.worst
        return {
            "meets": self.meets, "pass": self.meets, "status": self.status,
            "worst_margin_db": self.worst_margin_db,
            "worst_frequency_hz": None if worst is None else worst.worst_hz,
            "reference_gain_db": self.reference_gain_db,
            "segments": [s.as_dict() for s in self.segments],
            "group_delay": None if self.delay is None else self.delay.as_dict(),
            "stability": {"stable": self.stable,
                          "unstable_poles": [{"group": p.group, "frequency_hz": p.frequency_hz,
                                              "real_rad_s": p.pole_rad_s.real, "imag_rad_s": p.pole_rad_s.imag}
                                             for p in self.unstable_poles]},
        }

    @property
    def status(self) -> str:
        """``unstable``, ``meets``, ``misses`` or ``unproved`` (margins not all proved, none failed)."""
        if not self.stable:
            return "unstable"
        if self.meets:
            return "meets"
        failed = any(s.margin_db < 0 and s.proved for s in self.segments) or (
            self.delay is not None and self.delay.margin_pct < 0 and self.delay.proved)
        return "misses" if failed or self.proved else "unproved"


@dataclass
class BatchVerdict:
    """Verification of ``T`` trials (arrays over trials ``t`` and segments ``s``).

    Attributes
    ----------
    criteria : Criteria
    stable : ndarray bool (T,)
    reference_gain_db : ndarray (T,)
    margin_db : ndarray (T, S)
        Worst margin per segment, rounded to 0 within the tolerance; for an
        unproved segment its proved lower bound.  NaN for unstable trials.
    worst_hz, loss_db, unresolved_db, checked_to_hz : ndarray (T, S)
    ended : ndarray bool (T, S)
    delay_margin_pct, delay_worst_hz, delay_deviation_pct, dc_delay_s : ndarray (T,) or None
    delay_proved : ndarray bool (T,) or None
    poles : ndarray complex (T, P), pole_group : ndarray int (P,)
    located : ndarray bool (T, S)
        The margin was located by the full search (else it is a proved lower bound).
    """

    criteria: Criteria
    stable: np.ndarray
    reference_gain_db: np.ndarray
    margin_db: np.ndarray
    worst_hz: np.ndarray
    loss_db: np.ndarray
    unresolved_db: np.ndarray
    checked_to_hz: np.ndarray
    ended: np.ndarray
    delay_margin_pct: np.ndarray | None
    delay_worst_hz: np.ndarray | None
    delay_deviation_pct: np.ndarray | None
    dc_delay_s: np.ndarray | None
    delay_proved: np.ndarray | None
    poles: np.ndarray
    pole_group: np.ndarray
    located: np.ndarray | None = None

    @property
    def trials(self) -> int:
        return int(self.stable.shape[0])

    def meets(self) -> np.ndarray:
        """Bool (T,): stable, every segment margin >= 0, delay margin >= 0."""
        ok = self.stable.copy()
        if self.margin_db.shape[1]:
            with np.errstate(invalid="ignore"):
                ok &= np.all(self.margin_db >= 0.0, axis=1)
        if self.delay_margin_pct is not None:
            with np.errstate(invalid="ignore"):
                ok &= self.delay_margin_pct >= 0.0
        return ok

    def segment_met(self) -> np.ndarray:
        """Bool (T, S): the trial meets the segment (False when unstable)."""
        with np.errstate(invalid="ignore"):
            return (self.margin_db >= 0.0) & self.stable[:, None]

    def verdict(self, t: int = 0) -> Verdict:
        """The verdict of trial ``t``."""
        unstable = ()
        if not self.stable[t]:
            p = self.poles[t]
            bad = np.isfinite(p) & (p.real >= -1e-12 * np.abs(p))
            unstable = tuple(UnstablePole(int(self.pole_group[i]), complex(p[i])) for i in np.flatnonzero(bad)
                             if p[i].imag >= 0)
            return Verdict(False, unstable, None, (), None)
        segs = tuple(SegmentVerdict(
            lim, float(self.margin_db[t, s]), float(self.worst_hz[t, s]), float(self.loss_db[t, s]),
            bool(self.unresolved_db[t, s] == 0.0), float(self.unresolved_db[t, s]), float(self.checked_to_hz[t, s]),
            float(self.checked_to_hz[t, s]) if self.ended[t, s] else None)
            for s, lim in enumerate(self.criteria.limits))
        delay = None
        if self.delay_margin_pct is not None:
            delay = DelayVerdict(self.criteria.delay, float(self.delay_margin_pct[t]), float(self.delay_worst_hz[t]),
                                 float(self.delay_deviation_pct[t]), float(self.dc_delay_s[t]),
                                 bool(self.delay_proved[t]))
        return Verdict(True, (), float(self.reference_gain_db[t]), segs, delay)


#: Fewest trials for which the perturbation bound is tried before the full search.
BATCH_MIN_TRIALS = 16
#: Trials searched together by the full search (bounds its memory: a few hundred intervals of some twenty
#: roots per trial, a dozen temporaries of complex (intervals x roots) arrays; 64 trials stay near 20 MiB and in cache best).
SEARCH_CHUNK_TRIALS = 64


def _empty_batch(roots: RootSet, criteria: Criteria) -> "BatchVerdict":
    T, S = roots.trials, len(criteria.limits)
    return BatchVerdict(
        criteria=criteria, stable=~roots.unstable(), reference_gain_db=np.full(T, np.nan),
        margin_db=np.full((T, S), np.nan), worst_hz=np.full((T, S), np.nan), loss_db=np.full((T, S), np.nan),
        unresolved_db=np.full((T, S), np.nan), checked_to_hz=np.full((T, S), np.nan),
        ended=np.zeros((T, S), dtype=bool), delay_margin_pct=None, delay_worst_hz=None,
        delay_deviation_pct=None, dc_delay_s=None, delay_proved=None, poles=roots.poles,
        pole_group=roots.pole_group, located=np.zeros((T, S), dtype=bool))


def verify(roots: RootSet, criteria: Criteria, *, precision_db: float = PRECISION_DB,
           tolerance_db: float = TOLERANCE_DB, max_rounds: int = MAX_ROUNDS, nominal: RootSet | None = None,
           located_trials: int = 0) -> BatchVerdict:
    """Verify every trial of ``roots`` against ``criteria`` (see the module notes).

    Parameters
    ----------
    roots : RootSet
        ``T`` trials of zeros, poles (rad/s) and gain.
    criteria : Criteria
    precision_db : float
        How closely each segment's worst margin is located (dB).
    tolerance_db : float
        Margins within this of 0 are 0; the precision of a proof near 0 (dB).
    max_rounds : int
        Budget of the search (rounds of cutting).
    nominal : RootSet, optional
        One trial the others scatter around (a Monte Carlo run's nominal design).  With it and at least
        :data:`BATCH_MIN_TRIALS` trials, a trial whose perturbation bound from the nominal
        (:mod:`service.response.batch`) proves every segment passes without the full search; its
        ``margin_db`` is then that proved lower bound and ``located`` is False.
    located_trials : int
        The first trials whose margins are located by the full search regardless.

    Returns
    -------
    BatchVerdict
    """
    out = _empty_batch(roots, criteria)
    stable = out.stable
    tol, precision = tolerance_db / NEPER_DB, precision_db / NEPER_DB
    full = stable.copy()
    if (nominal is not None and roots.trials >= BATCH_MIN_TRIALS and criteria.limits and criteria.delay is None
            and not any(lim.ends_with_rolloff for lim in criteria.limits)):
        from service.response.batch import bound_trials, nominal_partition

        part = nominal_partition(nominal, criteria, tol, max_rounds)
        found = None if part is None else bound_trials(roots, nominal, criteria, part, tol, precision)
        if found is not None:
            estimate, bound, proven = found
            proven &= stable
            proven[:located_trials] = False
            full = stable & ~proven
            located = (estimate - bound) <= precision * (1 + 1e-6)
            margin = np.where(located, estimate, bound)
            margin = np.where(np.abs(margin) <= tol, 0.0, margin)
            out.margin_db[proven] = margin[proven] * NEPER_DB
            out.located[proven] = located[proven]
            out.unresolved_db[proven] = np.where(located, 0.0, (estimate - bound) * NEPER_DB)[proven]
            out.checked_to_hz[proven] = np.array([lim.stop_hz for lim in criteria.limits])
    live = np.flatnonzero(full)
    if live.size and criteria.limits:
        # in chunks of trials: the search's arrays grow with (intervals x roots) per trial, and a
        # failing board cannot be proved by the perturbation bound, so thousands may reach here
        for start in range(0, live.size, SEARCH_CHUNK_TRIALS):
            verify_losses(roots, criteria, live[start:start + SEARCH_CHUNK_TRIALS], out, precision, tol,
                          max_rounds, critical_trial=int(live[0]))
        out.located[live] = out.unresolved_db[live] == 0.0
    if criteria.delay is not None:
        verify_delay(roots, criteria.delay, np.flatnonzero(stable), out, max_rounds)
    return out


__all__ = ["Band", "LossLimit", "DelayLimit", "Criteria", "SegmentVerdict", "DelayVerdict", "UnstablePole",
           "Verdict", "BatchVerdict", "verify", "TOLERANCE_DB", "PRECISION_DB"]
