"""Diffusion sub-steps: the theta scheme on the tridiagonal operator of cable.fiber.

(I - theta h L) v' = (I + (1 - theta) h L) v with theta = 1/2 (Crank-Nicolson),
1 (backward Euler) or 0 (forward Euler, no solve). The matrix is constant, so it is
factored once and each step costs one elimination sweep and one substitution sweep.

The factorisation is the two-sided ("twisted") form of Gaussian elimination on a
tridiagonal matrix (Meurant 1992, SIAM J Matrix Anal Appl 13:707; van der Vorst 1987,
Parallel Comput 5:45): rows above a middle row m are eliminated downwards, rows below
it upwards, the two meet at m, and the substitution runs outwards from m. It does the
same work as the Thomas algorithm, but the two halves are independent chains of
dependent operations, which the processor overlaps, so the solve takes about half
the time of one long chain (measured in ``tools/bench``). The matrix is diagonally
dominant (theta h (lo + up) >= 0 added to a unit diagonal), so no pivoting is needed
and the two forms agree to rounding.

A ring (``[fiber] closed``) makes the matrix cyclic tridiagonal; :func:`factor_ring`
reduces it to a tridiagonal one and a rank-one correction (Sherman-Morrison), so a
step stays O(n): the same two sweeps, then one pass adding a multiple of a fixed vector.
"""

import numpy as np

from cable.kernels.jit import jit, jit_inline

THETA = {"crank-nicolson": 0.5, "backward-euler": 1.0, "forward-euler": 0.0}


@jit
def _factor(lo, up, h, theta, pivot, elim, back):
    a = -theta * h * lo      # sub-diagonal (a[0]: a ring's corner, not used here)
    c = -theta * h * up      # super-diagonal (c[n-1]: likewise)
    b = 1.0 + theta * h * (lo + up)
    _factor_abc(a, b, c, pivot, elim, back)


@jit
def _factor_abc(a, b, c, pivot, elim, back):
    n = a.size
    m = (n - 1) // 2
    # downwards over rows 0..m-1: x_i = w_i - back_i x_{i+1}
    prev = 0.0
    for i in range(m):
        piv = 1.0 / (b[i] - (a[i] * prev if i > 0 else 0.0))
        pivot[i] = piv
        elim[i] = a[i] * piv if i > 0 else 0.0
        back[i] = c[i] * piv
        prev = back[i]
    # upwards over rows n-1..m+1: x_i = z_i - back_i x_{i-1}
    nxt = 0.0
    for i in range(n - 1, m, -1):
        piv = 1.0 / (b[i] - (c[i] * nxt if i < n - 1 else 0.0))
        pivot[i] = piv
        elim[i] = c[i] * piv if i < n - 1 else 0.0
        back[i] = a[i] * piv
        nxt = back[i]
    # the middle row, with both neighbours substituted
    d = b[m]
    if m > 0:
        d -= a[m] * back[m - 1]
    if m < n - 1:
        d -= c[m] * back[m + 1]
    piv = 1.0 / d
    pivot[m] = piv
    elim[m] = a[m] * piv if m > 0 else 0.0
    back[m] = c[m] * piv if m < n - 1 else 0.0


def factor(lo, up, h, theta):
    """Factors of I - theta h L for a sub-step h [ms] (two-sided elimination).

    Parameters
    ----------
    lo, up : ndarray
        Operator coefficients to the left and right neighbour [1/ms] (see cable.fiber).
    h : float
        Sub-step [ms].
    theta : float
        Implicit weight (see ``THETA``).

    Returns
    -------
    pivot, elim, back : ndarray
        Inverse pivots, elimination multipliers (scaled by the pivot) and substitution
        coefficients; opaque to callers, consumed by :func:`diffuse`. For a ring
        (``lo[0]`` or ``up[n-1]`` nonzero: the closing edge, see ``cable.fiber``)
        ``back`` has 2n + 2 entries: see :func:`factor_ring`.
    """
    lo = np.ascontiguousarray(lo, dtype=np.float64)
    up = np.ascontiguousarray(up, dtype=np.float64)
    n = lo.size
    if n > 2 and (lo[0] != 0.0 or up[n - 1] != 0.0) and theta != 0.0:
        return factor_ring(lo, up, h, theta)
    pivot = np.zeros(n)
    elim = np.zeros(n)
    back = np.zeros(n)
    if n > 0:
        _factor(lo, up, float(h), float(theta), pivot, elim, back)
    return pivot, elim, back


