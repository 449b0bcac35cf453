"""Timeline plot of a flash analysis: flashes per second and flashing area against time.

One panel per labelled report (for example "render" and "source"), each with two stacked
axes sharing the time axis: the most flashes any block made in the trailing second, with
the limit of three marked, and the flashing share of the worst 10° field (WCAG 2.1) and of
the screen (ITU-R BT.1702), with the 25 % limit marked. Time ticks show seconds and the
report's timecode. matplotlib's Agg canvas only; no pyplot, so no global state or display.
"""

from __future__ import annotations

import os
from collections.abc import Mapping

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from framestyle import atomic
from framestyle.qc.flashes import AREA_LIMIT, KINDS, MAX_FLASHES, FlashReport

_COLOURS = {"general": "#1f4e9c", "red": "#c0392b"}
_SHORT_NAMES = {"wcag21": "WCAG 2.1", "bt1702": "BT.1702"}
_WIDTH = 11.0  # inches
_DPI = 100
# A panel's rows in inches, top to bottom: title, flashes axis, gap, area axis, time labels.
# Fixed margins rather than a layout engine: constrained layout doubled the drawing time.
_TITLE, _FLASH_AXIS, _GAP, _AREA_AXIS, _TIME_LABELS = 0.35, 1.25, 0.12, 1.35, 0.55
_PANEL_HEIGHT = _TITLE + _FLASH_AXIS + _GAP + _AREA_AXIS + _TIME_LABELS
_LEFT, _RIGHT = 0.8, 0.15  # inches


def _time_formatter(report: FlashReport) -> FuncFormatter:
    """Tick label ``"12.5 s\\n00:00:12:12"`` for a time in seconds."""

    def label(seconds: float, _position) -> str:
        frame = int(round(seconds * report.fps))
        if seconds < 0 or frame >= max(report.frames, 1):
            return f"{seconds:g} s"
        return f"{seconds:g} s\n{report.timecode(frame)}"

    return FuncFormatter(label)


def _draw(report: FlashReport, label: str, flash_axis, area_axis) -> None:
    seconds = np.arange(report.frames) / report.fps
    for kind in KINDS:
        series = report.series(kind)
        colour = _COLOURS[kind]
        flash_axis.step(seconds, series.flashes, where="post", color=colour, lw=1.2,
                        label=f"{kind} flashes")
        area_axis.step(seconds, 100 * series.field_fraction, where="post", color=colour, lw=1.2,
                       label=f"{kind}: worst 10° field (WCAG 2.1)")
        area_axis.step(seconds, 100 * series.screen_fraction, where="post", color=colour, lw=1.0, ls="--",
                       label=f"{kind}: screen (BT.1702)")
        # Shade the frames whose trailing second fails WCAG 2.1 for this kind of flash.
        area_axis.fill_between(seconds, 0, 100, where=series.field_fraction > AREA_LIMIT,
                               color=colour, alpha=0.08, step="post", lw=0)
    flash_axis.axhline(MAX_FLASHES, color="black", lw=0.8, ls=":", label=f"limit {MAX_FLASHES} per second")
    area_axis.axhline(100 * AREA_LIMIT, color="black", lw=0.8, ls=":", label=f"limit {AREA_LIMIT:.0%}")

    verdicts = " · ".join(
        f"{_SHORT_NAMES[standard]}: " + ", ".join(f"{k} {v}" for k, v in kinds.items())
        for standard, kinds in report.verdicts.items()
    )
    flash_axis.set_title(f"{label}: {report.frames} frames at {report.fps:g} fps — {verdicts}",
                         fontsize=9, loc="left")
    flash_axis.set_ylabel("flashes in\ntrailing second", fontsize=8)
    most = max(MAX_FLASHES + 1, *(int(report.series(k).flashes.max(initial=0)) for k in KINDS))
    flash_axis.set_ylim(0, most * 1.35)  # headroom for the legend
    area_axis.set_ylabel("flashing area %", fontsize=8)
    area_axis.set_ylim(0, 135)  # headroom for the legend
    area_axis.set_yticks([0, 25, 50, 75, 100])
    area_axis.set_xlim(0, max(report.frames / report.fps, 1.0 / report.fps))
    area_axis.xaxis.set_major_formatter(_time_formatter(report))
    for axis in (flash_axis, area_axis):
        axis.grid(True, lw=0.3, alpha=0.5)
        axis.tick_params(labelsize=7)
        axis.legend(fontsize=6.5, loc="upper right", ncol=3)


def plot_flash_timeline(reports: Mapping[str, FlashReport], path: str | os.PathLike) -> None:
    """Draw the flash timelines of labelled reports into one PNG, written atomically.

    Parameters
    ----------
    reports : mapping of label -> FlashReport
        One panel per entry, in the mapping's order (e.g. ``{"render": r, "source": s}``).
    path : path-like
        The PNG to write; its folder is created if needed.

    Raises
    ------
    ValueError
        ``reports`` is empty.
    """
    if not reports:
        raise ValueError("no flash reports to plot")
    height = _PANEL_HEIGHT * len(reports)
    fig = Figure(figsize=(_WIDTH, height), dpi=_DPI)
    FigureCanvasAgg(fig)

    def axis(top: float, rows: float, share=None):  # top and rows in inches from the figure's top
        box = (_LEFT / _WIDTH, 1 - (top + rows) / height, 1 - (_LEFT + _RIGHT) / _WIDTH, rows / height)
        return fig.add_axes(box, sharex=share)

    for i, (label, report) in enumerate(reports.items()):
        top = i * _PANEL_HEIGHT + _TITLE
        flash_axis = axis(top, _FLASH_AXIS)
        area_axis = axis(top + _FLASH_AXIS + _GAP, _AREA_AXIS, share=flash_axis)
        flash_axis.tick_params(labelbottom=False)
        _draw(report, label, flash_axis, area_axis)
    with atomic.atomic_path(path) as tmp:
        fig.savefig(tmp, format="png")
