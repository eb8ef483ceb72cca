"""What each approximation family needs and what its ``cutoff_hz`` means."""

from __future__ import annotations

from dataclasses import dataclass

from .types import Family


@dataclass(frozen=True)
class FamilyInfo:
    """Facts about one family, for callers and the catalog.

    Attributes
    ----------
    family : Family
    cutoff_meaning : str
        What ``cutoff_hz`` of an order-based design (``cutoff_at="family"``) is.
    cutoff_loss : str
        The loss at that frequency, in words (e.g. ``"passband_ripple_db"``).
    needs_ripple : bool
        An order-based design needs ``passband_ripple_db``.
    needs_attenuation : bool
        An order-based design needs ``stopband_attenuation_db``.
    max_order : int
        Highest prototype order accepted (accuracy limit of the computation).
    even_only : bool
        Only even orders exist.
    order_selection : str
        ``"closed form"`` (order equation) or ``"search"`` (order by order).
    reference : str
        Published source of the approximation.
    """

    family: Family
    cutoff_meaning: str
    cutoff_loss: str
    needs_ripple: bool
    needs_attenuation: bool
    max_order: int
    even_only: bool
    order_selection: str
    reference: str

    def as_dict(self) -> dict:
        """Plain-JSON form."""
        return {
            "family": self.family.value,
            "cutoff_meaning": self.cutoff_meaning,
            "cutoff_loss": self.cutoff_loss,
            "needs_passband_ripple_db": self.needs_ripple,
            "needs_stopband_attenuation_db": self.needs_attenuation,
            "max_order": self.max_order,
            "even_only": self.even_only,
            "order_selection": self.order_selection,
            "reference": self.reference,
        }


_INFO = {
    Family.BUTTERWORTH: FamilyInfo(
        Family.BUTTERWORTH, "-3 dB (half-power) point", "3.01 dB", False, False, 20, False,
        "closed form", "S. Butterworth, Wireless Engineer 7, 1930"),
    Family.CHEBYSHEV1: FamilyInfo(
        Family.CHEBYSHEV1, "edge of the ripple band", "passband_ripple_db", True, False, 20, False,
        "closed form", "A. Antoniou, Digital Filters, 2nd ed., 1993, sec. 5.3"),
    Family.CHEBYSHEV2: FamilyInfo(
        Family.CHEBYSHEV2, "stopband edge", "stopband_attenuation_db", False, True, 20, False,
        "closed form", "A. Antoniou, Digital Filters, 2nd ed., 1993, sec. 5.4"),
    Family.ELLIPTIC: FamilyInfo(
        Family.ELLIPTIC, "edge of the ripple band", "passband_ripple_db", True, True, 20, False,
        "closed form", "R. W. Daniels, Approximation Methods for Electronic Filter Design, 1974, ch. 5"),
    Family.BESSEL: FamilyInfo(
        Family.BESSEL, "-3 dB (half-power) point", "3.01 dB", False, False, 20, False,
        "search", "W. E. Thomson, Proc. IEE 96 (III), 1949"),
    Family.LEGENDRE: FamilyInfo(
        # above order 16 the roots of 1 + L_n lose more than 1e-7 of |H|^2 in double precision
        Family.LEGENDRE, "-3 dB (half-power) point", "3.01 dB", False, False, 16, False,
        "search", "A. Papoulis, Proc. IRE 46(3), 1958; Proc. IRE 47, 1959"),
    Family.LINKWITZ_RILEY: FamilyInfo(
        Family.LINKWITZ_RILEY, "crossover point (-6.02 dB)", "6.02 dB", False, False, 20, True,
        "closed form", "S. H. Linkwitz, J. Audio Eng. Soc. 24(1), 1976"),
}


def family_info(family: Family | str) -> FamilyInfo:
    """Facts about ``family`` (Enum member or its string value).

    Raises
    ------
    ApproximationError
        Unknown family.
    """
    from .validation import as_family

    return _INFO[as_family(family)]


def all_family_info() -> tuple[FamilyInfo, ...]:
    """:class:`FamilyInfo` of every family, in ``Family`` order."""
    return tuple(_INFO[f] for f in Family)
