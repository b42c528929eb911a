"""Reading case files: TOML text or a dict -> a validated :class:`Case`.

Units are converted here, once, to the canonical set of :mod:`cable.units`.
Every problem raises :class:`CaseError` with a message that names the key, shows the
value, says what is allowed and suggests the nearest valid name.
"""

from __future__ import annotations

import copy
from cable.suggest import did_you_mean
import math
import os
import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path

from cable import units
from cable.case import names
from cable.case.schema import LIST_SECTIONS, SECTIONS, Key


class CaseError(ValueError):
    """A case that cannot be run, with a message written for the user."""


#: refuse runs beyond these sizes (a mistyped unit, not a study): steps, and nodes x steps
MAX_STEPS = 1e9
MAX_NODE_STEPS = 1e13
#: temperatures outside this range [degC] run, with a warning
PHYSIOLOGICAL_TEMPERATURE = (0.0, 42.0)


# ----------------------------------------------------------------------------- dataclasses
@dataclass(frozen=True)
class Stimulus:
    """A named current pulse train over a zone ``[x, x + width]`` (canonical units)."""

    x: float
    width: float
    amplitude: float
    duration: float
    onset: float = 0.0
    count: int = 1
    cycle_length: float | None = None
    name: str = ""

    @property
    def start(self) -> float:
        """The first pulse's onset [ms] (the old name of :attr:`onset`)."""
        return self.onset

    def onsets(self) -> list[float]:
        """Pulse onset times [ms]."""
        cl = self.cycle_length or 0.0
        return [self.onset + k * cl for k in range(self.count)]


@dataclass(frozen=True)
class Fiber:
    """Fibre geometry and coupling (canonical units)."""

    length: float
    dx: float
    capacitance: float = 1.0
    radius: float | None = None
    axial_resistivity: float | None = None
    conductivity: float | None = None
    surface_to_volume: float | None = None
    cell_length: float | None = None
    gap_junction_conductance: float | None = None
    closed: bool = False      # a ring (periodic ends)
    initial: str = "rest"     # "rest" or "one-way" (a ring's circulating start)

    @property
    def diffusivity(self) -> float:
        """D [cm^2/ms]: a/(2 R_i C_m) (axon form) or sigma/(chi C_m) (tissue form)."""
        if self.radius is not None:
            # a [cm] / (ohm*cm) = S; S / (uF/cm^2) = cm^2 / (ohm*uF) = cm^2/us = 1e3 cm^2/ms
            return self.radius / (2.0 * self.axial_resistivity * self.capacitance) * 1e3
        return self.conductivity / (self.surface_to_volume * self.capacitance)

    @property
    def n_nodes(self) -> int:
        # a ring has no node at x = length: that point is x = 0
        return int(round(self.length / self.dx)) + (0 if self.closed else 1)


@dataclass(frozen=True)
class Membrane:
    model: str
    temperature: float | None = None
    scale: dict = field(default_factory=dict)
    parameters: dict = field(default_factory=dict)
    prepace: dict | None = None
    capacitance: float | None = None  # [uF/cm^2]; as given in [membrane] (see Case.capacitance)


@dataclass(frozen=True)
class Numerics:
    dt: float = 0.01
    splitting: str = "strang"
    diffusion: str = "crank-nicolson"
    gating: str = "rush-larsen"
    merge_half_steps: bool = True
    reaction: str = "rush-larsen"
    rates: str = "tabulated"
    dt_max: float | None = None

    @property
    def adaptive(self) -> bool:
        """Whether the steps are chosen between dt and ``dt_max`` (at least two levels)."""
        return self.dt_max is not None and self.dt_max >= 2.0 * self.dt * (1.0 - 1e-9)


