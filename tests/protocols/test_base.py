"""The protocol contract (cable/protocols/base.py) and its registry (cable/protocols/__init__.py).

A protocol is one file: the test below writes a tiny one into a folder of its own, adds the
folder to the package's path, and sees it listed, summarised by ``cable info`` and drawn by
``protocol_figure`` with nothing else changed.
"""

import importlib
import sys
import textwrap

import numpy as np
import pytest
from matplotlib.figure import Figure

import cable
import cable.protocols
from cable.cli import main
from cable.protocols import get_protocol, protocol_names, protocol_of, protocols
from conftest import hh_axon_case

TINY = '''
"""A tiny protocol of a test: the time to a twitch, one value per trial (invented numbers)."""

import numpy as np

from cable.io import schema
from cable.protocols._pacing import as_case
from cable.protocols.base import Protocol

TABLE = schema.Table({"twitch_time": schema.Var(("trial",), "ms", "time to the twitch"),
                      "trial": schema.Var(("trial",), "1", "trial number")},
                     {"trials": "trials made"})


def twitch(case, *, trials: int = 3):
    """Twitch times.

    Parameters
    ----------
    case : dict
    trials : int
        Number of trials.
    """
    case = as_case(case)
    return schema.dataset(("tiny_twitch", TABLE), {"twitch_time": 1.5 * np.arange(1, trials + 1)},
                          {"trial": np.arange(trials)}, {"trials": trials}, case=case, title="tiny twitch",
                          description="twitch")


def summary(ds):
    return f"tiny twitch: {ds.attrs['trials']} trials, last at {float(ds['twitch_time'][-1]):g} ms"


def figure(ds, fig):
    ax = fig.add_subplot()
    ax.plot(ds["trial"].values, ds["twitch_time"].values, marker="o")
    ax.set_ylabel("time to the twitch [ms]")


PROTOCOL = Protocol(name="tiny_twitch", title="twitch", run=twitch, summary=summary, figure=figure,
                    table=TABLE, order=99)
'''


@pytest.fixture
def tiny(tmp_path, monkeypatch):
    """The tiny protocol, in a folder added to cable.protocols' package path."""
    (tmp_path / "tiny_twitch.py").write_text(textwrap.dedent(TINY))
    monkeypatch.setattr(cable.protocols, "__path__", [*cable.protocols.__path__, str(tmp_path)])
    importlib.invalidate_caches()
    yield importlib.import_module("cable.protocols.tiny_twitch")
    sys.modules.pop("cable.protocols.tiny_twitch", None)


def test_a_new_protocol_is_one_file(tiny, tmp_path, capsys):
    assert protocol_names()[-1] == "tiny_twitch"
    assert get_protocol("tiny_twitch").options == ("trials",)
    ds = tiny.twitch(hh_axon_case(length=1.0), trials=4)
    assert protocol_of(ds) is tiny.PROTOCOL and ds.attrs["cable_protocol"] == "tiny_twitch"
    assert ds["twitch_time"].attrs == {"units": "ms", "long_name": "time to the twitch"}
    # listed, summarised by `cable info` from its file, drawn by protocol_figure
    from cable.io.netcdf import write_dataset

    path = tmp_path / "twitch.nc"
    write_dataset(ds, path)
    assert main(["info", str(path)]) == 0
    assert "tiny twitch: 4 trials, last at 6 ms" in capsys.readouterr().out
    fig = cable.plot.protocol_figure(ds, Figure())
    (line,) = fig.axes[0].get_lines()
    np.testing.assert_array_equal(line.get_ydata(), ds["twitch_time"].values)


def test_the_package_s_protocols():
    assert protocol_names() == ["threshold", "refractory", "restitution", "converge", "calibrate", "critical"]
    commands = {m.name for m in __import__("pkgutil").iter_modules(cable.cli.__path__)}
    for protocol in protocols():
        module = importlib.import_module(f"cable.protocols.{protocol.name}")
        assert module.PROTOCOL is protocol
        assert protocol.command in commands            # cable/cli/<command>.py runs it
        doc = protocol.run.__doc__
        for option in protocol.options:              # each option is documented by its function
            assert f"\n    {option}" in doc or f", {option}" in doc, (protocol.name, option)
        assert set(protocol.outputs.variables)           # declared in cable.io.schema.PROTOCOLS


def test_an_unknown_protocol_name_is_refused():
    import xarray as xr

    ds = xr.Dataset(attrs={"cable_protocol": "refractroy"})
    with pytest.raises(cable.CaseError, match="Did you mean 'refractory'"):
        protocol_of(ds)
    assert protocol_of(xr.Dataset()) is None                      # a run, a sweep: no protocol


def test_an_old_result_is_recognised_by_the_old_rule_with_a_note():
    # results written before cable_protocol carry only the free-text 'protocol' attribute
    from cable.cli.summary import summarise

    ds = cable.calibrate(hh_axon_case(length=1.0, dx=0.04, dt=0.02, duration=6.0), "fiber.axial_resistivity",
                         "conduction_velocity", 15.0, rtol=1e-2)
    old = ds.copy()
    del old.attrs["cable_protocol"]
    assert protocol_of(old) is get_protocol("calibrate")
    text = summarise(old)
    assert text.startswith(summarise(ds))
    assert text.splitlines()[-1].startswith("deprecated: this result has no 'cable_protocol' attribute")
