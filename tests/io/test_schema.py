"""Every protocol result is built through cable.io.schema: each variable, coordinate and global
attribute it carries is declared there, with the dimensions, units and long name declared.

Each protocol is run once on a small cheap case (Hodgkin & Huxley 1952 axon and membrane,
Mitchell & Schaeffer 2003 strand); what is compared is the result against its own
declaration, never against stored numbers.
"""

from pathlib import Path

import numpy as np
import pytest

import cable
from cable.io import schema
from cable.protocols import get_protocol, protocol_names, protocol_of
from conftest import hh_axon_case, ms_strand

PROTOCOLS_DIR = Path(cable.__file__).parent / "protocols"


def _axon(**kw):
    return hh_axon_case(length=1.0, dx=0.04, dt=0.02, duration=6.0, **kw)


#: one small run of each protocol, and of each variant that writes other outputs
RUNS = {
    "threshold": lambda: cable.strength_duration(_axon(), [0.1, 1.0], tolerance=0.05, mode="cell", observe=8.0,
                                                 points=1, workers=1),
    "refractory": lambda: cable.refractory_period(ms_strand(1), tolerance=8.0, points=1, workers=1),
    "restitution": lambda: cable.restitution(ms_strand(2, 600.0), [600, 380, 300], protocol="s1s2"),
    "restitution-dynamic": lambda: cable.restitution(ms_strand(2, 600.0), [600, 450], protocol="dynamic",
                                                     beats=2),
    "converge": lambda: cable.convergence(hh_axon_case(length=1.0, dx=0.04, dt=0.02, duration=4.0), levels=3,
                                          ratio="dt/dx"),
    "critical": lambda: cable.find_critical(_axon(), "membrane.scale.g_Na", 0.05, 1.0, tolerance=0.1, points=1,
                                            workers=1),
    "calibrate": lambda: cable.calibrate(_axon(), "fiber.axial_resistivity", "conduction_velocity", 15.0,
                                         rtol=1e-3),
}


@pytest.fixture(scope="module")
def results():
    return {}


def result(results, run):
    if run not in results:
        results[run] = RUNS[run]()
    return results[run]


def test_every_protocol_has_a_run_here():
    # a new protocol must add its cheap case to RUNS, so that its outputs are checked too
    covered = {run.split("-")[0] for run in RUNS}
    assert covered == set(protocol_names())


@pytest.mark.parametrize("run", sorted(RUNS))
def test_every_output_is_declared(run, results):
    ds = result(results, run)
    protocol = protocol_of(ds)
    assert protocol is get_protocol(run.split("-")[0])
    table = protocol.outputs
    fields = table.fields(ds.attrs)
    for name, var in ds.variables.items():
        declared = table.declared(name)            # KeyError: a variable the schema does not name
        assert var.dims == declared.dims, name
        assert dict(var.attrs) == table.attrs_of(name, fields), name
    assert protocol.complete(ds)
    allowed = set(schema.PROVENANCE_ATTRS) | set(table.attributes) | {schema.COMMAND_ATTR}
    assert set(ds.attrs) <= allowed, set(ds.attrs) - allowed


@pytest.mark.parametrize("run", sorted(RUNS))
def test_provenance_is_the_schema_s(run, results):
    ds = result(results, run)
    case = cable.load_case(ds.attrs["case"])
    expected = schema.provenance(ds.attrs["title"], case, protocol=ds.attrs["protocol"])
    for key, value in expected.items():
        assert ds.attrs[key] == value, key
    assert ds.attrs[schema.PROTOCOL_ATTR] == protocol_of(ds).name


def test_declared_units_parse_with_cf_units():
    cf_units = pytest.importorskip("cf_units")            # udunits2 (Unidata), the library CF names
    for name in protocol_names():
        table = get_protocol(name).outputs
        for var_name, var in table.variables.items():
            if var.units is not None and "{" not in var.units:
                cf_units.Unit(var.units)


def test_no_protocol_spells_its_own_attributes():
    # the schema alone names outputs: no protocol module builds a Dataset or writes a long name itself
    for path in sorted(PROTOCOLS_DIR.glob("*.py")):
        text = path.read_text()
        assert "xr.Dataset(" not in text and "long_name" not in text and "provenance(" not in text, path.name


def test_dataset_refuses_what_the_schema_does_not_declare():
    case = cable.load_case(_axon())
    with pytest.raises(KeyError, match="not_declared"):
        schema.dataset("calibrate", {"not_declared": 1.0}, {}, {}, case=case, title="t", description="d")
    with pytest.raises(KeyError, match="stray"):
        schema.dataset("calibrate", {}, {}, {"stray": 1}, case=case, title="t", description="d")
    with pytest.raises(ValueError, match="dimensions"):
        schema.dataset("calibrate", {"run_value": np.zeros((2, 2))}, {}, {}, case=case, title="t", description="d")
