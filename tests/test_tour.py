"""docs/tour.ipynb runs as stored: executed here with nbclient, its printed outputs as committed.

The notebook's own cells assert what they show (CV falls with g_Na, Hodgkin & Huxley
1952; the map passes the layout check); this test executes a copy and compares each
code cell's printed text with the stored outputs, so the tour cannot go stale.
"""

import os
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

ROOT = Path(__file__).resolve().parents[1]
TOUR = ROOT / "docs" / "tour.ipynb"
#: the whole tour, kernel start included, is meant to run in well under this [s]
#: (a hang guard, not a speed check)
CELL_TIMEOUT_S = 120


def printed(nb) -> list[str]:
    out = []
    for cell in nb.cells:
        if cell.cell_type != "code":
            continue
        out.append("".join(o.get("text", "") for o in cell.get("outputs", []) if o.output_type == "stream"))
    return out


def test_the_tour_runs_and_shows_what_is_stored(monkeypatch):
    stored = nbformat.read(TOUR, as_version=4)
    assert all(c.get("outputs") for c in stored.cells if c.cell_type == "code"), "the tour is stored executed"
    # the kernel imports this checkout's cable, whatever else is installed
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    fresh = nbformat.read(TOUR, as_version=4)
    client = nbclient.NotebookClient(fresh, timeout=CELL_TIMEOUT_S, kernel_name="python3",
                                     resources={"metadata": {"path": str(ROOT)}})
    client.execute()         # raises CellExecutionError on any failing cell (and its asserts)
    assert printed(fresh) == printed(stored)
    kinds = [set(o.get("data", {})) for c in fresh.cells if c.cell_type == "code" for o in c.outputs]
    assert {"text/html", "text/plain"} in kinds       # the case's and the model's rich display
    assert any("image/png" in k for k in kinds)       # the space-time map
