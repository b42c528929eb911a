"""Fibre description -> per-node and per-edge arrays for the kernels.

The grid is vertex-centred and uniform: nodes at x_i = i dx, i = 0..n-1, the end nodes
owning half a cell so that the sealed (no-flux) ends are exact for the discrete
operator (the mirror-node form). The diffusion operator is written per edge,

    (L v)_i = lo_i (v_{i-1} - v_i) + up_i (v_{i+1} - v_i)      [1/ms]

with lo_0 = up_{n-1} = 0. On an edge between nodes of different coupling the
conductance is the harmonic mean of the two sides (series resistances), so current
is conserved across a border.

Discrete cells
--------------
With ``[fiber] cell_length`` and ``gap_junction_conductance`` the strand is a chain of
cells of ``cell_length`` (a whole number m >= 1 of dx), each resolved by m nodes joined
by cytoplasm; cell k holds nodes k m .. k m + m - 1 (the end node of a fibre a whole
number of cells long joins the last cell), and the edge between the last node of a cell
and the first of the next holds a gap junction in series with the dx of cytoplasm
between the two nodes. Per unit cross-section the edge's resistance is then
``dx / sigma + 1 / g_j``, against ``dx / sigma`` for a cytoplasmic edge, so the junction
multiplies the edge's conductance by

    f_j = 1 / (1 + sigma / (g_j dx))

where sigma is the axial conductivity (tissue form: ``conductivity``; axon form:
1000 / ``axial_resistivity`` mS/cm) and g_j [mS/cm^2] the junction's conductance per
unit cross-sectional area (of the fibre in the axon form, of tissue in the tissue form).
A specific junction resistance R_j [ohm*cm^2] is g_j = 1/R_j (write
``gap_junction_conductance = "1/(1.5 ohm*cm^2)"``); an absolute junction conductance G
[uS] of a fibre of radius a is g_j = G / (pi a^2) (e.g. 2.5 uS at a = 11 um is
658 mS/cm^2 = 1/(1.52 ohm*cm^2)).

For cells much shorter than the space constant the chain behaves as a continuous
cable of effective resistivity ``1/sigma + 1/(g_j cell_length)`` (homogenisation;
the tests check this, and that strong junctions give back the continuous strand);
poorly coupled cells conduct step-wise, the delay concentrated at the junctions, which
continuous coupling cannot show.

A region's ``coupling`` factor multiplies the conductivity of a continuous fibre; in a
fibre of discrete cells it multiplies the gap-junction conductance only (uncoupling, as
in Shaw & Rudy 1997), the cytoplasm being left as it is. Either way an edge between
nodes of different factors takes their harmonic mean.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from cable.case.load import CaseError, Fiber, Numerics

#: cell_length may differ from a whole number of dx by this relative amount (rounding)
CELL_TOLERANCE = 1e-6


@dataclass(frozen=True)
class Grid:
    """Node positions and the diffusion operator of a strand.

    Attributes
    ----------
    x : ndarray
        Node positions [cm].
    lo, up : ndarray
        Coefficients of the operator to the left and right neighbour [1/ms].
    edge : ndarray or None
        Conductance of each edge (i, i+1) divided by the membrane capacitance of one dx
        of fibre [1/ms], length n-1 (so that lo_i = edge_{i-1} / volume_i).
    volume : ndarray or None
        Share of dx each node owns (1, or 1/2 at the sealed ends).
    cell : ndarray or None
        Cell index of each node for discrete cell coupling, else None.
    """

    x: np.ndarray
    lo: np.ndarray
    up: np.ndarray
    edge: np.ndarray | None = None
    volume: np.ndarray | None = None
    cell: np.ndarray | None = None
    closed: bool = False

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
        if self.closed:  # the closing edge (n-1, 0) of a ring
            a[0, n - 1] += self.lo[0]
            a[0, 0] -= self.lo[0]
            a[n - 1, 0] += self.up[n - 1]
            a[n - 1, n - 1] -= self.up[n - 1]
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


def axial_conductivity(fiber: Fiber) -> float:
    """Axial conductivity sigma [mS/cm]: the tissue form's, or 1000 / R_i for the axon form."""
    if fiber.radius is not None:
        return 1000.0 / fiber.axial_resistivity
    return fiber.conductivity


