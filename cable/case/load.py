"""Reading case files: TOML text or a dict -> a validated :class:`Case`.

Units are converted here, once, to the canonical set of :mod:`cable.units`.
Every problem raises :class:`CaseError` with a message that names the key, shows the
value, says what is allowed and suggests the nearest valid name.

The parts: :mod:`cable.case.validated` (the dataclasses), :mod:`cable.case.values`
(one value or table against its schema), :mod:`cable.case.assign` (``--set``),
:mod:`cable.case.toml_text` (TOML in and out), :mod:`cable.case.sections` (the
sections other modules own). The names they define that callers import from here
are imported here.
"""

from __future__ import annotations

import copy
import math
from dataclasses import replace

from cable.case import names, sections
from cable.case.assign import parse_assignment, set_key
from cable.case.schema import SECTIONS, Key
from cable.case.toml_text import MAX_DEPTH, anchor_cellml_path, dumps_toml, parse_toml, read_toml
from cable.case.validated import Case, CaseError, Fiber, Membrane, Numerics, Stimulus
from cable.case.values import (allowed_keys, convert, nearest, param_value, read_section, resolve_name,
                               resolved_table)

__all__ = ["Case", "CaseError", "Fiber", "Key", "Membrane", "Numerics", "PREPACE_KEYS", "Stimulus", "convert",
           "dumps_toml", "from_dict", "load_case", "parse_assignment", "resolve_name", "set_key"]

#: refuse runs beyond these sizes (a mistyped unit, not a study): steps, and nodes x steps
MAX_STEPS = 1e9
MAX_NODE_STEPS = 1e13
#: temperatures outside this range [degC] run, with a warning
PHYSIOLOGICAL_TEMPERATURE = (0.0, 42.0)


def load_case(source=None, overrides=(), *, text: str | None = None) -> Case:
    """Load and validate a case.

    Parameters
    ----------
    source : str, pathlib.Path, dict or Case
        A path to a TOML file, a dict of the same structure, or a Case. A string is a
        path when it names a file (whatever characters it holds, ``=`` included); a
        string that names no file is read as TOML text only if it has several lines
        (kept for compatibility; pass ``text=`` to say so).
    overrides : iterable of str or dict
        ``"KEY=VALUE"`` strings (as on the command line) or a ``{key: value}`` dict.
    text : str, optional
        TOML text of the case, instead of ``source``.

    Returns
    -------
    Case

    Raises
    ------
    CaseError
        With a message naming the key, the value and what is allowed.
    """
    if (source is None) == (text is None):
        raise CaseError("load_case: give the case as source (a file path, a dict or a Case) or as text=TOML text "
                        f"({'not both' if text is not None else 'neither was given'}).")
    try:
        if text is not None:
            if not isinstance(text, str):
                raise CaseError(f"load_case(text={text!r}): text must be a string of TOML, not "
                                f"{type(text).__name__}.")
            raw = parse_toml(text, None)
        elif isinstance(source, Case):
            raw = copy.deepcopy(source.raw)
        elif isinstance(source, dict):
            raw = copy.deepcopy(source)
        else:
            raw = read_toml(source)
            anchor_cellml_path(raw, source)
        notes = names.canonical_raw(raw) if isinstance(raw, dict) else []
        if isinstance(overrides, (str, bytes)):
            overrides = [overrides]
        items = overrides.items() if isinstance(overrides, dict) else (parse_assignment(o) for o in overrides)
        for key, value in items:
            set_key(raw, key, value, notes)
        return from_dict(raw, notes=notes)
    except RecursionError:
        raise CaseError(f"the case is nested too deeply (tables or lists within lists more than "
                        f"{MAX_DEPTH} levels); a case has sections of keys and short lists.") from None


