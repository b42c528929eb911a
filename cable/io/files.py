"""Result files on disk: the checks before writing, temporary names, atomic publication.

A result is built under ``.NAME.PID.tmp`` beside its target and given its name by
:func:`publish` when complete, so a reader never sees a half-written file; a run that
died leaves a temporary that the next run to the same output removes.
"""

from __future__ import annotations

import os
from pathlib import Path

from cable.case import CaseError


def check_target(path, overwrite: bool, inputs=()) -> None:
    """Refuse an output that would lose something; check its folder.

    Refused: an existing file without ``overwrite``; a target that is not a regular
    file (a folder, a FIFO, a device such as /dev/null), even with ``overwrite``; a
    target that is one of ``inputs`` (the case file). Temporaries of this output left
    by runs that died (``.NAME.PID.tmp`` whose process is gone) are removed.
    """
    path = Path(path)
    if path.is_dir():
        raise CaseError(f"output '{path}' is a folder; give a file name such as '{path / 'result.nc'}'.")
    for source in inputs:
        if source is not None and path.exists() and Path(source).exists() and os.path.samefile(path, source):
            raise CaseError(f"output '{path}' is the input file '{source}'; writing the result there would destroy "
                            f"the input. Give another output name, e.g. '{path.with_suffix('.nc')}'"
                            f"{'' if path.suffix != '.nc' else ' in another folder'}.")
    _check_regular(path)
    if path.exists() and not overwrite:
        raise CaseError(f"output '{path}' exists; pass --overwrite (overwrite=True) to replace it.")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        above = next((p for p in folder.parents if p.exists()), None) if not folder.exists() else folder
        if above is not None and not above.is_dir():
            raise CaseError(f"output folder '{folder}': '{above}' is a file, not a folder.")
        raise CaseError(f"output folder '{folder}' does not exist.")
    if not os.access(folder, os.W_OK):
        raise CaseError(f"output folder '{folder}' is not writable.")
    remove_stale_temporaries(path)


def _check_regular(path: Path) -> None:
    """Refuse to replace something that is not a regular file (FIFO, device, socket)."""
    if (path.exists() or path.is_symlink()) and not path.is_file():
        raise CaseError(f"output '{path}' exists and is not a regular file (a FIFO, a device or a socket); "
                        f"cable writes results only to regular files. Give a file name.")


def temporary_name(path) -> Path:
    """The name a result is built under before :func:`publish`: ``.NAME.PID.tmp`` beside it."""
    path = Path(path)
    return path.with_name(f".{path.name}.{os.getpid()}.tmp")


def remove_stale_temporaries(path) -> list[Path]:
    """Remove ``.NAME.PID.tmp`` files of ``path`` whose process no longer runs (killed with SIGKILL)."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    removed = []
    for tmp in folder.glob(f".{glob_escape(path.name)}.*.tmp"):
        pid = tmp.name[len(path.name) + 2:-len(".tmp")]
        if not pid.isdigit() or int(pid) == os.getpid() or _alive(int(pid)):
            continue
        tmp.unlink(missing_ok=True)
        removed.append(tmp)
    return removed


def glob_escape(name: str) -> str:
    import glob

    return glob.escape(name)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # someone else's process: alive
        return True
    return True


def publish(tmp, path, overwrite: bool) -> None:
    """Give the finished temporary file ``tmp`` its name ``path``, atomically.

    Without ``overwrite`` the name is taken exclusively (a hard link, which fails if
    the name exists), so of two runs to one output that both passed
    :func:`check_target`, the second is refused here rather than silently replacing
    the first's result. ``tmp`` is removed in every case.
    """
    tmp, path = Path(tmp), Path(path)
    try:
        if overwrite:
            _check_regular(path)
            os.replace(tmp, path)
            return
        try:
            os.link(tmp, path)
        except FileExistsError:
            raise CaseError(f"output '{path}' was created by another run while this one ran; it is left as that "
                            f"run wrote it and this run's result is not kept. Pass --overwrite (overwrite=True) "
                            f"to replace it, or choose another output.") from None
        except OSError:  # a file system without hard links: create the name exclusively, then fill it
            try:
                fd = os.open(path, os.O_CREAT | os.O_EXCL | os.O_WRONLY)
            except FileExistsError:
                raise CaseError(f"output '{path}' was created by another run while this one ran; this run's "
                                f"result is not kept. Pass --overwrite to replace it.") from None
            os.close(fd)
            os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)
