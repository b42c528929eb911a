"""The cyclic (ring) diffusion solve against a dense solve, and the ring grid."""

import numpy as np
import pytest

from cable.case import load_case
from cable.fiber import build_grid
from cable.kernels import diffusion
from tests.conftest import hh_axon_case

#: a dense LU solve of a well-conditioned (diagonally dominant) matrix agrees to rounding:
#: a few ulps times the condition number (below 10 here)
ROUNDING = 1e-13


def ring_grid(n_cells=12, coupling=None):
    case = hh_axon_case(length=1.2, dx=1.2 / n_cells)
    case["fiber"]["closed"] = True
    fiber = load_case(case).fiber
    return build_grid(fiber, coupling_factor=coupling)


def test_ring_grid_couples_last_node_to_first_and_conserves():
    g = ring_grid()
    assert g.n == 12 and g.closed and g.x[-1] == pytest.approx(1.1)  # no node at x = length (= x = 0)
    a = g.operator_dense()
    assert a[0, -1] > 0 and a[-1, 0] > 0
    np.testing.assert_allclose(a.sum(axis=1), 0.0, atol=ROUNDING * np.abs(a).max())  # rows: no source
    np.testing.assert_allclose(a.sum(axis=0), 0.0, atol=ROUNDING * np.abs(a).max())  # columns: conservation


@pytest.mark.parametrize("scheme", ["crank-nicolson", "backward-euler", "forward-euler"])
@pytest.mark.parametrize("n_cells", [3, 4, 12, 51])
def test_cyclic_step_equals_a_dense_solve(scheme, n_cells, rng):
    coupling = rng.uniform(0.3, 1.0, n_cells)  # uneven edges: the corners differ from the rest
    g = ring_grid(n_cells, coupling)
    theta = diffusion.THETA[scheme]
    h = 0.002 if scheme == "forward-euler" else 0.05
    v = rng.normal(size=g.n)
    out = v.copy()
    diffusion.diffuse(out, g.lo, g.up, h, theta, *diffusion.factor(g.lo, g.up, h, theta), np.zeros(g.n))
    a = g.operator_dense()
    eye = np.eye(g.n)
    expected = np.linalg.solve(eye - theta * h * a, (eye + (1 - theta) * h * a) @ v)
    np.testing.assert_allclose(out, expected, rtol=0, atol=ROUNDING * np.abs(v).max())
    assert out.sum() == pytest.approx(v.sum(), abs=ROUNDING * g.n)  # charge conserved round the ring


def test_open_strand_factors_unchanged():
    # an open strand keeps n substitution coefficients: the ring branch is not taken
    case = hh_axon_case(length=1.0, dx=0.1)
    g = build_grid(load_case(case).fiber)
    assert all(f.size == g.n for f in diffusion.factor(g.lo, g.up, 0.01, 0.5))
