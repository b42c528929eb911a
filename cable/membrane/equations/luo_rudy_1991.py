"""Luo & Rudy (1991) written as equations (the description form of the built-in model).

Luo CH, Rudy Y (1991) Circ Res 68:1501-1526, phase-1 model: the currents, rates, Nernst
potentials at 37 degC and calcium balance of the hand-written model it replaced
(tests/membrane/oracles/luo_rudy_1991.py, a test oracle), with the same parameters (G_K and
G_K1 stored at K_o = 5.4 mM and multiplied by sqrt(K_o/5.4)),
states and initial values (the quiescent fixed point that module computes at import,
written here as numbers; the test checks they are the same), per membrane area.

Where the generated kernel differs from the hand-written one:

* the removable singularities of alpha_m (V = -47.13 mV) and of X_i (V = -77 mV) are
  written as the paper's quotients; the hand-written kernel evaluates them by their
  limits (and by expm1, a few ulps more accurate near them), every generated function
  within 1e-4 mV of them by the line through the values on both sides (the limit to
  ~1e-10 relative, cable/membrane/equations/singular.py) and its tables average both sides
  (see DEVELOPERS.md);
* the h and j rates switch at V = -40 mV and X_i at V = -100 mV as piecewise expressions,
  as published (the tabulated path interpolates across the jump within one table row).

Ca_i's derivative is not linear in Ca_i (E_si = 7.7 - 13.0287 ln Ca_i), so the compiler
advances it by forward Euler like the hand-written kernel; ``current_states = "all"``
makes the ionic current of a step use the updated Ca_i, as the hand-written kernel does.
"""

from cable.membrane.equations.description import EqParameter, EqState, Equations


def _conductance(name, default, meaning):
    return EqParameter(name, default, "mS/cm^2", meaning, "conductance", True, 0.0)


def _concentration(name, default, meaning):
    return EqParameter(name, default, "mM", meaning, "concentration", minimum=0.0)


#: RT/F at 37 degC [mV]: R = 8314 mJ/(mol K), T = 310 K, F = 96485 C/mol (as the built-in)
RT_F = 8314.0 * 310.0 / 96485.0


def _gate(y, a, b):
    return y, f"{a}*(1 - {y}) - {b}*{y}"