def from_dict(raw: dict, *, notes=()) -> Case:
    """Validate a raw case dict (see :func:`load_case`); ``notes`` are added to the case's."""
    if not isinstance(raw, dict):
        raise CaseError(f"a case must be a table of sections, got {_fmt(raw)}.")
    raw = copy.deepcopy(raw)
    notes = list(dict.fromkeys([*notes, *names.canonical_raw(raw)]))
    known = sections.all_names()
    for name in raw:
        if name not in known:
            raise CaseError(f"unknown section [{name}].{nearest(name, known)} Sections: {allowed_keys(known)}.")
    if "membrane" not in raw:
        raise CaseError("missing section [membrane] (at least: model = \"hodgkin-huxley-1952\"; see `cable models`).")
    if "run" not in raw:
        raise CaseError("missing section [run] (duration = ... ms).")

    membrane, model = _read_membrane(raw, notes)
    fiber = _read_fiber_section(raw, membrane, notes)
    stimuli = _read_stimuli(raw, fiber)
    num = _read_numerics(raw, model, notes)
    run = read_section("run", raw["run"], SECTIONS["run"])
    out = read_section("output", raw.get("output", {}), SECTIONS["output"])
    meas = read_section("measure", raw.get("measure", {}), SECTIONS["measure"])

    out["states"] = tuple(resolve_name(model, name, "state", "output.states", notes) for name in out["states"])
    _check_size(num, run["duration"], membrane.prepace, fiber)
    every = _output_every(out["every"], num, run["duration"], notes)
    cv_window = _cv_window(meas["cv_window"], raw, fiber)
    levels = _apd_levels(meas["apd_levels"])
    if fiber is not None and num.diffusion == "forward-euler":
        from cable.fiber import check_forward_euler

        check_forward_euler(fiber, num)

    case = Case(membrane=membrane, fiber=fiber, stimuli=stimuli, numerics=num,
                duration=run["duration"], output_every=every, output_states=tuple(out["states"]),
                threshold=meas["threshold"], cv_window=cv_window, apd_levels=levels, raw=copy.deepcopy(raw),
                notes=tuple(notes), stop_when_quiet=run["stop_when_quiet"], quiet_tolerance=run["quiet_tolerance"],
                safety_factor=meas["safety_factor"], safety_factor_length=meas["safety_factor_length"],
                keep_fields=out["keep_fields"])
    extra = {}
    for owned in sections.owned():
        if owned.name in raw:
            extra[owned.name] = owned.validate(raw[owned.name], case)
    if extra:
        case = replace(case, extra=extra)
    return case


def _fmt(value) -> str:
    return repr(value)


def _read_membrane(raw: dict, notes: list):
    """``[membrane]`` -> (Membrane, the model)."""
    from cable.membrane import UnknownModelError, get_model

    mem = read_section("membrane", raw["membrane"], SECTIONS["membrane"])
    mem["model"] = _model_name(mem)
    try:
        model = get_model(mem["model"])
    except UnknownModelError as exc:
        raise CaseError(f"membrane.model = {mem['model']!r}: {exc}") from None
    own_cm = getattr(model, "capacitance", None)  # a CellML model's own C_m [uF/cm^2]
    if own_cm is not None and mem["capacitance"] is None and "capacitance" not in raw.get("fiber", {}):
        mem["capacitance"] = own_cm
        notes.append(f"membrane.capacitance = {own_cm:g} uF/cm^2, the model's own (give the key to change it).")
    scale = _read_scale(mem["scale"] or {}, model, notes)
    params = _read_parameters(mem["parameters"] or {}, model, notes)
    if mem["temperature"] is not None:
        _read_temperature(raw["membrane"], model, params, notes)
    prepace = _read_prepace(mem["prepace"]) if mem["prepace"] is not None else None
    if prepace is not None and prepace["beats"] == 0:
        prepace = None  # beats = 0 switches pre-pacing off (the nodes start as without [membrane.prepace])
    return Membrane(model.name, mem["temperature"], scale, params, prepace, mem["capacitance"]), model


