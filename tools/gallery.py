"""Draw one figure of every kind the commands write, through the commands themselves.

The gallery is what a reader of a paper would see from each figure command: the
space-time map, traces (plain, and with states and ionic currents), a sweep plot and
the four protocol figures, each from a small case of our own. It only calls
``cable.cli.main``, so it runs against any version of the package on ``PYTHONPATH``
(``docs/figures/before_after.md`` compares two versions drawn this way).

Run::

    python tools/gallery.py --out docs/figures/after --dpi 120     # about a minute on 2 cores
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

AXON = """
[membrane]
model = "hodgkin-huxley-1952"
temperature = "18.5 degC"
[fiber]
length = "2 cm"
dx = "100 um"
radius = "238 um"
axial_resistivity = "35.4 ohm*cm"
[stimulus.S1]
width = "1 mm"
amplitude = "500 uA/cm^2"
duration = "0.5 ms"
[numerics]
dt = "10 us"
[run]
duration = "6 ms"
[output]
every = "0.05 ms"
states = ["m", "h", "n"]
"""

SWEEP = AXON.replace('states = ["m", "h", "n"]', "") + """
[sweep]
"membrane.scale.g_Na" = {start = 1.0, stop = 0.2, num = 9}
"membrane.temperature" = ["6.3 degC", "18.5 degC"]
"""

#: a Mitchell & Schaeffer (2003) strand in the tissue form of ten Tusscher et al. (2004)
STRAND = """
[membrane]
model = "mitchell-schaeffer-2003"
[fiber]
length = "0.5 cm"
dx = "250 um"
conductivity = 6.17
surface_to_volume = 2000
capacitance = 2
[stimulus.S1]
width = "1 mm"
amplitude = 100
duration = 1
count = 2
cycle_length = 600
[numerics]
dt = 0.02
[run]
duration = 400
[output]
every = 1
"""

CELL = AXON.replace("length = \"2 cm\"", "length = \"1 cm\"")


def commands(tmp: Path, out: Path, dpi: int | None = None) -> list[list[str]]:
    axon, sweep, strand, cell = (tmp / f"{n}.toml" for n in ("axon", "sweep", "strand", "cell"))
    axon.write_text(AXON)
    sweep.write_text(SWEEP)
    strand.write_text(STRAND)
    cell.write_text(CELL)
    zone = str(ROOT / "cases" / "ischaemic_zone.toml")
    cmds = [
        ["run", zone, "-o", str(tmp / "zone.nc"), "-q"],
        ["map", str(tmp / "zone.nc"), "-o", str(out / "map.png")],
        ["run", str(axon), "-o", str(tmp / "axon.nc"), "-q"],
        ["traces", str(tmp / "axon.nc"), "-o", str(out / "traces.png")],
        ["traces", str(tmp / "axon.nc"), "--at", "0.5", "1.5", "--states", "m", "h", "n",
         "--currents", "I_Na", "I_K", "-o", str(out / "traces_panels.png")],
        ["sweep", str(sweep), "-o", str(tmp / "sweep.nc"), "--workers", "2"],
        ["plot-sweep", str(tmp / "sweep.nc"), "--y", "conduction_velocity", "--x", "g_Na", "--curves-by", "temperature",
         "-o", str(out / "plot_sweep.png")],
        ["threshold", str(cell), "--durations", "0.1", "0.5", "2", "5", "--mode", "cell", "--observe", "10",
         "--tolerance", "0.02", "-q", "--figure", str(out / "threshold.png")],
        ["erp", str(strand), "--tolerance", "8", "-q", "--figure", str(out / "erp.png")],
        ["restitution", str(strand), "--intervals", "600", "450", "380", "340", "300", "-q",
         "--figure", str(out / "restitution.png")],
        ["converge", str(axon), "--levels", "3", "--ratio", "dt/dx", "-q", "--figure", str(out / "converge.png")],
    ]
    if dpi:
        for cmd in cmds:
            if cmd[0] in ("map", "traces", "plot-sweep"):
                cmd += ["--figure-dpi", str(dpi)]
            elif "--figure" in cmd:
                cmd += ["--figure-dpi", str(dpi)]
    return cmds


def main(argv=None) -> int:
    from cable.cli import main as cable

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, default=ROOT / "docs" / "figures" / "gallery", help="folder for the figures")
    ap.add_argument("--dpi", type=int, help="resolution of the PNGs (default: the commands' own)")
    args = ap.parse_args(argv)
    args.out.mkdir(parents=True, exist_ok=True)
    failed = 0
    with tempfile.TemporaryDirectory() as tmp:
        for cmd in commands(Path(tmp), args.out, args.dpi):
            print("cable " + " ".join(cmd), flush=True)
            rc = cable(cmd)
            failed += rc != 0
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
