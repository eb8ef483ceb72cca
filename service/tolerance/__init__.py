"""Tolerance analysis: Monte Carlo, sensitivity, worst case and yield of a design.

Public surface
--------------
run_tolerance(plans, *, draw_order, response, trials, seed, distribution, temperature, tempco_ppm_per_c,
              gbw_spread, frequencies_hz, criteria, sensitivity_frequencies_hz, include_trials,
              memory_limit_bytes, max_trials, max_frequency_points, chunk_trials, outputs) -> ToleranceResult
Outputs, EVERYTHING
    Which parts of the result a run computes (all by default).
ToleranceResult
    ``as_dict()`` (the JSON reply), ``table()`` (columns per frequency), ``svg()``.
wilson_interval, PERCENTILES
    The yield interval and the named percentile levels.
DEFAULT_TOLERANCE, DEFAULT_TEMPCO_PPM_PER_C
    Defaults of parts the document says nothing about.
ToleranceError, InvalidDistribution, InvalidTolerance
    Errors (``InvalidParameter``/``ValueError``); too many trials is
    :class:`service.errors.LimitExceeded`.

Computation only: plain Python/numpy in and out, no I/O.
"""

from service.tolerance.errors import InvalidDistribution, InvalidTolerance, ToleranceError
from service.tolerance.result import ToleranceResult
from service.tolerance.run import (DEFAULT_MAX_TRIALS, DEFAULT_TRIALS, EVERYTHING, MAX_INCLUDED_TRIALS, Outputs,
                                   run_tolerance)
from service.tolerance.sampling import DEFAULT_TEMPCO_PPM_PER_C, DEFAULT_TOLERANCE
from service.tolerance.statistics import PERCENTILE_NAMES, PERCENTILES, wilson_interval

__all__ = [
    "run_tolerance", "Outputs", "EVERYTHING", "ToleranceResult", "wilson_interval", "PERCENTILES", "PERCENTILE_NAMES",
    "DEFAULT_TOLERANCE", "DEFAULT_TEMPCO_PPM_PER_C", "DEFAULT_TRIALS", "DEFAULT_MAX_TRIALS",
    "MAX_INCLUDED_TRIALS", "ToleranceError", "InvalidDistribution", "InvalidTolerance",
]
