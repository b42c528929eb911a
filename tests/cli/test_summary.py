"""The printed summary of a run (issue 16, item 3): where each number comes from, what the
case changed, no fibre columns for a single cell, "-" for the CV of a blocked beat, fixed
decimals per column, dx in um."""

import re

import pytest

import cable
from cable.cli.summary import summarise
from tests.conftest import hh_axon_case


@pytest.fixture(scope="module")
def blocked_run():
    # the HH axon with g_Na removed beyond 0.6 cm (1.4 cm, twice its space constant of 0.70 cm, measured
    # here by `cable check`): the wave cannot cross the segment and blocks in it (an inexcitable
    # membrane carries no action potential: Hodgkin & Huxley 1952)
    case = hh_axon_case(length=2.0, dx=0.02, dt=0.01, duration=6.0,
                        membrane={"scale": {"g_K": 1.0}}, measure={"threshold": -30.0, "cv_window": [0.1, 0.4]})
    case["region"] = [{"start": 0.6, "end": 2.0, "scale": {"g_Na": 0.0}}]
    return cable.simulate(case)


def table(text, header_start="beat "):
    lines = text.splitlines()
    head = next(k for k, line in enumerate(lines) if line.startswith(header_start))
    rows = []
    for line in lines[head + 1:]:
        if not re.match(r"\s*\d+\s", line):
            break
        rows.append(line)
    return lines[head], rows


def test_says_where_it_measured(blocked_run):
    text = summarise(blocked_run)
    # nodes x_i = 0.02 i: the window [0.1, 0.4] cm holds nodes 5-20, its centre 0.25 cm is node 12 or 13
    assert "over x = 0.1-0.4 cm (nodes 5-20, the CV window)" in text
    assert re.search(r"at x = 0\.2[46] cm \(node 1[23], the centre of the CV window\)", text)
    assert "upward crossing of -30 mV (measure.threshold)" in text


def test_echoes_what_the_case_changed(blocked_run):
    text = summarise(blocked_run)
    assert "changed from the model's defaults: g_K x 1, temperature = 18.5" in text
    assert "region R1: start = 0.6, end = 2, scale = {g_Na = 0}" in text
    assert "stimulus S1: amplitude = 1000, duration = 0.2, width = 0.1" in text
    assert "dx 200 um" in text


def test_blocked_beat_has_no_cv_or_wavelength_and_columns_have_fixed_decimals(blocked_run):
    assert int(blocked_run["blocked"][0]) == 1 and float(blocked_run["conduction_velocity"][0]) > 0
    header, rows = table(summarise(blocked_run))
    fields = rows[0].split()
    names = header.split()
    assert fields[names.index("CV_m/s")] == "-" and fields[names.index("wavelength_apd_cm")] == "-"
    assert re.fullmatch(r"-?\d+\.\d{2}", fields[names.index("APD90_ms")])
    assert re.fullmatch(r"-?\d+\.\d{2}", fields[names.index("rest_mV")])
    assert re.fullmatch(r"-?\d+\.\d{1}", fields[names.index("dVdt_V/s")])
    assert "at x =" in rows[0]


def test_single_cell_drops_cv_wavelength_and_block():
    ds = cable.simulate({"membrane": {"model": "hodgkin-huxley-1952"},
                         "stimulus": [{"amplitude": 20.0, "duration": 0.5}], "run": {"duration": 15.0}})
    text = summarise(ds)
    header, rows = table(text)
    assert header.split() == ["beat", "onset_ms", "captured", "APD90_ms", "rest_mV", "dVdt_V/s"]
    assert len(rows) == 1 and len(rows[0].split()) == 6
    assert "blocked" not in text and "CV" not in text and "wavelength" not in text