def factor_ring(lo, up, h, theta):
    """Factors of the cyclic tridiagonal I - theta h L of a ring (Sherman-Morrison).

    The corners A[0, n-1] = alpha = -theta h lo_0 and A[n-1, 0] = beta = -theta h up_{n-1}
    make the matrix cyclic. With gamma = -b_0, A = T' + u w^T where T' is tridiagonal
    with b'_0 = b_0 - gamma and b'_{n-1} = b_{n-1} - alpha beta / gamma, u = (gamma, 0,
    ..., beta) and w = (1, 0, ..., alpha / gamma). Then A x = r is T' y = r, T' z = u,
    x = y - (w.y) / (1 + w.z) z (Sherman & Morrison 1950, Ann Math Stat 21:124; the
    cyclic form as in Press et al., Numerical Recipes, section 2.7): one extra O(n) pass
    per solve. T' is factored as an open strand's matrix; ``back`` carries, after its
    n substitution coefficients, z (n entries), alpha / gamma and 1 / (1 + w.z), which
    :func:`diffuse` applies after the tridiagonal solve.
    """
    n = lo.size
    h, theta = float(h), float(theta)
    a = -theta * h * lo
    c = -theta * h * up
    b = 1.0 + theta * h * (lo + up)
    alpha, beta = a[0], c[n - 1]
    gamma = -b[0]
    b = b.copy()
    b[0] -= gamma
    b[n - 1] -= alpha * beta / gamma
    pivot, elim, back = np.zeros(n), np.zeros(n), np.zeros(n)
    _factor_abc(a, b, c, pivot, elim, back)
    u = np.zeros(n)
    u[0], u[n - 1] = gamma, beta
    z = np.zeros(n)
    solve(z, pivot, elim, back, u * pivot)
    q = alpha / gamma
    return pivot, elim, np.concatenate([back, z, [q, 1.0 / (1.0 + z[0] + q * z[n - 1])]])


@jit
def ring_correction(v, back):
    """v -= (w.v) / (1 + w.z) z: the Sherman-Morrison step of a ring (see :func:`factor_ring`)."""
    n = v.shape[0]
    q = back[2 * n]
    s = (v[0] + q * v[n - 1]) * back[2 * n + 1]
    for i in range(n):
        v[i] -= s * back[n + i]


@jit
def explicit_part(v, lo, up, e, pivot, work):
    """work = (v + e L v) * pivot: the right-hand side, already scaled by the pivots.

    The end rows add the closing edge of a ring (lo_0, up_{n-1}); on an open strand
    those coefficients are 0 and adding the zero term changes no bit.
    """
    n = v.shape[0]
    work[0] = (v[0] + e * (up[0] * (v[1] - v[0]) + lo[0] * (v[n - 1] - v[0]))) * pivot[0]
    for i in range(1, n - 1):
        vi = v[i]
        work[i] = (vi + e * (lo[i] * (v[i - 1] - vi) + up[i] * (v[i + 1] - vi))) * pivot[i]
    work[n - 1] = (v[n - 1] + e * (lo[n - 1] * (v[n - 2] - v[n - 1]) + up[n - 1] * (v[0] - v[n - 1]))) * pivot[n - 1]


@jit
def scaled_copy(v, pivot, work):
    """work = v * pivot (backward Euler: no explicit part)."""
    for i in range(v.shape[0]):
        work[i] = v[i] * pivot[i]


