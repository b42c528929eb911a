"""Names, dimensions, units and attributes of every variable cable writes.

Writers and readers map these; nothing else in the package spells a unit string or a
long name of an output. Unit strings are ones both udunits (CF) and pint read.
"""

from __future__ import annotations

CONVENTIONS = "CF-1.10"

#: name -> (dims, units, long_name, standard_name or None)
COORDS = {
    # no standard_name "time": CF requires "units since reference" for it; t is elapsed time
    "t": (("t",), "ms", "time", None),
    "x": (("x",), "cm", "position along the fibre", None),
    "beat": (("beat",), "1", "beat number (stimulus onsets in order)", None),
    "level": (("level",), "percent", "repolarisation level of the action-potential duration", None),
    # studies (issue 17): calibration runs, ring revolutions, pseudo-ECG electrodes
    "run": (("run",), "1", "run number, in the order made", None),
    "revolution": (("revolution",), "1", "revolution of the circulating wave past the reference node", None),
    "electrode": (("electrode",), "1", "electrode number (entries of [[electrode]] in order)", None),
}

VARIABLES = {
    "vm": (("t", "x"), "mV", "membrane potential", None),
    "beat_onset": (("beat",), "ms", "stimulus onset of the beat", None),
    "activation_time": (("beat", "x"), "ms", "activation time (upward threshold crossing)", None),
    "conduction_velocity": (("beat",), "m/s", "conduction velocity in the measurement window", None),
    "captured": (("beat",), "1", "stimulus capture: a stimulated node crossed the activation threshold (a stimulus "
                                 "far above threshold can do so passively)", None),
    "blocked": (("beat",), "1", "the wave started but did not reach an end of the fibre", None),
    "block_x": (("beat",), "cm", "last activated position of a blocked wave", None),
    "apd": (("level", "beat", "x"), "ms", "action-potential duration", None),
    "resting_potential": (("beat", "x"), "mV", "lowest potential before the upstroke", None),
    "peak_potential": (("beat", "x"), "mV", "peak potential of the action potential (probed every time step)",
                       None),
    "upstroke_velocity": (("beat", "x"), "V/s", "maximal rate of rise of the upstroke, stimulus current excluded "
                                                "(membrane and axial currents)", None),
    "wavelength_apd": (("beat",), "cm", "wavelength: CV times APD90 at the centre of the CV window", None),
    "timed_out": (("beat",), "1", "the run ended before the wave could be seen to stop (neither conducted nor "
                                  "blocked)", None),
    "front_x": (("beat",), "cm", "last activated position of a wave still travelling when the run ended", None),
    "outcome": (("beat",), "1", "what the beat did: not captured, conducted through the fibre, blocked, or timed "
                                "out (the run ended first)", None),
    "slow_response": (("beat",), "1", "conduction by a slow response: median upstroke velocity in the CV window "
                                      "below the fast-response limit (cable.measure.block.SLOW_RESPONSE_V_PER_S)",
                      None),
    "conducted": (("beat",), "1", "the stimulus captured and the wave reached both ends of the fibre", None),
    "reached_left": (("beat",), "1", "the beat's wave reached the left end (x = 0)", None),
    "reached_right": (("beat",), "1", "the beat's wave reached the right end (x = L)", None),
    "block_side": (("beat",), "1", "direction of block: 1 stopped going right, -1 going left, 2 both, 0 none", None),
    "safety_factor": (("beat", "x"), "1", "safety factor of conduction (Shaw & Rudy 1997), charge-based", None),
    # calibration (cable.protocols.calibrate); units are the key's and the measure's, set per result
    "value": ((), "1", "value of the key at which the measurement equals the target", None),
    "residual": ((), "1", "measurement at the value found minus the target", None),
    "run_value": (("run",), "1", "value of the key in the run", None),
    "run_measure": (("run",), "1", "measurement of the run", None),
    # reentry on a ring (cable.measure.ring)
    "revolution_time": (("revolution",), "ms", "time the circulating wave passed the reference node", None),
    "revolution_period": (("revolution",), "ms", "time since the previous pass (one revolution)", None),
    "revolution_cv": (("revolution",), "m/s", "mean conduction velocity around the ring over the revolution "
                                              "(circumference / period)", None),
    "ring_apd": (("revolution",), "ms", "APD90 at the reference node on this pass", None),
    "excitable_gap": (("revolution",), "ms", "period minus APD90 at the reference node (time excitable)", None),
    "reentry_sustained": ((), "1", "the wave still circulated at the end of the run (1 yes, 0 no)", None),
    "reentry_end": ((), "ms", "last pass at the reference node of a wave that stopped (NaN while it goes on)", None),
    # adaptive time steps (numerics.dt_max; cable.kernels.adaptive): present only then
    "step_dt": (("step_level",), "ms", "time step of the level (adaptive steps: dt x 2^k)", None),
    "steps_taken": (("step_level",), "1", "steps taken at the level (adaptive steps)", None),
    # pseudo-ECG (cable.measure.ecg)
    "pseudo_ecg": (("electrode", "t"), "mV", "extracellular potential at the electrode (far-field, 1D strand)", None),
    "electrode_x": (("electrode",), "cm", "electrode position along the strand axis", None),
    "electrode_distance": (("electrode",), "cm", "electrode distance from the strand axis", None),
    "qrs_onset": (("electrode", "beat"), "ms", "QRS onset: first activation of the strand in the beat", None),
    "qt_interval": (("electrode", "beat"), "ms", "QT interval: QRS onset to the end of the T wave", None),
    "t_peak": (("electrode", "beat"), "ms", "time of the T-wave peak", None),
    "t_amplitude": (("electrode", "beat"), "mV", "T-wave peak amplitude (signed)", None),
}

