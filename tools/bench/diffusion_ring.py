"""Cost of a ring's cyclic diffusion step against an open strand's (ns per node-step).

    python tools/bench/diffusion_ring.py [--nodes 1000] [--steps 20000] [--rounds 7]

Both run ``cable.kernels.diffusion.diffuse`` (Crank-Nicolson) in a compiled loop, so
no Python call overhead enters; the minimum over rounds is reported. The ring adds the
Sherman-Morrison pass (one multiply-add per node) to the two sweeps.
"""

import argparse
import time

import numba
import numpy as np

from cable.kernels import diffusion


@numba.njit
def _loop(v, lo, up, pivot, elim, back, work, steps):
    for _ in range(steps):
        diffusion.diffuse(v, lo, up, 0.0025, 0.5, pivot, elim, back, work)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--nodes", type=int, default=1000)
    ap.add_argument("--steps", type=int, default=20000)
    ap.add_argument("--rounds", type=int, default=7)
    args = ap.parse_args()
    n = args.nodes
    cases = {}
    for name, closed in (("open", False), ("ring", True)):
        lo, up = np.full(n, 100.0), np.full(n, 100.0)  # 1/ms: D / dx^2 of a 50 um HH grid, about
        if not closed:
            lo[0] = up[-1] = 0.0
        f = diffusion.factor(lo, up, 0.0025, 0.5)
        v, work = np.random.default_rng(0).normal(size=n), np.zeros(n)
        _loop(v, lo, up, *f, work, 2)
        cases[name] = (v, lo, up, f, work)
    best = {k: np.inf for k in cases}
    for _ in range(args.rounds):  # interleaved, so that load from elsewhere hits both alike
        for name, (v, lo, up, f, work) in cases.items():
            t = time.perf_counter()
            _loop(v, lo, up, *f, work, args.steps)
            best[name] = min(best[name], (time.perf_counter() - t) / args.steps / n * 1e9)
    for name, ns in best.items():
        print(f"{name:5s} {ns:7.2f} ns/node-step")
    print(f"ring / open: {best['ring'] / best['open']:.2f}")


if __name__ == "__main__":
    main()