def _read_temperature(given: dict, model, params: dict, notes: list) -> None:
    """``membrane.temperature`` into the model's temperature parameter (in ``params``)."""
    if model.temperature_parameter is None:
        raise CaseError(f"membrane.temperature: model '{model.name}' has no temperature dependence; remove the key.")
    if model.temperature_parameter in params:
        # one quantity, two keys: refuse rather than let one of them win silently
        twice = next(v for k, v in given["parameters"].items() if model.resolve(k)[0] == model.temperature_parameter)
        raise CaseError(f"membrane.temperature = {given['temperature']!r} and "
                        f"membrane.parameters.{model.temperature_parameter} = {twice!r} both set the "
                        f"temperature; give it once (either key).")
    params[model.temperature_parameter] = param_value("membrane.temperature", given["temperature"],
                                                      model.parameter(model.temperature_parameter))
    t_c = params[model.temperature_parameter]
    if not PHYSIOLOGICAL_TEMPERATURE[0] <= t_c <= PHYSIOLOGICAL_TEMPERATURE[1]:
        notes.append(f"warning: membrane.temperature = {t_c:g} degC is outside the physiological range "
                     f"{PHYSIOLOGICAL_TEMPERATURE[0]:g}-{PHYSIOLOGICAL_TEMPERATURE[1]:g} degC; the model's "
                     f"temperature scaling was not validated there.")


def _read_fiber_section(raw: dict, membrane: Membrane, notes: list) -> Fiber | None:
    """``[fiber]`` (None without one), its C_m reconciled with ``membrane.capacitance``."""
    if "fiber" not in raw:
        return None
    fiber = _read_fiber(read_section("fiber", raw["fiber"], SECTIONS["fiber"]), notes)
    if membrane.capacitance is not None:
        given = raw["fiber"].get("capacitance")
        if given is not None and fiber.capacitance != membrane.capacitance:
            raise CaseError(f"membrane.capacitance = {raw['membrane']['capacitance']!r} and fiber.capacitance = "
                            f"{given!r} differ; give C_m once (either key).")
        fiber = replace(fiber, capacitance=membrane.capacitance)
    return fiber


def _read_stimuli(raw: dict, fiber: Fiber | None) -> tuple[Stimulus, ...]:
    stim_raw = raw.get("stimulus", {})
    if not isinstance(stim_raw, dict):
        raise CaseError("[stimulus] must hold named tables of keys, e.g. [stimulus.S1] with amplitude = ... and "
                        "duration = ....")
    stimuli = tuple(_read_stimulus(name, s, fiber) for name, s in stim_raw.items())
    if fiber is not None and fiber.initial == "one-way" and not stimuli:
        raise CaseError("fiber.initial = \"one-way\" needs a [stimulus.S1]: the first stimulus starts the wave in "
                        "the open strand whose state begins the ring.")
    return stimuli


def _read_numerics(raw: dict, model, notes: list) -> Numerics:
    num = Numerics(**read_section("numerics", raw.get("numerics", {}), SECTIONS["numerics"]))
    notes.extend(_reaction_notes(num, model, raw.get("numerics", {})))
    _check_dt_max(num)
    if num.adaptive:
        from cable.kernels.adaptive import stability_note

        note = stability_note(model.name, num.dt, num.dt_max)
        if note:
            notes.append(note)
    return num


def _check_size(num: Numerics, duration: float, prepace: dict | None, fiber: Fiber | None) -> None:
    """Refuse a run (or its pre-pacing) beyond :data:`MAX_STEPS` steps or :data:`MAX_NODE_STEPS`."""
    if num.dt > duration:
        raise CaseError(f"numerics.dt = {num.dt:g} ms is longer than run.duration = {duration:g} ms.")
    steps = duration / num.dt
    if steps > MAX_STEPS:
        raise CaseError(f"numerics.dt = {num.dt:g} ms gives {steps:.3g} steps over run.duration = "
                        f"{duration:g} ms; at most {MAX_STEPS:.0e} are allowed. Increase dt or shorten the run.")
    if prepace is not None:
        pdt = prepace["dt"] if prepace["dt"] is not None else num.dt
        psteps = prepace["beats"] * prepace["cycle_length"] / pdt
        if psteps > MAX_STEPS:
            raise CaseError(f"membrane.prepace: beats = {prepace['beats']} at cycle_length = "
                            f"{prepace['cycle_length']:g} ms with dt = {pdt:g} ms gives {psteps:.3g} steps per cell; "
                            f"at most {MAX_STEPS:.0e} are allowed. Use fewer beats or a larger membrane.prepace.dt.")
    if fiber is not None and steps * fiber.n_nodes > MAX_NODE_STEPS:
        raise CaseError(f"the run needs {steps * fiber.n_nodes:.6g} node-steps ({fiber.n_nodes} nodes x {steps:.6g} "
                        f"steps); at most {MAX_NODE_STEPS:.6g} are allowed. Increase fiber.dx or numerics.dt, or "
                        f"shorten the fibre or the run.")