@dataclass(frozen=True)
class Case:
    """A validated case, every value in canonical units.

    ``raw`` keeps the case as given (after ``--set`` overrides) so that it can be
    written back as TOML into result files and rerun from them.
    """

    membrane: Membrane
    fiber: Fiber | None
    stimuli: tuple[Stimulus, ...]
    numerics: Numerics
    duration: float
    output_every: float
    output_states: tuple[str, ...]
    threshold: float | None
    cv_window: tuple[float, float] | None
    apd_levels: tuple[float, ...]
    raw: dict
    notes: tuple[str, ...] = ()
    extra: dict = field(default_factory=dict)  # validated sections owned by other modules
    stop_when_quiet: bool | None = None  # run.stop_when_quiet; None: not given (the caller's default)
    quiet_tolerance: float = 1.0         # run.quiet_tolerance [mV]

    @property
    def capacitance(self) -> float:
        """Membrane capacitance C_m [uF/cm^2]: the fibre's, or a single cell's (default 1)."""
        if self.fiber is not None:
            return self.fiber.capacitance
        return self.membrane.capacitance if self.membrane.capacitance is not None else 1.0

    @property
    def text(self) -> str:
        """The case as TOML text."""
        return dumps_toml(self.raw)

    def __repr__(self) -> str:
        from cable.case.describe import case_repr

        return case_repr(self)

    def _repr_html_(self) -> str:
        """The case and what it implies, as a table (a notebook's display)."""
        from cable.case.describe import case_html

        return case_html(self)

    def with_overrides(self, overrides) -> "Case":
        """A new case with ``{"section.key": value}`` overrides applied to the raw case."""
        raw = copy.deepcopy(self.raw)
        for key, value in dict(overrides).items():
            set_key(raw, key, value)
        return from_dict(raw)


# ----------------------------------------------------------------------------- helpers
_nearest = did_you_mean


def _allowed_keys(candidates) -> str:
    return ", ".join(sorted(candidates))


def _fmt(value) -> str:
    return repr(value)


def convert(where: str, value, spec: Key):
    """Validate and convert one value against its :class:`Key` spec."""
    kind = spec.kind
    if kind == "quantity":
        try:
            out = units.to_canonical(value, spec.quantity)
        except units.UnitError as exc:
            raise CaseError(f"{where} = {_fmt(value)}: {exc}. Give a number in "
                            f"{units.CANONICAL[spec.quantity]} or a string with a unit.") from None
        if not math.isfinite(out):
            raise CaseError(f"{where} = {_fmt(value)}: must be a finite number.")
        _check_range(where, value, out, spec)
        return out
    if kind == "int":
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                raise CaseError(f"{where} = {_fmt(value)}: must be a whole number.")
        _check_range(where, value, value, spec)
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise CaseError(f"{where} = {_fmt(value)}: must be true or false.")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise CaseError(f"{where} = {_fmt(value)}: must be a string.")
        return value
    if kind == "choice":
        if value not in spec.choices:
            raise CaseError(f"{where} = {_fmt(value)}: allowed values are "
                            f"{', '.join(repr(c) for c in spec.choices)}.{_nearest(value, spec.choices)}")
        return value
    if kind == "list_str":
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, (list, tuple)) or not all(isinstance(v, str) for v in value):
            raise CaseError(f"{where} = {_fmt(value)}: must be a list of names.")
        return tuple(value)
    if kind == "list_quantity":
        if not isinstance(value, (list, tuple)) or not value:
            raise CaseError(f"{where} = {_fmt(value)}: must be a non-empty list.")
        item = replace(spec, kind="quantity")
        return tuple(convert(f"{where}[{k}]", v, item) for k, v in enumerate(value))
    if kind == "table":
        if not isinstance(value, dict):
            raise CaseError(f"{where} = {_fmt(value)}: must be a table.")
        return value
    raise AssertionError(kind)


def _check_range(where, given, value, spec: Key):
    lo, hi = spec.minimum, spec.maximum
    unit = units.CANONICAL.get(spec.quantity, "")
    unit = "" if unit == "1" else f" {unit}"
    if lo is not None:
        if spec.exclusive_minimum and not value > lo:
            raise CaseError(f"{where} = {_fmt(given)}: must be greater than {lo:g}{unit}.")
        if not value >= lo:
            raise CaseError(f"{where} = {_fmt(given)}: must be at least {lo:g}{unit}.")
    if hi is not None and not value <= hi:
        raise CaseError(f"{where} = {_fmt(given)}: must be at most {hi:g}{unit}.")


def _read_section(name: str, table, specs: dict[str, Key]) -> dict:
    if not isinstance(table, dict):
        raise CaseError(f"[{name}] must be a table of keys, got {_fmt(table)}.")
    out = {}
    for key in table:
        if key not in specs:
            raise CaseError(f"unknown key '{name}.{key}'.{_nearest(key, specs)} "
                            f"Keys of [{name}]: {_allowed_keys(specs)}.")
    for key, spec in specs.items():
        if key in table:
            out[key] = convert(f"{name}.{key}", table[key], spec)
        elif spec.required:
            raise CaseError(f"missing key '{name}.{key}' ({spec.meaning}).")
        else:
            out[key] = spec.default
    return out


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


