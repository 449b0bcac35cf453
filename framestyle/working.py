"""The working frame: a source frame as the solver sees it, and the solver's result delivered
back at source size in the source's encoding."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from framestyle.errors import FramestyleError
from framestyle.finish.compose import finish, from_display, luma_image, to_display
from framestyle.imaging import resize
from framestyle.settings import Settings


WIDTH = 480
"""The default working width: quick, and the look holds up on a laptop screen."""
HD_WIDTH = 1280
"""The default working width of a source wider than this (1080p and up): delivered at 1.5×
at most, strokes keep their detail in a 1:1 crop (see the README's "HD sources")."""


def working_size(width: int, height: int, settings_width: int | None, min_side: int) -> tuple[int, int]:
    """Working (w, h): ``settings_width`` wide (never wider than the source), same aspect.

    ``settings_width`` None is the default: :data:`WIDTH`, or :data:`HD_WIDTH` for a source
    wider than :data:`HD_WIDTH`.
    """
    if settings_width is None:
        settings_width = HD_WIDTH if width > HD_WIDTH else WIDTH
    w = min(settings_width, width)
    h = max(1, round(height * w / width))
    if min(w, h) < min_side:
        raise FramestyleError(
            f"width {settings_width}: the working frame would be {w}×{h}, smaller than the "
            f"{min_side}-pixel minimum of the network; use a larger --width"
        )
    return w, h


@dataclass
class Frame:
    """One source frame at both sizes.

    display : (H, W, 3) display-referred source frame at source size (sRGB-encoded if the
        source is linear light)
    content : (h, w, 3) what the solver sees at working size (luma only in "luma" mode)
    """

    display: np.ndarray
    content: np.ndarray


def prepare_frame(frame: np.ndarray, size: tuple[int, int], settings: Settings, linear: bool) -> Frame:
    """Source frame → display-referred frame and the solver's working-size content."""
    display = to_display(frame, linear)
    content = resize(display, size)
    if settings.colour == "luma":
        content = luma_image(content, settings.luma_standard)
    return Frame(display, content)


def deliver(result: np.ndarray, frame: Frame, settings: Settings, matte: np.ndarray | None,
            linear: bool) -> np.ndarray:
    """The delivered frame at source size in the source's encoding.

    Parameters
    ----------
    result : (h, w, 3) the solver's result at working size
    frame : the source frame it was made from
    matte : (H, W) softened matte at source size, or None
    """
    h, w = frame.display.shape[:2]
    final = finish(resize(result, (w, h)), frame.display, colour=settings.colour,
                   standard=settings.luma_standard, strength=settings.strength, matte=matte)
    return from_display(final, linear)
