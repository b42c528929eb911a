"""Figures of the protocol results, and :func:`protocol_figure`, the one figure of each result.

Each protocol's drawing functions live in :mod:`cable.plot.protocol_figures` (one module
per protocol) and take the Dataset its protocol returns (:func:`cable.strength_duration`,
:func:`cable.refractory_period`, :func:`cable.restitution`, :func:`cable.convergence`),
read back from netCDF or fresh, drawing into the Axes given (pyplot's current one if
omitted). :func:`protocol_figure` asks the result's protocol (its ``cable_protocol``
attribute, :func:`cable.protocols.protocol_of`) for the figure its ``--figure`` writes.
"""

from __future__ import annotations

from cable.case import CaseError
from cable.plot import _common
from cable.plot.protocol_figures.converge import convergence
from cable.plot.protocol_figures.refractory import refractory
from cable.plot.protocol_figures.restitution import cv_restitution, restitution
from cable.plot.protocol_figures.threshold import charge_duration, strength_duration

__all__ = ["charge_duration", "convergence", "cv_restitution", "protocol_figure", "refractory", "restitution",
           "strength_duration"]


def _listed(titles) -> str:
    """``a, b, c or d``."""
    return titles[0] if len(titles) == 1 else f"{', '.join(titles[:-1])} or {titles[-1]}"


def protocol_figure(ds, fig=None, *, title: str | None = None):
    """The figure a protocol command's ``--figure`` writes: its panels side by side.

    Strength-duration: amplitude and charge; refractoriness: the trials; restitution:
    APD90 and (on a strand) CV; convergence: CV, its estimated error, and APD90 when
    computed; calibration: the runs. The protocol is the one the result names
    (:func:`cable.protocols.protocol_of`); its figure draws into ``fig``, one legend below
    each panel.

    Parameters
    ----------
    ds : xarray.Dataset
        A protocol result.
    fig : matplotlib.figure.Figure, optional
        Where to draw; default a new pyplot-free Figure (:func:`cable.plot._common.new_figure`).
    title : str, optional
        A title above the panels (none by default: a paper's caption says what it is).

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    CaseError
        ``ds`` is no protocol result with a figure, or lacks outputs its protocol always writes.
    """
    from cable.protocols import protocol_of, protocols

    protocol = protocol_of(ds)
    if protocol is None or protocol.figure is None or not protocol.complete(ds):
        drawn = [p.title for p in protocols() if p.figure is not None]
        raise CaseError(f"figure: the result is none of {_listed(drawn)} (its variables: "
                        f"{', '.join(map(str, ds.data_vars)) or '(none)'}).")
    fig = fig if fig is not None else _common.new_figure(size=(10.0, 5.0))
    protocol.figure(ds, fig)
    if title:
        fig.suptitle(str(title), fontsize="medium")
    return fig