# ----------------------------------------------------------------------------- --set
def parse_assignment(text: str, option: str = "--set") -> tuple[str, object]:
    """Split ``KEY=VALUE`` and read VALUE as a TOML value (a bare word is a string).

    ``option`` names the command-line option in messages (``--set``, ``--vary``).
    """
    if not isinstance(text, str) or "=" not in text:
        example = "membrane.scale.g_Na=[1,0.5]" if option in ("--over", "--vary") else "membrane.scale.g_Na=0.5"
        raise CaseError(f"{option} {text!r}: expected KEY=VALUE, e.g. {example}.")
    key, value = text.split("=", 1)
    key, value = key.strip(), value.strip()
    try:
        parsed = tomllib.loads(f"v = {value}")["v"]
    except tomllib.TOMLDecodeError:
        parsed = value
    except RecursionError:
        raise CaseError(f"{option} {key}: the value is nested too deeply.") from None
    return key, parsed


def set_key(raw: dict, dotted: str, value, notes: list | None = None) -> None:
    """Set ``section.key`` (named entries: ``stimulus.S1.amplitude``) in a raw case.

    The key may use the other spellings of :mod:`cable.case.names` (``fibre.dx``, an
    index ``stimulus.0.start``); a note on each old one is appended to ``notes``.
    """
    parts = dotted.split(".")
    if not all(parts):
        raise CaseError(f"key {dotted!r} is not a dotted case key such as membrane.scale.g_Na.")
    dotted = names.canonical_key(dotted, raw, notes)
    parts = dotted.split(".")
    node = raw
    for depth, part in enumerate(parts[:-1]):
        nxt = parts[depth + 1]
        if not isinstance(node, (dict, list)):
            _not_a_table(dotted, parts[:depth], node)
        if isinstance(node, list):
            index = _index(dotted, part, node)
            node = node[index]
            continue
        part = _spelt_as(node, part, parts[depth - 1] if depth else "")
        if part not in node:
            if depth == 0 and part not in SECTIONS and part not in _extra_sections():
                raise CaseError(f"unknown section '{part}' in key {dotted!r}.{_nearest(part, _all_sections())}")
            node[part] = [] if nxt.isdigit() else {}
        node = node[part]
        if isinstance(node, dict) and nxt.isdigit() and part in _list_sections():
            raise CaseError(f"{dotted!r}: [{part}] is a single table; write [[{part}]] to index it.")
    last = parts[-1]
    if isinstance(node, list):
        node[_index(dotted, last, node)] = value
    elif isinstance(node, dict):
        node[_spelt_as(node, last, parts[-2] if len(parts) > 1 else "")] = value
    else:
        _not_a_table(dotted, parts[:-1], node)


#: tables keyed by a model's names (conductances, parameters), where case is not significant
_NAME_TABLES = {"scale", "parameters", "block"}


def _spelt_as(node: dict, part: str, parent: str) -> str:
    """``part`` as the table already spells it: ``--set membrane.scale.g_Na`` replaces a
    case's ``G_Na`` rather than adding a second entry (model names ignore case)."""
    if parent not in _NAME_TABLES or part in node:
        return part
    same = [k for k in node if str(k).casefold() == part.casefold()]
    return same[0] if len(same) == 1 else part


def _not_a_table(dotted, head, node):
    where = ".".join(head)
    raise CaseError(f"key {dotted!r}: {where} = {_fmt(node)} is a value, not a table, so it has no key "
                    f"'{dotted[len(where) + 1:]}'; set {where} itself, e.g. --set {where}=...")


def _index(dotted, part, seq):
    if not part.isdigit():
        raise CaseError(f"key {dotted!r}: '{part}' must be a list index (0 to {len(seq) - 1}).")
    index = int(part)
    if index >= len(seq):
        section = dotted.split(".")[0]
        raise CaseError(f"key {dotted!r}: index {index} is out of range; the case has {len(seq)} "
                        f"{'entry' if len(seq) == 1 else 'entries'} ({'none' if not seq else f'0 to {len(seq) - 1}'}). "
                        f"To add one, give the whole list, e.g. --set '{section}=[{{...}}, {{...}}]'.")
    return index