def nodes_per_cell(fiber: Fiber) -> int | None:
    """Nodes per cell for discrete cell coupling (None for a continuous fibre).

    Raises
    ------
    CaseError
        When ``cell_length`` is not a whole number (>= 1) of ``dx``.
    """
    if fiber.cell_length is None:
        return None
    ratio = fiber.cell_length / fiber.dx
    m = int(round(ratio))
    if m < 1 or abs(ratio - m) > CELL_TOLERANCE * max(1.0, ratio):
        good = fiber.cell_length / max(1, m)
        raise CaseError(f"fiber.cell_length = {fiber.cell_length:g} cm must be a whole number (at least 1) of "
                        f"fiber.dx = {fiber.dx:g} cm, so that junctions fall between nodes; e.g. dx = {good:.6g} cm "
                        f"({max(1, m)} node(s) per cell).")
    return m


def junction_edges(fiber: Fiber) -> np.ndarray:
    """Indices e of the edges (e, e+1) that hold a gap junction (empty when continuous).

    Cell k holds nodes k m .. k m + m - 1; the end node of a fibre that is a whole
    number of cells long joins the last cell (no one-node cell at the sealed end).
    """
    m = nodes_per_cell(fiber)
    if m is None:
        return np.zeros(0, dtype=np.int64)
    edges = np.arange(m - 1, fiber.n_nodes - 1, m, dtype=np.int64)
    if edges.size and edges[-1] == fiber.n_nodes - 2 and m > 1:
        edges = edges[:-1]
    return edges


def junction_factor(fiber: Fiber, coupling: np.ndarray | None = None) -> np.ndarray | None:
    """Per-edge factor f_j of the junctions (1 on cytoplasmic edges); None when continuous.

    Parameters
    ----------
    fiber : Fiber
    coupling : ndarray, optional
        Per-edge factor on the junction conductance g_j (length n-1; regions).
    """
    edges = junction_edges(fiber)
    if fiber.cell_length is None:
        return None
    f = np.ones(fiber.n_nodes - 1)
    g = np.full(edges.size, fiber.gap_junction_conductance)
    if coupling is not None:
        g = g * np.asarray(coupling, dtype=float)[edges]
    sigma = axial_conductivity(fiber)
    with np.errstate(divide="ignore"):
        f[edges] = np.where(g > 0, 1.0 / (1.0 + sigma / (np.where(g > 0, g, 1.0) * fiber.dx)), 0.0)
    return f


def cell_index(fiber: Fiber) -> np.ndarray | None:
    """Cell number of each node (None when continuous)."""
    if fiber.cell_length is None:
        return None
    cell = np.zeros(fiber.n_nodes, dtype=np.int64)
    cell[junction_edges(fiber) + 1] = 1
    return np.cumsum(cell)


def effective_resistivity(fiber: Fiber) -> float:
    """Resistivity [ohm*cm] of the continuous cable equivalent to the fibre's cells.

    1/sigma + 1/(g_j cell_length) per unit cross-section (in ohm*cm: 1000 times the
    value in cm/mS); the plain axial resistivity when continuous.
    """
    sigma = axial_conductivity(fiber)
    r = 1.0 / sigma
    if fiber.cell_length is not None:
        r += 1.0 / (fiber.gap_junction_conductance * fiber.cell_length)
    return 1000.0 * r


def build_grid(fiber: Fiber, coupling_factor: np.ndarray | None = None) -> Grid:
    """Build the grid of ``fiber``.

    Parameters
    ----------
    fiber : Fiber
        With ``cell_length`` and ``gap_junction_conductance`` the junction edges are
        built in (see the module docstring).
    coupling_factor : ndarray, optional
        Factor on the conductivity at each node (regions), on the junction conductance
        for discrete cells; edges take the harmonic mean.
    """
    if fiber.closed:
        return _ring_grid(fiber, coupling_factor)
    x = node_positions(fiber)
    n = x.size
    d_edge = np.full(n - 1, fiber.diffusivity / fiber.dx**2)
    per_edge = None if coupling_factor is None else edge_conductance(np.asarray(coupling_factor, dtype=float))
    if fiber.cell_length is not None:
        d_edge = d_edge * junction_factor(fiber, per_edge)
    elif per_edge is not None:
        d_edge = d_edge * per_edge
    volume = np.ones(n)
    volume[0] = volume[-1] = 0.5
    lo = np.zeros(n)
    up = np.zeros(n)
    lo[1:] = d_edge / volume[1:]
    up[:-1] = d_edge / volume[:-1]
    return Grid(x=x, lo=lo, up=up, edge=d_edge, volume=volume, cell=cell_index(fiber))


