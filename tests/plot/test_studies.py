"""Figures of the studies: calibration runs, a ring's revolutions, the pseudo-ECG (cable.plot.studies)."""

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402

import cable  # noqa: E402
from cable.plot._common import new_figure  # noqa: E402
from tests.conftest import hh_axon_case  # noqa: E402


@pytest.fixture(scope="module")
def ring_result(tmp_path_factory):
    case = hh_axon_case(length=4.0, dx=0.05, dt=0.005, duration=10.0)
    case["fiber"].update(closed=True, initial="one-way")
    path = tmp_path_factory.mktemp("ring") / "ring.nc"
    cable.simulate(case, output=path).close()
    return path


@pytest.fixture(scope="module")
def ecg_result(tmp_path_factory):
    case = hh_axon_case(length=1.0, dx=0.05, dt=0.005, duration=5.0)
    case["electrode"] = [{"x": "2 cm"}, {"x": "0.5 cm", "distance": "0.5 cm"}]
    path = tmp_path_factory.mktemp("ecg") / "ecg.nc"
    cable.simulate(case, output=path).close()
    return path


def test_calibration_figure():
    from cable.plot import calibration

    ds = cable.calibrate(hh_axon_case(length=1.0, dx=0.05, duration=3.0), "fiber.axial_resistivity",
                         "conduction_velocity", 15.0)
    ax = calibration(ds, new_figure().add_subplot())
    assert len(ax.lines) >= 4 and "fiber.axial_resistivity" in ax.get_xlabel()


def test_ring_figure_and_map(ring_result, tmp_path):
    from cable.cli import main
    from cable.plot import ring

    with cable.open_result(ring_result) as ds:
        axes = ring(ds, new_figure().subplots(2, 1))
        assert np.isfinite(axes[0].lines[0].get_ydata()[1:]).all()
    assert main(["map", str(ring_result), "-o", str(tmp_path / "m.png")]) == 0  # the ring unrolled


def test_traces_with_the_pseudo_ecg(ecg_result, ring_result, tmp_path, capsys):
    from cable.cli import main
    from cable.plot import pseudo_ecg

    with cable.open_result(ecg_result) as ds:
        ax = pseudo_ecg(ds, new_figure().add_subplot())
        assert len([line for line in ax.lines if np.size(line.get_xdata()) == ds.sizes["t"]]) == 2
    assert main(["traces", str(ecg_result), "--ecg", "-o", str(tmp_path / "t.png")]) == 0
    assert (tmp_path / "t.png").stat().st_size > 0
    assert main(["traces", str(ring_result), "--ecg", "-o", str(tmp_path / "r.png")]) == 2
    assert "pseudo_ecg" in capsys.readouterr().err
