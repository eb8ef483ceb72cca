"""Reply schemas document every key the workflows answer with, and round figures by one rule."""

from __future__ import annotations

import math

import pytest

from service.api.formats import FIGURE_DIGITS, round_figure, round_figure_list, round_figures
from service.api.schemas.designs import DesignRequestSchema, DesignSchema
from service.api.schemas.compare import CompareRequestSchema
from service.api.schemas.filters import (REQUIREMENT_KEYS, ApproximationRequestSchema, ApproximationSchema,
                                         ComparisonSchema, requirement_from)
from service.api.schemas.responses import ResponseRequestSchema, ResponseSchema
from service.api.schemas.tolerance import ToleranceRequestSchema, ToleranceSchema
from service.api.views.designs import EXAMPLE as DESIGN_EXAMPLE
from service.api.views.responses import EXAMPLE as RESPONSE_EXAMPLE
from service.api.views.tolerance import EXAMPLE as TOLERANCE_EXAMPLE
from service.config import Settings
from service.workflows import approximate, compare, design, respond, tolerance

SETTINGS = Settings.from_env()
BANDPASS = {"response": "bandpass", "family": "elliptic", "passband_hz": ["35kHz", "45kHz"],
            "stopband_hz": ["25kHz", "60kHz"], "passband_ripple_db": 0.5, "stopband_attenuation_db": 30}


def missing_keys(raw, dumped, path="") -> list[str]:
    """Keys of ``raw`` (a workflow's reply) that the schema's dump lost, recursively."""
    lost = []
    if isinstance(raw, dict) and isinstance(dumped, dict):
        for k, v in raw.items():
            if k not in dumped:
                lost.append(f"{path}.{k}")
            else:
                lost += missing_keys(v, dumped[k], f"{path}.{k}")
    elif isinstance(raw, list) and isinstance(dumped, list):
        for i, (a, b) in enumerate(zip(raw, dumped)):
            lost += missing_keys(a, b, f"{path}[{i}]")
    return lost


@pytest.fixture(scope="module")
def replies():
    """(schema, raw reply) of every computing operation, for a lowpass and a band response."""
    out = []
    for req in (DESIGN_EXAMPLE, BANDPASS):
        filt = {k: v for k, v in req.items() if k in REQUIREMENT_KEYS}
        loaded = ApproximationRequestSchema().load(filt)
        out.append((ApproximationSchema, approximate(requirement_from(loaded), SETTINGS).as_dict()))
        loaded = CompareRequestSchema().load({k: v for k, v in filt.items() if k != "family"})
        out.append((ComparisonSchema, compare(requirement_from(loaded), SETTINGS).as_dict()))
    for req in (DESIGN_EXAMPLE, BANDPASS):
        loaded = DesignRequestSchema().load(dict(req))
        outcome = design(loaded["request"], SETTINGS)
        out.append((DesignSchema, outcome.as_dict()))
        out.append((ResponseSchema, respond(ResponseRequestSchema().load(
            {"design": outcome.as_dict(), "mask": {k: req[k] for k in ("response", "passband_hz", "stopband_hz",
                                                                      "passband_ripple_db",
                                                                      "stopband_attenuation_db")}})["request"],
            SETTINGS).as_dict()))
        out.append((ToleranceSchema, tolerance(ToleranceRequestSchema().load(
            {"design": outcome.as_dict(), "trials": 100, "include_trials": 2, "seed": 1,
             "temperature": {"min_c": 0, "max_c": 50}})["request"], SETTINGS).as_dict()))
    out.append((ResponseSchema, respond(ResponseRequestSchema().load(RESPONSE_EXAMPLE)["request"],
                                        SETTINGS).as_dict()))
    out.append((ToleranceSchema, tolerance(ToleranceRequestSchema().load(dict(TOLERANCE_EXAMPLE, trials=200))[
        "request"], SETTINGS).as_dict()))
    return out


def test_no_key_of_a_reply_is_lost_by_its_schema(replies):
    for schema, raw in replies:
        dumped = schema().dump(raw)
        assert missing_keys(raw, dumped) == [], schema.__name__


def _floats(node, path=""):
    if isinstance(node, float):
        yield path, node
    elif isinstance(node, dict):
        for k, v in node.items():
            yield from _floats(v, f"{path}.{k}")
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _floats(v, f"{path}[{i}]")


def _digits(x: float) -> int:
    return len(repr(x).split("e")[0].replace("-", "").replace(".", "").strip("0"))


def test_figures_have_six_significant_digits_and_part_values_are_exact(replies):
    for schema, raw in replies:
        dumped = schema().dump(raw)
        exact_prefixes = [p.replace(".*", "") for p in schema.EXACT]
        for path, x in _floats(dumped):
            plain = path.replace("[", ".").replace("]", "")
            plain = ".".join(s for s in plain.split(".") if s and not s.isdigit())
            if not any(plain == "." + e.lstrip(".") or plain.startswith("." + e + ".") or
                       plain.lstrip(".").startswith(e) for e in exact_prefixes):
                assert _digits(x) <= FIGURE_DIGITS, (schema.__name__, path, x)
    design_raw = next(raw for schema, raw in replies if schema is DesignSchema)
    dumped = DesignSchema().dump(design_raw)
    for a, b in zip(design_raw["stages"], dumped["stages"]):
        assert a["components"] == b["components"] and a["section"] == b["section"]
    approx_raw = next(raw for schema, raw in replies if schema is ApproximationSchema)
    assert ApproximationSchema().dump(approx_raw)["poles"] == approx_raw["poles"]


def test_percentiles_are_rounded_then_float64():
    # float32 noise: -0.3310233950614929 is float32(-0.331023395...) widened
    assert round_figure(-0.3310233950614929) == -0.331023
    assert round_figures({"a": [1.0 / 3.0], "b": {"c": 2.0 / 3.0}}, exact=("b",)) == {"a": [0.333333],
                                                                                      "b": {"c": 2.0 / 3.0}}
    assert round_figure(1e-12 / 3) == 3.33333e-13 and round_figure(0.0) == 0.0
    assert math.isnan(round_figure(float("nan"))) and round_figure(float("inf")) == math.inf
    assert round_figures([{"x": 1 / 7}], exact=("*.x",)) == [{"x": 1 / 7}]


def test_a_list_of_floats_is_rounded_to_the_same_bits_as_one_by_one():
    # source: Python's own decimal formatting ('%.6g', correctly rounded) through round_figure, the reference
    # of the vectorized route: every magnitude, exact halves, float32 values widened, zeros and non-finite
    import numpy as np

    rng = np.random.default_rng(7)
    x = np.concatenate([rng.standard_normal(20000) * 10.0 ** rng.uniform(-300, 300, 20000),
                        rng.standard_normal(20000) * 10.0 ** rng.uniform(-25, 25, 20000),
                        np.round(rng.uniform(-1e4, 1e4, 5000), 3), np.round(rng.uniform(0, 1, 5000), 7) + 5e-7,
                        rng.standard_normal(5000).astype(np.float32).astype(float),
                        [0.0, -0.0, 1.5, 2.5e-5, 123456.5, 1234565.0, 5e-324, 1.7976931348623157e308,
                         float("inf"), -float("inf")]]).tolist()
    fast = round_figure_list(x)
    slow = [round_figure(v) for v in x]
    assert all(a == b or (math.isnan(a) and math.isnan(b)) for a, b in zip(fast, slow))
    assert round_figures({"p": x[:100]}) == {"p": slow[:100]}
