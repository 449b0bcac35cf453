"""The report's pictures of a shot: a thumbnail strip and a plot of its per-frame figures.

The strip is the preview's contact sheet (:func:`framestyle.preview.contact_sheet`): the
source above the render, every Nth frame, labelled by the source's frame number. The plot
is matplotlib's (Agg canvas only, no pyplot: no global state, no display) with three panels
sharing the frame axis: the warping error of the render and of the source (Lai et al.
2018), the solver's iterations, and the seconds each frame took.
"""

from __future__ import annotations

import io as _bytes_io
import math

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from framestyle.imaging import resize
from framestyle.preview import contact_sheet, sample_frames
from framestyle.report.status import ShotSeries

# A strip row (6 tiles of 176 px and their 4-px gaps) and the plot (1080 px) fit the page's
# 1094-px column at their own size: shown 1:1 on a laptop screen, sharp.
THUMB_WIDTH = 176  # strip tile width in pixels
STRIP_TILES = 6  # tiles in a strip row, and the most a shot shows by default
RENDER_COLOUR, SOURCE_COLOUR = "#1f4e9c", "#8c8c8c"
_MISSING = 0.25  # grey of a tile whose frame is not rendered (or the source is not found)
_WIDTH, _HEIGHT, _DPI = 10.8, 4.6, 100  # plot size in inches, and pixels per inch


def strip_frames(start: int, end: int, every: int | None = None) -> list[int]:
    """Positions of a shot's frames [start, end] in its strip: the first, then every
    ``every``-th (by default as many as make at most :data:`STRIP_TILES` tiles)."""
    length = end - start + 1
    return sample_frames(start, end, every or max(1, math.ceil(length / STRIP_TILES)))


def thumbnail(frame: np.ndarray, width: int = THUMB_WIDTH) -> np.ndarray:
    """(H, W, 3) frame → (h, ``width``, 3) thumbnail, same aspect."""
    return resize(frame, (width, max(1, round(frame.shape[0] * width / frame.shape[1]))))


def strip(tiles: list[tuple[str, np.ndarray | None, np.ndarray | None]], aspect: float) -> np.ndarray:
    """A shot's strip: (label, source thumbnail or None, render thumbnail or None) per tile.

    Parameters
    ----------
    aspect : the frames' width / height, for grey tiles where a picture is missing

    Returns
    -------
    (H, W, 3) float32 in [0, 1]: rows of :data:`STRIP_TILES` tiles, source above render
    """
    blank = np.full((max(1, round(THUMB_WIDTH / aspect)), THUMB_WIDTH, 3), _MISSING, np.float32)
    return contact_sheet([(label, blank if src is None else src, blank if out is None else out)
                          for label, src, out in tiles], tile_width=THUMB_WIDTH, columns=STRIP_TILES)


def shot_plot(series: ShotSeries, render_label: str = "render") -> Figure:
    """The plot of one shot: warping error (render and source), iterations and seconds per frame.

    Frames are placed by the source's frame numbers; a frame where the chain started again (a
    missed cut) is marked by a dotted line. ``render_label`` names the render's line.
    """
    fig = Figure(figsize=(_WIDTH, _HEIGHT), dpi=_DPI)
    fig.subplots_adjust(left=0.07, right=0.99, top=0.92, bottom=0.09, hspace=0.12)  # fixed: quicker than a layout engine
    FigureCanvasAgg(fig)
    error_axis, iteration_axis, seconds_axis = fig.subplots(3, 1, sharex=True, height_ratios=(2, 1, 1))
    x = np.asarray(series.numbers, dtype=float)

    def values(items):
        return np.array([np.nan if v is None else v for v in items], dtype=float)

    error_axis.plot(x, values(series.source_error), color=SOURCE_COLOUR, lw=1.2, marker=".", ms=3,
                    label=f"source (mean {series.mean_error('source'):.4g})")
    error_axis.plot(x, values(series.render_error), color=RENDER_COLOUR, lw=1.6, marker=".", ms=4,
                    label=f"{render_label} (mean {series.mean_error('render'):.4g})")
    iteration_axis.bar(x, values(series.iterations), width=0.8, color=RENDER_COLOUR, alpha=0.75)
    seconds_axis.bar(x, values(series.seconds), width=0.8, color="#2e7d4f", alpha=0.75)
    restarts = [number for number, fresh in zip(x, series.fresh) if fresh]
    for axis in (error_axis, iteration_axis, seconds_axis):
        for k, number in enumerate(restarts):
            axis.axvline(number, color="#c0392b", lw=0.8, ls=":",
                         label="chain started again (a missed cut?)" if k == 0 and axis is error_axis else None)
        axis.grid(True, lw=0.3, alpha=0.5)
        axis.tick_params(labelsize=7)
    error_axis.set_ylabel("warping error\n(Lai et al. 2018)", fontsize=8)
    error_axis.set_ylim(bottom=0)
    # ticks as 1.5 with ×10⁻⁴ above, not 0.00015: the fixed left margin has room for those
    error_axis.ticklabel_format(axis="y", style="sci", scilimits=(-2, 3), useMathText=True)
    error_axis.yaxis.get_offset_text().set_fontsize(7)
    error_axis.legend(fontsize=7.5, loc="lower right", bbox_to_anchor=(1, 1), ncol=3, frameon=False)  # above, clear of ×10⁻⁴
    iteration_axis.set_ylabel("iterations", fontsize=8)
    seconds_axis.set_ylabel("seconds", fontsize=8)
    seconds_axis.set_xlabel("source frame", fontsize=8)
    seconds_axis.set_xlim(x[0] - 0.6, x[-1] + 0.6)
    return fig


def png_bytes(fig: Figure) -> bytes:
    """A figure encoded as PNG, in memory (the store writes it)."""
    buffer = _bytes_io.BytesIO()
    fig.savefig(buffer, format="png")
    return buffer.getvalue()
