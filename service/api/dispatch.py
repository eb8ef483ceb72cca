"""From loaded request fields to calls of the computation packages.

Kept apart from the views so that approximations, designs, responses and
tolerance call the engines the same way, with the configured limits applied
before any computation starts.
"""

from __future__ import annotations

from service.approximation import Approximation, GroupDelayLimit, design_by_order, design_by_requirement
from service.config import Settings, setting_env
from service.errors import LimitExceeded


def check_limit(name: str, asked: float, settings: Settings, *, field: str, what: str) -> None:
    """Raise :class:`LimitExceeded` when ``asked`` exceeds the setting ``name``."""
    value = getattr(settings, name)
    if asked > value:
        raise LimitExceeded(
            f"{what} {asked:g} exceeds the limit {name} = {value} (set by {setting_env(name)})",
            limit=name, value=value, setting=setting_env(name), field=field)


def approximation_from_filter(data: dict, settings: Settings) -> Approximation:
    """Design the transfer function a loaded :class:`FilterSchema` asks for."""
    if "order" in data:
        check_limit("max_order", data["order"], settings, field="order", what="order")
        return design_by_order(
            data["response"], data["family"], data["order"], data["cutoff_hz"],
            passband_ripple_db=data.get("passband_ripple_db"),
            stopband_attenuation_db=data.get("stopband_attenuation_db"),
            cutoff_at=data.get("cutoff_at", "family"), section_order=data.get("section_order", "ascending_q"),
            max_order=settings.max_order)
    gd = data.get("group_delay")
    return design_by_requirement(
        data["response"], data["family"], data["passband_hz"], data["stopband_hz"],
        data["passband_ripple_db"], data["stopband_attenuation_db"],
        excess=data.get("excess", "stopband"),
        group_delay=GroupDelayLimit(gd["frequency_hz"], gd["max_deviation_pct"]) if gd else None,
        section_order=data.get("section_order", "ascending_q"), max_order=settings.max_order)


def requirement_of(data: dict) -> dict | None:
    """The requirement fields of a loaded filter request, or None for a by-order request."""
    if "passband_hz" not in data:
        return None
    return {k: data[k] for k in ("response", "passband_hz", "stopband_hz", "passband_ripple_db",
                                  "stopband_attenuation_db")}
