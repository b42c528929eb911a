"""Conduction block per beat: capture, direction, source-sink mismatch, patterns over a train."""

import numpy as np
import pytest

import cable
from cable.measure.block import conduction_pattern
from cable.protocols.critical import find_critical

#: critical coupling at the two finest grids: they agree to the bisection's bracket
#: (2 % in ratio, log bisection) plus a margin for the grid
GRID_AGREEMENT = 0.05
#: a 100 um grid (about 1/1.4 of the segment's space constant at the critical coupling)
#: moves the critical coupling by more than this
COARSE_SHIFT = 0.3
#: CV in a uniform cable scales as sqrt(D) (Hodgkin 1954, J Physiol 125:221, from memory;
#: REFERENCES.md: theta^2 = K a/(2 R_i C_m)); the 0.6 mm window sits close to the segment's
#: ends, whose loading moves the local CV by a few %
SQRT_TOLERANCE = 0.15

SEGMENT = (0.2, 0.3)  # poorly coupled segment [cm]


def lr1(length=0.5, dx=0.01, duration=50.0, stimulus_x=0.0, regions=(), window=None, every=0.5, **stim):
    """Luo & Rudy (1991) strand, radius 11 um, R_i 300 ohm*cm."""
    case = {"membrane": {"model": "luo-rudy-1991"},
            "fiber": {"length": length, "dx": dx, "radius": "11 um", "axial_resistivity": "300 ohm*cm"},
            "stimulus": [dict({"x": stimulus_x, "amplitude": 100.0, "duration": 1.0, "width": 0.02}, **stim)],
            "numerics": {"dt": 0.01}, "run": {"duration": duration}, "output": {"every": every}}
    if regions:
        case["region"] = [dict(r) for r in regions]
    if window is not None:
        case["measure"] = {"cv_window": list(window)}
    return case


def segment_case(dx, coupling=0.1):
    return lr1(dx=dx, regions=[{"start": SEGMENT[0], "end": SEGMENT[1], "coupling": coupling}],
               window=(0.22, 0.28))


def test_subthreshold_stimulus_is_not_captured_and_not_a_block():
    ds = cable.simulate(lr1(length=0.3, duration=20.0, amplitude=5.0))
    assert not bool(ds.captured[0])
    assert not bool(ds.blocked[0]) and not bool(ds.conducted[0])
    assert int(ds.block_side[0]) == 0 and np.isnan(float(ds.block_x[0]))


@pytest.mark.slow
def test_source_sink_mismatch_blocks_at_the_exit_and_converges_with_dx():
    # A poorly coupled segment conducts slowly, but its weak current cannot charge the well
    # coupled tissue beyond it: below a critical coupling the wave dies at the segment's exit
    # (source-sink mismatch; Rohr 2004, Cardiovasc Res 62:309; Goldstein & Rall 1974,
    # Biophys J 14:731 for the axon analogue; from memory).
    found = {}
    for dx in (0.00125, 0.000625, 0.01):
        res = find_critical(segment_case(dx), "region.0.coupling", 0.01, 0.2, log=True, tolerance=0.02)
        fail = res.attrs["failing_value"]
        k = int(np.flatnonzero(res.value.values == fail)[-1])
        found[dx] = (res.attrs["critical_value"], float(res.block_x.values[k]), res.attrs["cv_passing_m_per_s"],
                     res.attrs["passing_value"])
    fine, finer, coarse = found[0.00125], found[0.000625], found[0.01]
    # block at the exit, not inside: the last activated node is the segment's last one
    for dx, (_, bx, _, _) in found.items():
        assert SEGMENT[1] - dx - 1e-9 <= bx <= SEGMENT[1] + 1e-9
    # the critical coupling converges: dx 12.5 um and 6.25 um agree; 100 um does not
    assert finer[0] == pytest.approx(fine[0], rel=GRID_AGREEMENT)
    assert abs(coarse[0] / finer[0] - 1.0) > COARSE_SHIFT
    # just above it the segment still conducts, slowly, as sqrt(coupling) says
    control = cable.simulate(lr1(dx=0.000625, window=(0.22, 0.28)))
    ratio = finer[2] / float(control.conduction_velocity[0])
    assert ratio == pytest.approx(np.sqrt(finer[3]), rel=SQRT_TOLERANCE)
    assert ratio < 0.3


def test_unidirectional_block_shows_which_direction_passes():
    # The same mismatch is one-way: entering a poorly coupled region from normal tissue is
    # easy (large source, small sink), leaving it is not (fact of the trade; Rohr 2004,
    # Cardiovasc Res 62:309, from memory). The region runs to the sealed right end.
    region = [{"start": 0.25, "end": 0.5, "coupling": 0.02}]
    beside = cable.simulate(lr1(dx=0.00125, duration=40.0, stimulus_x=0.0, regions=region))
    inside = cable.simulate(lr1(dx=0.00125, duration=40.0, stimulus_x=0.42, regions=region))
    assert bool(beside.conducted[0]) and int(beside.block_side[0]) == 0
    assert bool(inside.captured[0]) and not bool(inside.conducted[0])
    assert bool(inside.reached_right[0]) and not bool(inside.reached_left[0])
    assert int(inside.block_side[0]) == -1
    assert float(inside.block_x[0]) == pytest.approx(0.25, abs=0.0013)  # the region's exit, leftward


def test_depressed_zone_conducts_every_other_beat():
    # Depressed (raised K_o, reduced I_Na) tissue recovers excitability after repolarisation
    # (post-repolarisation refractoriness): at a rate the normal strand follows 1:1 the zone
    # passes only every other beat, 2:1 (fact of the trade; Shaw & Rudy 1997b, Circ Res 80:124,
    # from memory for the refractoriness).
    zone = {"start": 0.2, "end": 0.4, "parameters": {"K_o": 12.5}, "scale": {"G_Na": 0.3}}
    train = dict(count=4, cycle_length=500.0, width=0.03)
    control = cable.simulate(lr1(length=0.6, duration=2000.0, every=1.0, window=(0.05, 0.15), **train))
    injured = cable.simulate(lr1(length=0.6, duration=2000.0, every=1.0, window=(0.05, 0.15), regions=[zone],
                                 **train))
    assert conduction_pattern(control) == "1:1"
    assert conduction_pattern(injured) == "2:1"
    blocked = injured.blocked.values.astype(bool)
    assert np.all((injured.block_x.values[blocked] >= 0.2) & (injured.block_x.values[blocked] <= 0.4))
    assert np.all(injured.captured.values == 1)


@pytest.mark.parametrize("flags, pattern", [
    ("1111", "1:1"), ("1010", "2:1"), ("0101", "2:1"), ("110110", "3:2"), ("100100", "3:1"),
    ("0000", "no conduction"), ("1000", "no conduction from beat 1"), ("11010101", "2:1 from beat 1"),
    ("1110", "irregular (3 of 4 conducted)"), ("1", "1:1"),
])
def test_conduction_pattern_names_the_ratio(flags, pattern):
    # stimuli : conducted beats over the repeating period (common practice, e.g. "2:1 block")
    assert conduction_pattern([c == "1" for c in flags]) == pattern
