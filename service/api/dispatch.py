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


def design_approximation(args: dict, settings: Settings) -> Approximation:
    """The transfer function a /v1/designs request is realized from.

    By requirement, it is designed for a tighter requirement than asked: the
    passband loss reduced by ``passband_margin_db`` (default a quarter of the
    ripple) and the stopband loss raised by ``stopband_margin_db``, so that
    snapped part values still meet the requirement as asked (which the
    summary checks).
    """
    if "order" in args or "passband_ripple_db" not in args:
        return approximation_from_filter(args, settings)
    from service.api.schemas.designs import DEFAULT_PASSBAND_MARGIN_FRACTION
    from service.approximation import MAX_ATTENUATION_DB, MIN_RIPPLE_DB

    ripple = args["passband_ripple_db"]
    pass_margin = args.get("passband_margin_db")
    if pass_margin is None:
        pass_margin = DEFAULT_PASSBAND_MARGIN_FRACTION * ripple
    tightened = dict(args)
    tightened["passband_ripple_db"] = max(ripple - pass_margin, MIN_RIPPLE_DB)
    tightened["stopband_attenuation_db"] = min(args["stopband_attenuation_db"] + args.get("stopband_margin_db", 0.0),
                                               MAX_ATTENUATION_DB)
    return approximation_from_filter(tightened, settings)


def with_gain(approximation: Approximation, gain: float) -> Approximation:
    """``approximation`` scaled by a passband ``gain`` (V/V), carried by its last section
    (realization distributes the total over the stages)."""
    import dataclasses

    if gain == 1.0 or not approximation.sections:
        return approximation
    sections = list(approximation.sections)
    sections[-1] = dataclasses.replace(sections[-1], gain=sections[-1].gain * gain)
    return dataclasses.replace(approximation, gain=approximation.gain * gain, sections=sections)


def design_document(approximation: Approximation, args: dict, settings: Settings) -> dict:
    """Realize ``approximation`` with the request's preferences; the design document as plain JSON."""
    from service.realization import design_filter, document_from_design

    options = {k: args[k] for k in ("impedance_ohm", "stage_peak_margin_db", "output_amplitude_v", "gbw_error")
               if args.get(k) is not None}
    approximation = with_gain(approximation, args.get("gain", 1.0))
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


def mask_of(spec: dict | None):
    """A loaded ``mask`` field -> :class:`service.response.Mask` (None stays None)."""
    from service.response import Mask, MaskSegment

    if spec is None:
        return None
    if "requirement" in spec:
        r = spec["requirement"]
        return Mask.from_requirement(r["response"], r["passband_hz"], r["stopband_hz"], r["passband_ripple_db"],
                                     r["stopband_attenuation_db"])
    return Mask(tuple(MaskSegment(**seg) for seg in spec["segments"]))


def frequencies_of(spec, roots_rad_s, settings: Settings, *, default_points: int = 501):
    """A loaded ``frequencies`` field (grid dict or list) -> FrequencyGrid or list, with the point limit applied.

    Without one: ``default_points`` log-spaced points from a hundredth of the
    slowest to a hundred times the fastest pole or zero frequency.
    """
    import numpy as np

    from service.response import FrequencyGrid

    if spec is None:
        mags = np.abs(np.asarray(roots_rad_s, dtype=complex))
        mags = mags[mags > 0] / (2 * np.pi)
        low, high = (float(mags.min()), float(mags.max())) if mags.size else (1.0, 1.0)
        return FrequencyGrid(low / 100.0, high * 100.0, default_points, "log")
    if isinstance(spec, dict):
        check_limit("max_frequency_points", spec["points"], settings, field="frequencies.points",
                    what="frequency points")
        return FrequencyGrid(spec["start_hz"], spec["stop_hz"], spec["points"], spec["spacing"])
    check_limit("max_frequency_points", len(spec), settings, field="frequencies", what="frequency points")
    return spec


