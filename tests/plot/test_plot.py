"""Figures: they render without a display, carry their labels and colour bar, and follow the data.

Figures are made with ``matplotlib.figure.Figure`` (no pyplot, no display); pixel
statistics of the rendered canvas are compared, never a stored image.
"""

import matplotlib
import numpy as np
import pytest
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

import cable
from cable.plot import _common, layout
from conftest import hh_axon_case

#: fraction of pixels that must change between maps of different results: the block
#: case loses the whole distal front, far more than antialiasing noise (common practice)
MIN_CHANGED_FRACTION = 0.02
#: colour-bar lightness may dip this much between neighbouring entries [0-1 luminance]
LIGHTNESS_SLACK = 1e-3


def axon(g_na=1.0):
    """A 2 cm Hodgkin & Huxley (1952) axon; g_Na scaled by 0.3 the wave dies out (checked in the test)."""
    case = hh_axon_case(length=2.0, dx=0.02, dt=0.01, duration=8.0)
    case["output"] = {"every": 0.05, "states": ["h"]}
    case["membrane"]["scale"] = {"g_Na": g_na}
    return cable.simulate(case)


@pytest.fixture(scope="module")
def normal():
    return axon()


@pytest.fixture(scope="module")
def blocked():
    ds = axon(0.3)
    # a weakened membrane fails to propagate (Hodgkin & Huxley 1952 needs enough g_Na; from memory)
    assert bool(ds["blocked"][0])
    return ds


