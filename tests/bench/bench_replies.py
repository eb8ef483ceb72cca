"""What encoding a reply costs: the reply schema's dump (typed objects, figures rounded) and the JSON size.

For a tolerance reply (PM-7 anti-alias design, 500 trials, 501 frequencies) and a design document, prints
the median and spread of the schema dump with rounding and of the same dump with rounding switched off,
and the JSON size of each.

Run: python tests/bench/bench_replies.py [--repeat N]
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # before numpy is imported

import argparse  # noqa: E402
import json  # noqa: E402
import statistics  # noqa: E402
import time  # noqa: E402
from unittest import mock  # noqa: E402

from service.api.schemas import common  # noqa: E402
from service.api.schemas.designs import DesignRequestSchema, DesignSchema  # noqa: E402
from service.api.schemas.tolerance import ToleranceRequestSchema, ToleranceSchema  # noqa: E402
from service.api.views.designs import EXAMPLE  # noqa: E402
from service.config import Settings  # noqa: E402
from service.workflows import design, tolerance  # noqa: E402


def _times(fn, repeat: int) -> list[float]:
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return out


def _line(name: str, times: list[float], size: int) -> str:
    ms = [t * 1e3 for t in times]
    return (f"{name:38s} median {statistics.median(ms):7.2f} ms  spread {min(ms):7.2f}-{max(ms):7.2f} ms  "
            f"JSON {size / 1024:7.1f} KiB")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=15)
    args = ap.parse_args()
    settings = Settings.from_env()
    outcome = design(DesignRequestSchema().load(dict(EXAMPLE))["request"], settings)
    doc = outcome.as_dict()
    tol = tolerance(ToleranceRequestSchema().load({"design": doc, "trials": 500, "seed": 1})["request"],
                    settings).as_dict()
    for name, schema, raw in (("design document", DesignSchema(), doc), ("tolerance, 500 trials", ToleranceSchema(),
                                                                       tol)):
        rounded = _times(lambda: schema.dump(raw), args.repeat)
        size = len(json.dumps(schema.dump(raw)))
        with mock.patch.object(common, "round_figures", lambda data, exact=(): data):
            exact = _times(lambda: schema.dump(raw), args.repeat)
            size_exact = len(json.dumps(schema.dump(raw)))
        print(_line(f"{name}: dump, figures rounded", rounded, size))
        print(_line(f"{name}: dump, not rounded", exact, size_exact))
        print(f"{'':38s} ratio rounded/not {statistics.median(rounded) / statistics.median(exact):.2f}")


if __name__ == "__main__":
    main()
