"""Every command-line option is checked before any run: exit 2 and a message, never a traceback.

The commands are called in this process (``cable.cli.main``): an exception escaping it
is what a user would see as a traceback. Each case here once ran for minutes, hung, or
ended in a traceback.
"""

import time

import pytest

import cable
from cable.cli import main

CASE = """
[membrane]
model = "hodgkin-huxley-1952"
temperature = 18.5
[fiber]
length = 1.0
dx = 0.02
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"
[[stimulus]]
amplitude = 1000
duration = 0.2
width = 0.1
count = 2
cycle_length = 15
[numerics]
dt = 0.01
[run]
duration = 30
[output]
every = 0.5
"""

#: an option refused before any run answers in well under this [s] (a run of the
#: finest level of `--levels 50` took 300 s before it was checked up front)
PROMPT_S = 20.0


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("options")
    case = folder / "case.toml"
    case.write_text(CASE)
    result = folder / "result.nc"
    cable.simulate(case, output=result).close()
    return folder, str(case), str(result)


@pytest.mark.parametrize("argv, message", [
    (["converge", "{case}", "--levels", "50"], "--levels 50: the finest level"),
    (["converge", "{case}", "--levels", "12"], "at most 1e\\+09 are allowed"),
    (["converge", "{case}", "--beat", "99"], r"beat 99 \(--beat\): the case has 2 beat"),
    (["converge", "{case}", "--beat", "-3"], r"beat -3 \(--beat\)"),
    (["run", "{case}", "--certify", "--set", "fiber.dx=5e-7"], "more than 5 million nodes"),
    (["restitution", "{case}", "--beats", "0"], "--beats 0: must be a whole number of at least 1"),
    (["threshold", "{case}", "--durations", "1", "--tolerance", "1e-300"], "--tolerance 1e-300: give at least"),
    (["erp", "{case}", "--tolerance", "1e-300"], "--tolerance 1e-300 ms: give at least numerics.dt"),
    (["sweep", "{case}", "--vary", "membrane.scale.g_Na=[1,0.5]", "--workers", "100000", "-o", "{folder}/s.nc"],
     "--workers 100000: the local cluster runs one process per core"),
    (["map", "{result}", "--dpi", "100000", "-o", "{folder}/m.png"], "at most 16384 per side"),
    (["map", "{result}", "--size", "1e6", "1e6", "-o", "{folder}/m.png"], "at most 16384 per side"),
    (["map", "{result}", "--size", "nan", "3", "-o", "{folder}/m.png"], "width and height must be above 0"),
    (["traces", "{result}", "--size", "inf", "3", "-o", "{folder}/t.png"], "at most 16384 per side"),
    (["threshold", "{case}", "--durations", "1", "--figure", "{folder}/f.png", "--figure-dpi", "99999"],
     "--figure-dpi 99999 gives"),
    (["run", "{case}", "--set", "fiber.length.x=3"], "fiber.length = 1.0 is a value, not a table"),
    (["run", "{case}", "--set", "measure.apd_levels=[90, 90]"], "a level is given twice"),
])
def test_bad_option_is_refused_before_any_run(files, capsys, argv, message):
    import re

    folder, case, result = files
    argv = [a.format(case=case, result=result, folder=folder) for a in argv]
    t0 = time.perf_counter()
    rc = main(argv)
    took = time.perf_counter() - t0
    err = capsys.readouterr().err
    assert rc == 2, err
    assert re.search(message, err), err
    assert took < PROMPT_S


def test_run_summary_gives_rest_upstroke_and_wavelength_at_the_centre(files, capsys):
    # issue 3: resting potential and maximal upstroke velocity per beat at the centre of the
    # CV window, and the wavelength CV x APD90 there; the printed table shows them
    folder, case, result = files
    assert main(["info", result]) == 0
    lines = capsys.readouterr().out.splitlines()
    header = next(line for line in lines if line.startswith("beat "))
    assert header.split()[5:8] == ["rest_mV", "dVdt_V/s", "wavelength_apd_cm"]
    row = lines[lines.index(header) + 1].split()
    with cable.open_result(result) as ds:
        centre = dict(x=float(ds.x.sel(x=0.5, method="nearest")), beat=0)
        expected = [float(ds.resting_potential.sel(centre)), float(ds.upstroke_velocity.sel(centre)),
                    float(ds.wavelength_apd[0])]
    # the table prints fixed decimals per column (rest 2, dVdt 1, wavelength 3): within 5e-4 here
    assert [float(v) for v in row[5:8]] == pytest.approx(expected, rel=5e-4)