# Other modules (regions, sweeps) register the sections they own here, at import of
# cable.case; they are validated by the function given.
_EXTERNAL: dict[str, tuple[bool, object]] = {}


def register_section(name: str, *, is_list: bool, validate) -> None:
    """Let another module own a case section: ``validate(raw_value, case_so_far) -> value``."""
    _EXTERNAL[name] = (is_list, validate)


def _extra_sections():
    return set(_EXTERNAL)


def _all_sections():
    return set(SECTIONS) | set(_EXTERNAL)


def _list_sections():
    return set(LIST_SECTIONS) | {k for k, (is_list, _) in _EXTERNAL.items() if is_list}


# ----------------------------------------------------------------------------- loading
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
            raw = _parse_toml(text, None)
        elif isinstance(source, Case):
            raw = copy.deepcopy(source.raw)
        elif isinstance(source, dict):
            raw = copy.deepcopy(source)
        else:
            raw = _read_toml(source)
            _anchor_cellml_path(raw, source)
        notes = names.canonical_raw(raw) if isinstance(raw, dict) else []
        if isinstance(overrides, (str, bytes)):
            overrides = [overrides]
        items = overrides.items() if isinstance(overrides, dict) else (parse_assignment(o) for o in overrides)
        for key, value in items:
            set_key(raw, key, value, notes)
        return from_dict(raw, notes=notes)
    except RecursionError:
        raise CaseError(f"the case is nested too deeply (tables or lists within lists more than "
                        f"{_MAX_DEPTH} levels); a case has sections of keys and short lists.") from None


#: deepest nesting of tables and lists accepted in a case
_MAX_DEPTH = 32


def _depth(value, limit: int = _MAX_DEPTH) -> int:
    """Nesting depth of tables/lists, counted without recursion (stops past ``limit``)."""
    stack, deepest = [(value, 0)], 0
    while stack:
        node, d = stack.pop()
        deepest = max(deepest, d)
        if deepest > limit:
            return deepest
        if isinstance(node, dict):
            stack.extend((v, d + 1) for v in node.values())
        elif isinstance(node, (list, tuple)):
            stack.extend((v, d + 1) for v in node)
    return deepest


def _anchor_cellml_path(raw: dict, source) -> None:
    """A CellML path in a case file is relative to the file: made absolute here."""
    mem = raw.get("membrane") if isinstance(raw, dict) else None
    is_file = isinstance(source, (str, os.PathLike)) and _names_file(os.fspath(source))
    if not isinstance(mem, dict) or not is_file:
        return
    for key in ("cellml", "model"):
        value = mem.get(key)
        if isinstance(value, str) and value.split("?")[0].lower().endswith(".cellml") \
                and not Path(value).expanduser().is_absolute():
            mem[key] = str(Path(source).resolve().parent / value)


def _read_toml(source) -> dict:
    if isinstance(source, str) and "\n" in source.strip() and not _names_file(source):
        return _parse_toml(source, None)  # TOML text given as source (several lines): as before
    if not isinstance(source, (str, os.PathLike)):
        raise CaseError(f"case = {source!r}: give a path to a TOML case file, a dict, a Case, or TOML text as "
                        f"load_case(text=...); not {type(source).__name__}.")
    path = Path(source)
    if path.is_dir():
        raise CaseError(f"case file '{source}' is a folder; give the TOML file inside it"
                        + (f" (there: {', '.join(sorted(p.name for p in path.glob('*.toml'))[:5])})."
                           if any(path.glob("*.toml")) else "."))
    if not path.is_file():
        if path.exists():
            raise CaseError(f"case file '{source}' is not a regular file.")
        raise CaseError(f"case file '{source}' not found.")
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise CaseError(f"case file '{source}' cannot be read: {exc}.") from None
    return _parse_toml(text, path)


def _names_file(source: str) -> bool:
    try:
        return Path(source).is_file()
    except (OSError, ValueError):  # a name too long, or with a NUL: not a file
        return False


def _parse_toml(text: str, path) -> dict:
    where = f"case file '{path}'" if path else "case text"
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"{where} is not valid TOML: {exc}.") from None
    except RecursionError:
        raise CaseError(f"{where} is nested too deeply (more than {_MAX_DEPTH} levels of tables or lists).") from None
    if _depth(raw) > _MAX_DEPTH:
        raise CaseError(f"{where} is nested too deeply (more than {_MAX_DEPTH} levels of tables or lists); a case "
                        f"has sections of keys and short lists.")
    return raw


