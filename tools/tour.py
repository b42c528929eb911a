"""Write docs/tour.ipynb from the cells below and execute it with nbclient, keeping its outputs.

Run after changing the tour (the test suite executes the stored notebook and compares
its printed outputs with the stored ones, tests/test_tour.py)::

    python tools/tour.py                  # about 15 s
"""
import sys
from pathlib import Path

import nbformat
from nbclient import NotebookClient

md, code = nbformat.v4.new_markdown_cell, nbformat.v4.new_code_cell
cells = [
    md("# A tour of cable in a notebook\n\n"
       "Three everyday uses, each on a small fibre so that the whole notebook runs in seconds:\n\n"
       "1. **conduction velocity under altered conductances** (a drug that blocks part of the sodium current);\n"
       "2. **block from a local injury** (a segment whose sodium conductance is depressed), and the severity "
       "at which it starts;\n"
       "3. **a space-time map** for a figure.\n\n"
       "The scenario is our own: the squid giant axon of Hodgkin & Huxley (1952) at 18.5 °C. "
       "cable is a research tool for modelling studies, not for clinical decisions. The test suite runs this "
       "notebook (`tests/test_tour.py`), so what it shows cannot go stale."),
    code("import cable\n\n"
         "axon = {\n"
         "    \"membrane\": {\"model\": \"hodgkin-huxley-1952\", \"temperature\": \"18.5 degC\"},\n"
         "    \"fiber\": {\"length\": \"2 cm\", \"dx\": \"200 um\", \"radius\": \"238 um\", \"axial_resistivity\": \"35.4 ohm*cm\"},\n"
         "    \"stimulus\": {\"S1\": {\"width\": \"1 mm\", \"amplitude\": \"500 uA/cm^2\", \"duration\": \"0.5 ms\"}},\n"
         "    \"numerics\": {\"dt\": \"10 us\"},\n"
         "    \"run\": {\"duration\": \"5 ms\"},\n"
         "    \"output\": {\"every\": \"0.05 ms\"},\n"
         "}\n"
         "case = cable.load_case(axon)\n"
         "case          # what the case implies, before any run"),
    md("The display above is the case's own summary: grid, space constant and the grid spacing against it, "
       "time steps, stimulus. The membrane model shows its states, parameters and currents with their units:"),
    code("cable.get_model(\"hodgkin-huxley-1952\")"),
    md("## 1. Conduction velocity under altered conductances\n\n"
       "Scale the sodium conductance as a drug that blocks a fraction of the channels would, and measure the "
       "conduction velocity of the wave (in the middle half of the fibre, by default)."),
    code("cv = {}\n"
         "for g in (1.0, 0.7, 0.5, 0.35):\n"
         "    ds = cable.simulate(case.with_overrides({\"membrane.scale.g_Na\": g}))\n"
         "    cv[g] = float(ds.conduction_velocity[0])\n"
         "    print(f\"g_Na x {g:<4}  CV {cv[g]:5.2f} m/s\")\n"
         "# less sodium current, slower conduction (Hodgkin & Huxley 1952)\n"
         "assert all(a > b for a, b in zip(cv.values(), list(cv.values())[1:]))"),
    md("## 2. Block from a local injury\n\n"
       "A 4 mm segment in the middle of the fibre keeps only a fraction of its sodium conductance, with a "
       "1 mm border over which it ramps back to normal. Does the wave get through?"),
    code("injured = dict(axon, region={\"injury\": {\"start\": \"8 mm\", \"end\": \"12 mm\", \"border\": \"1 mm\",\n"
         "                                         \"scale\": {\"g_Na\": 0.1}}})\n"
         "ds = cable.simulate(injured)\n"
         "print(f\"blocked: {bool(ds.blocked[0])}, last activated at x = {float(ds.block_x[0]):.2f} cm\")"),
    md("At which fraction of g_Na in the segment does conduction turn into block? `find_critical` narrows a "
       "bracket, here two values per round run side by side (`points=1` is plain bisection; the default "
       "follows the cores free):"),
    code("critical = cable.find_critical(injured, \"region.injury.scale.g_Na\", 0.05, 1.0, tolerance=0.02, points=2)\n"
         "value = critical.attrs[\"critical_value\"]\n"
         "print(f\"conduction fails below g_Na x {value:.3f} in the segment ({critical.attrs['runs']} runs in \"\n"
         "      f\"{critical.attrs['rounds']} rounds)\")"),
    md("## 3. A space-time map for a figure\n\n"
       "Time runs along the horizontal axis and position up the vertical one; the white line is the "
       "activation front, the cross the block site, and the hatched bar beside the map the injured segment "
       "(its border ramp in grey). Every figure function takes an Axes, so the map composes into figures of "
       "your own."),
    code("import io\n"
         "from IPython.display import Image\n"
         "from matplotlib.figure import Figure\n"
         "from cable.plot import layout\n\n"
         "fig = Figure(figsize=(6.3, 3.9), layout=\"constrained\")\n"
         "cable.plot.space_time(ds, fig.add_subplot())\n"
         "assert layout.problems(fig) == []      # no text over text, nothing cut at the edges\n"
         "png = io.BytesIO()\n"
         "fig.savefig(png, format=\"png\", dpi=110)   # or fig.savefig(\"map.pdf\") for the paper\n"
         "Image(png.getvalue())"),
]
nb = nbformat.v4.new_notebook(cells=cells)
nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
ROOT = Path(__file__).resolve().parents[1]
out = Path(sys.argv[1]) if len(sys.argv) > 1 else ROOT / "docs" / "tour.ipynb"
NotebookClient(nb, timeout=120, kernel_name="python3", resources={"metadata": {"path": str(out.parent.parent)}}).execute()
nbformat.write(nb, out)
print("wrote", out)
