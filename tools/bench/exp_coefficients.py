"""Coefficients of the polynomial in ``cable.kernels.elementary.exp``.

exp(r) ~ 1 + r + r^2 Q(r) on |r| <= ln(2)/2, Q of degree 9 (the whole polynomial of
degree 11), with the coefficients of Q chosen to minimise the largest relative error:
Lawson's iteratively reweighted least squares (Lawson 1961, thesis, UCLA; see Rice &
Usow 1968, Math Comp 22:118) on 4000 Chebyshev points, in numpy's extended precision
(``longdouble``, 64-bit mantissa on x86-64), then rounded to double. Prints the
coefficients and the largest relative error of the rounded polynomial, to paste into
``cable/kernels/elementary.py``; ``tests/kernels/test_fast_paths.py`` checks the
resulting ``exp`` against numpy to 1 ulp.

Run::

    python tools/bench/exp_coefficients.py
"""

from __future__ import annotations

import numpy as np

DEGREE = 11          # of the whole polynomial
POINTS = 4000
ITERATIONS = 60


def fit(degree: int = DEGREE) -> tuple[np.ndarray, float]:
    """(coefficients of r^2 .. r^degree as float64, largest relative error)."""
    ld = np.longdouble
    half = ld(np.log(2.0)) / 2
    k = np.arange(POINTS, dtype=ld)
    r = half * np.cos(np.pi * (k + ld(0.5)) / POINTS)
    f = np.exp(r)
    basis = np.stack([r ** (2 + j) for j in range(degree - 1)], axis=1) / f[:, None]
    target = (f - 1 - r) / f
    w = np.ones(POINTS, dtype=ld)
    c = np.zeros(degree - 1, dtype=ld)
    for _ in range(ITERATIONS):
        a = basis * w[:, None]
        normal = (a.T @ a).astype(np.float64)
        c = np.linalg.solve(normal, (a.T @ (target * w)).astype(np.float64)).astype(ld)
        for _ in range(2):   # refine the float64 solve in extended precision
            res = target - basis @ c
            c = c + np.linalg.solve(normal, (a.T @ (res * w)).astype(np.float64)).astype(ld)
        res = np.abs(target - basis @ c)
        w = w * np.sqrt(res / res.max() + ld(1e-30))
        w = w / w.max()
    coef = np.array(c, dtype=np.float64)
    p = 1 + r + r * r * sum(ld(coef[j]) * r ** j for j in range(degree - 1))
    return coef, float(np.max(np.abs(p / f - 1)))


def main() -> int:
    coef, err = fit()
    for j, c in enumerate(coef):
        print(f"P{j + 2} = {float(c)!r}")
    print(f"# largest relative error of the rounded polynomial: {err:.3g}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