def from_dict(raw: dict, *, notes=()) -> Case:
    """Validate a raw case dict (see :func:`load_case`); ``notes`` are added to the case's."""
    from cable.membrane import UnknownModelError, get_model

    if not isinstance(raw, dict):
        raise CaseError(f"a case must be a table of sections, got {_fmt(raw)}.")
    raw = copy.deepcopy(raw)
    notes = list(dict.fromkeys([*notes, *names.canonical_raw(raw)]))
    for name in raw:
        if name not in _all_sections():
            raise CaseError(f"unknown section [{name}].{_nearest(name, _all_sections())} "
                            f"Sections: {_allowed_keys(_all_sections())}.")
    if "membrane" not in raw:
        raise CaseError("missing section [membrane] (at least: model = \"hodgkin-huxley-1952\"; see `cable models`).")
    if "run" not in raw:
        raise CaseError("missing section [run] (duration = ... ms).")

    mem = _read_section("membrane", raw["membrane"], SECTIONS["membrane"])
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
        if model.temperature_parameter is None:
            raise CaseError(f"membrane.temperature: model '{model.name}' has no temperature dependence; remove the key.")
        if model.temperature_parameter in params:
            # one quantity, two keys: refuse rather than let one of them win silently
            given = next(v for k, v in raw["membrane"]["parameters"].items()
                         if model.resolve(k)[0] == model.temperature_parameter)
            raise CaseError(f"membrane.temperature = {raw['membrane']['temperature']!r} and "
                            f"membrane.parameters.{model.temperature_parameter} = {given!r} both set the "
                            f"temperature; give it once (either key).")
        params[model.temperature_parameter] = _param_value("membrane.temperature", raw["membrane"]["temperature"],
                                                           model.parameter(model.temperature_parameter))
        t_c = params[model.temperature_parameter]
        if not PHYSIOLOGICAL_TEMPERATURE[0] <= t_c <= PHYSIOLOGICAL_TEMPERATURE[1]:
            notes.append(f"warning: membrane.temperature = {t_c:g} degC is outside the physiological range "
                         f"{PHYSIOLOGICAL_TEMPERATURE[0]:g}-{PHYSIOLOGICAL_TEMPERATURE[1]:g} degC; the model's "
                         f"temperature scaling was not validated there.")
    prepace = _read_prepace(mem["prepace"]) if mem["prepace"] is not None else None
    if prepace is not None and prepace["beats"] == 0:
        prepace = None  # beats = 0 switches pre-pacing off (the nodes start as without [membrane.prepace])
    membrane = Membrane(model.name, mem["temperature"], scale, params, prepace, mem["capacitance"])

    fiber = None
    if "fiber" in raw:
        fiber = _read_fiber(_read_section("fiber", raw["fiber"], SECTIONS["fiber"]), notes)
        if mem["capacitance"] is not None:
            given = raw["fiber"].get("capacitance")
            if given is not None and fiber.capacitance != mem["capacitance"]:
                raise CaseError(f"membrane.capacitance = {raw['membrane']['capacitance']!r} and fiber.capacitance = "
                                f"{given!r} differ; give C_m once (either key).")
            fiber = replace(fiber, capacitance=mem["capacitance"])

    stim_raw = raw.get("stimulus", {})
    if not isinstance(stim_raw, dict):
        raise CaseError("[stimulus] must hold named tables of keys, e.g. [stimulus.S1] with amplitude = ... and "
                        "duration = ....")
    stimuli = tuple(_read_stimulus(name, s, fiber) for name, s in stim_raw.items())
    if fiber is not None and fiber.initial == "one-way" and not stimuli:
        raise CaseError("fiber.initial = \"one-way\" needs a [stimulus.S1]: the first stimulus starts the wave in "
                        "the open strand whose state begins the ring.")

    num = Numerics(**_read_section("numerics", raw.get("numerics", {}), SECTIONS["numerics"]))
    notes.extend(_reaction_notes(num, model, raw.get("numerics", {})))
    _check_dt_max(num)
    if num.adaptive:
        from cable.kernels.adaptive import stability_note

        note = stability_note(model.name, num.dt, num.dt_max)
        if note:
            notes.append(note)
    run = _read_section("run", raw["run"], SECTIONS["run"])
    out = _read_section("output", raw.get("output", {}), SECTIONS["output"])
    meas = _read_section("measure", raw.get("measure", {}), SECTIONS["measure"])

    out["states"] = tuple(resolve_name(model, name, "state", "output.states", notes) for name in out["states"])
    if num.dt > run["duration"]:
        raise CaseError(f"numerics.dt = {num.dt:g} ms is longer than run.duration = {run['duration']:g} ms.")
    steps = run["duration"] / num.dt
    if steps > MAX_STEPS:
        raise CaseError(f"numerics.dt = {num.dt:g} ms gives {steps:.3g} steps over run.duration = "
                        f"{run['duration']:g} ms; at most {MAX_STEPS:.0e} are allowed. Increase dt or shorten the run.")
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
    every = out["every"]
    ratio = every / num.dt
    if abs(ratio - round(ratio)) > 1e-9 * max(1.0, ratio) or round(ratio) < 1:
        new_every = max(1, round(ratio)) * num.dt
        notes.append(f"output.every = {every:g} ms is not a multiple of numerics.dt = {num.dt:g} ms; "
                     f"using {new_every:g} ms.")
        every = new_every
    if every > run["duration"]:
        raise CaseError(f"output.every = {every:g} ms is longer than run.duration = {run['duration']:g} ms.")
    cv_window = meas["cv_window"]
    if cv_window is not None:
        if len(cv_window) != 2 or not cv_window[0] < cv_window[1]:
            raise CaseError(f"measure.cv_window = {raw['measure']['cv_window']!r}: give two positions, left < right.")
        if fiber is None:
            raise CaseError("measure.cv_window needs a [fiber].")
        if cv_window[0] < 0 or cv_window[1] > fiber.length + 1e-12:
            raise CaseError(f"measure.cv_window = {raw['measure']['cv_window']!r}: must lie inside the fibre "
                            f"(0 to {fiber.length:g} cm).")
    levels = tuple(meas["apd_levels"])
    for lvl in levels:
        if not 0.0 < lvl < 100.0:
            raise CaseError(f"measure.apd_levels: {lvl:g} must be a percentage between 0 and 100 (e.g. 90).")
    if len(set(levels)) != len(levels):
        raise CaseError(f"measure.apd_levels = {[float(v) for v in levels]}: a level is given twice; give each "
                        f"level once, e.g. [50, 90].")
    if 90.0 not in levels:
        levels += (90.0,)  # the wavelength (CV x APD90) and the summaries need APD90
    if fiber is not None and num.diffusion == "forward-euler":
        from cable.fiber import forward_euler_limit

        limit = forward_euler_limit(fiber, num)
        if num.dt > limit:
            raise CaseError(f"numerics.dt = {num.dt:g} ms exceeds the stability limit of forward-Euler diffusion, "
                            f"{limit:.4g} ms, for dx = {fiber.dx:g} cm and D = {fiber.diffusivity:.4g} cm^2/ms; "
                            f"reduce dt or use diffusion = \"crank-nicolson\".")

    case = Case(membrane=membrane, fiber=fiber, stimuli=stimuli, numerics=num,
                duration=run["duration"], output_every=every, output_states=tuple(out["states"]),
                threshold=meas["threshold"], cv_window=tuple(cv_window) if cv_window else None,
                apd_levels=levels, raw=copy.deepcopy(raw), notes=tuple(notes),
                stop_when_quiet=run["stop_when_quiet"], quiet_tolerance=run["quiet_tolerance"])
    extra = {}
    for name, (is_list, validate) in _EXTERNAL.items():
        if name in raw:
            extra[name] = validate(raw[name], case)
    if extra:
        case = replace(case, extra=extra)
    return case


