"""Netlist model: views, trial counts, derivation and validation."""

from __future__ import annotations

import numpy as np
import pytest

from service.circuit import Circuit, CircuitError, ElementKind, OpAmpModel, ac_response
from service.errors import InvalidParameter


def _rc() -> Circuit:
    c = Circuit("rc")
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "out", 1e3)
    c.add_capacitor("C1", "out", "0", 1e-6)
    return c


def test_views():
    c = _rc()
    assert [e.name for e in c.elements] == ["VIN", "R1", "C1"]
    assert c.elements[1].kind is ElementKind.RESISTOR
    assert c.elements[1].nodes == ("in", "out")
    assert c.elements[1].value == 1e3
    assert c.nodes == ("in", "out")
    assert c.trials == 1
    assert isinstance(c.elements, tuple)


def test_error_is_invalid_parameter_and_value_error():
    assert issubclass(CircuitError, InvalidParameter)
    assert issubclass(CircuitError, ValueError)


def test_duplicate_name_rejected_naming_it():
    c = _rc()
    with pytest.raises(CircuitError, match="R1: duplicate"):
        c.add_resistor("R1", "out", "0", 1e3)


@pytest.mark.parametrize("value", [0.0, -1.0, np.inf, np.nan])
@pytest.mark.parametrize("method", ["add_resistor", "add_capacitor", "add_inductor"])
def test_non_positive_or_non_finite_values_rejected(method, value):
    c = Circuit()
    with pytest.raises(CircuitError, match="X1"):
        getattr(c, method)("X1", "a", "0", value)


def test_one_bad_trial_rejected():
    c = Circuit()
    with pytest.raises(CircuitError, match="R7.*positive"):
        c.add_resistor("R7", "a", "0", np.array([1.0, 2.0, -3.0]))


def test_mismatched_trial_lengths_rejected():
    c = Circuit()
    c.add_resistor("R1", "a", "0", np.ones(4))
    with pytest.raises(CircuitError, match="R2.*3 trials.*R1 has 4"):
        c.add_resistor("R2", "a", "b", np.ones(3))
    assert c.trials == 4


def test_trials_from_opamp_model_arrays():
    c = _rc()
    c.add_opamp("U1", "out", "o", "o", model=OpAmpModel(gbw_hz=np.full(6, 1e6)))
    assert c.trials == 6


def test_missing_input_rejected():
    c = Circuit()
    c.add_resistor("R1", "a", "out", 1e3)
    c.add_resistor("R2", "out", "0", 1e3)
    with pytest.raises(CircuitError, match="no input voltage source"):
        ac_response(c, np.array([1.0]))


def test_second_source_rejected():
    c = _rc()
    with pytest.raises(CircuitError, match="V2.*exactly one"):
        c.add_voltage_source("V2", "out", "0")


def test_floating_node_rejected_naming_it():
    c = _rc()
    c.add_opamp("U1", "x", "out", "o")   # x reaches nothing but an op-amp input
    with pytest.raises(CircuitError, match="'x' is floating"):
        ac_response(c, np.array([100.0]), output="o")


def test_node_reached_only_by_a_current_source_is_floating():
    c = _rc()
    c.add_vccs("G1", "y", "0", "out", "0", 1e-3)
    with pytest.raises(CircuitError, match="'y' is floating"):
        c.validate()


def test_unknown_output_node_rejected():
    with pytest.raises(CircuitError, match="'nope'"):
        ac_response(_rc(), np.array([1.0]), output="nope")


def test_bad_names_rejected():
    c = Circuit()
    with pytest.raises(CircuitError):
        c.add_resistor("R 1", "a", "0", 1.0)
    with pytest.raises(CircuitError):
        c.add_resistor("R1", "a b", "0", 1.0)
    with pytest.raises(CircuitError, match="both terminals"):
        c.add_resistor("R1", "a", "a", 1.0)


def test_opamp_model_validated():
    c = Circuit()
    with pytest.raises(CircuitError, match="U1: gbw_hz"):
        c.add_opamp("U1", "a", "b", "c", model=OpAmpModel(gbw_hz=0.0))
    with pytest.raises(CircuitError, match="U2: rout_ohm"):
        c.add_opamp("U2", "a", "b", "c", model=OpAmpModel(gbw_hz=1e6, rout_ohm=-1.0))
    with pytest.raises(CircuitError, match="U3.*zero in every trial"):
        c.add_opamp("U3", "a", "b", "c", model=OpAmpModel(gbw_hz=1e6, rout_ohm=np.array([0.0, 10.0])))


def test_with_values_replaces_and_leaves_original():
    c = _rc()
    c.add_opamp("U1", "out", "o", "o", model=None)
    r = np.array([1e3, 2e3, 3e3])
    d = c.with_values({"R1": r, "U1.gbw_hz": np.full(3, 1e6)})
    assert d.trials == 3 and c.trials == 1
    np.testing.assert_array_equal(d.element("R1").value, r)
    assert d.element("U1").value.a0 == OpAmpModel(gbw_hz=1.0).a0
    assert c.element("U1").value is None
    with pytest.raises(CircuitError, match="R9"):
        c.with_values({"R9": 1.0})
    with pytest.raises(CircuitError, match="R1"):
        c.with_values({"R1.gbw_hz": 1.0})
    with pytest.raises(CircuitError, match="U1"):
        c.with_values({"U1.a0": 1.0})  # an ideal op-amp needs gbw_hz to become a macromodel


def test_trial_picks_one_trial():
    c = _rc().with_values({"R1": np.array([1e3, 2e3])})
    one = c.trial(1)
    assert one.trials == 1 and one.element("R1").value == 2e3
    with pytest.raises(CircuitError):
        c.trial(2)


def test_values_are_read_only():
    c = Circuit()
    c.add_resistor("R1", "a", "0", np.array([1.0, 2.0]))
    with pytest.raises(ValueError):
        c.element("R1").value[0] = 5.0


def test_structurally_singular_circuit_rejected():
    c = Circuit()
    c.add_voltage_source("VIN", "in", "0")
    c.add_resistor("R1", "in", "out", 1e3)
    c.add_resistor("R2", "out", "0", 1e3)
    # both inputs held by fixed voltages: nothing determines the op-amp output
    c.add_opamp("U1", "in", "0", "o")
    c.add_resistor("R3", "o", "0", 1e3)
    with pytest.raises(CircuitError, match="singular"):
        ac_response(c, np.array([1.0, 10.0]), output="o")
