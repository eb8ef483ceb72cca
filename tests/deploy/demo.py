"""Requests of the demo scenario (Larkspur Fluidics PM-7, invented) used by the deployment tests,
the container smoke test and the capacity benchmark: one per endpoint, as a caller would send them."""

from __future__ import annotations

import json

ACCELEROMETER = {"response": "lowpass", "passband_hz": "10kHz", "stopband_hz": "25.6kHz",
                 "passband_ripple_db": 0.1, "stopband_attenuation_db": 80}

DESIGN = {**ACCELEROMETER, "family": "elliptic",
          "parts": {"resistors": {"series": "E96", "tolerance": 0.01},
                    "capacitors": {"series": "E12", "tolerance": 0.02}},
          "opamp": {"gbw_hz": "20MHz", "slew_v_per_us": 5}}

NOTCH = {"filter": {"response": "bandstop", "family": "chebyshev2", "passband_hz": ["20Hz", "150Hz"],
                    "stopband_hz": ["49Hz", "61Hz"], "passband_ripple_db": 1, "stopband_attenuation_db": 40},
         "frequencies": {"start_hz": "5Hz", "stop_hz": "500Hz", "points": 801},
         "mask": {"response": "bandstop", "passband_hz": ["20Hz", "150Hz"], "stopband_hz": ["49Hz", "61Hz"],
                  "passband_ripple_db": 1, "stopband_attenuation_db": 40}}


def tolerance_request(design_document: dict, trials: int = 500, seed: int = 1) -> dict:
    """A seeded Monte Carlo run of a design document (-20...70 degC)."""
    return {"design": design_document, "trials": trials, "seed": seed, "temperature": {"min_c": -20, "max_c": 70}}


def body(value: dict) -> bytes:
    return json.dumps(value).encode()


# (name, method, path, body or None); the design-document ones are filled in by `with_design`.
SIMPLE = [
    ("catalog", "GET", "/v1/catalog", None),
    ("values/nearest (GET)", "GET", "/v1/values/nearest?value=4.87k&series=E24", None),
    ("approximations (GET, by order)", "GET",
     "/v1/approximations?response=bandpass&family=butterworth&order=3&cutoff_hz=35k,45k", None),
    ("approximations (requirement)", "POST", "/v1/approximations", {**ACCELEROMETER, "family": "elliptic"}),
    ("approximations/compare", "POST", "/v1/approximations/compare", ACCELEROMETER),
    ("designs", "POST", "/v1/designs", DESIGN),
    ("responses (SVG figure, 801 points)", "POST", "/v1/responses", {**NOTCH, "format": "svg"}),
    ("responses (JSON)", "POST", "/v1/responses", NOTCH),
]


def with_design(design_document: dict) -> list[tuple[str, str, str, dict | None]]:
    """The requests that send a design document back."""
    return [
        ("designs/evaluate", "POST", "/v1/designs/evaluate", design_document),
        ("tolerance (500 trials)", "POST", "/v1/tolerance", tolerance_request(design_document)),
    ]