def _param_value(where, value, par):
    if par.choices is not None:
        if value not in par.choices:
            raise CaseError(f"{where} = {_fmt(value)}: allowed values are "
                            f"{', '.join(repr(c) for c in par.choices)}.{_nearest(value, par.choices)}")
        return value
    # converted to the parameter's own declared unit (the model's internal one), so that a
    # value written in the unit `cable models` lists is accepted whatever its quantity kind
    unit = par.units if par.units not in ("", "1") else "1"
    try:
        out = units.to_unit(value, unit, par.quantity)
    except units.UnitError as exc:
        raise CaseError(f"{where} = {_fmt(value)}: {exc}. Give a number in {unit} or a string with a unit.") from None
    if not math.isfinite(out):
        raise CaseError(f"{where} = {_fmt(value)}: must be a finite number.")
    if par.minimum is not None and not out >= par.minimum:
        raise CaseError(f"{where} = {_fmt(value)}: must be at least {par.minimum:g} {unit}.")
    if par.maximum is not None and not out <= par.maximum:
        raise CaseError(f"{where} = {_fmt(value)}: must be at most {par.maximum:g} {unit}.")
    return out


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


_KINDS = {"conductance": ("a scalable conductance", "Scalable", "conductances"),
          "parameter": ("a parameter", "Parameters", "parameter_names"),
          "state": ("a state", "States", "state_names")}


