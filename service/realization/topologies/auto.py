"""The default topology for a section: a documented rule.

Rule (thresholds are common practice of the trade, no single source; the
reasoning follows Mancini [1]_ sec. 16.9 (from memory) and Schaumann & Van
Valkenburg [2]_ ch. 3-4: the Q sensitivity of single-op-amp biquads to
component spread grows with Q, while multi-op-amp biquads keep S^Q of their
passives near 1 regardless of Q):

1. First order: gain exactly 1 -> ``rc_first_order`` (``unity_gain``);
   gain above 1 -> ``noninverting_first_order``; any other gain (below 1 or
   negative) -> ``inverting_first_order`` (sign tracked by the cascade).
2. Lowpass/highpass, ``Q <= 3``: ``sallen_key``; ``unity_gain`` for a gain of
   at most 1 (the cascade redistributes the remainder) or when an op-amp GBW
   is given and ``GBW < 100 Q f0`` (a follower keeps the op-amp's whole
   bandwidth), otherwise ``given_gain``.
3. Lowpass/highpass, ``Q > 3``: ``state_variable`` (Q set by a resistor
   ratio, S^Q of order 1).
4. Bandpass, ``Q <= 10`` and ``|g| < 2 Q^2``: ``multiple_feedback``; otherwise
   ``tow_thomas``.
5. ``notch``, ``lowpass_notch``, ``highpass_notch``: ``state_variable``.
6. ``allpass``: no topology yet -> :class:`UnsupportedSection`.

References
----------
.. [1] R. Mancini (ed.), *Op Amps for Everyone*, TI SLOD006B, 2002, ch. 16.
.. [2] R. Schaumann, M. E. Van Valkenburg, *Design of Analog Filters*,
   Oxford University Press, 2001.
"""

from __future__ import annotations

from service.approximation.types import Section, SectionKind
from service.realization.errors import UnsupportedSection
from service.realization.topologies.base import NOTCH_KINDS, Topology
from service.realization.topologies.first_order import INVERTING_FIRST_ORDER, NONINVERTING_FIRST_ORDER, RC_FIRST_ORDER
from service.realization.topologies.multiple_feedback import MULTIPLE_FEEDBACK
from service.realization.topologies.sallen_key import SALLEN_KEY
from service.realization.topologies.state_variable import STATE_VARIABLE
from service.realization.topologies.tow_thomas import TOW_THOMAS

SALLEN_KEY_MAX_Q = 3.0        # common practice (no source)
MFB_BANDPASS_MAX_Q = 10.0     # common practice (no source)
GBW_PER_Q_F0 = 100.0          # common practice (no source): GBW >= 100 Q f0 for small Q/f0 error


def auto_topology(section: Section, *, opamp_gbw_hz: float | None = None) -> tuple[Topology, str]:
    """Default ``(topology, strategy)`` for ``section`` by the rule of the module docstring.

    Parameters
    ----------
    section : Section
    opamp_gbw_hz : float, optional
        Gain-bandwidth product (Hz) of the op-amp, if known.

    Returns
    -------
    (Topology, str)

    Raises
    ------
    UnsupportedSection
        For a kind no topology realizes (``allpass``).
    """
    kind, g = section.kind, section.gain
    if section.order == 1:
        if kind not in (SectionKind.LOWPASS, SectionKind.HIGHPASS):
            raise UnsupportedSection(f"no topology realizes a first-order {kind.value!r} section", field="section.kind")
        if g == 1.0:
            return RC_FIRST_ORDER, "unity_gain"
        if g > 1.0:
            return NONINVERTING_FIRST_ORDER, "given_gain"
        return INVERTING_FIRST_ORDER, "given_gain"
    q = section.q if section.q is not None else 0.0
    if kind in (SectionKind.LOWPASS, SectionKind.HIGHPASS):
        if q <= SALLEN_KEY_MAX_Q:
            slow = opamp_gbw_hz is not None and opamp_gbw_hz < GBW_PER_Q_F0 * q * section.f0_hz
            if g <= 1.0 or slow:
                return SALLEN_KEY, "unity_gain"
            return SALLEN_KEY, "given_gain"
        return STATE_VARIABLE, "given_gain"
    if kind == SectionKind.BANDPASS:
        if q <= MFB_BANDPASS_MAX_Q and abs(g) < 2.0 * q * q:
            return MULTIPLE_FEEDBACK, "given_gain"
        return TOW_THOMAS, "given_gain"
    if kind in NOTCH_KINDS:
        return STATE_VARIABLE, "given_gain"
    raise UnsupportedSection(f"no topology realizes a {kind.value!r} section yet", field="section.kind")
