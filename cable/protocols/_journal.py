"""The journal of a critical-value search with an output file: its runs kept as they finish.

An interrupted :func:`cable.find_critical`, started again with the same output, reuses them.
"""

from __future__ import annotations

import numpy as np


class Journal:
    """The runs of a search with an output file, kept as they finish so that an
    interrupted search, started again with the same output, reuses them.

    Bisection is deterministic: replaying the same case, key, interval and tolerance
    asks for the same values in the same order, so the reused outcomes give the same
    bracket and the same file as an uninterrupted search. The folder
    ``<output>.runs/`` holds one ``.npz`` per run and ``search.txt`` (the identity:
    the case text and the search settings); a different search at the same output
    discards it. It is removed when the result is written.
    """

    def __init__(self, output, identity: str):
        import hashlib
        from pathlib import Path

        self.folder = Path(f"{output}.runs")
        self.identity = hashlib.sha256(identity.encode()).hexdigest()
        self.done = {}
        stamp = self.folder / "search.txt"
        if self.folder.is_dir():
            if stamp.is_file() and stamp.read_text().strip() == self.identity:
                for f in sorted(self.folder.glob("run-*.npz")):
                    try:
                        with np.load(f) as z:
                            self.done[float(z["value"])] = {k: (z[k] if z[k].ndim else z[k].item())
                                                            for k in z.files if k != "value"}
                    except Exception:  # noqa: BLE001 -- a damaged entry (cut off: BadZipFile, EOFError,
                        # zlib.error, OSError...) is redone, whatever the zip reader raises for it
                        f.unlink(missing_ok=True)
            else:
                self.remove()
        self.folder.mkdir(parents=True, exist_ok=True)
        stamp.write_text(self.identity + "\n")

    def get(self, value):
        return self.done.get(float(value))

    def put(self, value, outcome: dict) -> None:
        import os

        taken = [int(f.stem.split("-")[1]) for f in self.folder.glob("run-*.npz") if f.stem.split("-")[1].isdigit()]
        name = self.folder / f"run-{max(taken, default=-1) + 1:04d}.npz"  # after every entry kept (none replaced)
        tmp = self.folder / f".{name.name}.{os.getpid()}.tmp.npz"
        np.savez(tmp, value=float(value), **outcome)
        os.replace(tmp, name)
        self.done[float(value)] = outcome

    def remove(self) -> None:
        import shutil

        shutil.rmtree(self.folder, ignore_errors=True)
