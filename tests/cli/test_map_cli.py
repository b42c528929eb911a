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
    assert f"{cv:.4g}" in out
    assert "status: complete" in out


def test_info_of_a_missing_file(tmp_path, capsys):
    # exit 2 with the reason, no traceback (cable.cli docstring)
    assert main(["info", str(tmp_path / "nothing.nc")]) == EXIT_INPUT
    assert "not found" in capsys.readouterr().err
