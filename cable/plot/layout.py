"""What a reader needs of a drawn figure, checked with the renderer's own extents.

:func:`problems` lists what would spoil a figure in print: text over text, text or
markers past the canvas, markers cut by their axes, a legend over the data. The
figure tests assert on it (``tests/plot/``), and ``tools/figures.py`` and
``tools/gallery.py`` report it for what they write. The extents are matplotlib's
(``Artist.get_window_extent`` after a draw), in display pixels.
"""

from __future__ import annotations

import numpy as np

#: overlaps and overhangs up to this many pixels are rounding of the extents, not defects
SLACK_PX = 1.0


def _renderer(fig):
    if not hasattr(fig.canvas, "get_renderer"):      # a pyplot-free Figure: measure with Agg
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        FigureCanvasAgg(fig)
    fig.canvas.draw()        # applies the layout engine, so that the extents are final
    return fig.canvas.get_renderer()


def all_axes(fig) -> list:
    """Every Axes of ``fig``, with the ones drawn inside others (insets, strips)."""
    out, todo = [], list(fig.axes)
    while todo:
        ax = todo.pop(0)
        out.append(ax)
        todo += list(getattr(ax, "child_axes", []))
    return out


def texts(fig) -> list:
    """The visible, non-empty Text artists of ``fig`` that are drawn.

    Tick labels count only for the ticks drawn (those inside the view); matplotlib keeps
    label objects for ticks beyond it that it does not draw.
    """
    from matplotlib.text import Text

    ticks, drawn = set(), []
    for ax in all_axes(fig):
        for axis in (ax.xaxis, ax.yaxis):
            every = axis.get_major_ticks() + axis.get_minor_ticks()
            ticks.update(id(lab) for tick in every for lab in (tick.label1, tick.label2))
            if not (ax.get_visible() and ax.axison and axis.get_visible()):
                continue
            for tick in axis._update_ticks():     # the ticks it draws (inside the view)
                drawn += [lab for lab in (tick.label1, tick.label2) if lab.get_visible()]
    out = [t for t in drawn if t.get_text().strip()]
    for t in fig.findobj(Text):
        if id(t) in ticks or not t.get_visible() or not t.get_text().strip():
            continue
        if t.axes is not None and not t.axes.get_visible():
            continue
        out.append(t)
    return out


def _overlap(a, b) -> bool:
    w = min(a.x1, b.x1) - max(a.x0, b.x0)
    h = min(a.y1, b.y1) - max(a.y0, b.y0)
    return w > SLACK_PX and h > SLACK_PX


def _inside(box, outer) -> bool:
    return (box.x0 >= outer.x0 - SLACK_PX and box.y0 >= outer.y0 - SLACK_PX and box.x1 <= outer.x1 + SLACK_PX
            and box.y1 <= outer.y1 + SLACK_PX)


def _text_boxes(fig, renderer):
    boxes = []
    for t in texts(fig):
        box = t.get_window_extent(renderer)
        # text clipped to its axes (data labels) shows only inside them
        if t.get_clip_on() and t.axes is not None and not _inside(box, t.axes.bbox):
            if not _overlap(box, t.axes.bbox):
                continue
        boxes.append((t, box))
    return boxes


def _marker_radius_px(line, fig) -> float:
    return 0.5 * (line.get_markersize() + line.get_markeredgewidth()) * fig.dpi / 72.0


def _marker_points(line):
    """Display coordinates of a line's markers (finite points only)."""
    xy = np.column_stack([np.asarray(line.get_xdata(), dtype=float).ravel(),
                          np.asarray(line.get_ydata(), dtype=float).ravel()]) if np.size(line.get_xdata()) else \
        np.empty((0, 2))
    xy = xy[np.all(np.isfinite(xy), axis=1)]
    if not xy.size:
        return xy
    return line.get_transform().transform(xy)


def _lines(fig):
    from matplotlib.lines import Line2D

    for ax in all_axes(fig):
        if not ax.get_visible():
            continue
        for line in ax.get_lines():
            if line.get_visible() and isinstance(line, Line2D):
                yield ax, line


def problems(fig) -> list[str]:
    """What a reader would find wrong with ``fig``, one line each (an empty list: none).

    * two texts overlap (labels, tick labels, legend entries, annotations, titles);
    * a text or a marker reaches past the canvas;
    * a marker is cut by the edge of its axes (drawn with clipping, centre inside, but
      its disc reaching out);
    * a legend drawn inside its axes covers a data point or a line's vertex.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A figure with a canvas (drawn here first, so that the layout is final).

    Returns
    -------
    list of str
    """
    renderer = _renderer(fig)
    canvas = fig.bbox
    out = []
    boxes = _text_boxes(fig, renderer)
    for k, (t, box) in enumerate(boxes):
        if not _inside(box, canvas):
            out.append(f"text {t.get_text()!r} reaches past the canvas")
        for u, other in boxes[k + 1:]:
            if _overlap(box, other):
                out.append(f"text {t.get_text()!r} overlaps {u.get_text()!r}")
    for ax, line in _lines(fig):
        marker = line.get_marker()
        pts = _marker_points(line)
        if not pts.size:
            continue
        if marker not in (None, "None", "none", "", " "):
            r = _marker_radius_px(line, fig)
            lo, hi = pts - r, pts + r
            if np.any(lo < canvas.x0 - SLACK_PX) or np.any(hi[:, 0] > canvas.x1 + SLACK_PX) or \
                    np.any(hi[:, 1] > canvas.y1 + SLACK_PX):
                out.append(f"marker of {line.get_label()!r} reaches past the canvas")
            if line.get_clip_on():
                clip = ax.bbox
                centre_in = (pts[:, 0] >= clip.x0) & (pts[:, 0] <= clip.x1) & (pts[:, 1] >= clip.y0) & \
                    (pts[:, 1] <= clip.y1)
                cut = centre_in & ((lo[:, 0] < clip.x0 - SLACK_PX) | (hi[:, 0] > clip.x1 + SLACK_PX) |
                                   (lo[:, 1] < clip.y0 - SLACK_PX) | (hi[:, 1] > clip.y1 + SLACK_PX))
                if cut.any():
                    out.append(f"marker of {line.get_label()!r} cut by the edge of its axes "
                               f"({int(cut.sum())} point(s))")
    out += _legends_over_data(fig, renderer)
    return out


def _legends_over_data(fig, renderer) -> list[str]:
    out = []
    for ax in all_axes(fig):
        leg = ax.get_legend()
        if leg is None or not leg.get_visible():
            continue
        box = leg.get_window_extent(renderer)
        if not _overlap(box, ax.bbox):
            continue        # drawn outside the axes
        for line in ax.get_lines():
            if not line.get_visible() or line.get_transform() is not ax.transData:
                continue
            pts = _marker_points(line)
            hit = (pts[:, 0] > box.x0) & (pts[:, 0] < box.x1) & (pts[:, 1] > box.y0) & (pts[:, 1] < box.y1) \
                if pts.size else np.zeros(0, bool)
            if hit.any():
                out.append(f"the legend covers data of {line.get_label()!r}")
                break
    return out


def axis_labels(fig) -> list[str]:
    """The x and y labels of every visible axes of ``fig`` (colour bars and strips too), non-empty ones."""
    out = []
    for ax in all_axes(fig):
        if not ax.get_visible():
            continue
        for text in (ax.get_xlabel(), ax.get_ylabel()):
            if text.strip() and ax.axison:
                out.append(text)
    return out
