"""Factoring a transfer function into first- and second-order sections.

Rules (after Schaumann & Van Valkenburg [1]_, ch. 6, cascade design):

1. **Poles.** Complex poles form conjugate pairs, one second-order section
   each.  Real poles are sorted by value and paired neighbour with neighbour
   into second-order sections (Q <= 0.5); an odd one left over becomes the
   single first-order section.
2. **Finite zero pairs** (on the j-axis, notch kinds; or the mirror image of a
   pole pair, allpass) are assigned *nearest pole pair first*: the pole pairs
   are taken in descending Q and each takes the remaining zero pair closest to
   its upper pole in the s-plane (Euclidean distance), the pairing that keeps
   every section's peak gain low.
3. **Zeros at the origin and at infinity** go to the remaining sections so that
   each is a standard kind: the first-order section takes a zero at infinity
   (lowpass) if any is left, else one at the origin (highpass); each
   second-order section then takes one of each (bandpass) while both remain,
   else two at the origin (highpass) or two at infinity (lowpass).
4. **Gain.** Each section's standard-form gain starts at 1; the remaining
   constant ``c`` (transfer-function gain over the product of the standard
   forms) is shared equally, ``|c|**(1/m)`` per section, its sign on the first
   section.  The product of the sections then equals the transfer function.
5. **Order** of the cascade: ascending Q (default; first-order sections count
   as Q = 0), descending Q, or as computed (the order of the poles given).

References
----------
.. [1] R. Schaumann, M. E. Van Valkenburg, Design of Analog Filters, Oxford
       University Press 2001, ch. 6 (cascade design: pole-zero pairing,
       section ordering, gain assignment).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .enums import SectionOrder
from .errors import ApproximationError
from .types import Section, SectionKind

_TWO_PI = 2.0 * np.pi
_REL_TOL = 1e-9          # real/complex and on-axis decisions, relative to |root|
_NOTCH_TOL = 1e-8        # |wz - w0| / w0 below this: kind "notch"


@dataclass
class _Group:
    poles: list                      # one real pole, two real poles, or [upper complex pole]
    index: int                       # position of the first pole in the input
    zeros: list = field(default_factory=list)   # finite zeros (complex, upper member of a pair)
    n_origin: int = 0
    n_inf: int = 0
    allpass: bool = False

    @property
    def order(self) -> int:
        return 1 if (len(self.poles) == 1 and abs(np.imag(self.poles[0])) == 0.0) else 2

    def w0_q(self) -> tuple[float, float | None]:
        if self.order == 1:
            return float(-np.real(self.poles[0])), None
        if len(self.poles) == 1:
            p = self.poles[0]
            w0 = float(abs(p))
            return w0, float(w0 / (-2.0 * p.real))
        p1, p2 = (float(np.real(x)) for x in self.poles)
        w0 = float(np.sqrt(p1 * p2))
        return w0, float(w0 / (-(p1 + p2)))


def _split_poles(poles: np.ndarray) -> list[_Group]:
    groups: list[_Group] = []
    used = np.zeros(poles.size, bool)
    scale = np.abs(poles)
    is_real = np.abs(poles.imag) <= _REL_TOL * np.maximum(scale, 1e-300)
    reals = []
    for i, p in enumerate(poles):
        if used[i]:
            continue
        if p.real >= 0.0:
            raise ApproximationError(f"pole {p} is not in the open left half plane", field="poles")
        if is_real[i]:
            reals.append((float(p.real), i))
            used[i] = True
            continue
        # find the conjugate partner
        cand = np.where(~used & ~is_real)[0]
        cand = cand[cand != i]
        if cand.size == 0:
            raise ApproximationError("complex poles must come in conjugate pairs", field="poles")
        j = cand[np.argmin(np.abs(poles[cand] - np.conj(p)))]
        if abs(poles[j] - np.conj(p)) > 1e-6 * scale[i]:
            raise ApproximationError("complex poles must come in conjugate pairs", field="poles")
        used[i] = used[j] = True
        upper = p if p.imag > 0 else poles[j]
        groups.append(_Group(poles=[complex(upper.real, abs(upper.imag))], index=i))
    reals.sort()
    while len(reals) >= 2:
        (a, ia), (b, ib) = reals.pop(0), reals.pop(0)
        groups.append(_Group(poles=[a, b], index=min(ia, ib)))
    if reals:
        a, ia = reals.pop()
        groups.append(_Group(poles=[complex(a, 0.0)], index=ia))
    return groups


def _classify_zeros(zeros: np.ndarray, scale: float):
    """Split zeros into (origin count, list of upper j-axis/complex members)."""
    n_origin = 0
    pairs = []
    rest = list(zeros)
    while rest:
        z = rest.pop(0)
        if abs(z) <= _REL_TOL * scale:
            n_origin += 1
            continue
        if abs(z.imag) <= _REL_TOL * abs(z):
            raise ApproximationError(
                f"real zero {z.real:g} rad/s away from the origin has no standard section form",
                field="zeros")
        if not rest:
            raise ApproximationError("complex zeros must come in conjugate pairs", field="zeros")
        d = [abs(x - np.conj(z)) for x in rest]
        j = int(np.argmin(d))
        if d[j] > 1e-6 * abs(z):
            raise ApproximationError("complex zeros must come in conjugate pairs", field="zeros")
        rest.pop(j)
        pairs.append(complex(z.real, abs(z.imag)))
    return n_origin, pairs


def sections_from_zpk(zeros, poles, gain, *, order: SectionOrder | str = SectionOrder.ASCENDING_Q
                      ) -> list[Section]:
    """Factor ``k * prod(s - z) / prod(s - p)`` into standard sections.

    Parameters
    ----------
    zeros : array_like of complex, shape (nz,)
        Finite zeros, rad/s (conjugate pairs; on the j-axis, at the origin, or
        mirror images of pole pairs).
    poles : array_like of complex, shape (np,)
        Poles, rad/s, open left half plane, conjugate pairs; ``np >= nz``.
    gain : float
        ``k`` (real).
    order : {"ascending_q", "descending_q", "as_computed"}
        Order of the returned cascade (see the module docstring for all rules).

    Returns
    -------
    list of Section
        ``np // 2 + np % 2`` sections whose product equals the transfer function.

    Raises
    ------
    ApproximationError
        Roots that are not conjugate pairs, poles not in the left half plane, a
        zero with no standard section form, more zeros than poles.
    """
    order = _as_order(order)
    z = np.atleast_1d(np.asarray(zeros, dtype=complex))
    p = np.atleast_1d(np.asarray(poles, dtype=complex))
    if p.size == 0:
        raise ApproximationError("a transfer function needs at least one pole", field="poles")
    if z.size > p.size:
        raise ApproximationError("more zeros than poles (improper transfer function)", field="zeros")
    if not (np.all(np.isfinite(z)) and np.all(np.isfinite(p)) and np.isfinite(gain)):
        raise ApproximationError("zeros, poles and gain must be finite", field="poles")
    groups = _split_poles(p)
    scale = float(np.max(np.abs(p)))
    n_origin, zpairs = _classify_zeros(z, scale)
    n_inf = p.size - z.size

    # 2. finite zero pairs, highest-Q pole pair first, nearest zero pair
    second = [g for g in groups if g.order == 2]
    if len(zpairs) > len(second):
        raise ApproximationError("more finite zero pairs than second-order pole pairs", field="zeros")
    by_q = sorted(second, key=lambda g: -g.w0_q()[1])
    remaining = list(zpairs)
    for g in by_q:
        if not remaining:
            break
        w0, q = g.w0_q()
        ref = g.poles[0] if len(g.poles) == 1 else complex(-w0 / (2 * q), 0.0)
        j = int(np.argmin([abs(zz - ref) for zz in remaining]))
        zz = remaining.pop(j)
        if abs(zz.real) > _REL_TOL * abs(zz):
            mirror = complex(-ref.real, abs(ref.imag))
            if len(g.poles) != 1 or abs(zz - mirror) > 1e-6 * abs(zz):
                raise ApproximationError(
                    "a complex zero pair off the j-axis must mirror its pole pair (allpass)",
                    field="zeros")
            g.allpass = True
        g.zeros = [zz]

    # 3. zeros at the origin / infinity
    for g in groups:
        if g.order == 1:
            if n_inf >= 1:
                g.n_inf, n_inf = 1, n_inf - 1
            elif n_origin >= 1:
                g.n_origin, n_origin = 1, n_origin - 1
    for g in groups:
        if g.order == 2 and not g.zeros:
            if n_origin >= 1 and n_inf >= 1:
                g.n_origin, g.n_inf = 1, 1
                n_origin, n_inf = n_origin - 1, n_inf - 1
            elif n_origin >= 2:
                g.n_origin, n_origin = 2, n_origin - 2
            elif n_inf >= 2:
                g.n_inf, n_inf = 2, n_inf - 2
            else:
                raise ApproximationError("zeros cannot be distributed over standard sections",
                                         field="zeros")
    if n_origin or n_inf:
        raise ApproximationError("zeros cannot be distributed over standard sections", field="zeros")

    # 4. kinds, standard-form constants and gains
    specs = []
    const = 1.0
    for g in groups:
        w0, q = g.w0_q()
        fz = None
        if g.order == 1:
            kind = SectionKind.LOWPASS if g.n_inf else SectionKind.HIGHPASS
            lead = w0 if g.n_inf else 1.0
        elif g.allpass:
            kind, lead = SectionKind.ALLPASS, 1.0
        elif g.zeros:
            wz = float(abs(g.zeros[0].imag))
            fz = wz / _TWO_PI
            if abs(wz - w0) <= _NOTCH_TOL * w0:
                kind = SectionKind.NOTCH
            elif wz > w0:
                kind = SectionKind.LOWPASS_NOTCH
            else:
                kind = SectionKind.HIGHPASS_NOTCH
            lead = w0 * w0 / (wz * wz)
        elif g.n_inf == 2:
            kind, lead = SectionKind.LOWPASS, w0 * w0
        elif g.n_origin == 2:
            kind, lead = SectionKind.HIGHPASS, 1.0
        else:
            kind, lead = SectionKind.BANDPASS, w0 / q
        const *= lead
        specs.append((g, kind, w0, q, fz))
    c = float(gain) / const
    m = len(specs)
    share = abs(c) ** (1.0 / m)
    sign = -1.0 if c < 0 else 1.0

    if order in (SectionOrder.ASCENDING_Q, SectionOrder.MAX_DYNAMIC_RANGE):
        specs.sort(key=lambda t: (t[3] if t[3] is not None else 0.0, t[2]))
    elif order is SectionOrder.DESCENDING_Q:
        specs.sort(key=lambda t: (-(t[3] if t[3] is not None else 0.0), t[2]))
    else:
        specs.sort(key=lambda t: t[0].index)
    out = []
    for i, (g, kind, w0, q, fz) in enumerate(specs):
        out.append(Section(kind=kind, order=g.order, f0_hz=w0 / _TWO_PI, q=q, fz_hz=fz,
                           gain=float(share * (sign if i == 0 else 1.0))))
    return out


def _as_order(order) -> SectionOrder:
    try:
        return SectionOrder(order)
    except ValueError:
        raise ApproximationError(
            f"section_order must be one of {[o.value for o in SectionOrder]}, got {order!r}",
            field="section_order") from None


def section_polynomials(section: Section) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator of a section's standard form (see ``SectionKind``).

    Parameters
    ----------
    section : Section

    Returns
    -------
    b, a : ndarray of float
        Polynomial coefficients in s (rad/s), highest power first; ``a`` is
        monic, length ``order + 1``; ``b`` has the same length (leading zeros
        where the numerator has lower degree).
    """
    w0 = _TWO_PI * section.f0_hz
    g = section.gain
    kind = SectionKind(section.kind)
    if section.order == 1:
        a = np.array([1.0, w0])
        if kind is SectionKind.LOWPASS:
            return np.array([0.0, g * w0]), a
        if kind is SectionKind.HIGHPASS:
            return np.array([g, 0.0]), a
        raise ApproximationError(f"a first-order section cannot be of kind {kind.value}",
                                 field="sections.kind")
    if section.order != 2:
        raise ApproximationError("section order must be 1 or 2", field="sections.order")
    q = section.q
    if q is None or not q > 0:
        raise ApproximationError("a second-order section needs q > 0", field="sections.q")
    a = np.array([1.0, w0 / q, w0 * w0])
    if kind is SectionKind.LOWPASS:
        return np.array([0.0, 0.0, g * w0 * w0]), a
    if kind is SectionKind.HIGHPASS:
        return np.array([g, 0.0, 0.0]), a
    if kind is SectionKind.BANDPASS:
        return np.array([0.0, g * w0 / q, 0.0]), a
    if kind is SectionKind.ALLPASS:
        return g * np.array([1.0, -w0 / q, w0 * w0]), a
    if section.fz_hz is None or not section.fz_hz > 0:
        raise ApproximationError(f"a {kind.value} section needs fz_hz > 0", field="sections.fz_hz")
    wz = _TWO_PI * section.fz_hz
    r = g * w0 * w0 / (wz * wz)
    return np.array([r, 0.0, r * wz * wz]), a


def sections_response(sections, w_rad_s) -> np.ndarray:
    """Product of the sections' responses at ``s = j w``.

    Parameters
    ----------
    sections : sequence of Section
    w_rad_s : array_like of float, any shape
        Angular frequencies, rad/s.

    Returns
    -------
    ndarray of complex, same shape as ``w_rad_s``
    """
    w = np.asarray(w_rad_s, dtype=float)
    s = 1j * w.reshape(-1)
    h = np.ones(s.shape, complex)
    for sec in sections:
        b, a = section_polynomials(sec)
        h *= np.polyval(b, s) / np.polyval(a, s)
    return h.reshape(w.shape)
