"""Benchmark of the noise analysis: python tests/bench/bench_noise.py [--quick]

An 8th-order Butterworth lowpass realized as four Sallen-Key stages (10 MHz
op-amps with 10 nV/rtHz, 1 pA/rtHz and 1/f corners), 1,000 frequencies from
10 Hz to 100 kHz.  Target: the noise of this design in 20 ms in-process.

Prints median, interquartile range and min/max of repeated runs as wall
time (``time.perf_counter``) and CPU time (``time.process_time``), with the
load average before and after (the machine may be shared: read the CPU
figures and compare ratios taken in one run), of:

- ``noise_spectra`` by block back substitution (``"blocked"``, the default)
  and by the whole-system adjoint solve (``"full"``), and their ratio;
- ``analyze_noise``: the densities on the 1,000 points plus the integration
  over 10 Hz-100 kHz on its own 200-per-decade grid, contributions ranked;
- ``analyze_headroom`` on the same grid (every op-amp output, peaks refined);
- ``supply_report`` on a 5 V single rail (mid-rail network, DC solve, offsets,
  passband check), for scale.
"""

from __future__ import annotations

import os
import statistics
import sys

sys.path.insert(0, os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))

import numpy as np  # noqa: E402

from service.approximation import design_by_order  # noqa: E402
from service.circuit import noise_spectra  # noqa: E402
from service.realization import design_filter  # noqa: E402
from service.realization.supply import filter_circuit, supply_report  # noqa: E402
from service.response.headroom import analyze_headroom  # noqa: E402
from service.response.noise import analyze_noise  # noqa: E402
from tests.bench.benchlib import load, measure as _measure, report  # noqa: E402

QUICK = "--quick" in sys.argv
OPAMP = {"gbw_hz": 10e6, "en_nv_rthz": 10.0, "in_pa_rthz": 1.0, "en_corner_hz": 100.0, "in_corner_hz": 200.0,
         "output_swing_v": 10.0}


def measure(fn, repeats: int) -> tuple[list[float], list[float]]:
    return _measure(fn, repeats, quick=QUICK, warm=True)


def main() -> None:
    print(f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', '(unset)')}  cores={os.cpu_count()}  "
          f"{load()} at start")
    design = design_filter(design_by_order("lowpass", "butterworth", 8, 1000.0), opamp=OPAMP)
    assert len(design.stages) == 4
    fc = filter_circuit(design)
    f = np.logspace(1, 5, 1000)
    blocked = measure(lambda: noise_spectra(fc.circuit, f, method="blocked"), 60)
    full = measure(lambda: noise_spectra(fc.circuit, f, method="full"), 30)
    report("noise_spectra, blocked (4 stages, 1,000 frequencies)", blocked)
    report("noise_spectra, full adjoint solve", full)
    print(f"    full / blocked, median CPU: {statistics.median(full[1]) / statistics.median(blocked[1]):.2f}")
    report("analyze_noise (densities on 1,000 points + integration 10 Hz-100 kHz)",
           measure(lambda: analyze_noise(fc.circuit, f, (10.0, 1e5), stage_of=fc.stage_of, full_scale_v=2.0), 40))
    report("analyze_headroom (4 op-amp outputs, 1,000 points)",
           measure(lambda: analyze_headroom(fc.circuit, f, limits=fc.output_limits, stage_of=fc.opamp_stage,
                                            input_peak_v=1.0), 20))
    report("supply_report, 5 V single rail", measure(lambda: supply_report(design, supply={"v_pos": 5.0}), 10))
    print(f"{load()} at end")


if __name__ == "__main__":
    main()
