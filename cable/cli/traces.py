"""``cable traces OUT.nc --at 1cm 2cm 3cm``: vm (stored states, ionic currents) against time at positions."""

from cable.cli import _figures

NAME = "traces"
HELP = "draw vm (and stored states or ionic currents) against time at chosen positions of a result file"
ORDER = 31


def add_arguments(p):
    p.add_argument("result", help="result file (.nc) written by `cable run`")
    p.add_argument("--at", nargs="+", metavar="POS", help="positions, e.g. 1cm 2cm 3cm (bare numbers in cm); "
                   "default: a quarter, half and three quarters of the fibre")
    p.add_argument("--states", nargs="+", default=[], metavar="NAME",
                   help="stored states to draw below vm (the case's output.states), e.g. h m (default: none)")
    p.add_argument("--currents", nargs="+", default=[], metavar="NAME",
                   help="ionic currents to draw below the states, e.g. I_Na I_K (`cable models MODEL` lists them); "
                        "recomputed from the stored states, so the run must store all of them (output.states); default: none")
    p.add_argument("--t-window", nargs=2, metavar=("A", "B"), help="time range; bare numbers in ms (default: the whole run)")
    p.add_argument("--ecg", action="store_true", help="add a panel of the pseudo-ECG (a case with [[electrode]]; default: no panel)")
    _figures.add_figure_options(p, ".traces.png", stacked=True)


def run(args):
    import numpy as np

    from cable.io.netcdf import open_result, require
    from cable.plot import traces

    out = _figures.output_path(args, ".traces.png")
    with open_result(args.result) as ds:
        require(ds, ["vm"], args.result, "draw traces")
        if args.at:
            at = [_figures.quantity(a, "length", "--at") for a in args.at]
        elif "x" in ds.dims:
            x = ds["x"].values
            at = list(x[0] + (x[-1] - x[0]) * np.array([0.25, 0.5, 0.75]))
        else:
            at = []
        t_window = _figures.pair(args.t_window, "time", "--t-window")
        if args.ecg:
            require(ds, ["pseudo_ecg"], args.result, "draw the pseudo-ECG (add an [[electrode]] to the case)")
        panels = 1 + len(args.states) + len(args.currents) + int(args.ecg)
        _figures.stacked_size(args, panels)
        with _figures.drawing(args) as fig:
            axes = fig.subplots(panels, 1, sharex=True, squeeze=False)[:, 0]
            traces(ds, at, list(axes), states=args.states, currents=args.currents, t_window=t_window)
            if args.ecg:
                from cable.plot import pseudo_ecg

                axes[-2].set_xlabel("")
                pseudo_ecg(ds, axes[-1], t_window=t_window)
            _figures.finish(fig, args, out)
    return 0
