"""The ranges the service represents, reads back and computes accurately (one place; the api schemas use them).

A design whose parts leave these ranges is refused (422) rather than
returned: every document the service writes can be read back.
"""

from __future__ import annotations

from service.realization.opamp import FIGURES as _OPAMP_FIGURES
from service.realization.supply import MAX_RAIL_V

#: Resistor values (ohm): a tenth of a milliohm is below any wiring, a tera-ohm above any leakage path.
RESISTOR_RANGE_OHM = (1e-2, 1e10)
#: Capacitor values (F): 1 fF to 1 F.
CAPACITOR_RANGE_F = (1e-15, 1.0)
#: Largest magnitude of a section's gain (V/V).
MAX_SECTION_GAIN = 1e6
#: Section pole and zero frequencies (Hz): band transforms of extreme requirements leave the requirement range.
SECTION_FREQUENCY_RANGE_HZ = (1e-6, 1e13)
#: Section Q.
SECTION_Q_RANGE = (1e-9, 1e6)
#: Relative tolerance of a part.
TOLERANCE_RANGE = (0.0, 0.5)
#: Op-amp figures.
GBW_RANGE_HZ = (1.0, 1e12)
A0_RANGE_DB = (20.0, 200.0)
SLEW_RANGE_V_PER_US = (1e-6, 1e6)
VOLTAGE_RANGE_V = (1e-3, 1e4)
ROUT_RANGE_OHM = (0.0, 1e6)
#: Op-amp noise, DC and swing figures (the ranges the circuit analyses accept): name -> (low, high) in the
#: field's unit (nV/sqrt(Hz), pA/sqrt(Hz), Hz, V, A); offset and bias current may take either sign.
OPAMP_FIGURE_RANGES = {name: ((-hi if signed else lo), hi) for name, (lo, hi, signed) in _OPAMP_FIGURES.items()}
#: Supply rails (V), either sign.
RAIL_RANGE_V = (-MAX_RAIL_V, MAX_RAIL_V)
#: Peak signal levels a request may state (V).
LEVEL_RANGE_V = (1e-9, 1e4)
#: Most stages of a design document, parts of a stage, op-amps of a stage.
MAX_STAGES = 64
MAX_COMPONENTS_PER_STAGE = 64
MAX_OPAMPS_PER_STAGE = 8
#: Longest ref, role, part id, dielectric name.
MAX_REF_LENGTH = 32
MAX_ID_LENGTH = 128
MAX_DIELECTRIC_LENGTH = 32

#: Part value range by kind.
VALUE_RANGE = {"resistor": RESISTOR_RANGE_OHM, "capacitor": CAPACITOR_RANGE_F}
