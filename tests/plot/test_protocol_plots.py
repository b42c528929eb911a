"""Figures of the protocol results: labels, legends, the marks at the protocol's values, data followed.

Each figure is drawn from a real, small protocol result (Hodgkin & Huxley 1952 membrane
and axon, Mitchell & Schaeffer 2003 strand); the checks compare what is drawn with the
Dataset's own variables, never with stored numbers or images.
"""

import numpy as np
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

import cable
from cable.plot import layout
from cable.cli import main
from conftest import hh_axon_case, ms_strand

#: fraction of pixels that must change between figures of different results; a shifted
#: curve or line moves far more pixels than antialiasing noise (common practice)
MIN_CHANGED_FRACTION = 0.01
#: a channel difference above this counts as a changed pixel [0-255]: antialiasing of the
#: same drawing gives 0 (the same data draws the same pixels, checked below)
PIXEL_STEP = 8
#: drawn values are the result's float64 values or closed forms of them: round-off only
EXACT = 1e-9


@pytest.fixture(scope="module")
def sd():
    # single-cell HH membrane, four durations from well below to well above the chronaxie
    case = hh_axon_case(length=1.0, dx=0.02, dt=0.01)
    return cable.strength_duration(case, [0.1, 0.5, 2.0, 5.0], tolerance=0.02, mode="cell", observe=10.0)


@pytest.fixture(scope="module")
def erp():
    return cable.refractory_period(ms_strand(1), tolerance=8.0)


@pytest.fixture(scope="module")
def rest():
    # 300 ms is inside the refractory period of the 600 ms beat (APD90 ~ 280 ms): the last S2 fails
    ds = cable.restitution(ms_strand(2, 600.0), [600, 450, 380, 340, 300], protocol="s1s2")
    assert ds["propagated"].values.tolist() == [1, 1, 1, 1, 0]
    return ds


@pytest.fixture(scope="module")
def conv():
    case = hh_axon_case(length=1.5, dx=0.04, dt=0.02, duration=3.9, output={"every": 0.2})
    return cable.convergence(case, levels=3, ratio="dt/dx")


