"""Names shared by every layer that handles transfer functions.

The string values of these enums are public API field values (see the design
notes): callers send and receive them verbatim, so they never change within
``/v1``.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum


class ResponseType(str, Enum):
    """Kind of frequency response a filter has."""

    LOWPASS = "lowpass"
    HIGHPASS = "highpass"
    BANDPASS = "bandpass"
    BANDSTOP = "bandstop"


class Family(str, Enum):
    """Approximation family of the lowpass prototype."""

    BUTTERWORTH = "butterworth"
    CHEBYSHEV1 = "chebyshev1"
    CHEBYSHEV2 = "chebyshev2"
    ELLIPTIC = "elliptic"
    BESSEL = "bessel"
    LEGENDRE = "legendre"
    LINKWITZ_RILEY = "linkwitz_riley"


class SectionKind(str, Enum):
    """Standard form of a first- or second-order section.

    With w0 = 2*pi*f0_hz and wz = 2*pi*fz_hz (rad/s), g the section ``gain``:

    - ``lowpass``   g*w0^2/(s^2 + s*w0/Q + w0^2);  first order g*w0/(s + w0)
    - ``highpass``  g*s^2/(s^2 + s*w0/Q + w0^2);   first order g*s/(s + w0)
    - ``bandpass``  g*(w0/Q)*s/(s^2 + s*w0/Q + w0^2)   (g is the gain at f0)
    - ``notch``, ``lowpass_notch``, ``highpass_notch``
      g*(w0^2/wz^2)*(s^2 + wz^2)/(s^2 + s*w0/Q + w0^2)  (g is the DC gain);
      ``notch`` has wz == w0, ``lowpass_notch`` wz > w0, ``highpass_notch`` wz < w0
    - ``allpass``   g*(s^2 - s*w0/Q + w0^2)/(s^2 + s*w0/Q + w0^2)
    """

    LOWPASS = "lowpass"
    HIGHPASS = "highpass"
    BANDPASS = "bandpass"
    NOTCH = "notch"
    LOWPASS_NOTCH = "lowpass_notch"
    HIGHPASS_NOTCH = "highpass_notch"
    ALLPASS = "allpass"


@dataclass(frozen=True)
class Section:
    """One first- or second-order section in the standard forms of :class:`SectionKind`.

    Attributes
    ----------
    kind : SectionKind
    order : int
        1 or 2.
    f0_hz : float
        Pole frequency (Hz); for first order the pole's corner frequency.
    q : float or None
        Pole quality factor; None for first-order sections.
    fz_hz : float or None
        Zero frequency (Hz) of the notch kinds; None otherwise.
    gain : float
        Gain ``g`` of the standard form (dimensionless, may be negative).
    """

    kind: SectionKind
    order: int
    f0_hz: float
    q: float | None
    fz_hz: float | None
    gain: float

    def as_dict(self) -> dict:
        """Plain-JSON form: ``{kind, order, f0_hz, q, fz_hz, gain}``."""
        return {
            "kind": self.kind.value,
            "order": self.order,
            "f0_hz": self.f0_hz,
            "q": self.q,
            "fz_hz": self.fz_hz,
            "gain": self.gain,
        }