def _output_every(every: float, num: Numerics, duration: float, notes: list) -> float:
    """``output.every``, rounded to a whole number of steps (with a note)."""
    ratio = every / num.dt
    if abs(ratio - round(ratio)) > 1e-9 * max(1.0, ratio) or round(ratio) < 1:
        new_every = max(1, round(ratio)) * num.dt
        notes.append(f"output.every = {every:g} ms is not a multiple of numerics.dt = {num.dt:g} ms; "
                     f"using {new_every:g} ms.")
        every = new_every
    if every > duration:
        raise CaseError(f"output.every = {every:g} ms is longer than run.duration = {duration:g} ms.")
    return every


def _cv_window(cv_window, raw: dict, fiber: Fiber | None) -> tuple[float, float] | None:
    if cv_window is None:
        return None
    if len(cv_window) != 2 or not cv_window[0] < cv_window[1]:
        raise CaseError(f"measure.cv_window = {raw['measure']['cv_window']!r}: give two positions, left < right.")
    if fiber is None:
        raise CaseError("measure.cv_window needs a [fiber].")
    if cv_window[0] < 0 or cv_window[1] > fiber.length + 1e-12:
        raise CaseError(f"measure.cv_window = {raw['measure']['cv_window']!r}: must lie inside the fibre "
                        f"(0 to {fiber.length:g} cm).")
    return tuple(cv_window)


def _apd_levels(given) -> tuple[float, ...]:
    levels = tuple(given)
    for lvl in levels:
        if not 0.0 < lvl < 100.0:
            raise CaseError(f"measure.apd_levels: {lvl:g} must be a percentage between 0 and 100 (e.g. 90).")
    if len(set(levels)) != len(levels):
        raise CaseError(f"measure.apd_levels = {[float(v) for v in levels]}: a level is given twice; give each "
                        f"level once, e.g. [50, 90].")
    if 90.0 not in levels:
        levels += (90.0,)  # the wavelength (CV x APD90) and the summaries need APD90
    return levels


def _model_name(mem: dict) -> str:
    """The registry name of [membrane] model or cellml (a CellML file with its options)."""
    from cable.membrane.equations.registry import cellml_model_name, is_generated_name

    options = {k: mem[k] for k in ("potential", "stimulus_current", "convention")}
    if mem["cellml"] is not None:
        if mem["model"] is not None:
            raise CaseError("membrane.model and membrane.cellml are both given; give one of them.")
        return cellml_model_name(mem["cellml"], **options)
    if mem["model"] is None:
        raise CaseError("missing key membrane.model (a registered model, see `cable models`, or a CellML file).")
    if is_generated_name(mem["model"]) and not mem["model"].startswith("equations:"):
        return cellml_model_name(mem["model"].split("?")[0], **options)
    given = [k for k, v in options.items() if v is not None]
    if given:
        raise CaseError(f"membrane.{given[0]} applies to CellML models only; membrane.model = {mem['model']!r}.")
    return mem["model"]


def _read_scale(table: dict, model, notes=None) -> dict:
    table = resolved_table(table, model, "conductance", "membrane.scale", notes)
    return {name: convert(f"membrane.scale.{name}", value, Key("quantity", minimum=0.0))
            for name, value in table.items()}


def _read_parameters(table: dict, model, notes=None) -> dict:
    table = resolved_table(table, model, "parameter", "membrane.parameters", notes)
    return {name: param_value(f"membrane.parameters.{name}", value, model.parameter(name))
            for name, value in table.items()}


