"""Parameter sweeps on Dask: ``cable.sweep(case)`` runs every point of a case's ``[sweep]``.

* :mod:`cable.sweep.spec` — the ``[sweep]`` section: swept keys -> points (declared
  as its ``SECTION``; the case loader imports it when a case has the section, see
  :mod:`cable.case.sections`);
* :mod:`cable.sweep.run` — the Dask driver and the worker-side point runner;
* :mod:`cable.sweep.store` — one netCDF file per finished point (resume), the
  assembled result, :func:`open_points` (the point files, fields included, as one
  Dataset).

Importing this package does not import Dask; :func:`sweep` does, on first use.
``cable/__init__.py`` binds the name ``cable.sweep`` to the function below (not to
this package), so ``cable.sweep(case)`` is the call and the package stays reachable as
``sys.modules["cable.sweep"]`` / ``from cable.sweep import ...``.
"""

__all__ = ["open_points", "sweep"]


def sweep(case, **options):
    """Run every point of a case's ``[sweep]`` on Dask; see :func:`cable.sweep.run.sweep`."""
    from cable.sweep.run import sweep as run_sweep

    return run_sweep(case, **options)


def open_points(*args, **kwargs):
    """The stored point files of a sweep as one Dataset; see :func:`cable.sweep.store.open_points`."""
    from cable.sweep.store import open_points as _open

    return _open(*args, **kwargs)
