"""Start-up cost of ``cable run``: cold (empty numba cache) and warm (cache filled).

Runs ``cable run CASE -o OUT --overwrite`` as a fresh process, first with
``NUMBA_CACHE_DIR`` pointing at an empty folder (every kernel compiled: the run says
so), then again with the same folder (every kernel loaded from the cache), and the
bare ``import cable``. Wall times are the best of ``--repeat`` runs (the cold run is
timed once per fresh folder).

Run::

    python tools/bench/startup.py                       # cases/squid_axon.toml
    python tools/bench/startup.py --case my.toml --repeat 5
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def timed(cmd, env) -> tuple[float, str]:
    """Wall time [s] of a command and its standard error."""
    t = time.perf_counter()
    done = subprocess.run(cmd, env=env, capture_output=True, text=True)
    wall = time.perf_counter() - t
    if done.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd)} failed ({done.returncode}):\n{done.stderr}")
    return wall, done.stderr


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--case", default=str(ROOT / "cases" / "squid_axon.toml"))
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    cable = [sys.executable, "-m", "cable"]
    with tempfile.TemporaryDirectory() as tmp:
        out = str(Path(tmp) / "out.nc")
        run = cable + ["run", args.case, "-o", out, "--overwrite"]
        colds = []
        for k in range(args.repeat):
            env = dict(os.environ, NUMBA_CACHE_DIR=str(Path(tmp) / f"cache{k}"))
            wall, err = timed(run, env)
            colds.append(wall)
            said = "compiling" in err
        warm_env = dict(os.environ, NUMBA_CACHE_DIR=str(Path(tmp) / "cache0"))
        warms = [timed(run, warm_env)[0] for _ in range(args.repeat)]
        _, err = timed(run, warm_env)
        warm_said = "compiling" in err
        imports = [timed([sys.executable, "-c", "import cable"], warm_env)[0] for _ in range(args.repeat)]
    print(f"case: {args.case}")
    print(f"cold cable run (empty NUMBA_CACHE_DIR): best {min(colds):6.2f} s of {args.repeat}; "
          f"says it is compiling: {'yes' if said else 'NO'}")
    print(f"warm cable run (cache filled):          best {min(warms):6.2f} s of {args.repeat}; "
          f"says it is compiling: {'yes (wrong)' if warm_said else 'no'}")
    print(f"python -c 'import cable':               best {min(imports):6.2f} s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
