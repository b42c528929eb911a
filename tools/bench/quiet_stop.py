"""Where ``run.stop_when_quiet`` ends three short runs, and the wall time with and without.

The cases are those of the protocol tests (``tests/protocols/protocol_cases.py``): the
HH axon, an LR1 and a TP06 strand; each runs once to compile, then without and with the
stop (warm). The measurements of the beats are the same in both (``tests/test_quiet.py``).

Run::

    python tools/bench/quiet_stop.py
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

import cable  # noqa: E402
from tests.protocols.protocol_cases import cardiac_strand, hh_axon  # noqa: E402

CASES = {
    "HH axon 1 cm, 40 ms": hh_axon(length=1.0, duration=40.0),
    "LR1 strand 0.5 cm, 2 beats at 400 ms, 1400 ms": cardiac_strand("luo-rudy-1991", length=0.5, count=2,
                                                                    cycle_length=400.0, duration=1400.0),
    "TP06 strand 0.5 cm, 1 beat, 1000 ms": cardiac_strand("ten-tusscher-panfilov-2006", length=0.5, count=1,
                                                          duration=1000.0),
}


def main() -> int:
    for name, raw in CASES.items():
        case = cable.load_case(raw)
        cable.simulate(case)
        walls, stop = [], None
        for quiet in (False, True):
            t = time.perf_counter()
            ds = cable.simulate(case.with_overrides({"run.stop_when_quiet": quiet}))
            walls.append(time.perf_counter() - t)
            stop = ds.attrs.get("stopped_when_quiet_ms", stop)
        print(f"{name}: stopped at {stop} ms; wall {walls[0]:.2f} s -> {walls[1]:.2f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
