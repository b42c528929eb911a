"""Property-based fuzzing of case files: every input gets a CaseError or runs; nothing else."""

import copy
import string

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import cable
from cable.case import CaseError, load_case

BASE = {
    "membrane": {"model": "hodgkin-huxley-1952", "temperature": 18.5},
    "fiber": {"length": 0.5, "dx": 0.01, "radius": 0.0238, "axial_resistivity": 35.4},
    "stimulus": [{"amplitude": 500.0, "duration": 0.5}],
    "numerics": {"dt": 0.01},
    "run": {"duration": 1.0},
    "output": {"every": 0.1},
}

KEYS = [
    "membrane.model", "membrane.temperature", "membrane.scale.g_Na", "membrane.parameters.E_K",
    "membrane.parameters.nonsense", "fiber.length", "fiber.dx", "fiber.radius", "fiber.axial_resistivity",
    "fiber.conductivity", "fiber.capacitance", "fiber.lenght", "stimulus.0.x", "stimulus.0.width",
    "stimulus.0.amplitude", "stimulus.0.duration", "stimulus.0.count", "stimulus.0.cycle_length",
    "stimulus.0.start", "numerics.dt", "numerics.splitting", "numerics.diffusion", "numerics.gating",
    "run.duration", "output.every", "output.states", "measure.threshold", "measure.cv_window",
    "measure.apd_levels", "bogus.key", "membrane.prepace.beats",
]

#: accepted cases up to this many node-steps are also run (about 0.1 s each)
FUZZ_RUN_NODE_STEPS = 2e6

values = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(min_value=-10**12, max_value=10**12),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(alphabet=string.printable, max_size=20),
    st.sampled_from(["1 cm", "-3 um", "2 mV", "0.5 ms", "1e9 cm", "nan ms", "strang", "h", "1/0",
                     "35.4 ohm*cm", "10 degC", "400 K", "cm", ""]),
    st.lists(st.one_of(st.floats(allow_nan=False, min_value=-10, max_value=10), st.text(max_size=5)),
             max_size=3),
    st.dictionaries(st.text(max_size=5), st.integers(), max_size=2),
)


def apply(raw, key, value):
    node = raw
    parts = key.split(".")
    for part in parts[:-1]:
        if isinstance(node, list):
            node = node[int(part)]
        else:
            node = node.setdefault(part, {})
    if value is None:
        if isinstance(node, dict):
            node.pop(parts[-1], None)
    else:
        node[parts[-1]] = value


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(KEYS), values), min_size=1, max_size=4))
def test_any_case_is_accepted_or_refused_with_a_case_error(edits):
    raw = copy.deepcopy(BASE)
    for key, value in edits:
        try:
            apply(raw, key, value)
        except (TypeError, AttributeError, IndexError, ValueError):
            return  # the edit itself does not fit the structure: not a case
    try:
        case = load_case(raw)
        setup = cable.prepare(case)
    except CaseError as exc:
        assert str(exc)  # a message for the user
        return
    # accepted: must be a sane, small run
    assert setup.n >= 1 and setup.n_samples >= 1
    # and a small one must run to its end or stop with a SimulationError (duplicate APD
    # levels once passed preparation and raised TypeError in the run)
    steps = (setup.n_samples - 1) * setup.steps_per_sample
    if setup.n * steps <= FUZZ_RUN_NODE_STEPS:
        try:
            ds = cable.simulate(case)
        except cable.SimulationError:
            return
        except CaseError as exc:  # refused before the time loop (e.g. a threshold at rest)
            assert str(exc)
            return
        assert ds.sizes["t"] == setup.n_samples


@settings(max_examples=150, deadline=None)
@given(st.text(max_size=200))
def test_arbitrary_text_is_refused_cleanly(text):
    try:
        load_case(text + "\n")
    except CaseError:
        pass


@settings(max_examples=100, deadline=None)
@given(st.text(alphabet=string.ascii_letters + "._=0123456789'\" []", max_size=40))
def test_arbitrary_set_options_are_refused_cleanly(option):
    try:
        load_case(copy.deepcopy(BASE), [option])
    except CaseError:
        pass


@pytest.mark.parametrize("edits", [
    {"numerics.dt": 1e-300},       # absurd number of steps
    {"fiber.dx": 1e-8},           # 50 million nodes
])
def test_absurd_sizes_are_refused_before_running(edits):
    with pytest.raises(CaseError):
        cable.prepare(load_case(copy.deepcopy(BASE), edits))


@settings(max_examples=150, deadline=None)
@given(st.sampled_from(KEYS), st.sampled_from(["", ".x", ".0", ".0.x", ".g_Na.y"]), values)
def test_set_on_any_key_path_is_applied_or_refused_cleanly(key, suffix, value):
    # a dotted path below a value (fiber.length.x) once raised TypeError, not CaseError
    try:
        load_case(copy.deepcopy(BASE), {key + suffix: value})
    except CaseError as exc:
        assert str(exc)