EQUATIONS = Equations(
    name="luo-rudy-1991",
    citation="Luo CH, Rudy Y (1991) Circ Res 68:1501-1526",
    summary="guinea-pig ventricular myocyte: I_Na, I_si, I_K, I_K1, I_Kp, I_b and Ca_i",
    resting_potential=-84.54743905819177,
    states=(
        EqState("m", 0.0016663613650808255, "1", "I_Na activation gate"),
        EqState("h", 0.9833038155321961, "1", "I_Na fast inactivation gate"),
        EqState("j", 0.9895228554692516, "1", "I_Na slow inactivation gate"),
        EqState("d", 0.002977334280224665, "1", "I_si activation gate"),
        EqState("f", 0.9999812413005027, "1", "I_si inactivation gate"),
        EqState("X", 0.005643227238145185, "1", "I_K activation gate"),
        EqState("Ca_i", 0.00017836051585145272, "mM", "intracellular calcium concentration"),
    ),
    parameters=(
        _conductance("G_Na", 23.0, "maximal fast sodium conductance"),
        _conductance("G_si", 0.09, "maximal slow inward conductance"),
        _conductance("G_K", 0.282, "maximal time-dependent K conductance at K_o = 5.4 mM (times sqrt(K_o/5.4))"),
        _conductance("G_K1", 0.6047,
                     "maximal time-independent K conductance at K_o = 5.4 mM (times sqrt(K_o/5.4))"),
        _conductance("G_Kp", 0.0183, "plateau K conductance"),
        _conductance("G_b", 0.03921, "background conductance"),
        EqParameter("E_b", -59.87, "mV", "background reversal potential", "potential"),
        _concentration("K_o", 5.4, "extracellular potassium (> 0)"),
        _concentration("K_i", 145.0, "intracellular potassium (> 0)"),
        _concentration("Na_o", 140.0, "extracellular sodium (> 0)"),
        _concentration("Na_i", 18.0, "intracellular sodium (> 0)"),
        EqParameter("PR_NaK", 0.01833, "1", "Na/K permeability ratio of I_K", minimum=0.0),
    ),
    intermediates=(
        ("RT_F", repr(RT_F)),
        ("E_Na", "RT_F*log(Na_o/Na_i)"),
        ("E_K", "RT_F*log((K_o + PR_NaK*Na_o)/(K_i + PR_NaK*Na_i))"),
        ("E_K1", "RT_F*log(K_o/K_i)"),
        ("E_si", "7.7 - 13.0287*log(Ca_i)"),
        ("k_factor", "sqrt(K_o/5.4)"),
        # rates [1/ms]
        ("alpha_m", "0.32*(V + 47.13)/(1 - exp(-0.1*(V + 47.13)))"),
        ("beta_m", "0.08*exp(-V/11)"),
        ("alpha_h", "Piecewise((0, V >= -40), (0.135*exp((80 + V)/-6.8), True))"),
        ("beta_h", "Piecewise((1/(0.13*(1 + exp((V + 10.66)/-11.1))), V >= -40),"
                   " (3.56*exp(0.079*V) + 3.1e5*exp(0.35*V), True))"),
        ("alpha_j", "Piecewise((0, V >= -40), ((-1.2714e5*exp(0.2444*V) - 3.474e-5*exp(-0.04391*V))"
                    "*(V + 37.78)/(1 + exp(0.311*(V + 79.23))), True))"),
        ("beta_j", "Piecewise((0.3*exp(-2.535e-7*V)/(1 + exp(-0.1*(V + 32))), V >= -40),"
                   " (0.1212*exp(-0.01052*V)/(1 + exp(-0.1378*(V + 40.14))), True))"),
        ("alpha_d", "0.095*exp(-0.01*(V - 5))/(1 + exp(-0.072*(V - 5)))"),
        ("beta_d", "0.07*exp(-0.017*(V + 44))/(1 + exp(0.05*(V + 44)))"),
        ("alpha_f", "0.012*exp(-0.008*(V + 28))/(1 + exp(0.15*(V + 28)))"),
        ("beta_f", "0.0065*exp(-0.02*(V + 30))/(1 + exp(-0.2*(V + 30)))"),
        ("alpha_X", "0.0005*exp(0.083*(V + 50))/(1 + exp(0.057*(V + 50)))"),
        ("beta_X", "0.0013*exp(-0.06*(V + 20))/(1 + exp(-0.04*(V + 20)))"),
        ("X_i", "Piecewise((1, V <= -100), (2.837*(exp(0.04*(V + 77)) - 1)/((V + 77)*exp(0.04*(V + 35))), True))"),
        # time-independent potassium: K1_inf of V - E_K1; plateau factor
        ("dV_K1", "V - E_K1"),
        ("alpha_K1", "1.02/(1 + exp(0.2385*(dV_K1 - 59.215)))"),
        ("beta_K1", "(0.49124*exp(0.08032*(dV_K1 + 5.476)) + exp(0.06175*(dV_K1 - 594.31)))"
                    "/(1 + exp(-0.5143*(dV_K1 + 4.753)))"),
        ("K1_inf", "alpha_K1/(alpha_K1 + beta_K1)"),
        ("K_p", "1/(1 + exp((7.488 - V)/5.98))"),
        ("i_si", "G_si*d*f*(V - E_si)"),
    ),
    derivatives=(
        _gate("m", "alpha_m", "beta_m"), _gate("h", "alpha_h", "beta_h"), _gate("j", "alpha_j", "beta_j"),
        _gate("d", "alpha_d", "beta_d"), _gate("f", "alpha_f", "beta_f"), _gate("X", "alpha_X", "beta_X"),
        ("Ca_i", "-1e-4*i_si + 0.07*(1e-4 - Ca_i)"),
    ),
    currents=(
        ("I_Na", "G_Na*m**3*h*j*(V - E_Na)"),
        ("I_si", "i_si"),
        ("I_K", "G_K*k_factor*X*X_i*(V - E_K)"),
        ("I_K1", "G_K1*k_factor*K1_inf*dV_K1"),
        ("I_Kp", "G_Kp*K_p*dV_K1"),
        ("I_b", "G_b*(V - E_b)"),
    ),
    current_basis="area",
    threshold=-40.0,
    current_states="all",
    meanings={"E_si": "slow inward reversal potential [mV] (Ca_i in mM)",
              "X_i": "I_K inactivation factor", "K1_inf": "I_K1 steady-state gate", "K_p": "I_Kp factor",
              "i_si": "slow inward current [uA/cm^2]"},
)
