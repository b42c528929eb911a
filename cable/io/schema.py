"""Names, dimensions, units and attributes of every variable cable writes.

Writers and readers map these; nothing else in the package spells a unit string or a
long name of an output. Unit strings are ones both udunits (CF) and pint read.

A plain run's variables are :data:`COORDS` and :data:`VARIABLES`; each protocol's
(``cable/protocols/<name>.py``) are its :class:`Table` in :data:`PROTOCOLS`, built into a
Dataset by :func:`dataset` (which writes the provenance too). A protocol's table is looked
up first, then the run's coordinates and variables (``x``, ``run``), so a name means one
thing per result kind; :func:`dataset` refuses a name or dimensions the schema does not
declare.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

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
    "steps_windowed": ((), "1", "fine steps in which only a front's nodes reacted, the others once per block "
                                "(adaptive steps on a strand)", None),
    "reactions_saved": ((), "1", "node reaction steps those blocks saved (adaptive steps on a strand)", None),
    # pseudo-ECG (cable.measure.ecg)
    "pseudo_ecg": (("electrode", "t"), "mV", "extracellular potential at the electrode (far-field, 1D strand)", None),
    "electrode_x": (("electrode",), "cm", "electrode position along the strand axis", None),
    "electrode_distance": (("electrode",), "cm", "electrode distance from the strand axis", None),
    "qrs_onset": (("electrode", "beat"), "ms", "QRS onset: first activation of the strand in the beat", None),
    "qt_interval": (("electrode", "beat"), "ms", "QT interval: QRS onset to the end of the T wave", None),
    "t_peak": (("electrode", "beat"), "ms", "time of the T-wave peak", None),
    "t_amplitude": (("electrode", "beat"), "mV", "T-wave peak amplitude (signed)", None),
    # the membrane parameters the nodes ran with, stored when every state is (the currents can then be
    # recomputed: cable.plot.traces.ionic_current); the distinct rows and each node's row
    "membrane_parameters": (("parameter_set", "parameter"), "1", "distinct rows of the nodes' membrane parameters, "
                            "each in its unit in the model (cable models NAME; names in parameter_name)", None),
    "parameter_name": (("parameter",), "1", "name of the membrane model's parameter", None),
    "node_parameter_set": (("x",), "1", "row of membrane_parameters the node ran with", None),
}

#: the variables of the nodes' membrane parameters (not measurements: a sweep does not keep them)
PARAMETER_TABLE = ("membrane_parameters", "parameter_name", "node_parameter_set")

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


# --------------------------------------------------------------------------- protocol results

#: the global attribute naming the protocol of a result (its registry name, cable/protocols/<name>.py);
#: ``protocol`` keeps the free-text description that results carried before it
PROTOCOL_ATTR = "cable_protocol"
#: the global attributes :func:`provenance` writes, and the one every command adds
PROVENANCE_ATTRS = ("Conventions", "title", "protocol", PROTOCOL_ATTR, "source", "model", "model_citation", "case",
                    "cable_version", "numpy_version", "numba_version", "comment")
COMMAND_ATTR = "command"


class Var(NamedTuple):
    """One declared output: ``Var(dims, units, long_name, flag=None, optional=False)``.

    ``units`` and ``long_name`` may hold ``{field}`` templates filled per result from its
    global attributes (:attr:`Table.fields`): the unit of the key a search varies, say.
    ``units`` None: none written. ``flag`` is ``"bool"`` (int8 0/1, ``flag_values`` and
    ``flag_meanings``, no units) or ``(values, meanings)`` for a coded variable (CF 1.10
    section 3.5). ``optional``: not in every result of the protocol (a series run only
    with some options).
    """

    dims: tuple
    units: str | None
    long_name: str
    flag: object = None
    optional: bool = False


class Table:
    """The outputs of one protocol: its coordinates and variables (:class:`Var`), its global
    attributes (name -> meaning), and how the ``{field}`` templates are filled from those."""

    def __init__(self, variables: dict, attributes: dict, fields=None):
        self.variables = dict(variables)
        self.attributes = dict(attributes)
        self.fields = fields or (lambda attrs: {})

    def declared(self, name: str) -> Var:
        """The declaration of ``name``: the table's own, else the run's coordinate or variable."""
        if name in self.variables:
            return self.variables[name]
        if name in COORDS or name in VARIABLES:
            dims_, units, long_name, _standard = {**COORDS, **VARIABLES}[name]
            flag = "bool" if name in FLAGS else CODES.get(name)
            return Var(dims_, units, long_name, flag)
        raise KeyError(name)

    def attrs_of(self, name: str, fields: dict) -> dict:
        """The CF attributes of ``name`` with the templates filled from ``fields``."""
        var = self.declared(name)
        if var.flag == "bool":
            return {"long_name": var.long_name.format(**fields), "flag_values": [0, 1], "flag_meanings": "false true"}
        if var.flag is not None:
            values, meanings = var.flag
            return {"long_name": var.long_name.format(**fields), "flag_values": list(values), "flag_meanings": meanings}
        out = {"long_name": var.long_name.format(**fields)}
        if var.units is not None:
            out = {"units": var.units.format(**fields) or "1", **out}
        return out


def _flags(values, var):
    arr = np.asarray(values)
    return arr.astype(np.int8) if var.flag == "bool" and arr.dtype == bool else arr


def dataset(table, variables: dict, coords: dict, attrs: dict, *, title: str, case, description: str,
            model=None):
    """The Dataset of a protocol result, every variable as :data:`PROTOCOLS` declares it.

    Parameters
    ----------
    table : str or Table
        The protocol's name (its table in :data:`PROTOCOLS`, and the value of
        :data:`PROTOCOL_ATTR`) or, for a protocol outside the package, a ``(name, Table)`` pair.
    variables, coords : dict
        name -> values; dimensions, units and long names come from the table.
    attrs : dict
        The protocol's own global attributes (each declared in the table).
    title, case, model, description
        For :func:`provenance` (``description``: the ``protocol`` attribute's free text).

    Raises
    ------
    KeyError
        A variable or attribute the table does not declare (a programming error).
    ValueError
        Values whose number of dimensions differs from the declaration.
    """
    import xarray as xr

    name, table = (table, PROTOCOLS[table]) if isinstance(table, str) else table
    undeclared = [k for k in attrs if k not in table.attributes]
    if undeclared:
        raise KeyError(f"{name}: global attributes {undeclared} are not declared in cable.io.schema")
    head = provenance(title, case, model=model, protocol=description)
    head[PROTOCOL_ATTR] = name
    full = {**head, **attrs}
    fields = table.fields(full)

    def entry(key, values):
        var = table.declared(key)
        arr = _flags(values, var)
        if arr.ndim != len(var.dims):
            raise ValueError(f"{name}: {key} has {arr.ndim} dimensions, the schema declares {var.dims}")
        return (var.dims, arr, table.attrs_of(key, fields))

    return xr.Dataset({k: entry(k, v) for k, v in variables.items()},
                      coords={k: entry(k, v) for k, v in coords.items()}, attrs=full)


def _converge_table() -> dict:
    """The convergence certificate's outputs (cable.protocols.converge): levels, then each
    quantity's order and extrapolation, then the separate dx and dt series."""
    out = {"level": Var(("level",), "1", "refinement level (0 = case)"),
           "dx": Var(("level",), "cm", "grid spacing"),
           "dt": Var(("level",), "ms", "time step"),
           "conduction_velocity": Var(("level",), "m/s", "conduction velocity of the beat"),
           "apd90": Var(("level",), "ms", "APD90 at the centre of the CV window"),
           "propagated": Var(("level",), None, "the beat reached the far end", "bool"),
           "dx_series_dx": Var(("dx_level",), "cm", "dx of the separate dx series", optional=True),
           "dt_series_dt": Var(("dt_level",), "ms", "dt of the separate dt series", optional=True),
           "dx_recommended": Var((), "cm", "dx at which the space error is half the tolerance (dx series)",
                                 optional=True),
           "dt_recommended": Var((), "ms", "dt at which the time error is half the tolerance (dt series)",
                                 optional=True)}
    for q, unit, long in (("cv", "m/s", "conduction velocity"), ("apd90", "ms", "APD90")):
        out[f"{q}_observed_order"] = Var((), "1", f"observed order of the {long}")
        out[f"{q}_order_used"] = Var((), "1", "order used for extrapolation")
        out[f"{q}_extrapolated"] = Var((), unit, f"Richardson-extrapolated {long}")
        out[f"{q}_relative_error"] = Var((), "1", f"estimated relative error of the {long} at the case's resolution")
        for axis, kind, other in (("dx", "space", "dt"), ("dt", "time", "dx")):
            out[f"{q}_{axis}_series"] = Var((f"{axis}_level",), unit, f"{long} with {axis} refined at the case's "
                                                                      f"{other}", optional=True)
            out[f"{q}_{kind}_error"] = Var((), "1", f"estimated relative {kind} error of the {long} at the case's "
                                                    f"{axis}", optional=True)
            out[f"{q}_{kind}_observed_order"] = Var((), "1", f"observed order of the {long} in {axis}", optional=True)
    return out


_CUR = "uA/cm^2"
_SEARCH = {"rounds": "rounds of runs made together", "points_per_round": "values tried per round"}

#: protocol name (cable/protocols/<name>.py) -> its outputs
PROTOCOLS = {
    "threshold": Table({
        "duration": Var(("duration",), "ms", "stimulus pulse duration"),
        "threshold": Var(("duration",), _CUR, "threshold stimulus amplitude (an amplitude that excited, within the "
                                              "tolerance of the true threshold)"),
        "charge": Var(("duration",), "nC/cm^2", "threshold charge (amplitude x duration)"),
        "trials": Var(("duration",), "1", "simulations run for this duration"),
        "lapicque_residual": Var(("duration",), _CUR, "threshold minus Lapicque fit"),
        "weiss_residual": Var(("duration",), _CUR, "threshold minus Weiss fit"),
        "rheobase_lapicque": Var((), _CUR, "rheobase, Lapicque fit I = I_rh / (1 - exp(-d/tau))"),
        "chronaxie_lapicque": Var((), "ms", "chronaxie tau ln 2, Lapicque fit"),
        "rheobase_weiss": Var((), _CUR, "rheobase, Weiss fit I = I_rh (1 + c/d)"),
        "chronaxie_weiss": Var((), "ms", "chronaxie c, Weiss fit"),
        "rheobase_measured": Var((), _CUR, "rheobase measured: the computed threshold at the longest duration (the "
                                           "curve's plateau)"),
        "chronaxie_direct": Var((), "ms", "chronaxie measured: duration at which the computed threshold is twice "
                                          "the measured rheobase"),
        "lapicque_rms_relative_residual": Var((), "1", "root-mean-square of the Lapicque residuals relative to the "
                                                       "thresholds"),
        "weiss_rms_relative_residual": Var((), "1", "root-mean-square of the Weiss residuals relative to the "
                                                    "thresholds"),
    }, {"mode": "capture criterion: strand or cell", "capture_criterion": "what counted as excitation",
        "tolerance_relative": "relative width of the final amplitude bracket", "observe_ms": "watch after the pulse",
        "stimulus_x_cm": "left edge of the stimulus zone", "stimulus_width_cm": "width of the stimulus zone",
        "fits": "the fitted laws", "notes": "warnings on the fits and the plateau"}),
    "refractory": Table({
        "coupling_interval": Var(("trial",), "ms", "S1-S2 coupling interval"),
        "erp": Var((), "ms", "effective refractory period: shortest S1-S2 interval whose S2 propagates along the "
                             "strand"),
        "local_refractory_period": Var((), "ms", "shortest S1-S2 interval whose S2 starts a regenerative response "
                                                 "at the stimulus site"),
        "vulnerable_window": Var((), "ms", "intervals with a local response that fails to propagate"),
        "apd90_s1": Var((), "ms", "APD90 of the last S1 beat at the stimulus site"),
        "apd90_s1_centre": Var((), "ms", "APD90 of the last S1 beat at the centre of the CV window"),
        "erp_minus_apd90": Var((), "ms", "post-repolarisation refractoriness (ERP - APD90 at the site)"),
        "conduction_velocity_s1": Var((), "m/s", "CV of the last S1 beat"),
        "wavelength_erp": Var((), "cm", "wavelength: CV of the last S1 beat times the ERP"),
        "wavelength_apd": Var((), "cm", "wavelength: CV of the last S1 beat times its APD90 mid-strand"),
        "s2_captured": Var(("trial",), None, "S2 started a regenerative response at the site", "bool"),
        "s2_propagated": Var(("trial",), None, "S2 wave reached the far end", "bool"),
    }, {"s1_count": "S1 pulses", "s1_cycle_length_ms": "S1 interval (NaN for one S1)",
        "s1_amplitude": "S1 amplitude [uA/cm^2]", "s2_amplitude": "S2 amplitude [uA/cm^2]",
        "s2_duration_ms": "S2 duration", "tolerance_ms": "width of the final brackets",
        "search_start_ms": "shortest interval searched", "observe_ms": "watch after each S2"}),
    "restitution": Table({
        "interval": Var(("point",), "ms", "{interval}"),
        "diastolic_interval": Var(("point",), "ms", "diastolic interval before the beat"),
        "apd90": Var(("point",), "ms", "APD90 of the beat"),
        "conduction_velocity": Var(("point",), "m/s", "conduction velocity of the beat"),
        "wavelength_apd": Var(("point",), "cm", "wavelength: CV x APD90"),
        "propagated": Var(("point",), None, "the beat propagated along the strand (a cell: captured)", "bool"),
        "one_to_one": Var(("point",), None, "every beat at this cycle length propagated", "bool", optional=True),
        "max_slope": Var((), "1", "maximal slope of APD90 against DI"),
        "max_slope_di": Var((), "ms", "DI at the maximal slope"),
        "apd90_s1": Var((), "ms", "APD90 of the last S1 beat (basic cycle length)"),
    }, {"s1_count": "S1 pulses", "basic_cycle_length_ms": "S1 (basic) cycle length",
        "beats_per_cycle_length": "dynamic protocol: beats per cycle length (0 for s1s2)",
        "measurement_x_cm": "where APD90 and DI are read (NaN: a single cell)"},
        fields=lambda attrs: {"interval": "S1-S2 coupling interval" if attrs.get("protocol") == "s1s2"
                              else "cycle length"}),
    "converge": Table(_converge_table(), {
        "ratio": "what is held fixed as dx halves", "formal_order": "formal order in dx of the refinement",
        "refinement": "how each level refines", "scheme_orders": "formal orders of the scheme",
        "beat": "the beat measured", "splitting": "numerics.splitting", "diffusion": "numerics.diffusion",
        "gating": "numerics.gating", "tolerance_relative": "error the recommendation aims at",
        "warning": "warnings, one per line", "numerical_block": "1 when the case's grid blocks numerically",
        "notes": "notes, one per line"}),
    "critical": Table({
        "value": Var(("run",), "{units}", "value of {key}"),
        "conducted": Var(("run",), None, "every judged beat conducted through the strand", "bool"),
        "captured": Var(("run",), None, "the stimulus excited (first failing beat, else last judged)", "bool"),
        "blocked": Var(("run",), None, "the wave started but did not reach an end", "bool"),
        "block_x": Var(("run",), "cm", "last activated position of the blocked wave"),
        "conduction_velocity": Var(("run",), "m/s", "conduction velocity in the measurement window"),
        "beats_conducted": Var(("run",), "1", "judged beats that conducted"),
        "slow_response": Var(("run",), None, "conduction by a slow response (first failing beat, else last judged)",
                             "bool"),
        "activation_time": Var(("run", "x"), "ms", "activation time of the first judged beat", optional=True),
    }, {"key": "the key searched", "units": "its canonical unit", "low": "lower end of the interval",
        "high": "upper end of the interval", "tolerance": "width of the final bracket", "scale": "linear or log",
        "runs": "runs made", "straddles": "1 when the ends straddle block", "criterion": "what failing means",
        "passing_value": "passing end of the final bracket", "failing_value": "failing end of the final bracket",
        "critical_value": "midpoint of the final bracket", "cv_passing_m_per_s": "CV at the passing end",
        "note": "the transition found is loss of capture", **_SEARCH},
        fields=lambda attrs: {"key": attrs.get("key", ""), "units": attrs.get("units", "")}),
    "calibrate": Table({
        "value": Var((), "{units}", "value of {key} at which {measure} = {target:g} {measure_units}"),
        "residual": Var((), "{measure_units}", "measurement at the value found minus the target"),
        "run_value": Var(("run",), "{units}", "value of the key in the run"),
        "run_measure": Var(("run",), "{measure_units}", "{measure}"),
    }, {"key": "the key calibrated", "units": "its canonical unit", "measure": "what is matched",
        "measure_units": "its unit", "target": "the target", "runs": "runs made", "low": "bracket, low end",
        "high": "bracket, high end", "dx_cm": "the case's dx", "dt_ms": "the case's dt"},
        fields=lambda attrs: {k: attrs.get(k, "") for k in ("key", "units", "measure", "measure_units")}
        | {"target": float(attrs.get("target", np.nan))}),
}