#: long names of state variables come from the model; units from the model too
STATE_PREFIX = "state_"

#: boolean variables are stored as int8 0/1 with flag attributes
FLAGS = {"captured", "blocked", "conducted", "reached_left", "reached_right", "timed_out", "slow_response"}

#: coded (enumerated) int8 variables: name -> (flag_values, flag_meanings); CF 1.10 section 3.5.
#: The codes of block_side are those of cable.measure.block (LEFT, NONE, RIGHT, BOTH).
CODES = {"block_side": ([-1, 0, 1, 2], "blocked_leftward none blocked_rightward blocked_both_ways"),
         "outcome": ([0, 1, 2, 3, 4], "not_captured conducted blocked timed_out other")}


def attrs(name: str) -> dict:
    """CF attributes of a coordinate or variable."""
    dims, units, long_name, standard = {**COORDS, **VARIABLES}[name]
    out = {"units": units, "long_name": long_name}
    if standard:
        out["standard_name"] = standard
    if name in FLAGS:
        out.update(flag_values=[0, 1], flag_meanings="false true")
        out.pop("units")
    elif name in CODES:
        values, meanings = CODES[name]
        out.update(flag_values=list(values), flag_meanings=meanings)
        out.pop("units")
    return out


def dims(name: str) -> tuple[str, ...]:
    return {**COORDS, **VARIABLES}[name][0]


#: unit spellings models use that udunits (CF) does not read -> the spelling written to files
UDUNITS_SPELLING = {"mM": "mmol/L", "uM": "umol/L", "nM": "nmol/L", "M": "mol/L", "": "1", "dimensionless": "1"}


def cf_units(units: str) -> str:
    """The udunits spelling of a unit string (``"mM"`` -> ``"mmol/L"``); others unchanged."""
    return UDUNITS_SPELLING.get(units.strip(), units.strip())


#: the caution every result file carries
CAUTION = "Research tool; not for clinical decisions."


def provenance(title: str, case, *, model=None, protocol: str | None = None) -> dict:
    """The global attributes every result file starts with (CF ``Conventions``, title,
    source, the model and its citation, the full case text, library versions, the caution).

    Parameters
    ----------
    title : str
        The file's CF ``title``.
    case : cable.case.Case
        The validated case the result comes from (its text is stored).
    model : str or cable.membrane.base.MembraneModel, optional
        The model (or its name); default the case's.
    protocol : str, optional
        The protocol's name (absent for plain runs and sweeps).
    """
    import numba
    import numpy as np

    from cable import __version__

    if model is None or isinstance(model, str):
        name = model or case.membrane.model
        try:
            from cable.membrane import get_model

            citation = get_model(name).citation
        except Exception:  # an unresolvable name is the caller's error, said there; provenance does not raise
            citation = ""
    else:
        name, citation = model.name, model.citation
    out = {"Conventions": CONVENTIONS, "title": title}
    if protocol is not None:
        out["protocol"] = protocol
    out.update({"source": f"cable {__version__}", "model": name, "model_citation": citation, "case": case.text,
                "cable_version": __version__, "numpy_version": np.__version__,
                "numba_version": numba.__version__, "comment": CAUTION})
    return out