PREPACE_KEYS = {
    "beats": Key("int", default=10, minimum=0, maximum=100000, meaning="number of paced beats (0: no pre-pacing)"),
    "cycle_length": Key("quantity", "time", default=1000.0, minimum=0.0, exclusive_minimum=True, meaning="pacing interval [ms]"),
    "amplitude": Key("quantity", "current_density", minimum=0.0, exclusive_minimum=True,
                     meaning="stimulus per area [uA/cm^2]; default: the first stimulus's"),
    "duration": Key("quantity", "time", minimum=0.0, exclusive_minimum=True, meaning="pulse duration [ms]; default: the first stimulus's"),
    "dt": Key("quantity", "time", minimum=0.0, exclusive_minimum=True, meaning="time step [ms]; default: numerics.dt"),
    "until_change": Key("quantity", "time", minimum=0.0, exclusive_minimum=True,
                        meaning="stop pacing after the first beat whose APD90 differs from the previous beat's by less than this [ms] (beats is then the cap); the report says how many beats it took"),
}


def _read_prepace(table) -> dict:
    return read_section("membrane.prepace", table, PREPACE_KEYS)


def _read_fiber(f: dict, notes: list) -> Fiber:
    axon = [k for k in ("radius", "axial_resistivity") if f[k] is not None]
    tissue = [k for k in ("conductivity", "surface_to_volume") if f[k] is not None]
    if axon and tissue:
        raise CaseError(f"[fiber] mixes the axon form ({', '.join(axon)}) and the tissue form ({', '.join(tissue)}); "
                        "give either radius and axial_resistivity, or conductivity and surface_to_volume.")
    if not axon and not tissue:
        raise CaseError("[fiber] needs its coupling: radius and axial_resistivity (axon form), "
                        "or conductivity and surface_to_volume (tissue form).")
    for pair in (("radius", "axial_resistivity"), ("conductivity", "surface_to_volume")):
        given = [k for k in pair if f[k] is not None]
        if len(given) == 1:
            missing = [k for k in pair if k not in given][0]
            raise CaseError(f"[fiber] has {given[0]} but not {missing}; the {'axon' if pair[0] == 'radius' else 'tissue'} "
                            f"form needs both.")
    if f["dx"] >= f["length"]:
        raise CaseError(f"fiber.dx = {f['dx']:g} cm must be smaller than fiber.length = {f['length']:g} cm.")
    n = f["length"] / f["dx"]
    if n > 5_000_000:
        raise CaseError(f"fiber.length / fiber.dx = {n:.3g} nodes; more than 5 million nodes is refused. Increase dx.")
    if abs(n - round(n)) > 1e-6 * n:
        new_dx = f["length"] / round(n)
        pairs = _grid_pairs(f["length"], f["dx"])
        notes.append(f"note: fiber.length = {f['length']:g} cm is not a multiple of fiber.dx = {f['dx']:g} cm; "
                     f"the spacing was changed to dx = {new_dx:.6g} cm ({int(round(n))} intervals). Valid pairs "
                     f"near the request: {pairs}.")
        f = dict(f, dx=new_dx)
    if (f["cell_length"] is None) != (f["gap_junction_conductance"] is None):
        raise CaseError("[fiber] cell_length and gap_junction_conductance go together (discrete cell coupling).")
    if f["closed"]:
        if f["cell_length"] is not None:
            raise CaseError("fiber.closed = true with fiber.cell_length: a ring of discrete cells is not supported; "
                            "remove cell_length and gap_junction_conductance (a continuous ring), or open the fibre.")
        if round(f["length"] / f["dx"]) < 3:
            raise CaseError(f"fiber.closed = true: a ring needs at least 3 nodes; fiber.length / fiber.dx = "
                            f"{f['length'] / f['dx']:.3g}. Refine dx.")
    elif f["initial"] != "rest":
        raise CaseError(f"fiber.initial = {f['initial']!r} needs fiber.closed = true (it starts a wave round a ring).")
    return Fiber(**f)