def resolve_name(model, name, kind: str, where: str, notes: list | None = None) -> str:
    """The model's name for a conductance, parameter or state as a case writes it.

    Accepts what :meth:`cable.membrane.base.MembraneModel.resolve` accepts (``g_Na`` for
    ``G_Na``; an earlier name, whose note is appended to ``notes``); anything else is a
    CaseError naming ``where``, with the nearest name and the list of valid ones.
    """
    found, note = model.resolve(name, kind)
    if found is None:
        what, label, attr = _KINDS[kind]
        valid = getattr(model, attr)
        raise CaseError(f"{where}: '{name}' is not {what} of '{model.name}'.{_nearest(name, valid)} "
                        f"{label}: {', '.join(valid) or '(none)'}.")
    if note and notes is not None and note not in notes:
        notes.append(note)
    return found


def _resolved_table(table: dict, model, kind: str, section: str, notes=None) -> dict:
    """``{model's name: value}`` of a table keyed by names; a name given twice is refused."""
    out, given = {}, {}
    for name, value in table.items():
        found = resolve_name(model, name, kind, f"{section}.{name}", notes)
        if found in given:
            raise CaseError(f"{section}: '{given[found]}' and '{name}' both name {model.name}'s '{found}'; "
                            f"give it once.")
        given[found] = name
        out[found] = value
    return out


def _read_scale(table: dict, model, notes=None) -> dict:
    table = _resolved_table(table, model, "conductance", "membrane.scale", notes)
    return {name: convert(f"membrane.scale.{name}", value, Key("quantity", minimum=0.0))
            for name, value in table.items()}


def _read_parameters(table: dict, model, notes=None) -> dict:
    table = _resolved_table(table, model, "parameter", "membrane.parameters", notes)
    return {name: _param_value(f"membrane.parameters.{name}", value, model.parameter(name))
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
    return _read_section("membrane.prepace", table, PREPACE_KEYS)


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
    s = _read_section(f"stimulus.{k}", table, SECTIONS["stimulus"])
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


# ----------------------------------------------------------------------------- TOML out
def dumps_toml(raw: dict) -> str:
    """Write a raw case dict as TOML (the subset case files use)."""
    lines: list[str] = []

    def value(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, (int, float)):
            if isinstance(v, float) and not math.isfinite(v):
                return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf")
            return repr(v)
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(value(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{" + ", ".join(f"{_bare(k)} = {value(x)}" for k, x in v.items()) + "}"
        raise TypeError(f"cannot write {v!r} as TOML")

    def table(prefix, d, header):
        scalars = {k: v for k, v in d.items() if not isinstance(v, dict) and not _is_table_list(v)}
        subs = {k: v for k, v in d.items() if isinstance(v, dict)}
        lists = {k: v for k, v in d.items() if _is_table_list(v)}
        # a table of named tables only ([stimulus] holding [stimulus.S1]) needs no header of its own
        header = header if scalars or lists or not subs else None
        if header:
            lines.append(header)
        for k, v in scalars.items():
            lines.append(f"{_bare(k)} = {value(v)}")
        if header or scalars:
            lines.append("")
        for k, v in subs.items():
            name = f"{prefix}.{_bare(k)}" if prefix else _bare(k)
            table(name, v, f"[{name}]")
        for k, v in lists.items():
            name = f"{prefix}.{_bare(k)}" if prefix else _bare(k)
            for item in v:
                table(name, item, f"[[{name}]]")

    table("", raw, None)
    return "\n".join(lines).strip() + "\n"


def _is_table_list(v):
    return isinstance(v, list) and v and all(isinstance(x, dict) for x in v)


def _bare(k: str) -> str:
    k = str(k)
    if k and all(ch.isalnum() or ch in "-_" for ch in k):
        return k
    return '"' + k.replace('"', '\\"') + '"'
