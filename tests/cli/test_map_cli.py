"""The figure and file commands: map, traces, plot-sweep, rerun, info (run in-process)."""

import shutil

import matplotlib.image
import netCDF4
import numpy as np
import pytest
import xarray as xr

import cable
from cable.cli import EXIT_INPUT, EXIT_OK, main
from cable.cli.rerun import EXIT_DIFFERENT
from conftest import hh_axon_case

#: file signatures: PNG (W3C PNG specification 2003, 5.2), PDF (ISO 32000-1, 7.5.2), SVG is XML text
SIGNATURES = {".png": b"\x89PNG\r\n\x1a\n", ".pdf": b"%PDF-"}


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    path = tmp_path_factory.mktemp("cli") / "axon.nc"
    case = hh_axon_case(length=2.0, dx=0.02, dt=0.01, duration=8.0)
    case["output"] = {"every": 0.05, "states": ["h", "m"]}
    cable.simulate(case, output=path).close()
    return path


@pytest.mark.parametrize("suffix", [".png", ".pdf", ".svg"])
def test_map_writes_the_format_its_suffix_names(result, tmp_path, suffix, capsys):
    out = tmp_path / f"map{suffix}"
    assert main(["map", str(result), "-o", str(out), "--dpi", "60"]) == EXIT_OK
    head = out.read_bytes()[:400]
    if suffix == ".svg":
        assert b"<svg" in head
    else:
        assert head.startswith(SIGNATURES[suffix])
    assert f"wrote {out}" in capsys.readouterr().out


@pytest.mark.filterwarnings("error:constrained_layout not applied")   # the layout must fit a journal column
def test_map_size_dpi_and_windows(result, tmp_path):
    out = tmp_path / "small.png"
    rc = main(["map", str(result), "-o", str(out), "--size", "8cm", "60mm", "--dpi", "100",
               "--t-window", "0.5", "4 ms", "--x-window", "2mm", "1.5", "--vlim", "-80", "40",
               "--isochrones", "0.5"])
    assert rc == EXIT_OK
    height, width = matplotlib.image.imread(out).shape[:2]
    # 8 cm x 6 cm at 100 dpi (1 inch = 2.54 cm)
    assert width == pytest.approx(8 / 2.54 * 100, abs=1)
    assert height == pytest.approx(6 / 2.54 * 100, abs=1)


def test_map_default_output_name(result, tmp_path):
    # house style: without -o the figure goes beside the result, named after it
    copy = tmp_path / "run1.nc"
    shutil.copy(result, copy)
    assert main(["map", str(copy), "--dpi", "50"]) == EXIT_OK
    assert (tmp_path / "run1.map.png").is_file()


@pytest.mark.parametrize("args, message", [
    (["-o", "map.jpg"], "'.jpg' is not supported"),
    (["--t-window", "100", "200"], "t_window"),
    (["--vlim", "10", "-10"], "vmin must be below vmax"),
    (["--cmap", "cividiss"], "Did you mean 'cividis'"),
    (["--isochrones", "2 mV"], "--isochrones"),
    (["--variable", "state_n"], "state_n"),
])
def test_map_bad_options_exit_2_with_the_reason(result, tmp_path, args, message, capsys, monkeypatch):
    # exit code 2 for invalid input (cable.cli docstring); the message names the option (house style)
    monkeypatch.chdir(tmp_path)
    assert main(["map", str(result), *args]) == EXIT_INPUT
    assert message in capsys.readouterr().err


def test_traces_with_states(result, tmp_path):
    # positions with units parsed by pint (cable.units); PNG signature as above
    out = tmp_path / "traces.png"
    assert main(["traces", str(result), "--at", "0.5cm", "10mm", "1.5", "--states", "h", "m",
                 "-o", str(out), "--dpi", "50"]) == EXIT_OK
    assert out.read_bytes().startswith(SIGNATURES[".png"])


def test_traces_position_outside_the_fibre(result, tmp_path, capsys):
    # the fibre is 2 cm long: 3 cm is outside (house style: say why, exit 2)
    assert main(["traces", str(result), "--at", "3cm", "-o", str(tmp_path / "t.png")]) == EXIT_INPUT
    assert "outside the fibre" in capsys.readouterr().err


def test_plot_sweep(tmp_path, capsys):
    # a file in the shape of a sweep result: dimensions named after the swept keys (cable.sweep)
    g = np.array([0.25, 0.5, 1.0])
    ds = xr.Dataset({"conduction_velocity": (("g_Na", "beat"), np.array([[np.nan], [14.0], [19.0]]),
                                             {"units": "m/s", "long_name": "conduction velocity"}),
                     "blocked": (("g_Na", "beat"), np.array([[1], [0], [0]], dtype=np.int8))},
                    coords={"g_Na": g, "beat": [0]})
    path = tmp_path / "sweep.nc"
    ds.to_netcdf(path)
    out = tmp_path / "sweep.svg"
    assert main(["plot-sweep", str(path), "--y", "conduction_velocity", "--x", "g_Na", "-o", str(out)]) == EXIT_OK
    assert b"<svg" in out.read_bytes()[:400]
    assert main(["plot-sweep", str(path), "--y", "conduction_velocity", "--x", "gNa"]) == EXIT_INPUT
    assert "Did you mean 'g_Na'" in capsys.readouterr().err


