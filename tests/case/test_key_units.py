"""One lookup of a case key's quantity and unit, shared by sweeps, searches and calibration."""

import cable
from cable.case.key_units import KeyUnit, unit_of

CASE = {"membrane": {"model": "hodgkin-huxley-1952"},
        "fiber": {"length": 1.0, "dx": 0.01, "radius": 0.0238, "axial_resistivity": 35.4},
        "stimulus": {"S1": {"amplitude": 500, "duration": 0.5, "count": 2, "cycle_length": 20}},
        "region": {"zone": {"start": 0.4, "end": 0.6, "scale": {"g_Na": 0.5}}},
        "run": {"duration": 1.0}}


def test_quantity_and_unit_of_each_kind_of_key():
    # the units are the canonical ones of cable.units (cm, ms, uA/cm^2), and a model parameter's its
    # own declared unit (HH 1952: potentials in mV)
    case = cable.load_case(CASE)
    assert unit_of("fiber.dx", case) == KeyUnit("length", "cm")
    assert unit_of("fibre.dx", case) == KeyUnit("length", "cm")                # the other spelling
    assert unit_of("stimulus.S1.amplitude", case) == KeyUnit("current_density", "uA/cm^2")
    assert unit_of("stimulus.S1.count", case) == KeyUnit(None, "1")           # a whole number, not a quantity
    assert unit_of("membrane.scale.g_Na", case) == KeyUnit("dimensionless", "1")
    assert unit_of("region.zone.scale.g_Na", case) == KeyUnit("dimensionless", "1")
    assert unit_of("region.zone.end", case) == KeyUnit("length", "cm")
    assert unit_of("membrane.parameters.E_Na", case).unit == "mV"
    assert unit_of("numerics.diffusion", case) == KeyUnit()                   # a choice
    assert unit_of("membrane.parameters.nothing", case) == KeyUnit()


def test_sweep_and_search_read_the_same_lookup():
    # before, cable.sweep.spec and cable.protocols.critical each had their own copy of this table
    from cable.protocols.critical import key_units
    from cable.sweep.spec import _quantity_of

    case = cable.load_case(CASE)
    for key in ("fiber.dx", "stimulus.S1.onset", "stimulus.S1.count", "region.zone.start", "membrane.scale.g_Na",
                "membrane.parameters.E_Na", "numerics.splitting"):
        assert _quantity_of(key, case) == unit_of(key, case).quantity
        assert key_units(case, key) == unit_of(key, case).unit