def response_system(args: dict, settings: Settings):
    """The system a /v1/responses request asks about: (system, roots for the default grid, response type)."""
    import numpy as np

    from service.response import CircuitSystem, ZpkSystem

    if "filter" in args:
        approx = approximation_from_filter(args["filter"], settings)
        return approx, np.concatenate([approx.poles, approx.zeros]), approx.response
    if "sections" in args:
        from service.approximation import Section, SectionKind

        sections = [Section(SectionKind(s["kind"]), s["order"], s["f0_hz"], s.get("q"), s.get("fz_hz"), s["gain"])
                    for s in args["sections"]]
        system = ZpkSystem.from_sections(sections)
        return system, np.concatenate([system.poles, system.zeros]), None
    if "poles" in args:
        zeros = np.array([complex(*z) for z in args.get("zeros", [])], dtype=complex)
        poles = np.array([complex(*p) for p in args["poles"]], dtype=complex)
        return ZpkSystem(zeros, poles, args["gain"]), np.concatenate([poles, zeros]), None
    from service.realization import design_to_circuit, evaluate_document

    design = evaluate_document(args["design"])  # its errors name design.stages[...] fields
    circuit = design_to_circuit(design)
    roots = np.array([2 * np.pi * st.section.f0_hz for st in design.stages])
    return CircuitSystem(circuit), roots, design.response


#: Frequencies every trial is evaluated at whatever the caller's grid: the per-trial metric grid (dense
#: windows around the -3 dB frequencies, the mask edges, DC) of service.tolerance is a few hundred points.
METRIC_GRID_POINTS = 400

#: Cost of one trial at one frequency apart from the circuit (three percentile stores, per-trial
#: figures), in the units of :func:`stage_cost_weight`: measured, 1-stage designs at 100,000 trials.
PER_TRIAL_POINT_WEIGHT = 2


def stage_cost_weight(document: dict) -> int:
    """Cost weight of a design's Monte Carlo per trial and frequency point: the sum over its stages of
    (op-amps in the stage)^2.

    A measured proxy, not a formula of the engine: a one-op-amp stage is one small block, while a stage
    of three or four op-amps with summing nodes is solved as coupled blocks. Over designs from an
    8th-order Sallen-Key lowpass to a 20th-order state-variable bandstop, run_tolerance took 1.1e7 to
    2.6e7 of these units per second of CPU on the build machines (2 cores).
    """
    return sum(max(1, len(stage.get("opamps") or ())) ** 2 for stage in document["stages"])


def tolerance_analysis(args: dict, settings: Settings):
    """Run the tolerance analysis a loaded /v1/tolerance request asks for, after the limit checks."""
    import numpy as np

    from service.response import resolve_frequencies
    from service.tolerance import run_tolerance

    document = args["design"]
    check_limit("max_trials", args["trials"], settings, field="trials", what="trials")
    roots = [2 * np.pi * float(st["section"]["f0_hz"]) for st in document["stages"]]
    grid = frequencies_of(args.get("frequencies"), roots, settings)
    points = len(resolve_frequencies(grid, settings.max_frequency_points))
    weight = stage_cost_weight(document) + PER_TRIAL_POINT_WEIGHT
    points = max(points, METRIC_GRID_POINTS)
    work = args["trials"] * points * weight
    if work > settings.max_work:
        raise LimitExceeded(
            f"the Monte Carlo work trials x frequency points (at least {METRIC_GRID_POINTS}) x (stage weight + "
            f"{PER_TRIAL_POINT_WEIGHT}) = {args['trials']} x {points} x "
            f"{weight} = {work:,} exceeds the limit max_work = {settings.max_work:,} (set by ROLLOFF_MAX_WORK); "
            f"use at most {max(1, settings.max_work // (points * weight)):,} trials at {points} points",
            limit="max_work", value=settings.max_work, setting="ROLLOFF_MAX_WORK", field="trials")
    mask = mask_of(args.get("mask"))
    requirement = document.get("requirement")
    if mask is None and requirement and "passband_hz" in requirement:
        mask = mask_of({"requirement": {k: requirement[k] for k in (
            "response", "passband_hz", "stopband_hz", "passband_ripple_db", "stopband_attenuation_db")}})
    return run_tolerance(
        document, trials=args["trials"], seed=args["seed"], distribution=args["distribution"],
        temperature=args.get("temperature"), tempco_ppm_per_c=args.get("tempco_ppm_per_c"),
        gbw_spread=args.get("gbw_spread"), frequencies_hz=grid, mask=mask,
        sensitivity_frequencies_hz=args.get("sensitivity_frequencies_hz") or (),
        include_trials=args["include_trials"], memory_limit_bytes=settings.memory_limit_bytes,
        max_trials=settings.max_trials, max_frequency_points=settings.max_frequency_points)