def render(draw, size=(5, 3.5), dpi=80):
    fig = Figure(figsize=size, dpi=dpi, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    draw(ax)
    fig.canvas.draw()
    return ax, np.asarray(fig.canvas.buffer_rgba())[..., :3].astype(float)


def legend_texts(ax):
    return [t.get_text() for t in ax.get_legend().get_texts()]


def lines_labelled(ax, start):
    return [ln for ln in ax.get_lines() if ln.get_label().startswith(start)]


def changed(a, b):
    return float(np.mean(np.any(np.abs(a - b) > PIXEL_STEP, axis=-1)))


# --------------------------------------------------------------------------- strength-duration

def test_strength_duration_thresholds_fits_rheobase_and_chronaxie(sd):
    ax, _ = render(lambda ax: cable.plot.strength_duration(sd, ax))
    assert ax.get_xlabel() == "stimulus duration [ms]"          # house style: quantity [unit]
    assert ax.get_ylabel() == "threshold [µA/cm²]"   # units typeset
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    texts = legend_texts(ax)
    assert texts[0] == "computed threshold"
    assert texts[1].startswith("Lapicque fit: I_rh") and texts[2].startswith("Weiss fit: I_rh")
    assert texts[3:] == ["rheobase I_rh of each fit", "chronaxie c: threshold 2 I_rh"]
    (points,) = lines_labelled(ax, "computed threshold")
    assert np.array_equal(points.get_xdata(), sd["duration"].values)
    assert np.array_equal(points.get_ydata(), sd["threshold"].values)
    for key, law in (("lapicque", "Lapicque"), ("weiss", "Weiss")):
        rh, c = float(sd[f"rheobase_{key}"]), float(sd[f"chronaxie_{key}"])
        assert f"I_rh {rh:.3g} µA/cm², c {c:.3g} ms" in [t for t in texts if t.startswith(law)][0]
        (curve,) = lines_labelled(ax, f"{law} fit")
        d, i = np.asarray(curve.get_xdata()), np.asarray(curve.get_ydata())
        # each fitted law in its own form (from memory): Lapicque 1907 (J Physiol Pathol Gen 9:620)
        # I = I_rh / (1 - exp(-d/tau)) with c = tau ln 2; Weiss 1901 (Arch Ital Biol 35:413)
        # I = I_rh (1 + c/d)
        law_curve = rh / (1 - np.exp(-d * np.log(2) / c)) if key == "lapicque" else rh * (1 + c / d)
        assert np.allclose(i, law_curve, rtol=EXACT)
        # chronaxie: the duration at which the threshold is twice the rheobase (Lapicque's definition)
        assert np.interp(np.log(c), np.log(d), np.log(i)) == pytest.approx(np.log(2 * rh), abs=1e-3)
        colour = curve.get_color()
        marks = [ln for ln in ax.get_lines() if ln.get_markeredgecolor() == colour and np.size(ln.get_xdata()) == 1]
        assert [(float(m.get_xdata()[0]), float(m.get_ydata()[0])) for m in marks] == [(c, 2 * rh)]
        rheo = [ln for ln in ax.get_lines() if ln.get_color() == colour and ln.get_linestyle() == ":"]
        assert len(rheo) == 1 and np.allclose(rheo[0].get_ydata(), rh)


def test_strength_duration_marks_a_duration_without_threshold(sd):
    # a NaN threshold (no amplitude up to the search limit excited) is marked, not dropped silently,
    # in a strip below the axes (it has no value to draw on the amplitude axis)
    ds = sd.copy(deep=True)
    ds["threshold"][0] = np.nan
    ax, _ = render(lambda ax: cable.plot.strength_duration(ds, ax))
    (strip,) = ax.child_axes
    (ring,) = lines_labelled(strip, "no threshold found")
    assert strip.get_xlabel() == "stimulus duration [ms]"
    assert list(ring.get_xdata()) == [float(ds["duration"][0])]
    (points,) = lines_labelled(ax, "computed threshold")
    assert list(points.get_xdata()) == list(ds["duration"].values[1:])


def test_strength_duration_linear_axes_when_asked(sd):
    ax, _ = render(lambda ax: cable.plot.strength_duration(sd, ax, logx=False, logy=False, fits=False))
    assert ax.get_xscale() == "linear" and ax.get_yscale() == "linear"
    assert legend_texts(ax) == ["computed threshold"]


def test_charge_duration_is_weiss_line(sd):
    # Weiss 1901 (Arch Ital Biol 35:413; from memory): Q = I_rh (d + c), a line of slope I_rh
    ax, _ = render(lambda ax: cable.plot.charge_duration(sd, ax))
    assert ax.get_ylabel() == "charge [nC/cm²]"
    (points,) = lines_labelled(ax, "computed threshold charge")
    assert np.array_equal(points.get_ydata(), sd["charge"].values)
    rh, c = float(sd["rheobase_weiss"]), float(sd["chronaxie_weiss"])
    (line,) = lines_labelled(ax, "Weiss fit")
    d, q = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
    assert np.diff(q)[0] / np.diff(d)[0] == pytest.approx(rh, rel=EXACT)
    assert np.interp(0.0, d, q) == pytest.approx(rh * c, rel=EXACT)
    # the computed charge rises with duration (the check; common practice)
    assert np.all(np.diff(points.get_ydata()) > 0)


# --------------------------------------------------------------------------- refractoriness

def test_refractory_trials_by_outcome_and_the_window(erp):
    ax, _ = render(lambda ax: cable.plot.refractory(erp, ax), size=(7, 3.5))
    assert ax.get_xlabel() == "S1-S2 coupling interval [ms]"
    assert [t.get_text() for t in ax.get_yticklabels()] == ["no capture", "local response only", "propagated"]
    ci = erp["coupling_interval"].values
    prop = erp["s2_propagated"].values.astype(bool)
    cap = erp["s2_captured"].values.astype(bool)
    for label, mask, row in (("S2 propagated", prop, 2), ("S2 local response only", cap & ~prop, 1),
                             ("S2 no capture", ~cap, 0)):
        found = lines_labelled(ax, label)
        if not mask.any():
            assert not found
            continue
        assert np.array_equal(found[0].get_xdata(), ci[mask]) and np.all(found[0].get_ydata() == row)
    # every trial drawn once (a propagated S2 counts as propagated, not also as local)
    assert sum(np.size(ln.get_xdata()) for ln in lines_labelled(ax, "S2 ")) == ci.size
    e, local, apd = float(erp["erp"]), float(erp["local_refractory_period"]), float(erp["apd90_s1"])
    for start, value in (("ERP", e), ("local refractory period", local), ("APD90 of the last S1", apd)):
        (ln,) = lines_labelled(ax, start)
        assert np.allclose(ln.get_xdata(), value)
        assert f"{value:.1f} ms" in ln.get_label()      # one decimal in every label [ms]
    # the vulnerable window: local response without propagation (the definition)
    if e > local:
        (span,) = [p for p in ax.patches if p.get_hatch()]
        # axvspan: a Rectangle from matplotlib 3.9 on (x in data), a Polygon before
        x = [span.get_x(), span.get_x() + span.get_width()] if hasattr(span, "get_width") else span.get_xy()[:, 0]
        assert (min(x), max(x)) == pytest.approx((local, e), rel=EXACT)
        assert any(t.startswith("vulnerable window") for t in legend_texts(ax))


# --------------------------------------------------------------------------- restitution

def test_restitution_curve_and_maximal_slope(rest):
    ax, _ = render(lambda ax: cable.plot.restitution(rest, ax))
    assert ax.get_xlabel() == "diastolic interval [ms]" and ax.get_ylabel() == "APD90 [ms]"
    ok = rest["propagated"].values.astype(bool)
    di, apd = rest["diastolic_interval"].values[ok], rest["apd90"].values[ok]
    order = np.argsort(di)
    (curve,) = lines_labelled(ax, "APD90 (S1-S2)")
    assert np.array_equal(curve.get_xdata(), di[order]) and np.array_equal(curve.get_ydata(), apd[order])
    # APD90 shortens as DI shortens (the restitution check; common practice)
    assert np.all(np.diff(curve.get_ydata()) > 0)
    s, s_di = float(rest["max_slope"]), float(rest["max_slope_di"])
    (chord,) = lines_labelled(ax, "maximal slope")
    x, y = chord.get_xdata(), chord.get_ydata()
    assert (y[1] - y[0]) / (x[1] - x[0]) == pytest.approx(s, rel=EXACT)
    assert x[0] < s_di < x[1]
    assert chord.get_label() == f"maximal slope {s:.2f} at DI {s_di:.1f} ms"
    # the S2 that failed never activated the site, so it has no DI: it is named by its coupling
    # interval in the legend, not drawn at an invented DI
    assert not np.isfinite(rest["diastolic_interval"].values[~ok]).any()
    (fails,) = lines_labelled(ax, "no propagation")
    assert fails.get_label() == "no propagation at S1-S2 300.0 ms" and np.size(fails.get_xdata()) == 0
    assert not ax.child_axes


def test_cv_restitution(rest):
    ax, _ = render(lambda ax: cable.plot.cv_restitution(rest, ax))
    assert ax.get_ylabel() == "conduction velocity [m/s]"
    (curve,) = lines_labelled(ax, "conduction velocity")
    ok = rest["propagated"].values.astype(bool)
    assert np.array_equal(np.sort(curve.get_ydata()), np.sort(rest["conduction_velocity"].values[ok]))
    # CV falls at short DI (CV restitution; common practice)
    assert np.all(np.diff(curve.get_ydata()) > 0)
    cell = rest.copy()
    cell["conduction_velocity"] = cell["conduction_velocity"] * np.nan
    with pytest.raises(cable.CaseError, match="no finite conduction_velocity"):
        cable.plot.cv_restitution(cell, Figure().add_subplot())


def test_dynamic_train_not_one_to_one_is_ringed(rest):
    ds = rest.copy()
    ds.attrs = dict(rest.attrs, protocol="dynamic")
    ds["one_to_one"] = ("point", np.array([1, 1, 1, 0, 0], dtype=np.int8))
    ax, _ = render(lambda ax: cable.plot.restitution(ds, ax))
    (ring,) = lines_labelled(ax, "last beat of a train that was not 1:1")
    assert list(ring.get_xdata()) == [float(ds["diastolic_interval"][3])]
    assert lines_labelled(ax, "APD90 (dynamic)")


# --------------------------------------------------------------------------- convergence

def test_convergence_values_extrapolation_and_case_grid(conv):
    ax, _ = render(lambda ax: cable.plot.convergence(conv, ax))
    assert ax.get_xscale() == "log"
    assert ax.get_xlabel() == "dx [µm]" and ax.get_ylabel() == "CV [m/s]"
    p = float(conv["cv_observed_order"])
    texts = legend_texts(ax)
    assert texts[0] == f"CV: observed order {p:.2f} (formal {conv.attrs['formal_order']:g})"
    (curve,) = lines_labelled(ax, "CV:")
    assert np.array_equal(curve.get_xdata(), conv["dx"].values)
    assert np.array_equal(curve.get_ydata(), conv["conduction_velocity"].values)
    (ext,) = lines_labelled(ax, "Richardson extrapolation")
    assert np.allclose(ext.get_ydata(), float(conv["cv_extrapolated"]))
    (mine,) = lines_labelled(ax, "the case's grid")
    assert float(mine.get_xdata()[0]) == float(conv["dx"][0])
    assert f"error {100 * float(conv['cv_relative_error']):.2g} %" in mine.get_label()
    assert [t.get_text() for t in ax.get_xticklabels()] == [f"{v * 1e4:.3g}" for v in conv["dx"].values]  # µm


def test_convergence_error_panel_has_the_formal_slope(conv):
    ax, _ = render(lambda ax: cable.plot.convergence(conv, ax, error=True))
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    assert ax.get_ylabel() == "CV error [%]"
    (ref,) = lines_labelled(ax, "slope")
    x, y = np.asarray(ref.get_xdata()), np.asarray(ref.get_ydata())
    slope = np.log(y[0] / y[-1]) / np.log(x[0] / x[-1])
    assert slope == pytest.approx(conv.attrs["formal_order"], rel=EXACT)
    (curve,) = lines_labelled(ax, "CV:")
    ext = float(conv["cv_extrapolated"])
    assert np.allclose(curve.get_ydata(), 100 * np.abs(conv["conduction_velocity"].values - ext) / ext, rtol=EXACT)
    # the extrapolated value is closer to the limit than any single grid, so the error falls with dx
    # (Richardson 1911, Phil Trans R Soc A 210:307; from memory)
    assert np.all(np.diff(curve.get_ydata()) < 0)


def test_convergence_apd90_and_no_propagation(conv):
    ds = conv.copy(deep=True)
    ds["propagated"][0] = 0
    ds["conduction_velocity"][0] = np.nan
    ds.attrs["numerical_block"] = 1
    ax, _ = render(lambda ax: cable.plot.convergence(ds, ax, quantity="apd90"))
    assert ax.get_ylabel() == "APD90 [ms]"
    (fail,) = lines_labelled(ax.child_axes[0], "no propagation (numerical block)")
    assert float(fail.get_xdata()[0]) == float(ds["dx"][0])
    with pytest.raises(cable.CaseError, match="Did you mean 'cv'"):
        cable.plot.convergence(conv, ax, quantity="cvv")


# --------------------------------------------------------------------------- shared

def test_wrong_result_names_the_protocol(sd, erp):
    # house style (STYLE.md, point 9): name what is missing and where it comes from
    ax = Figure().add_subplot()
    with pytest.raises(cable.CaseError, match="cable.strength_duration"):
        cable.plot.strength_duration(erp, ax)
    with pytest.raises(cable.CaseError, match="cable.refractory_period"):
        cable.plot.refractory(sd, ax)
    with pytest.raises(cable.CaseError, match="none of strength-duration"):
        cable.plot.protocol_figure(sd[["trials"]], Figure())


def test_protocol_figure_panels(sd, erp, rest, conv):
    panels = {}
    for name, ds in (("sd", sd), ("erp", erp), ("rest", rest), ("conv", conv)):
        fig = cable.plot.protocol_figure(ds, Figure(layout="constrained"))
        drawn = [ax for ax in fig.axes if ax.axison]
        panels[name] = [ax.get_ylabel() for ax in drawn]
        assert fig.get_suptitle() == ""          # no title built from the command's tokens
        # a legend below each panel names each of its entries once
        legends = fig.legends + [leg for sub in fig.subfigs for leg in sub.legends]
        assert len(legends) == len(drawn)
        for legend in legends:
            names = [t.get_text() for t in legend.get_texts()]
            assert len(names) == len(set(names)) and names
        assert layout.problems(fig) == []
    assert panels == {"sd": ["threshold [µA/cm²]", "charge [nC/cm²]"],
                      "erp": ["S2 outcome"],
                      "rest": ["APD90 [ms]", "conduction velocity [m/s]"],
                      "conv": ["CV [m/s]", "CV error [%]", "APD90 [ms]"]}
    titled = cable.plot.protocol_figure(sd, Figure(layout="constrained"), title="HH membrane")
    assert titled.get_suptitle() == "HH membrane"


def shifted(ds, **factors):
    out = ds.copy(deep=True)
    for name, f in factors.items():
        out[name] = out[name] * f
    return out


@pytest.mark.parametrize("which", ["sd", "erp", "rest", "conv"])
def test_figures_differ_when_the_data_differ(which, sd, erp, rest, conv):
    # common practice: other numbers must move what is drawn, the same numbers must not
    ds, draw, other = {
        "sd": (sd, cable.plot.strength_duration,
               shifted(sd, threshold=1.6, rheobase_lapicque=1.6, rheobase_weiss=1.6)),
        "erp": (erp, cable.plot.refractory, shifted(erp, erp=1.05, local_refractory_period=0.97)),
        "rest": (rest, cable.plot.restitution, shifted(rest, apd90=0.8, max_slope=1.3)),
        "conv": (conv, cable.plot.convergence, shifted(conv, conduction_velocity=1.03, cv_extrapolated=0.98)),
    }[which]

    def fixed(d):   # the same axis limits for both, so that only the drawing can differ
        def go(ax):
            draw(d, ax, legend=False)
            ax.set_xlim(*limits[0])
            ax.set_ylim(*limits[1])
        return go

    probe, _ = render(lambda ax: draw(ds, ax, legend=False))
    limits = (probe.get_xlim(), probe.get_ylim())
    _, a = render(fixed(ds))
    _, a2 = render(fixed(ds))
    _, b = render(fixed(other))
    assert np.array_equal(a, a2), "the same data draws the same pixels"
    assert changed(a, b) > MIN_CHANGED_FRACTION


# --------------------------------------------------------------------------- command line

def test_protocol_command_writes_figure(tmp_path, capsys):
    from cable.case.load import dumps_toml

    case = tmp_path / "axon.toml"
    case.write_text(dumps_toml(hh_axon_case(length=1.0, dx=0.02, dt=0.01)))
    out = tmp_path / "sd.png"
    assert main(["threshold", str(case), "--mode", "cell", "--durations", "0.2", "2", "--tolerance", "0.05",
                 "--observe", "10", "-q", "--figure", str(out), "--figure-size", "12", "8",
                 "--figure-dpi", "50"]) == 0
    assert f"wrote {out}" in capsys.readouterr().out
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"       # the PNG signature (PNG specification)
    # bad figure options fail before any run, naming the option and the fix (house style)
    assert main(["threshold", str(case), "--durations", "1", "--figure", str(tmp_path / "sd.pgn")]) == 2
    assert "--figure" in (err := capsys.readouterr().err) and "Did you mean '.png'" in err
    assert main(["erp", str(case), "--figure", str(tmp_path / "none" / "erp.png")]) == 2
    assert "does not exist" in capsys.readouterr().err
    assert main(["converge", str(case), "--figure", str(out), "--figure-size", "0", "5"]) == 2
    assert "--figure-size" in capsys.readouterr().err


@pytest.mark.parametrize("size", [None, ("8.5", "12")])
def test_protocol_figures_at_the_command_sizes_pass_the_layout_check(size, sd, erp, rest, conv):
    # what --figure writes (default 16 x 10 cm, and a single journal column, panels stacked): checked with the
    # renderer's extents (cable.plot.layout) and every value axis labelled with its unit
    from types import SimpleNamespace

    from cable.cli import _figures

    for ds in (sd, erp, rest, conv):
        with _figures.drawing(SimpleNamespace(size=size, dpi=100, title=None)) as fig:
            cable.plot.protocol_figure(ds, fig)
            assert layout.problems(fig) == []
            for text in layout.axis_labels(fig):
                assert text == "S2 outcome" or text.endswith("]"), text