def render(draw, size=(4, 3), dpi=80):
    fig = Figure(figsize=size, dpi=dpi, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    out = draw(ax)
    fig.canvas.draw()
    return fig, ax, out, np.asarray(fig.canvas.buffer_rgba())[..., :3].astype(float)


def test_space_time_labels_and_colour_bar(normal):
    # common practice: axes labelled "quantity [unit]" from the file's long_name and units
    fig, ax, image, _ = render(lambda ax: cable.plot.space_time(normal, ax))
    assert ax.get_xlabel() == "time [ms]"
    assert ax.get_ylabel().startswith("position along the fibre") and ax.get_ylabel().endswith("[cm]")
    assert image.colorbar is not None
    assert image.colorbar.ax.get_ylabel() == "membrane potential [mV]"
    assert image.get_cmap().name == _common.FIELD_CMAP


def test_time_axis_y_swaps_the_axes(normal):
    # common practice: the option does what its name says
    _, ax, _, _ = render(lambda ax: cable.plot.space_time(normal, ax, time_axis="y", colorbar=False))
    assert ax.get_ylabel() == "time [ms]"
    assert "position" in ax.get_xlabel()


def test_maps_differ_when_the_data_differ(normal, blocked):
    *_, a = render(lambda ax: cable.plot.space_time(normal, ax, vmin=-80, vmax=40))
    *_, a2 = render(lambda ax: cable.plot.space_time(normal, ax, vmin=-80, vmax=40))
    *_, b = render(lambda ax: cable.plot.space_time(blocked, ax, vmin=-80, vmax=40))
    assert np.array_equal(a, a2), "the same data draws the same pixels"
    changed = np.mean(np.any(np.abs(a - b) > 8, axis=-1))
    assert changed > MIN_CHANGED_FRACTION
    # the propagating wave puts depolarised (bright) pixels over the distal fibre; the blocked one does not
    assert a.mean() != b.mean()


def test_front_follows_activation_time(normal):
    # the front drawn is the measured activation time itself, not a smoothed copy (common practice)
    _, ax, _, _ = render(lambda ax: cable.plot.space_time(normal, ax, colorbar=False))
    act = normal["activation_time"].isel(beat=0).values
    fronts = [ln for ln in ax.get_lines() if ln.get_color() == "white" and ln.get_xdata().size == act.size]
    assert len(fronts) == 1
    assert np.array_equal(fronts[0].get_xdata(), act, equal_nan=True)
    assert np.array_equal(fronts[0].get_ydata(), normal["x"].values)


def test_isochrone_marks_lie_on_the_front(normal):
    # common practice: isochrones at equal steps of activation time, linear interpolation between nodes
    step = 0.5
    _, ax, _, _ = render(lambda ax: cable.plot.space_time(normal, ax, isochrones=step, colorbar=False))
    marks = [ln for ln in ax.get_lines() if ln.get_marker() == "o"]
    act = normal["activation_time"].isel(beat=0).values
    x = normal["x"].values
    onset = float(normal["beat_onset"][0])
    expected = int(np.floor((np.nanmax(act) - onset) / step))
    times = sorted(float(t) for ln in marks for t in ln.get_xdata())
    assert len(times) == expected
    assert np.allclose(np.diff(times), step)
    for ln in marks:     # each mark sits where the front passes its time (linear between nodes)
        for t, pos in zip(ln.get_xdata(), ln.get_ydata()):
            assert np.interp(pos, x, act) == pytest.approx(t, abs=1e-9)


def test_block_site_is_marked(blocked):
    # block_x is the last activated position of the blocked wave (cable.measure.activation)
    _, ax, _, _ = render(lambda ax: cable.plot.space_time(blocked, ax, colorbar=False))
    crosses = [ln for ln in ax.get_lines() if ln.get_marker() == "X"]
    assert len(crosses) == 1
    assert crosses[0].get_ydata()[0] == pytest.approx(float(blocked["block_x"][0]))
    assert any(t.get_text() == "block" for t in ax.texts)


def test_regions_are_those_of_the_validated_case(normal):
    # the zones are read from the loaded case, not parsed again from its text: the same positions as
    # cable.regions.regions_of gives, and a case text that does not load marks nothing
    from cable.regions import regions_of

    text = normal.attrs["case"] + '\n[region.zone]\nstart = "4 mm"\nend = 0.6\nscale = {g_Na = 0.25}\n'
    expected = regions_of(cable.load_case(text=text))
    zones = _common.regions(normal.copy().assign_attrs(case=text))
    assert [(z.start, z.end, z.border) for z in zones] == [(r.start, r.end, r.border) for r in expected]
    assert zones[0].label.startswith("zone, 4–6 mm")
    bad = text.replace("end = 0.6", "end = 99.0")  # beyond the fibre: the loader refuses the region
    assert _common.regions(normal.copy().assign_attrs(case=bad)) == []


def test_regions_from_the_case_text_are_marked_beside_the_map(normal):
    # regions come from [[region]] tables of the case text; positions may carry units (pint; common practice).
    # The field inside a region stays visible: the region is a hatched bar beside the map, and on the map
    # only lines at its ends and at the ends of its border ramp
    ds = normal.copy()
    ds.attrs = dict(normal.attrs, case=normal.attrs["case"] + '\n[[region]]\nstart = "0.5 cm"\nend = "10 mm"\n'
                                                              'border = "1 mm"\nparameters = {E_K = -70}\n'
                                                              'scale = {g_Na = 0.5}\n')
    # the old [[region]] list's entries are named R1, R2... by the loader (cable.case.names), as the case
    # text it stores in a result names them
    label = "R1, 0.5–1 cm: E_K = -70 mV, g_Na × 0.5"     # the unit from the model (HH 1952: mV)
    assert _common.regions(ds) == [_common.Zone(0.5, 1.0, label, 0.1)]
    fig, ax, _, _ = render(lambda ax: cable.plot.space_time(ds, ax, colorbar=False), size=(6, 4))
    assert not [p for p in ax.patches if p.get_hatch()]             # nothing hatched over the field
    (bar,) = ax.child_axes
    assert [p.get_hatch() for p in bar.patches if p.get_hatch()] == ["///"]
    assert label in [t.get_text().replace("\n", " ") for t in ax.get_legend().get_texts()]
    marked = sorted(ln.get_ydata()[0] for ln in ax.get_lines() if ln.get_xdata()[0] == 0 and
                    np.ptp(ln.get_ydata()) == 0 and ln.get_transform() is not ax.transData)
    assert marked == pytest.approx([0.4, 0.5, 1.0, 1.1])   # the border ramp ends 1 mm outside the core
    assert layout.problems(fig) == []
    _, ax, _, _ = render(lambda ax: cable.plot.space_time(normal, ax, colorbar=False))
    assert not ax.child_axes


def test_windows_and_colour_limits(normal):
    # common practice: the axes show the window asked for (plus half a sample at the edges)
    _, ax, image, _ = render(lambda ax: cable.plot.space_time(normal, ax, t_window=(1, 4), x_window=(0.5, 1.5),
                                                             vmin=-70, vmax=20))
    lo, hi = ax.get_xlim()
    assert 0.9 <= lo <= 1.0 and 4.0 <= hi <= 4.1
    lo, hi = ax.get_ylim()
    assert 0.45 <= lo <= 0.5 and 1.5 <= hi <= 1.55
    assert image.get_clim() == (-70, 20)
    with pytest.raises(cable.CaseError, match="t_window"):
        cable.plot.space_time(normal, ax, t_window=(100, 200))
    with pytest.raises(cable.CaseError, match="vmin must be below vmax"):
        cable.plot.space_time(normal, ax, vmin=10, vmax=-10)


def test_default_colour_map_prints_as_an_ordered_grey_ramp():
    # cividis was built to have monotonically increasing lightness (Nunez, Anderton & Renslow 2018,
    # PLoS ONE 13:e0199239); luminance by ITU-R BT.601 weights (common practice)
    rgb = matplotlib.colormaps[_common.FIELD_CMAP](np.linspace(0, 1, 256))[:, :3]
    grey = rgb @ np.array([0.299, 0.587, 0.114])
    assert np.all(np.diff(grey) > -LIGHTNESS_SLACK)
    assert grey[-1] - grey[0] > 0.7


def test_line_looks_differ_without_colour():
    # common practice for greyscale print: curves told apart by dash pattern and marker, not colour alone
    looks = _common.LINE_LOOKS
    assert len({str(lk["linestyle"]) for lk in looks}) == len(looks)
    assert len({lk["marker"] for lk in looks}) == len(looks)


def test_traces_at_positions(normal):
    # each trace is the nearest node's stored samples (common practice); errors suggest a fix (house style)
    fig = Figure(figsize=(4, 4))
    axes = fig.subplots(2, 1, sharex=True)
    out = cable.plot.traces(normal, [0.5, 1.5], list(axes), states=["h"])
    assert out[-1].get_xlabel() == "time [ms]"
    assert out[0].get_ylabel() == "V [mV]"     # a stacked panel: the short name, as a paper writes it
    lines = out[0].get_lines()
    assert [ln.get_label() for ln in lines] == ["x = 0.5 cm", "x = 1.5 cm"]
    assert np.array_equal(lines[1].get_ydata(), normal["vm"].sel(x=1.5, method="nearest").values)
    assert np.array_equal(out[1].get_lines()[0].get_ydata(), normal["state_h"].sel(x=0.5, method="nearest").values)
    with pytest.raises(cable.CaseError, match="Did you mean 'h'"):
        cable.plot.traces(normal, [0.5], list(axes), states=["hh"])
    with pytest.raises(cable.CaseError, match="outside the fibre"):
        cable.plot.traces(normal, [5.0], list(axes))


def test_traces_differ_when_the_data_differ(normal, blocked):
    # at 1.5 cm the normal wave passes and the blocked one never arrives (see the block fixture)
    *_, a = render(lambda ax: cable.plot.traces(normal, [1.5], ax))
    *_, b = render(lambda ax: cable.plot.traces(blocked, [1.5], ax))
    assert np.mean(np.any(np.abs(a - b) > 8, axis=-1)) > 0.005


def sweep_dataset():
    """Hand-built in the shape of a sweep result: conduction_velocity(g_Na, temperature, beat)."""
    g = np.array([0.2, 0.4, 0.6, 0.8, 1.0])
    temp = np.array([6.3, 18.5])
    cv = np.sqrt(g)[:, None, None] * np.array([12.0, 19.0])[None, :, None] * np.ones((1, 1, 2))
    blocked = np.zeros(cv.shape, dtype=np.int8)
    captured = np.ones(cv.shape, dtype=np.int8)
    blocked[0, 1] = 1        # g_Na 0.2 at 18.5 degC: excited, then blocked
    captured[0, 0] = 0       # g_Na 0.2 at 6.3 degC: not excited at all
    cv[0] = np.nan
    dims = ("g_Na", "temperature", "beat")
    return xr.Dataset({"conduction_velocity": (dims, cv, cable.io.schema.attrs("conduction_velocity")),
                       "blocked": (dims, blocked), "captured": (dims, captured)},
                      coords={"g_Na": g, "temperature": ("temperature", temp, {"units": "degC"}), "beat": [0, 1]})


def test_sweep_plot_curves_and_block():
    # the curves are the data as given; block and no-capture marks sit at the points flagged (common practice)
    ds = sweep_dataset()
    fig = Figure()
    ax = fig.add_subplot()
    cable.plot.sweep(ds, "conduction_velocity", "g_Na", ax, hue="temperature", select={"beat": 0})
    curves = [ln for ln in ax.get_lines() if ln.get_linestyle() != "None"]
    assert len(curves) == 2
    assert np.array_equal(curves[1].get_ydata(), ds["conduction_velocity"].isel(temperature=1, beat=0).values,
                          equal_nan=True)
    (strip,) = ax.child_axes                                          # the outcomes without a value
    crosses = [ln for ln in strip.get_lines() if ln.get_marker() == "x"]
    assert [list(ln.get_xdata()) for ln in crosses] == [[0.2]]
    assert crosses[0].get_color() == curves[1].get_color()           # in the colour of its curve
    circles = [ln for ln in strip.get_lines() if ln.get_marker() == "o"]
    assert [list(ln.get_xdata()) for ln in circles] == [[0.2]]
    assert circles[0].get_markeredgecolor() == curves[0].get_color()
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert labels == ["6.3", "18.5"]
    assert strip.get_xlabel() == "g_Na"
    assert ax.get_ylabel().endswith("[m/s]")
    assert ax.get_legend().get_title().get_text() == "temperature [°C]"


def test_sweep_plot_errors_name_the_fix():
    # house style (STYLE.md, point 9): name the value, list what is allowed, suggest the nearest
    ds = sweep_dataset()
    ax = Figure().add_subplot()
    with pytest.raises(cable.CaseError, match="Did you mean 'conduction_velocity'"):
        cable.plot.sweep(ds, "conduction_velocty", "g_Na", ax)
    with pytest.raises(cable.CaseError, match="--fix temperature=6.3 --fix beat=0"):
        cable.plot.sweep(ds, "conduction_velocity", "g_Na", ax)
    with pytest.raises(cable.CaseError, match="not a dimension"):
        cable.plot.sweep(ds, "conduction_velocity", "g_K", ax)


def test_sweep_plots_differ_when_the_data_differ():
    # common practice: halving every CV must move the drawn curves
    ds = sweep_dataset()
    other = ds.copy(deep=True)
    other["conduction_velocity"] = other["conduction_velocity"] * 0.5
    draw = lambda d: lambda ax: cable.plot.sweep(d, "conduction_velocity", "g_Na", ax, hue="temperature",  # noqa: E731
                                                 select={"beat": 1})
    *_, a = render(draw(ds))
    *_, b = render(draw(other))
    assert np.mean(np.any(np.abs(a - b) > 8, axis=-1)) > 0.005


def test_sweep_plot_does_not_mark_points_without_a_result():
    # cable.sweep.store: a failed or not computed point has blocked = captured = -1 ("no_result");
    # it is neither a block nor a failed capture and gets no mark
    ds = sweep_dataset()
    ds["blocked"][2, 0, :] = -1
    ds["captured"][2, 0, :] = -1
    ax = Figure().add_subplot()
    cable.plot.sweep(ds, "conduction_velocity", "g_Na", ax, hue="temperature", select={"beat": 0})
    marked = sorted(float(v) for ln in ax.child_axes[0].get_lines() for v in ln.get_xdata())
    assert marked == [0.2, 0.2]   # the block (18.5 degC) and the no-capture (6.3 degC) of g_Na 0.2 only


def test_map_legend_stays_within_a_narrow_map(normal):
    # common practice: a legend wider than its axes would squeeze the map (constrained layout
    # makes room beside it); on a single-column figure the legend takes fewer columns instead
    region = '\n[[region]]\nstart = 0.5\nend = 1.0\nborder = 0.1\nscale = {g_Na = 0.5}\n'
    ds = normal.copy()
    ds.attrs = dict(normal.attrs, case=normal.attrs["case"] + region)
    fig = Figure(figsize=(8.5 / 2.54, 6.5 / 2.54), dpi=100, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    cable.plot.space_time(ds, ax, isochrones=1.0, time_axis="y")
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    legend = ax.get_legend().get_window_extent(renderer)
    assert legend.width <= ax.get_window_extent(renderer).width + 1.0   # [pixels], rounding
    assert ax.get_window_extent(renderer).width > 0.4 * fig.bbox.width  # the map keeps its room


def test_traces_of_ionic_currents_follow_the_model(tmp_path):
    # Hodgkin & Huxley 1952 (J Physiol 117:500, eq. 3): I_Na = g_Na m^3 h (V - E_Na), recomputed
    # here from the stored states with the model's default parameters (float32 samples, hence rtol)
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    case["output"] = {"every": 0.05, "states": ["m", "h", "n"]}
    path = tmp_path / "axon.nc"
    cable.simulate(case, output=path).close()
    model = cable.get_model("hodgkin-huxley-1952")
    g_na, e_na = model.parameter("g_Na").default, model.parameter("E_Na").default
    with cable.open_result(path) as ds:
        fig = Figure(figsize=(4, 6))
        axes = fig.subplots(3, 1, sharex=True)
        out = cable.plot.traces(ds, [0.5], list(axes), states=["h"], currents=["I_Na"])
        drawn = out[2].get_lines()[0].get_ydata()
        at = ds.sel(x=0.5)
        v, m, h = (at[k].values.astype(float) for k in ("vm", "state_m", "state_h"))
        np.testing.assert_allclose(drawn, g_na * m**3 * h * (v - e_na), rtol=1e-9, atol=1e-9)
        assert out[2].get_ylabel().startswith("I_Na") and "µA/cm²" in out[2].get_ylabel()
        assert drawn.min() < -100.0   # the upstroke's inward sodium current (HH 1952, Fig. 17; from memory)
        with pytest.raises(cable.CaseError, match="Did you mean 'I_Na'"):
            cable.plot.traces(ds, [0.5], list(axes), currents=["I_Nx"])
    short = tmp_path / "short.nc"
    case["output"]["states"] = ["h"]
    cable.simulate(case, output=short).close()
    with cable.open_result(short) as ds, pytest.raises(cable.CaseError, match=r"does not store m, n"):
        cable.plot.traces(ds, [0.5], list(axes), currents=["I_Na"])


def test_currents_use_the_parameters_the_file_stores(tmp_path, monkeypatch):
    # a region halves g_Na (I_Na = g_Na m^3 h (V - E_Na), Hodgkin & Huxley 1952, eq. 3): the file stores
    # the two distinct parameter rows and each node's row, and the currents are recomputed from them
    # without loading the case; a file without them (written before) gives the same from its case
    import importlib

    traces_module = importlib.import_module("cable.plot.traces")  # the module (cable.plot.traces is a function)

    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01, duration=3.0)
    case["output"] = {"every": 0.05, "states": ["m", "h", "n"]}
    case["region"] = [{"start": 0.4, "end": 0.6, "scale": {"g_Na": 0.5}}]
    path = tmp_path / "axon.nc"
    cable.simulate(case, output=path).close()
    model = cable.get_model("hodgkin-huxley-1952")
    g_na, e_na = model.parameter("g_Na").default, model.parameter("E_Na").default
    with cable.open_result(path) as ds:
        ds = ds.load()
    assert ds["membrane_parameters"].shape == (2, len(model.parameter_names))
    assert list(ds["parameter_name"].values) == list(model.parameter_names)
    assert ds["node_parameter_set"].sizes["x"] == ds.sizes["x"]
    from_case = {node: traces_module.ionic_current(ds.drop_vars(list(cable.io.schema.PARAMETER_TABLE)), "I_Na",
                                                   node)[0] for node in (0.2, 0.5)}

    def no_case(*args, **kwargs):
        raise AssertionError("the case was loaded although the file stores the parameters")

    monkeypatch.setattr(traces_module, "_parameters_from_case", no_case)
    for node, scale in ((0.2, 1.0), (0.5, 0.5)):
        at = ds.sel(x=node)
        v, m, h = (at[k].values.astype(float) for k in ("vm", "state_m", "state_h"))
        stored = traces_module.ionic_current(ds, "I_Na", node)[0]
        np.testing.assert_allclose(stored, scale * g_na * m**3 * h * (v - e_na), rtol=1e-9, atol=1e-9)
        np.testing.assert_array_equal(stored, from_case[node])  # the same rows, whichever way found
    # no parameters stored where the currents cannot be recomputed (not every state stored)
    case["output"]["states"] = ["h"]
    assert "membrane_parameters" not in cable.simulate(case)


def test_sweep_outcomes_without_a_value_sit_in_a_strip_below_the_axes():
    # block and no capture are outcomes, not values (common practice): they are drawn in a strip of their
    # own below the axes, one row per outcome, never on the value axis
    ds = sweep_dataset()
    fig, ax, _, _ = render(lambda ax: cable.plot.sweep(ds, "conduction_velocity", "g_Na", ax, hue="temperature",
                                                        select={"beat": 0}), size=(6, 4), dpi=100)
    assert all(ln.get_linestyle() != "None" for ln in ax.get_lines())     # only the curves on the value axis
    (strip,) = ax.child_axes
    assert [t.get_text() for t in strip.get_yticklabels()] == ["blocked", "no capture"]
    rows = {round(float(np.mean(ln.get_ydata()))): ln.get_xdata().tolist() for ln in strip.get_lines()}
    assert rows == {0: [0.2], 1: [0.2]}
    assert strip.get_xlabel() == "g_Na" and ax.get_ylabel() == "CV [m/s]"
    assert ax.get_legend().get_title().get_text() == "temperature [°C]"
    assert layout.problems(fig) == []


@pytest.mark.parametrize("ascii_unit, typeset", [("uA/cm^2", "µA/cm²"), ("degC", "°C"), ("ohm*cm", "Ω·cm"),
                                                 ("cm^2/ms", "cm²/ms"), ("uA/uF", "µA/µF"), ("um", "µm"),
                                                 ("cm^-1", "cm⁻¹"), ("percent", "%"), ("mmol/L", "mM"),
                                                 ("m/s", "m/s"), ("1", ""), (None, "")])
def test_units_are_typeset_for_print(ascii_unit, typeset):
    # SI brochure (BIPM 2019, 5.4): the prefix micro is µ, powers are superscripts, degree Celsius °C
    assert _common.unit_text(ascii_unit) == typeset


def test_short_names_of_swept_keys_and_measurements():
    assert _common.short_name("membrane.scale.g_Na") == "g_Na scale"
    assert _common.short_name("region.0.parameters.K_o") == "K_o"
    assert _common.short_name("g_Na", "swept case key membrane.scale.g_Na") == "g_Na scale"
    assert _common.short_name("conduction_velocity") == "CV"