def _ring_grid(fiber: Fiber, coupling_factor=None) -> Grid:
    """A ring (``fiber.closed``): n edges, the last one (n-1, 0) closing it; every node owns a whole dx.

    ``lo[0]`` and ``up[n-1]`` carry the closing edge (zero on an open fibre), which is
    how :mod:`cable.kernels.diffusion` tells a ring from a strand. ``edge`` has n entries.
    """
    x = node_positions(fiber)
    n = x.size
    d_edge = np.full(n, fiber.diffusivity / fiber.dx**2)
    if coupling_factor is not None:
        f = np.asarray(coupling_factor, dtype=float)
        d_edge = d_edge * edge_conductance(np.append(f, f[0]))  # edge (n-1, 0) between the last node and the first
    lo = np.roll(d_edge, 1)   # lo_i: edge (i-1, i); lo_0 the closing edge
    up = d_edge.copy()        # up_i: edge (i, i+1); up_{n-1} the closing edge
    return Grid(x=x, lo=lo, up=up, edge=d_edge, volume=np.ones(n), cell=None, closed=True)


def forward_euler_limit(fiber: Fiber, numerics: Numerics) -> float:
    """Largest stable dt [ms] for forward-Euler diffusion on a fibre's uniform grid.

    The rate 2 D / dx^2 of every inner node; :func:`forward_euler_dt_limit` gives the
    limit of a built grid (regions, discrete cells), from the same rule.
    """
    return _explicit_limit(2.0 * fiber.diffusivity / fiber.dx**2, numerics)


def forward_euler_dt_limit(grid: Grid, numerics: Numerics) -> float:
    """Largest stable dt [ms] of forward-Euler diffusion on this grid (region coupling included).

    inf for a grid without coupling.
    """
    rate = float(np.max(grid.lo + grid.up)) if grid.lo.size else 0.0
    return _explicit_limit(rate, numerics)


def _explicit_limit(rate: float, numerics: Numerics) -> float:
    """The explicit step v + h L v is stable when h max_i (lo_i + up_i) <= 1 (``rate`` that
    maximum [1/ms]), with h = dt, or dt/2 for Strang splitting with its half steps unmerged."""
    if not rate > 0.0:
        return float("inf")
    per_dt = 1.0 if (numerics.splitting == "godunov" or numerics.merge_half_steps) else 0.5
    return 1.0 / (rate * per_dt)


def check_forward_euler(fiber: Fiber, numerics: Numerics) -> None:
    """Refuse a dt beyond the stability limit of forward-Euler diffusion (:func:`forward_euler_limit`)."""
    limit = forward_euler_limit(fiber, numerics)
    if numerics.dt > limit:
        raise CaseError(f"numerics.dt = {numerics.dt:g} ms exceeds the stability limit of forward-Euler diffusion, "
                        f"{limit:.4g} ms, for dx = {fiber.dx:g} cm and D = {fiber.diffusivity:.4g} cm^2/ms; "
                        f"reduce dt or use diffusion = \"crank-nicolson\".")


def check_grid_forward_euler(grid: Grid, numerics: Numerics) -> None:
    """Refuse a dt beyond the stability limit of forward-Euler diffusion on a built grid
    (:func:`forward_euler_dt_limit`: region coupling included), before a run starts."""
    limit = forward_euler_dt_limit(grid, numerics)
    if numerics.dt > limit:
        raise CaseError(f"numerics.dt = {numerics.dt:g} ms exceeds the stability limit of forward-Euler diffusion "
                        f"on this grid ({limit:.4g} ms); reduce dt or use "
                        f"diffusion = \"crank-nicolson\".")
