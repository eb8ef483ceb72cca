"""Entry validation: errors name the field and the reason; Enums or strings accepted."""

import warnings

import numpy as np
import pytest

from service.approximation import (ApproximationError, Family, GroupDelayLimit, InfeasibleRequirement,
                                   ResponseType, UnsupportedOrder, all_family_info, design_by_order,
                                   design_by_requirement, family_info)
from service.errors import InfeasibleSpec, InvalidParameter


def test_error_hierarchy():
    assert issubclass(ApproximationError, InvalidParameter) and issubclass(ApproximationError, ValueError)
    assert issubclass(InfeasibleRequirement, InfeasibleSpec)
    assert issubclass(UnsupportedOrder, ApproximationError)


def test_enum_or_string_accepted():
    a = design_by_order(ResponseType.LOWPASS, Family.BUTTERWORTH, 3, 100.0)
    b = design_by_order("lowpass", "butterworth", 3, 100.0)
    assert np.allclose(a.poles, b.poles) and a.family is Family.BUTTERWORTH


@pytest.mark.parametrize("kwargs,field", [
    (dict(response="allpass"), "response"),
    (dict(family="gaussian"), "family"),
    (dict(order=0), "order"),
    (dict(order=2.5), "order"),
    (dict(order=True), "order"),
    (dict(cutoff_hz=0.0), "cutoff_hz"),
    (dict(cutoff_hz=2e10), "cutoff_hz"),
    (dict(cutoff_hz=float("nan")), "cutoff_hz"),
    (dict(cutoff_hz="1k"), "cutoff_hz"),
    (dict(cutoff_hz=(100.0, 200.0)), "cutoff_hz"),
    (dict(cutoff_at="-6db"), "cutoff_at"),
    (dict(section_order="random"), "section_order"),
    (dict(max_order=0), "max_order"),
])
def test_by_order_invalid(kwargs, field):
    args = dict(response="lowpass", family="butterworth", order=3, cutoff_hz=100.0)
    args.update(kwargs)
    with pytest.raises(ApproximationError) as ei:
        design_by_order(args.pop("response"), args.pop("family"), args.pop("order"),
                        args.pop("cutoff_hz"), **args)
    assert ei.value.field == field
    assert field.split(".")[0] in str(ei.value)


def test_family_parameters_required_and_ranges():
    with pytest.raises(ApproximationError) as ei:
        design_by_order("lowpass", "chebyshev1", 3, 100.0)
    assert ei.value.field == "passband_ripple_db"
    with pytest.raises(ApproximationError) as ei:
        design_by_order("lowpass", "elliptic", 3, 100.0, passband_ripple_db=0.5)
    assert ei.value.field == "stopband_attenuation_db"
    with pytest.raises(ApproximationError) as ei:
        design_by_order("lowpass", "chebyshev1", 3, 100.0, passband_ripple_db=3.5)
    assert ei.value.field == "passband_ripple_db"
    with pytest.raises(ApproximationError) as ei:
        design_by_order("lowpass", "chebyshev2", 3, 100.0, stopband_attenuation_db=151.0)
    assert ei.value.field == "stopband_attenuation_db"
    a = design_by_order("lowpass", "butterworth", 3, 100.0, passband_ripple_db=1.0)
    assert any("passband_ripple_db" in n for n in a.notes)


def test_band_pair_required_and_ascending():
    with pytest.raises(ApproximationError) as ei:
        design_by_order("bandpass", "butterworth", 3, 100.0)
    assert ei.value.field == "cutoff_hz"
    with pytest.raises(ApproximationError):
        design_by_order("bandpass", "butterworth", 3, (200.0, 100.0))


def test_order_limits():
    with pytest.raises(UnsupportedOrder) as ei:
        design_by_order("lowpass", "butterworth", 21, 100.0)
    assert ei.value.field == "order" and ei.value.highest == 20
    with pytest.raises(UnsupportedOrder) as ei:
        design_by_order("lowpass", "butterworth", 9, 100.0, max_order=8)
    assert "max_order" in str(ei.value)
    with pytest.raises(UnsupportedOrder):
        design_by_order("lowpass", "legendre", 17, 100.0)
    with pytest.raises(InfeasibleRequirement) as ei:
        design_by_order("lowpass", "linkwitz_riley", 3, 100.0)
    assert ei.value.field == "order"
    with pytest.raises(UnsupportedOrder):     # transition band too narrow to compute
        design_by_order("lowpass", "elliptic", 20, 100.0, passband_ripple_db=3.0, stopband_attenuation_db=20.0)


