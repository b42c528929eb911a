"""Mitchell & Schaeffer (2003) written as equations (the description form of the built-in model).

Mitchell CC, Schaeffer DG (2003) Bull Math Biol 65:767-793, in the form of
the hand-written model it replaced (tests/membrane/oracles/mitchell_schaeffer_2003.py, a test
oracle; same parameters, defaults and meanings, the package's factor ``g_in`` on J_in included): v = (V - V_rest)/(V_peak - V_rest),
J_in = g_in h v^2 (1 - v)/tau_in, J_out = -v/tau_out, I_ion = -(V_peak - V_rest)(J_in + J_out)
[uA/uF], and the gate's switching rule dh/dt = (1 - h)/tau_open below v_gate,
-h/tau_close at or above it, written as a piecewise expression. dh/dt is linear in h on
either side, so the compiler advances h by Rush-Larsen with b = -1/tau_open or -1/tau_close
chosen by the same rule: the exact update of the hand-written kernel, to rounding.
"""

from cable.membrane.equations.description import EqParameter, EqState, Equations

EQUATIONS = Equations(
    name="mitchell-schaeffer-2003",
    citation="Mitchell CC, Schaeffer DG (2003) Bull Math Biol 65:767-793",
    summary="two-current phenomenological cardiac membrane (v, gate h), mapped to mV",
    resting_potential=-80.0,
    states=(EqState("h", 1.0, "1", "inward-current gate (1 = fully recovered)"),),
    parameters=(
        EqParameter("V_rest", -80.0, "mV", "potential at v = 0", "potential"),
        EqParameter("V_peak", 20.0, "mV", "potential at v = 1", "potential"),
        EqParameter("tau_in", 0.3, "ms", "time constant of the inward current", "time", minimum=0.0),
        EqParameter("tau_out", 6.0, "ms", "time constant of the outward current", "time", minimum=0.0),
        EqParameter("tau_open", 120.0, "ms", "time constant of gate opening (recovery)", "time", minimum=0.0),
        EqParameter("tau_close", 150.0, "ms", "time constant of gate closing", "time", minimum=0.0),
        EqParameter("v_gate", 0.13, "1", "gate switching level of v", minimum=0.0, maximum=1.0),
        EqParameter("g_in", 1.0, "1", "factor on the inward current (1 = published model)",
                    scalable=True, minimum=0.0),
    ),
    intermediates=(
        ("span", "V_peak - V_rest"),
        ("v", "(V - V_rest)/span"),
    ),
    derivatives=(("h", "Piecewise(((1 - h)/tau_open, v < v_gate), (-h/tau_close, True))"),),
    currents=(
        ("I_in", "-span*g_in*h*v**2*(1 - v)/tau_in"),
        ("I_out", "span*v/tau_out"),
    ),
    current_basis="capacitance",
    threshold=-30.0,
    meanings={"span": "V_peak - V_rest [mV]", "v": "dimensionless potential"},
)
