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


def parts_policy(parts: dict | None, settings: Settings) -> dict | None:
    """The request's ``parts`` (series, ``range``, tolerance, dielectric, parts-level ``stock`` list)
    as the plain policy realization takes (``min_value``/``max_value``, stock per kind)."""
    if not parts:
        return None
    stock = parts.get("stock") or []
    check_limit("max_stock_entries", len(stock), settings, field="parts.stock", what="stock entries")
    policy: dict = {}
    for key, kind in (("resistors", "resistor"), ("capacitors", "capacitor")):
        given = dict(parts.get(key) or {})
        rng = given.pop("range", None)
        if rng is not None:
            given["min_value"], given["max_value"] = rng
        entries = [{k: v for k, v in e.items() if k != "kind"} for e in stock if e["kind"] == kind]
        if entries:
            given["stock"] = entries
        if given or key in parts:
            policy[key] = given
    return policy


def _strip_root(error, prefix: str = "design."):
    if error.field and error.field.startswith(prefix):
        error.field = error.field[len(prefix):]
    elif error.field == prefix.rstrip("."):
        error.field = None
    return error


def design_document(approximation: Approximation, args: dict, settings: Settings) -> dict:
    """Realize ``approximation`` with the request's preferences; the design document as plain JSON."""
    from service.realization import design_filter, document_from_design

    options = {k: args[k] for k in ("impedance_ohm", "stage_peak_margin_db", "output_amplitude_v", "gbw_error")
               if args.get(k) is not None}
    design = design_filter(
        approximation, topology=args.get("topology", "auto"), strategy=args.get("strategy"),
        parts=parts_policy(args.get("parts"), settings), opamp=args.get("opamp"), exact=args.get("exact", False),
        section_order=args.get("section_order", "ascending_q"), requirement=requirement_of(args), **options)
    return document_from_design(design)


def evaluate(document: dict) -> dict:
    """Recompute a (possibly edited) design document; field paths relative to the document."""
    from service.realization import RealizationError, document_from_design, evaluate_document

    try:
        return document_from_design(evaluate_document(document))
    except RealizationError as exc:
        raise _strip_root(exc) from None
