"""The passive membrane written as equations (the description form of the built-in model).

A leak conductance only, I_L = g_L (V - E_L) (linear membrane of cable theory: Jack, Noble &
Tsien 1975, Electric Current Flow in Excitable Cells), with the parameters, defaults and
meanings of the hand-written model it replaced (tests/membrane/oracles/passive.py, a test
oracle). No states: the generated kernel is the same forward-Euler step of V as the
hand-written one. The registry's ``passive`` is generated from this file.
"""

from cable.membrane.equations.description import EqParameter, Equations

EQUATIONS = Equations(
    name="passive",
    citation="linear membrane of cable theory (Jack, Noble & Tsien 1975)",
    summary="leak conductance only",
    resting_potential=-65.0,
    states=(),
    parameters=(
        EqParameter("g_L", 0.1, "mS/cm^2", "leak conductance (1/R_m)", "conductance", True, 0.0),
        EqParameter("E_L", -65.0, "mV", "leak reversal (resting) potential", "potential"),
    ),
    intermediates=(),
    derivatives=(),
    currents=(("I_L", "g_L*(V - E_L)"),),
    current_basis="area",
    threshold=-55.0,
)
