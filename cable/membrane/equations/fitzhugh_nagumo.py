"""The FitzHugh-Nagumo membrane written as equations (the description form of the built-in model).

FitzHugh R (1961) Biophys J 1:445; Nagumo J, Arimoto S, Yoshizawa S (1962) Proc IRE 50:2061;
in the dimensional form of the hand-written model it replaced
(tests/membrane/oracles/fitzhugh_nagumo.py, a test oracle; same parameters, defaults and meanings): u = (V - V_rest)/(V_peak - V_rest), dw/dt = epsilon (u - gamma w), and the ionic
current per capacitance -(V_peak - V_rest) [k u (u - a)(1 - u) - c w] [uA/uF].

The hand-written model has no per-current function; here the ionic current is written as
its two terms, the cubic excitation ``I_exc`` and the recovery ``I_rec`` (their sum is the
hand-written I_ion). w is linear in itself, so the compiler advances it by Rush-Larsen,
which for fixed u is the exact update the hand-written kernel writes out.
"""

from cable.membrane.equations.description import EqParameter, EqState, Equations

EQUATIONS = Equations(
    name="fitzhugh-nagumo",
    citation="FitzHugh 1961, Biophys J 1:445; Nagumo, Arimoto & Yoshizawa 1962, Proc IRE 50:2061",
    summary="two-variable excitable membrane (cubic + linear recovery), dimensional form",
    resting_potential=-80.0,
    states=(EqState("w", 0.0, "1", "recovery variable"),),
    parameters=(
        EqParameter("V_rest", -80.0, "mV", "resting potential (u = 0)", "potential"),
        EqParameter("V_peak", 20.0, "mV", "excited potential (u = 1)", "potential"),
        EqParameter("a", 0.13, "1", "excitation threshold on the u scale", minimum=0.0, maximum=1.0),
        EqParameter("k", 1.0, "1/ms", "rate of the cubic source", "rate", True, 0.0),
        EqParameter("c", 1.0, "1/ms", "coupling of recovery into u", "rate", minimum=0.0),
        EqParameter("epsilon", 0.005, "1/ms", "recovery rate", "rate", minimum=0.0),
        EqParameter("gamma", 1.0, "1", "recovery decay factor", minimum=0.0),
    ),
    intermediates=(
        ("span", "V_peak - V_rest"),
        ("u", "(V - V_rest)/span"),
    ),
    derivatives=(("w", "epsilon*(u - gamma*w)"),),
    currents=(
        ("I_exc", "-span*k*u*(u - a)*(1 - u)"),
        ("I_rec", "span*c*w"),
    ),
    current_basis="capacitance",
    threshold=-30.0,
    meanings={"span": "V_peak - V_rest [mV]", "u": "dimensionless potential"},
)
