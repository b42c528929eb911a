"""Reading and writing results (netCDF) and the failures of doing so."""


class OutputError(OSError):
    """The result file could not be written (disk full, file system error).

    The message says what was kept: the temporary file is removed, so nothing of the
    run is left behind half-written. The CLI exits with status 4 for it.
    """
