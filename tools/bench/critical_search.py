"""Wall time of the README's critical-value search, before and after, back to back.

The search is the README's example: ``cable.find_critical("cases/ischaemic_zone.toml",
"region.0.scale.G_Na", 0.3, 1.0)`` (LR1 strand with an ischaemic zone, 6 beats at
2 Hz, 3000 ms), default bracket tolerance (1 % of the interval) in both. "Before" is a
tree of an earlier commit (``git archive COMMIT | tar -x -C DIR``), run with the same
Python; each search runs in a fresh process, before and after alternating, after one
warm-up search of each (the compilation cache). The machine may be shared: read the
ratio of each pair, measured back to back.

Run::

    git archive 1086c4f | tar -x -C /tmp/base
    python tools/bench/critical_search.py --before /tmp/base --pairs 3
    python tools/bench/critical_search.py --before /tmp/base --options "points=2"
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parents[2]

SCRIPT = """
import json, sys, time, cable
kw = json.loads(sys.argv[1])
t = time.perf_counter()
ds = cable.find_critical("cases/ischaemic_zone.toml", "region.0.scale.G_Na", 0.3, 1.0, **kw)
print(json.dumps({"wall": time.perf_counter() - t, "runs": int(ds.attrs["runs"]),
                  "rounds": int(ds.attrs.get("rounds", ds.attrs["runs"])),
                  "critical": float(ds.attrs["critical_value"]),
                  "passing": float(ds.attrs["passing_value"]), "failing": float(ds.attrs["failing_value"])}))
"""


def search(tree: Path, options: dict) -> dict:
    """One search in a fresh process, in ``tree``."""
    env = dict(os.environ, PYTHONPATH=str(tree))
    out = subprocess.run([sys.executable, "-c", SCRIPT, json.dumps(options)], cwd=tree, env=env, check=True,
                         capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--before", required=True, type=Path, help="tree of the earlier commit")
    ap.add_argument("--pairs", type=int, default=2, help="before/after pairs measured")
    ap.add_argument("--options", nargs="*", default=[], metavar="NAME=INT",
                    help="find_critical keywords of the 'after' search (points=4 workers=2)")
    args = ap.parse_args(argv)
    options = {k: int(v) for k, v in (o.split("=", 1) for o in args.options)}
    for tree, opts in ((args.before, {}), (HERE, options)):   # warm-up: the compilation caches
        search(tree, opts)
    print(f"load average at start: {os.getloadavg()[0]:.2f}; after: {options or 'defaults'}")
    ratios = []
    for k in range(args.pairs):
        b = search(args.before, {})
        a = search(HERE, options)
        ratios.append(b["wall"] / a["wall"])
        print(f"pair {k}: before {b['wall']:.2f} s ({b['runs']} runs, critical {b['critical']:.5f}, bracket "
              f"[{b['failing']:.5f}, {b['passing']:.5f}]); after {a['wall']:.2f} s ({a['runs']} runs in "
              f"{a['rounds']} rounds, critical {a['critical']:.5f}, bracket [{a['failing']:.5f}, "
              f"{a['passing']:.5f}]); ratio {ratios[-1]:.2f}  (load {os.getloadavg()[0]:.2f}, "
              f"{time.strftime('%H:%M:%S')})")
    print(f"ratio before/after: min {min(ratios):.2f}, max {max(ratios):.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
