"""Figure regression: each figure command writes a PNG a reader can use.

Every figure is drawn by its command (in-process) at the command's default size and
resolution; the test keeps the drawn Figure, reads the PNG back, and asserts on what a
reader needs, measured with matplotlib's renderer (:mod:`cable.plot.layout`): axis
labels with their units, no text over text, nothing past the canvas, no marker cut by
its axes, no legend over the data. The checker itself is tested first on figures made
to fail it, so that a pass means something.
"""

import matplotlib.image
import numpy as np
import pytest
import xarray as xr
from matplotlib.figure import Figure

import cable
from cable.cli import EXIT_OK, _figures, main
from cable.plot import layout
from conftest import hh_axon_case

#: axis labels that carry no unit on purpose: gate states and scale factors are pure
#: numbers, the S2 outcome is a category (common practice: "quantity [unit]" otherwise)
UNITLESS = {"m", "h", "n", "S2 outcome", "g_Na scale", "g_Na"}


def figure(size=(4, 3), dpi=100):
    return Figure(figsize=size, dpi=dpi, layout="constrained")


# --------------------------------------------------------------------------- the checker fails when it should

def test_checker_finds_text_over_text_and_past_the_canvas():
    fig = Figure(figsize=(4, 3), dpi=100)        # no layout engine: the texts stay where put
    ax = fig.add_subplot()
    ax.text(0.5, 0.5, "first label", transform=ax.transAxes)
    ax.text(0.52, 0.5, "second label", transform=ax.transAxes)
    ax.text(0.98, 0.9, "a label running off the right edge", transform=fig.transFigure)
    found = layout.problems(fig)
    assert "text 'first label' overlaps 'second label'" in found
    assert "text 'a label running off the right edge' reaches past the canvas" in found


def test_checker_finds_a_cut_marker_and_a_legend_over_data():
    fig = figure()
    ax = fig.add_subplot()
    ax.plot([0, 1, 2], [0, 1, 0], marker="o", markersize=12, label="edge")
    ax.set_xlim(0, 2)       # the first and last markers sit on the axes' edges: half cut
    ax.plot(np.linspace(0, 2, 50), np.full(50, 0.95), label="under the legend")
    ax.legend(loc="upper right")
    found = layout.problems(fig)
    assert any(p.startswith("marker of 'edge' cut") for p in found)
    assert any(p.startswith("the legend covers data") for p in found)


def test_checker_passes_a_clean_figure():
    fig = figure()
    ax = fig.add_subplot()
    ax.plot([0, 1, 2], [0, 1, 0], label="curve")
    ax.set_xlabel("time [ms]")
    ax.set_ylabel("V [mV]")
    ax.legend(loc="lower left", bbox_to_anchor=(0, 1.02), frameon=False)
    assert layout.problems(fig) == []
    assert layout.axis_labels(fig) == ["time [ms]", "V [mV]"]


# --------------------------------------------------------------------------- every figure command

@pytest.fixture(scope="module")
def results(tmp_path_factory):
    folder = tmp_path_factory.mktemp("figures")
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=5.0)
    case["output"] = {"every": 0.05, "states": ["m", "h", "n"]}
    case["region"] = {"injury": {"start": 0.4, "end": 0.6, "border": 0.05, "scale": {"g_Na": 0.6},
                                 "parameters": {"E_K": -72}}}
    cable.simulate(case, output=folder / "axon.nc").close()
    g = np.array([0.2, 0.4, 0.6, 0.8, 1.0])
    temp = np.array([6.3, 18.5])
    cv = np.sqrt(g)[:, None] * np.array([12.0, 19.0])[None, :]
    cv[0, 1] = np.nan
    blocked = np.zeros(cv.shape, np.int8)
    blocked[0, 1] = 1
    dims = ("g_Na", "temperature")
    sweep = xr.Dataset({"conduction_velocity": (dims, cv, cable.io.schema.attrs("conduction_velocity")),
                        "blocked": (dims, blocked), "captured": (dims, np.ones(cv.shape, np.int8))},
                       coords={"g_Na": ("g_Na", g, {"case_key": "membrane.scale.g_Na"}),
                               "temperature": ("temperature", temp, {"units": "degC",
                                                                     "case_key": "membrane.temperature"})})
    sweep.to_netcdf(folder / "sweep.nc")
    return folder


@pytest.fixture
def drawn(monkeypatch):
    """The Figures the commands save, kept for measuring (they are saved as usual)."""
    kept = []
    original = _figures.finish

    def keep(fig, args, out):
        kept.append(fig)
        original(fig, args, out)

    monkeypatch.setattr(_figures, "finish", keep)
    return kept


COMMANDS = {
    "map": ["map", "{d}/axon.nc"],
    "map, time upwards": ["map", "{d}/axon.nc", "--time-axis", "y", "--isochrones", "1"],
    "traces": ["traces", "{d}/axon.nc"],
    "traces, states and currents": ["traces", "{d}/axon.nc", "--at", "0.2", "0.8", "--states", "m", "h", "n",
                                    "--currents", "I_Na", "I_K"],
    "plot-sweep": ["plot-sweep", "{d}/sweep.nc", "--y", "conduction_velocity", "--x", "g_Na",
                   "--hue", "temperature"],
    "single-column map": ["map", "{d}/axon.nc", "--size", "8.5", "6.5"],
}


def check_png(path, fig):
    image = matplotlib.image.imread(path)
    width, height = (fig.get_size_inches() * fig.dpi).astype(int)      # matplotlib truncates
    assert image.shape[:2] == (height, width)
    assert np.ptp(image[..., :3]) > 0.5          # something is drawn, dark on light


def check_units(labels):
    assert labels
    for text in labels:
        flat = text.replace("\n", " ")
        assert flat in UNITLESS or ("[" in flat and flat.endswith("]")), flat
        assert "^" not in flat and "degC" not in flat and "uA" not in flat, flat    # units typeset


@pytest.mark.parametrize("name", list(COMMANDS))
def test_figure_command_writes_a_readable_png(name, results, drawn, tmp_path, capsys):
    out = tmp_path / "figure.png"
    args = [a.format(d=results) for a in COMMANDS[name]] + ["-o", str(out), "--dpi", "100"]
    assert main(args) == EXIT_OK
    (fig,) = drawn
    check_png(out, fig)
    assert layout.problems(fig) == []
    check_units(layout.axis_labels(fig))


def test_stacked_traces_grow_in_height_with_the_panels(results, drawn, tmp_path):
    for extra in ([], ["--states", "m", "h", "n"]):
        assert main(["traces", str(results / "axon.nc"), "-o", str(tmp_path / "t.png"), "--dpi", "60", *extra]) == 0
    one, four = (f.get_size_inches()[1] * 2.54 for f in drawn)
    assert one == pytest.approx(_figures.DEFAULT_SIZE_CM[1])
    assert four == pytest.approx(_figures.STACKED_FIRST_CM + 3 * _figures.STACKED_EACH_CM)


def test_map_names_the_region_with_its_units(results, drawn, tmp_path):
    assert main(["map", str(results / "axon.nc"), "-o", str(tmp_path / "m.png"), "--dpi", "60"]) == 0
    (fig,) = drawn
    entries = [t.get_text().replace("\n", " ") for ax in fig.axes if ax.get_legend()
               for t in ax.get_legend().get_texts()]
    assert "injury, 4–6 mm: E_K = -72 mV, g_Na × 0.6" in entries       # the region's own name
    assert "border ramp, 0.5 mm" in entries
