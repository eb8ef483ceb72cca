"""Frequency and time response of filters, their metrics, and requirement masks.

Public surface::

    FrequencyGrid, TimeGrid, resolve_frequencies
    ZpkSystem, CircuitSystem, section_zpk
    Mask, MaskSegment, MaskResult, SegmentResult, check_mask
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
from service.response.mask import MARGIN_TOLERANCE_DB, Mask, MaskResult, MaskSegment, SegmentResult, check_mask
from service.response.metrics import ResponseMetrics
from service.response.result import ResponseResult, TimeResponse
from service.response.systems import CircuitSystem, ZpkSystem, section_zpk
from service.response.zpk import MAGNITUDE_FLOOR_DB

__all__ = [
    "analyze", "Comparison", "FamilyComparison", "compare_families", "ImproperSystem", "InvalidGrid", "InvalidMask", "table_to_csv", "FrequencyGrid", "TimeGrid",
    "resolve_frequencies", "MARGIN_TOLERANCE_DB", "Mask", "MaskResult", "MaskSegment", "SegmentResult",
    "check_mask", "ResponseMetrics", "ResponseResult", "TimeResponse", "CircuitSystem", "ZpkSystem",
    "section_zpk", "MAGNITUDE_FLOOR_DB", "InvalidLevel", "analyze_noise", "NoiseReport", "NoiseContribution",
    "analyze_headroom", "HeadroomReport", "OpAmpLevel",
]