@jit
def solve(v, pivot, elim, back, work):
    """v = the solution for the right-hand side in ``work`` (scaled by the pivots).

    ``work`` is overwritten. The downward and upward eliminations run in one loop, two
    rows per iteration, as do the two substitutions.
    """
    n = v.shape[0]
    m = (n - 1) // 2
    top = m - 1          # rows 1..m-1 eliminated downwards
    bottom = n - 2 - m   # rows n-2..m+1 eliminated upwards
    both = max(0, min(top, bottom))
    # the carried values stay in registers (a reload from work would add the
    # store-to-load latency to each link of the chain)
    wi = work[0]
    wj = work[n - 1]
    for k in range(1, both + 1):
        i = k
        j = n - 1 - k
        wi = work[i] - elim[i] * wi
        wj = work[j] - elim[j] * wj
        work[i] = wi
        work[j] = wj
    for i in range(both + 1, top + 1):
        wi = work[i] - elim[i] * wi
        work[i] = wi
    for k in range(both + 1, bottom + 1):
        j = n - 1 - k
        wj = work[j] - elim[j] * wj
        work[j] = wj
    xm = work[m]
    if m > 0:
        xm -= elim[m] * work[m - 1]
    if m < n - 1:
        xm -= back[m] * work[m + 1]
    v[m] = xm
    # outwards: rows m-1..0 and m+1..n-1
    below = n - 1 - m
    both = min(m, below)
    xi = xm
    xj = xm
    for k in range(1, both + 1):
        i = m - k
        j = m + k
        xi = work[i] - back[i] * xi
        xj = work[j] - back[j] * xj
        v[i] = xi
        v[j] = xj
    for k in range(both + 1, m + 1):
        i = m - k
        xi = work[i] - back[i] * xi
        v[i] = xi
    for k in range(both + 1, below + 1):
        j = m + k
        xj = work[j] - back[j] * xj
        v[j] = xj


@jit
def diffuse(v, lo, up, h, theta, pivot, elim, back, work):
    """One theta-scheme sub-step of length h, in place on v (factors from :func:`factor`)."""
    n = v.shape[0]
    if n == 1:
        return
    e = (1.0 - theta) * h
    if theta == 0.0:
        # forward Euler: v += h L v, no solve (the end rows with a ring's closing edge, 0 if open)
        work[0] = v[0] + e * (up[0] * (v[1] - v[0]) + lo[0] * (v[n - 1] - v[0]))
        for i in range(1, n - 1):
            vi = v[i]
            work[i] = vi + e * (lo[i] * (v[i - 1] - vi) + up[i] * (v[i + 1] - vi))
        work[n - 1] = v[n - 1] + e * (lo[n - 1] * (v[n - 2] - v[n - 1]) + up[n - 1] * (v[0] - v[n - 1]))
        for i in range(n):
            v[i] = work[i]
        return
    if e != 0.0:
        explicit_part(v, lo, up, e, pivot, work)
    else:
        scaled_copy(v, pivot, work)
    solve(v, pivot, elim, back, work)
    if back.shape[0] > n:  # a ring (factor_ring)
        ring_correction(v, back)


# ----------------------------------------------------------------------------- batches
# Many independent strands in one call (cable.kernels.batch). Each strand is solved
# with the factors that :func:`factor` gives it alone and with the floating-point
# operations of :func:`diffuse`, in the same order per node (the strands' chains are
# independent, so running them side by side changes no rounding): a batched strand
# is bitwise the strand run alone. Two layouts:
#
# * interleaved (strands of one length): node i of strand j at i * S + j (S strands).
#   Each row of the sweeps is a loop over the S strands, which vectorises.
# * segments (any lengths): strand j on nodes offsets[j]..offsets[j+1]-1, each solved
#   by :func:`diffuse` on its own slice.

def interleave(arrays) -> np.ndarray:
    """Per-strand arrays of one length, as one array with node i of strand j at i*S + j."""
    return np.ascontiguousarray(np.stack([np.asarray(a) for a in arrays], axis=1)).reshape(
        (-1,) + np.asarray(arrays[0]).shape[1:])


def factor_interleaved(grids, h, theta):
    """The factors of each strand (:func:`factor`, as it has alone), interleaved.

    Parameters
    ----------
    grids : sequence of (lo, up)
        Operator coefficients of each strand [1/ms], all of one length.
    h, theta : float
        As for :func:`factor`.
    """
    parts = [factor(lo, up, h, theta) for lo, up in grids]
    return tuple(interleave([f[k] for f in parts]) for k in range(3))


@jit_inline
def _row_first(out, v, up, v_next, e, pivot):
    # the first row of explicit_part (and of the forward-Euler step, pivot 1)
    for j in range(out.shape[0]):
        out[j] = (v[j] + e * (up[j] * (v_next[j] - v[j]))) * pivot[j]


@jit_inline
def _row_explicit(out, v, lo, up, v_prev, v_next, e, pivot):
    # an inner row of explicit_part
    for j in range(out.shape[0]):
        vj = v[j]
        out[j] = (vj + e * (lo[j] * (v_prev[j] - vj) + up[j] * (v_next[j] - vj))) * pivot[j]


@jit_inline
def _row_last(out, v, lo, v_prev, e, pivot):
    # the last row of explicit_part
    for j in range(out.shape[0]):
        out[j] = (v[j] + e * (lo[j] * (v_prev[j] - v[j]))) * pivot[j]