def _grid_pairs(length: float, dx: float) -> str:
    """Nearest (length, dx) pairs with a whole number of intervals, for the grid note."""
    lo, hi = math.floor(length / dx), math.ceil(length / dx)
    out = [f"length {length:g} cm with dx {length / k:.6g} cm" for k in sorted({max(lo, 1), hi})]
    out += [f"length {k * dx:g} cm with dx {dx:g} cm" for k in sorted({max(lo, 1), hi})]
    return "; ".join(out)


def _read_stimulus(k: str, table, fiber: Fiber | None) -> Stimulus:
    s = read_section(f"stimulus.{k}", table, SECTIONS["stimulus"])
    if s["count"] > 1 and s["cycle_length"] is None:
        raise CaseError(f"stimulus.{k}.count = {s['count']} needs stimulus.{k}.cycle_length.")
    if s["cycle_length"] is not None and s["count"] > 1 and s["cycle_length"] < s["duration"]:
        raise CaseError(f"stimulus.{k}.cycle_length = {s['cycle_length']:g} ms is shorter than its duration "
                        f"{s['duration']:g} ms.")
    if fiber is not None:
        if s["x"] >= fiber.length:
            raise CaseError(f"stimulus.{k}.x = {s['x']:g} cm lies outside the fibre (0 to {fiber.length:g} cm).")
        if s["x"] + s["width"] > fiber.length + 1e-9:
            raise CaseError(f"stimulus.{k}: zone {s['x']:g} to {s['x'] + s['width']:g} cm extends beyond the fibre "
                            f"end at {fiber.length:g} cm.")
    return Stimulus(**s, name=str(k))


def _reaction_notes(num, model, given: dict) -> list[str]:
    """Check ``numerics.reaction`` against the model and ``numerics.gating``; the stability warning."""
    from cable.kernels import schemes

    if num.reaction == schemes.DEFAULT:
        return []
    if model.kinetics is None:
        raise CaseError(f"numerics.reaction = \"{num.reaction}\": model '{model.name}' supplies no kinetics "
                        f"kernel, so only \"rush-larsen\" applies to it.")
    if "gating" in given and num.gating != "rush-larsen":
        raise CaseError(f"numerics.gating = \"{num.gating}\" selects the gate update of numerics.reaction = "
                        f"\"rush-larsen\" only; with reaction = \"{num.reaction}\" leave gating out.")
    note = schemes.stability_note(model.name, num.reaction, num.dt)
    return [note] if note else []


def _check_dt_max(num) -> None:
    """Refuse ``numerics.dt_max`` below dt, and with the schemes adaptive steps are not safe with."""
    if num.dt_max is None:
        return
    if num.dt_max < num.dt * (1.0 - 1e-9):
        raise CaseError(f"numerics.dt_max = {num.dt_max:g} ms is shorter than numerics.dt = {num.dt:g} ms: dt is "
                        f"the finest step and dt_max the longest; give dt_max >= dt (at least 2 dt to adapt), or "
                        f"leave it out for fixed steps.")
    if not num.adaptive:
        return
    unsafe = []
    if num.gating != "rush-larsen":
        unsafe.append(f"numerics.gating = \"{num.gating}\" (a forward-Euler gate is unstable beyond twice its "
                      f"time constant, far below dt_max for the fast gates; use \"rush-larsen\")")
    if num.reaction != "rush-larsen":
        unsafe.append(f"numerics.reaction = \"{num.reaction}\" (adaptive steps use the model's own Rush-Larsen "
                      f"step; use \"rush-larsen\")")
    if num.diffusion == "forward-euler":
        unsafe.append("numerics.diffusion = \"forward-euler\" (its stability limit holds for dt, not for the long "
                      "steps; use \"crank-nicolson\")")
    if unsafe:
        raise CaseError(f"numerics.dt_max = {num.dt_max:g} ms: adaptive time steps are not available with "
                        + "; nor with ".join(unsafe) + ". Or leave numerics.dt_max out.")