def test_rerun_identical_then_tampered(result, tmp_path, capsys):
    # common practice: a deterministic rerun is bit-identical; one changed value makes it differ (exit 1)
    assert main(["rerun", str(result), "-o", str(tmp_path / "again.nc")]) == EXIT_OK
    out = capsys.readouterr().out
    assert "activation_time: identical" in out
    assert f"rerun of {result}: identical" in out
    tampered = tmp_path / "tampered.nc"
    shutil.copy(result, tampered)
    with netCDF4.Dataset(tampered, "a") as nc:
        nc.variables["activation_time"][0, 5] += 0.01
    assert main(["rerun", str(tampered), "-q"]) == EXIT_DIFFERENT
    assert "activation_time: DIFFERS" in capsys.readouterr().out


def test_info_summarises_model_fibre_beats_and_cv(result, capsys):
    # the summary shows the file's own values (common practice), as the issue lists them
    assert main(["info", str(result)]) == EXIT_OK
    out = capsys.readouterr().out
    with cable.open_result(result) as ds:
        cv = float(ds["conduction_velocity"][0])
        n = ds.sizes["x"]
    assert "model: hodgkin-huxley-1952" in out
    assert f"{n} nodes" in out
    assert "beats: 1 (1 captured, 0 blocked)" in out
    assert f"{cv:.3f}" in out     # CV printed with 3 decimals
    assert "status: complete" in out


def test_info_of_a_missing_file(tmp_path, capsys):
    # exit 2 with the reason, no traceback (cable.cli docstring)
    assert main(["info", str(tmp_path / "nothing.nc")]) == EXIT_INPUT
    assert "not found" in capsys.readouterr().err


def test_traces_cli_draws_ionic_currents(tmp_path, capsys):
    # --currents recomputes the model's currents from the stored states (all of them needed)
    path = tmp_path / "all.nc"
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    case["output"] = {"every": 0.05, "states": ["m", "h", "n"]}
    cable.simulate(case, output=path).close()
    out = tmp_path / "currents.png"
    assert main(["traces", str(path), "--at", "0.5cm", "--currents", "I_Na", "I_K", "-o", str(out)]) == EXIT_OK
    assert out.read_bytes()[:8] == SIGNATURES[".png"]
    assert main(["traces", str(path), "--currents", "I_Nx", "-o", str(out)]) == EXIT_INPUT
    assert "Did you mean 'I_Na'" in capsys.readouterr().err


@pytest.fixture(scope="module")
def threshold_result(tmp_path_factory):
    # single-cell strength-duration of the HH membrane: cheap, and a protocol result, not a run
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=5.0)
    ds = cable.strength_duration(case, [0.5, 2.0], mode="cell", tolerance=0.05)
    path = tmp_path_factory.mktemp("proto") / "sd.nc"
    cable.io.netcdf.write_dataset(ds, path)
    return path


def test_info_summarises_a_protocol_result(threshold_result, capsys):
    # the summary of a protocol file is its command's table, not a run summary of nothing
    assert main(["info", str(threshold_result)]) == EXIT_OK
    out = capsys.readouterr().out
    assert "strength-duration (cell)" in out and "Lapicque" in out and "Weiss" in out
    assert "single cell (no fibre)" not in out and "beats: none" not in out


def test_rerun_refuses_what_is_not_a_run(threshold_result, capsys):
    # a protocol result holds a case but not one run: rerunning it as a run could only "differ"
    assert main(["rerun", str(threshold_result)]) == EXIT_INPUT
    err = capsys.readouterr().err
    assert "strength-duration protocol result, not the result of one run" in err


def test_info_of_a_sweep_counts_only_real_flags(tmp_path, capsys):
    # cable.sweep.store: -1 marks a point without a result; it is neither captured nor blocked
    from cable.sweep import store

    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=4.0)
    case["sweep"] = {"membrane.scale.g_Na": [1.0, 0.5]}
    spec = cable.load_case(case).extra["sweep"]
    ok = cable.simulate(cable.load_case({k: v for k, v in case.items() if k != "sweep"}))
    points = [store.label(store.point_dataset(ok, False), spec, 0),
              store.label(store.failed_dataset("numerical_failure", "NaN at t = 1 ms"), spec, 1)]
    path = tmp_path / "sweep.nc"
    cable.io.netcdf.write_dataset(store.assemble(spec, points, {"model": "hodgkin-huxley-1952"}), path)
    assert main(["info", str(path)]) == EXIT_OK
    out = capsys.readouterr().out
    assert "beats: 1 of 1 captured, 0 blocked (1 without a result)" in out
    assert "2 points: 1 ok; 1 failed (1 numerical_failure)" in out


def test_info_names_the_conduction_pattern_of_a_train(tmp_path, capsys):
    # cases/ischaemic_zone.toml (our scenario, tests/test_regions.py): every other beat blocks in
    # the zone; the summary names the ratio as "2:1" (common practice)
    from pathlib import Path

    case_path = Path(__file__).resolve().parents[2] / "cases" / "ischaemic_zone.toml"
    path = tmp_path / "zone.nc"
    assert main(["run", str(case_path), "-o", str(path), "-q", "--set", "stimulus.0.count=4",
                 "--set", "run.duration=2000"]) == EXIT_OK
    assert main(["info", str(path)]) == EXIT_OK
    assert "conduction pattern (stimuli : beats through the whole fibre): 2:1" in capsys.readouterr().out