@jit_inline
def _row_update(w, el, w_prev):
    # w = w - el * w_prev over one row of strands (one elimination step)
    for j in range(w.shape[0]):
        w[j] = w[j] - el[j] * w_prev[j]


@jit_inline
def _row_substitute(x, w, bk, x_next):
    # x = w - bk * x_next over one row of strands (one substitution step)
    for j in range(x.shape[0]):
        x[j] = w[j] - bk[j] * x_next[j]


@jit
def diffuse_interleaved(v, lo, up, h, theta, pivot, elim, back, work, strands):
    """One theta-scheme sub-step of ``strands`` interleaved strands of one length, in place.

    Factors from :func:`factor_interleaved`. Per strand, the operations of
    :func:`diffuse` (explicit part, elimination downwards to the middle row and
    upwards to it, the middle row, substitution outwards) in the same order, so each
    strand's result is bitwise its result alone; each row is a loop over the strands.
    (Multiplying by a pivot of 1 in the forward-Euler step is exact.)
    """
    n = v.shape[0]
    S = strands
    length = n // S
    if length == 1:
        return
    e = (1.0 - theta) * h
    last = (length - 1) * S
    if theta == 0.0:
        ones = np.ones(S)
        _row_first(work[0:S], v[0:S], up[0:S], v[S:2 * S], e, ones)
        for i in range(1, length - 1):
            r = i * S
            _row_explicit(work[r:r + S], v[r:r + S], lo[r:r + S], up[r:r + S], v[r - S:r], v[r + S:r + 2 * S],
                          e, ones)
        _row_last(work[last:n], v[last:n], lo[last:n], v[last - S:last], e, ones)
        for g in range(n):
            v[g] = work[g]
        return
    if e != 0.0:
        _row_first(work[0:S], v[0:S], up[0:S], v[S:2 * S], e, pivot[0:S])
        for i in range(1, length - 1):
            r = i * S
            _row_explicit(work[r:r + S], v[r:r + S], lo[r:r + S], up[r:r + S], v[r - S:r], v[r + S:r + 2 * S],
                          e, pivot[r:r + S])
        _row_last(work[last:n], v[last:n], lo[last:n], v[last - S:last], e, pivot[last:n])
    else:
        for g in range(n):
            work[g] = v[g] * pivot[g]
    m = (length - 1) // 2
    # downwards over rows 1..m-1, upwards over rows length-2..m+1 (solve's two chains)
    for i in range(1, m):
        r = i * S
        _row_update(work[r:r + S], elim[r:r + S], work[r - S:r])
    for i in range(length - 2, m, -1):
        r = i * S
        _row_update(work[r:r + S], elim[r:r + S], work[r + S:r + 2 * S])
    # the middle row, with both neighbours substituted (in solve's order)
    r = m * S
    for j in range(S):
        xm = work[r + j]
        if m > 0:
            xm -= elim[r + j] * work[r - S + j]
        if m < length - 1:
            xm -= back[r + j] * work[r + S + j]
        v[r + j] = xm
    # outwards: rows m-1..0 and m+1..length-1
    for i in range(m - 1, -1, -1):
        r = i * S
        _row_substitute(v[r:r + S], work[r:r + S], back[r:r + S], v[r + S:r + 2 * S])
    for i in range(m + 1, length):
        r = i * S
        _row_substitute(v[r:r + S], work[r:r + S], back[r:r + S], v[r - S:r])


def factor_segments(grids, h, theta):
    """The factors of each strand (:func:`factor`, as it has alone), laid end to end."""
    parts = [factor(lo, up, h, theta) for lo, up in grids]
    return tuple(np.concatenate([f[k] for f in parts]) for k in range(3))


@jit
def diffuse_segments(v, lo, up, h, theta, pivot, elim, back, work, offsets):
    """One theta-scheme sub-step of strands laid end to end, each by :func:`diffuse` alone.

    Strand j holds nodes ``offsets[j]`` to ``offsets[j + 1] - 1``; factors from
    :func:`factor_segments`.
    """
    for j in range(offsets.shape[0] - 1):
        a = offsets[j]
        b = offsets[j + 1]
        diffuse(v[a:b], lo[a:b], up[a:b], h, theta, pivot[a:b], elim[a:b], back[a:b], work[a:b])
