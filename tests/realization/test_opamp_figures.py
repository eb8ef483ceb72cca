"""Op-amp noise, DC and rail figures: validation, the design document, SI conversion."""

from __future__ import annotations

import pytest

from service.approximation import design_by_order
from service.circuit import OpAmpSources
from service.realization import OpAmpSpec, design_filter
from service.workflows import outcome_of
from service.realization.errors import RealizationError
from service.realization.opamp import sources_of


@pytest.mark.parametrize(("field", "value"), [
    ("en_nv_rthz", -1.0), ("en_nv_rthz", 1e6), ("in_pa_rthz", -0.1), ("in_pa_rthz", float("inf")),
    ("en_corner_hz", -10.0), ("in_corner_hz", 1e9), ("vos_v", 5.0), ("vos_v", float("nan")), ("ib_a", 1.0),
    ("rail_headroom_v", -0.1), ("rail_headroom_v", 50.0), ("en_nv_rthz", True), ("ib_a", "10n"),
])
def test_absurd_figures_name_the_field(field, value):
    with pytest.raises(RealizationError) as err:
        OpAmpSpec.from_dict({"gbw_hz": 1e6, field: value})
    assert err.value.field == f"opamp.{field}"


def test_figures_in_si_units():
    spec = OpAmpSpec.from_dict({"gbw_hz": 1e6, "en_nv_rthz": 4.5, "in_pa_rthz": 0.4, "en_corner_hz": 10,
                                "vos_v": -2e-4, "ib_a": 1e-12})
    src = spec.sources()
    expected = dict(en_v_rthz=4.5e-9, in_a_rthz=0.4e-12, en_corner_hz=10.0, in_corner_hz=0.0, vos_v=-2e-4, ib_a=1e-12)
    for key, value in expected.items():
        assert getattr(src, key) == pytest.approx(value, rel=1e-15)
    assert OpAmpSpec(gbw_hz=1e6).sources() is None
    assert sources_of(OpAmpSpec(gbw_hz=1e6, vos_v=0.0)) == OpAmpSources()


def test_figures_reach_every_op_amp_of_the_document():
    op = {"gbw_hz": 3e6, "en_nv_rthz": 6.0, "in_pa_rthz": 0.9, "vos_v": 1e-3, "ib_a": 2e-9, "rail_headroom_v": 0.05}
    d = design_filter(design_by_order("bandpass", "butterworth", 4, [900.0, 1100.0]), opamp=op)
    doc = outcome_of(d).as_dict()
    for stage in doc["stages"]:
        for u in stage["opamps"]:
            for key, value in op.items():
                assert u[key] == value
            assert u["en_corner_hz"] is None and u["in_corner_hz"] is None
