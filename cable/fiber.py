"""Fibre description -> per-node and per-edge arrays for the kernels.

The grid is vertex-centred and uniform: nodes at x_i = i dx, i = 0..n-1, the end nodes
owning half a cell so that the sealed (no-flux) ends are exact for the discrete
operator (the mirror-node form). The diffusion operator is written per edge,

    (L v)_i = lo_i (v_{i-1} - v_i) + up_i (v_{i+1} - v_i)      [1/ms]

with lo_0 = up_{n-1} = 0. On an edge between nodes of different coupling the
conductance is the harmonic mean of the two sides (series resistances), so current
is conserved across a border.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from cable.case.load import Fiber, Numerics


@dataclass(frozen=True)
class Grid:
    """Node positions and the diffusion operator of a strand.

    Attributes
    ----------
    x : ndarray
        Node positions [cm].
    lo, up : ndarray
        Coefficients of the operator to the left and right neighbour [1/ms].
    """

    x: np.ndarray
    lo: np.ndarray
    up: np.ndarray

    @property
    def n(self) -> int:
        return self.x.size

    def operator_dense(self) -> np.ndarray:
        """The operator as a dense matrix (for tests)."""
        n = self.n
        a = np.zeros((n, n))
        for i in range(n):
            if i > 0:
                a[i, i - 1] += self.lo[i]
                a[i, i] -= self.lo[i]
            if i < n - 1:
                a[i, i + 1] += self.up[i]
                a[i, i] -= self.up[i]
        return a


def node_positions(fiber: Fiber) -> np.ndarray:
    """Node positions [cm] of a fibre."""
    return np.arange(fiber.n_nodes) * fiber.dx


def edge_conductance(node_factor: np.ndarray) -> np.ndarray:
    """Harmonic mean of the coupling factors either side of each edge (length n-1)."""
    a, b = node_factor[:-1], node_factor[1:]
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where((a > 0) & (b > 0), 2.0 * a * b / (a + b), 0.0)
    return out


def build_grid(fiber: Fiber, coupling_factor: np.ndarray | None = None,
               edge_factor: np.ndarray | None = None) -> Grid:
    """Build the grid of ``fiber``.

    Parameters
    ----------
    fiber : Fiber
    coupling_factor : ndarray, optional
        Factor on the conductivity at each node (regions); edges take the harmonic mean.
    edge_factor : ndarray, optional
        Factor per edge applied after that (discrete junctions), length n-1.
    """
    x = node_positions(fiber)
    n = x.size
    d_edge = np.full(n - 1, fiber.diffusivity / fiber.dx**2)
    if coupling_factor is not None:
        d_edge = d_edge * edge_conductance(np.asarray(coupling_factor, dtype=float))
    if edge_factor is not None:
        d_edge = d_edge * edge_factor
    volume = np.ones(n)
    volume[0] = volume[-1] = 0.5
    lo = np.zeros(n)
    up = np.zeros(n)
    lo[1:] = d_edge / volume[1:]
    up[:-1] = d_edge / volume[:-1]
    return Grid(x=x, lo=lo, up=up)


def forward_euler_limit(fiber: Fiber, numerics: Numerics) -> float:
    """Largest stable dt [ms] for forward-Euler diffusion (uniform coupling).

    The explicit step v + h L v is stable when h max_i (lo_i + up_i) <= 1; with the
    Strang half steps unmerged the sub-step is dt/2.
    """
    rate = 2.0 * fiber.diffusivity / fiber.dx**2
    limit = 1.0 / rate
    if numerics.splitting == "strang" and not numerics.merge_half_steps:
        limit *= 2.0
    return limit