@pytest.mark.parametrize("response,pb,sb", [
    ("lowpass", 1000.0, 500.0),
    ("highpass", 1000.0, 2000.0),
    ("bandpass", (1000.0, 2000.0), (1200.0, 3000.0)),
    ("bandpass", (1000.0, 2000.0), (500.0, 1800.0)),
    ("bandstop", (1000.0, 2000.0), (500.0, 1500.0)),
    ("bandstop", (1000.0, 2000.0), (1200.0, 2500.0)),
])
def test_stopband_not_nested_is_infeasible(response, pb, sb):
    with pytest.raises(InfeasibleRequirement) as ei:
        design_by_requirement(response, "butterworth", pb, sb, 1.0, 40.0)
    assert ei.value.field == "stopband_hz"


def test_attenuation_not_above_ripple():
    with pytest.raises(InfeasibleRequirement) as ei:
        design_by_requirement("lowpass", "butterworth", 1000.0, 2000.0, 1.0, 1.0)
    assert ei.value.field == "stopband_attenuation_db"
    with pytest.raises(InfeasibleRequirement):
        design_by_order("lowpass", "elliptic", 3, 100.0, passband_ripple_db=2.0, stopband_attenuation_db=1.5)


def test_group_delay_only_for_bessel_lowpass():
    lim = GroupDelayLimit(500.0, 1.0)
    with pytest.raises(ApproximationError) as ei:
        design_by_requirement("lowpass", "butterworth", 1000.0, 5000.0, 1.0, 20.0, group_delay=lim)
    assert ei.value.field == "group_delay"
    with pytest.raises(ApproximationError):
        design_by_requirement("highpass", "bessel", 1000.0, 100.0, 1.0, 20.0, group_delay=lim)
    with pytest.raises(ApproximationError) as ei:
        design_by_requirement("lowpass", "bessel", 1000.0, 10000.0, 1.0, 20.0,
                              group_delay=GroupDelayLimit(500.0, 150.0))
    assert ei.value.field == "group_delay.max_deviation_pct"
    with pytest.raises(InfeasibleRequirement) as ei:
        design_by_requirement("lowpass", "bessel", 1000.0, 10000.0, 1.0, 40.0,
                              group_delay=GroupDelayLimit(9000.0, 0.01))
    assert ei.value.field == "group_delay"


def test_unknown_excess():
    with pytest.raises(ApproximationError) as ei:
        design_by_requirement("lowpass", "butterworth", 1000.0, 2000.0, 1.0, 20.0, excess="both")
    assert ei.value.field == "excess"


def test_no_warnings_for_ordinary_requests():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for fam in Family:
            for resp in ResponseType:
                band = resp in (ResponseType.BANDPASS, ResponseType.BANDSTOP)
                n = 2 if fam is Family.LINKWITZ_RILEY else 3
                design_by_order(resp, fam, n, (1e-3, 2e-3) if band else 1e10,
                                passband_ripple_db=0.001, stopband_attenuation_db=150.0)
                design_by_order(resp, fam, 16, (1e-3, 2e-3) if band else 1e10,
                                passband_ripple_db=0.001, stopband_attenuation_db=150.0)


def test_family_info():
    infos = all_family_info()
    assert [i.family for i in infos] == list(Family)
    assert family_info("linkwitz_riley").even_only
    assert family_info(Family.ELLIPTIC).needs_ripple and family_info("elliptic").needs_attenuation
    assert family_info("chebyshev2").cutoff_meaning == "stopband edge"
    assert family_info("legendre").max_order == 16
    assert set(family_info("bessel").as_dict()) >= {"family", "cutoff_meaning", "max_order", "even_only"}
    with pytest.raises(ApproximationError):
        family_info("gaussian")


def test_as_dict_plain_json():
    import json
    a = design_by_requirement("bandpass", "elliptic", (35e3, 45e3), (25e3, 60e3), 0.5, 60.0)
    d = json.loads(json.dumps(a.as_dict()))
    assert d["degree"] == 2 * d["order"] and len(d["poles"]) == d["degree"]
    assert d["sections"][0].keys() == {"kind", "order", "f0_hz", "q", "fz_hz", "gain"}
    assert len(d["edges"]) == 4
    with pytest.raises((AttributeError, TypeError, ValueError)):
        a.poles[0] = 0     # read-only arrays
