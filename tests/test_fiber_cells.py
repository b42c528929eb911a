"""Discrete cell coupling: cells of several nodes joined by gap junctions."""

import numpy as np
import pytest

import cable
from cable.fiber import build_grid, effective_resistivity, junction_edges

#: well-coupled junctions: CV within this fraction of the continuous strand's (the
#: remaining junction resistance is 1 % of the cytoplasm's at g_j = 1e5 mS/cm^2, so CV,
#: ~ R^-1/2, is ~0.5 % off; the same grid is used for both)
CONTINUUM_TOLERANCE = 0.01
#: homogenisation: a chain of cells 100 um long, far shorter than the ~0.6 mm space
#: constant, conducts like the continuous cable of the effective resistivity; the
#: cellular structure makes ~1-2 % of difference (from memory, Keener & Sneyd,
#: Mathematical Physiology, ch. on gap junctions: homogenised cable)
HOMOGENISED_TOLERANCE = 0.03
#: poorly coupled cells: the activation delay across a junction exceeds the delay
#: across a cytoplasmic edge by more than this factor (step-wise conduction)
STEPWISE_RATIO = 10.0

RI = 150.0        # ohm*cm, myoplasm (Shaw & Rudy 1997, from memory)
RG = 1.5          # ohm*cm^2, normal junction resistance (Shaw & Rudy 1997, from memory)


def strand(gj=None, ri=RI, dx=0.0025, length=1.0, cell="100 um"):
    fiber = {"length": length, "dx": dx, "radius": "11 um", "axial_resistivity": f"{ri} ohm*cm"}
    if gj is not None:
        fiber.update(cell_length=cell, gap_junction_conductance=gj)
    return {"membrane": {"model": "luo-rudy-1991"}, "fiber": fiber,
            "stimulus": [{"amplitude": 200.0, "duration": 1.0, "width": 0.02}],
            "numerics": {"dt": 0.01}, "run": {"duration": 30.0}, "output": {"every": 0.5},
            "measure": {"cv_window": [0.3 * length, 0.7 * length]}}


def cv(case) -> float:
    ds = cable.simulate(case)
    assert bool(ds.conducted[0])
    return float(ds.conduction_velocity[0])


def test_junction_edges_and_factor():
    case = cable.load_case(strand(gj=f"1/({RG} ohm*cm^2)", dx=0.0025, length=0.1))
    fib = case.fiber
    edges = junction_edges(fib)
    np.testing.assert_array_equal(edges, [3, 7, 11, 15, 19, 23, 27, 31, 35])  # 4 nodes per 100 um cell
    grid = build_grid(fib)
    assert grid.cell[:8].tolist() == [0, 0, 0, 0, 1, 1, 1, 1]
    # series resistances per cross-section: dx/sigma + 1/g_j on a junction edge (common practice)
    base = fib.diffusivity / fib.dx**2
    cyto = fib.dx * RI / 1000.0          # cm^2/mS
    junction = RG / 1000.0               # cm^2/mS
    assert grid.edge[edges[0]] == pytest.approx(base * cyto / (cyto + junction), rel=1e-12)
    assert grid.edge[0] == pytest.approx(base, rel=1e-12)
    # the loader reads a junction resistance and a conductance per area alike: 2.5 uS per
    # junction over the cross-section pi (11 um)^2 is 6.577e3 uS/cm^2 = 1/(1.520 ohm*cm^2)
    as_resistance = cable.load_case(strand(gj="1/(1.52 ohm*cm^2)", length=0.1)).fiber.gap_junction_conductance
    per_area = cable.load_case(strand(gj=f"{2.5 / (np.pi * (11e-4) ** 2)!r} uS/cm^2",
                                      length=0.1)).fiber.gap_junction_conductance
    assert as_resistance == pytest.approx(1000.0 / 1.52, rel=1e-12)  # mS/cm^2
    assert per_area == pytest.approx(as_resistance, rel=2e-3)        # 1.52 is rounded to 3 digits
    # homogenised resistivity R_i + R_g / cell length (series resistances; common practice)
    assert effective_resistivity(fib) == pytest.approx(RI + RG / 0.01)


def test_cell_length_must_be_whole_number_of_dx():
    case = strand(gj=100.0, dx=0.003, length=0.3)
    with pytest.raises(cable.CaseError, match=r"fiber\.cell_length = 0\.01 cm must be a whole number.*of fiber\.dx"):
        cable.simulate(case)
    with pytest.raises(cable.CaseError, match=r"cell_length and gap_junction_conductance go together"):
        bad = strand(gj=100.0)
        del bad["fiber"]["gap_junction_conductance"]
        cable.load_case(bad)


def test_well_coupled_junctions_converge_to_the_continuous_strand():
    continuous = cv(strand())
    errors = [abs(cv(strand(gj=g)) / continuous - 1.0) for g in (1e3, 1e4, 1e5)]
    assert errors[0] > errors[1] > errors[2]
    assert errors[2] < CONTINUUM_TOLERANCE


def test_cells_conduct_like_the_homogenised_cable():
    # normal coupling (R_g = 1.5 ohm*cm^2): R_eff = 150 + 1.5/0.01 = 300 ohm*cm
    discrete = cable.load_case(strand(gj=f"1/({RG} ohm*cm^2)"))
    r_eff = effective_resistivity(discrete.fiber)
    assert cv(discrete) == pytest.approx(cv(strand(ri=r_eff)), rel=HOMOGENISED_TOLERANCE)


def test_poorly_coupled_cells_conduct_stepwise():
    # Poorly coupled cells: each cell fires nearly as one, the delay sits at the junctions
    # (discontinuous conduction; Spach et al. 1981, Circ Res 48:39, from memory). The
    # continuous cable of the same effective resistivity has uniform delays.
    gj = 1000.0 / 150.0  # R_g = 150 ohm*cm^2, 100 times the normal value
    case = strand(gj=gj, length=0.6)
    case["run"]["duration"] = 80.0
    case["measure"]["cv_window"] = [0.2, 0.4]
    ds = cable.simulate(case)
    assert bool(ds.conducted[0])
    t = ds.activation_time.values[0]
    steps = np.diff(t)
    edges = junction_edges(cable.load_case(case).fiber)
    inside = np.setdiff1d(np.arange(steps.size), edges)
    middle = lambda idx: idx[(idx > 0.25 * steps.size) & (idx < 0.75 * steps.size)]  # noqa: E731
    ratio = np.mean(steps[middle(edges)]) / np.mean(steps[middle(inside)])
    assert ratio > STEPWISE_RATIO
    smooth = strand(ri=effective_resistivity(cable.load_case(case).fiber), length=0.6)
    smooth["run"]["duration"] = 80.0
    smooth["measure"]["cv_window"] = [0.2, 0.4]
    t_c = cable.simulate(smooth).activation_time.values[0]
    d_c = np.diff(t_c)
    assert np.mean(d_c[middle(edges)]) / np.mean(d_c[middle(inside)]) == pytest.approx(1.0, rel=0.05)
