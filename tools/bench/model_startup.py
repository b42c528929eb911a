"""Cost of ``cable.get_model(NAME)`` in a fresh process: cold (empty generated-module cache) and warm.

For each model, a fresh process imports cable and calls ``get_model``; printed are the
wall time of ``import cable``, of ``get_model`` after it, and whether sympy was imported.
"Cold" points ``CABLE_CACHE_DIR`` at an empty folder (a generated model is written from
its description, with sympy); "warm" runs again with the same folder (the module is read
from the cache under the hash of its description and the compiler). Numba's compilation is
not part of either (kernels compile on first call). Best of ``--repeat`` warm runs.

Run::

    python tools/bench/model_startup.py
    python tools/bench/model_startup.py --models luo-rudy-1991 --repeat 5
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile

SCRIPT = """
import json, sys, time
t0 = time.perf_counter()
import cable
t1 = time.perf_counter()
cable.get_model(sys.argv[1])
t2 = time.perf_counter()
print(json.dumps({"import": t1 - t0, "get_model": t2 - t1, "sympy": "sympy" in sys.modules}))
"""

DEFAULT = ["passive", "fitzhugh-nagumo", "mitchell-schaeffer-2003", "luo-rudy-1991", "hodgkin-huxley-1952"]


def once(name: str, cache: str) -> dict:
    env = dict(os.environ, CABLE_CACHE_DIR=cache)
    out = subprocess.run([sys.executable, "-c", SCRIPT, name], env=env, check=True, capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--models", nargs="*", default=DEFAULT)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    print(f"load average at start: {os.getloadavg()[0]:.2f}")
    print(f"{'model':>26} {'cold import_s':>13} {'cold get_model_s':>16} {'sympy':>5} "
          f"{'warm import_s':>13} {'warm get_model_s':>16} {'sympy':>5}")
    for name in args.models:
        with tempfile.TemporaryDirectory() as cache:
            cold = once(name, cache)
            warm = min((once(name, cache) for _ in range(args.repeat)), key=lambda r: r["import"] + r["get_model"])
        print(f"{name:>26} {cold['import']:13.3f} {cold['get_model']:16.3f} {str(cold['sympy']):>5} "
              f"{warm['import']:13.3f} {warm['get_model']:16.3f} {str(warm['sympy']):>5}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
