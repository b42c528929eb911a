"""Hodgkin & Huxley (1952) written as equations (the description form of the built-in model).

Hodgkin AL, Huxley AF (1952) J Physiol 117:500-544: the rates, reversal potentials and
Q10 scaling of the hand-written model it replaced (tests/membrane/oracles/hodgkin_huxley_1952.py,
a test oracle), modern sign convention, rest -65 mV, with the same parameters, states and
initial values (the gates' steady states at -65 mV that module computes at import, written
here as numbers; the test checks they are the same). ``get_model("hodgkin-huxley-1952")``
is the model generated from it; the CellML export of ``hodgkin-huxley-1952`` writes it.

Where the generated kernel differs from the hand-written one: the removable singularities
of alpha_m (V = -40 mV) and alpha_n (V = -55 mV) are written as the paper's quotients; the
hand-written kernel evaluates them by their limits, every generated function within 1e-4 mV
of them by the line through the values on both sides (cable/membrane/equations/singular.py).
"""

from cable.membrane.equations.description import EqParameter, EqState, Equations

EQUATIONS = Equations(
    name="hodgkin-huxley-1952",
    citation="Hodgkin AL, Huxley AF (1952) J Physiol 117:500-544",
    summary="squid giant axon: Na, K and leak channels, gates m, h, n",
    resting_potential=-65.0,
    states=(
        EqState("m", 0.05293248525724958, "1", "sodium activation gate"),
        EqState("h", 0.5961207535084603, "1", "sodium inactivation gate"),
        EqState("n", 0.3176769140606974, "1", "potassium activation gate"),
    ),
    parameters=(
        EqParameter("g_Na", 120.0, "mS/cm^2", "maximal sodium conductance", "conductance", True, 0.0),
        EqParameter("g_K", 36.0, "mS/cm^2", "maximal potassium conductance", "conductance", True, 0.0),
        EqParameter("g_L", 0.3, "mS/cm^2", "leak conductance", "conductance", True, 0.0),
        EqParameter("E_Na", 50.0, "mV", "sodium reversal potential", "potential"),
        EqParameter("E_K", -77.0, "mV", "potassium reversal potential", "potential"),
        EqParameter("E_L", -54.387, "mV", "leak reversal potential", "potential"),
        EqParameter("temperature", 6.3, "degC", "temperature; rates scale with Q10 = 3 from 6.3 degC",
                    "temperature", minimum=-5.0, maximum=45.0),
    ),
    intermediates=(
        ("phi", "3**((temperature - 6.3)/10)"),
        ("alpha_m", "phi*0.1*(V + 40)/(1 - exp(-(V + 40)/10))"),
        ("beta_m", "phi*4*exp(-(V + 65)/18)"),
        ("alpha_h", "phi*0.07*exp(-(V + 65)/20)"),
        ("beta_h", "phi/(1 + exp(-(V + 35)/10))"),
        ("alpha_n", "phi*0.01*(V + 55)/(1 - exp(-(V + 55)/10))"),
        ("beta_n", "phi*0.125*exp(-(V + 65)/80)"),
    ),
    derivatives=(
        ("m", "alpha_m*(1 - m) - beta_m*m"),
        ("h", "alpha_h*(1 - h) - beta_h*h"),
        ("n", "alpha_n*(1 - n) - beta_n*n"),
    ),
    currents=(
        ("I_Na", "g_Na*m**3*h*(V - E_Na)"),
        ("I_K", "g_K*n**4*(V - E_K)"),
        ("I_L", "g_L*(V - E_L)"),
    ),
    current_basis="area",
    threshold=-20.0,
    temperature_parameter="temperature",
)
