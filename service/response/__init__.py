"""Frequency and time response of filters, their metrics, and requirement masks.

Public surface::

    FrequencyGrid, TimeGrid, resolve_frequencies
    ZpkSystem, CircuitSystem, section_zpk
    Band, LossLimit, DelayLimit, Criteria, Verdict, BatchVerdict, verify
    analyze -> ResponseResult (metrics: ResponseMetrics; step/impulse: TimeResponse)
    compare_families -> Comparison (families: list of FamilyComparison)
    table_to_csv
    analyze_noise -> NoiseReport (NoiseContribution); analyze_headroom -> HeadroomReport (OpAmpLevel)
    InvalidGrid, InvalidMask, ImproperSystem, InvalidLevel

Everything takes and returns plain Python/numpy values; no I/O. Frequencies
are in Hz at this surface, roots in rad/s.
"""

from service.response.analysis import analyze
from service.response.comparison import Comparison, FamilyComparison, compare_families
from service.response.errors import ImproperSystem, InvalidGrid, InvalidLevel, InvalidMask
from service.response.headroom import HeadroomReport, OpAmpLevel, analyze_headroom
from service.response.noise import NoiseContribution, NoiseReport, analyze_noise
from service.response.formats import table_to_csv
from service.response.grids import FrequencyGrid, TimeGrid, resolve_frequencies
from service.response.verification import (Band, BatchVerdict, Criteria, DelayLimit, LossLimit, Verdict,
                                           verify)
from service.response.metrics import ResponseMetrics
from service.response.result import ResponseResult, TimeResponse
from service.response.systems import CircuitSystem, ZpkSystem, section_zpk
from service.response.zpk import MAGNITUDE_FLOOR_DB

__all__ = [
    "analyze", "Comparison", "FamilyComparison", "compare_families", "ImproperSystem", "InvalidGrid", "InvalidMask", "table_to_csv", "FrequencyGrid", "TimeGrid",
    "resolve_frequencies", "Band", "LossLimit", "DelayLimit", "Criteria", "Verdict", "BatchVerdict",
    "verify", "ResponseMetrics", "ResponseResult", "TimeResponse", "CircuitSystem", "ZpkSystem",
    "section_zpk", "MAGNITUDE_FLOOR_DB", "InvalidLevel", "analyze_noise", "NoiseReport", "NoiseContribution",
    "analyze_headroom", "HeadroomReport", "OpAmpLevel",
]
