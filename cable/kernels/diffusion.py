"""Diffusion sub-steps: the theta scheme on the tridiagonal operator of cable.fiber.

(I - theta h L) v' = (I + (1 - theta) h L) v with theta = 1/2 (Crank-Nicolson),
1 (backward Euler) or 0 (forward Euler, no solve). The matrix is constant, so it is
factored once (Thomas algorithm) and each step costs one forward and one backward
sweep.
"""

import numpy as np

from cable.kernels.jit import jit

THETA = {"crank-nicolson": 0.5, "backward-euler": 1.0, "forward-euler": 0.0}


def factor(lo, up, h, theta):
    """Thomas factors of I - theta h L for a sub-step h [ms].

    Returns
    -------
    sub, cp, inv : ndarray
        Sub-diagonal, modified super-diagonal and inverse pivots.
    """
    n = lo.size
    sub = -theta * h * lo
    sup = -theta * h * up
    diag = 1.0 + theta * h * (lo + up)
    cp = np.zeros(n)
    inv = np.zeros(n)
    inv[0] = 1.0 / diag[0]
    cp[0] = sup[0] * inv[0]
    for i in range(1, n):
        inv[i] = 1.0 / (diag[i] - sub[i] * cp[i - 1])
        cp[i] = sup[i] * inv[i]
    return sub, cp, inv


@jit
def diffuse(v, lo, up, h, theta, sub, cp, inv, work):
    """One theta-scheme sub-step of length h, in place on v."""
    n = v.shape[0]
    if n == 1:
        return
    e = (1.0 - theta) * h
    # explicit part, written into work
    if e != 0.0:
        prev = v[0]
        for i in range(n):
            vi = v[i]
            acc = 0.0
            if i > 0:
                acc += lo[i] * (prev - vi)
            if i < n - 1:
                acc += up[i] * (v[i + 1] - vi)
            work[i] = vi + e * acc
            prev = vi
    else:
        for i in range(n):
            work[i] = v[i]
    if theta == 0.0:
        for i in range(n):
            v[i] = work[i]
        return
    # forward sweep
    work[0] = work[0] * inv[0]
    for i in range(1, n):
        work[i] = (work[i] - sub[i] * work[i - 1]) * inv[i]
    # back substitution
    v[n - 1] = work[n - 1]
    for i in range(n - 2, -1, -1):
        v[i] = work[i] - cp[i] * v[i + 1]
