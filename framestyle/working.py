"""The working frame: a source frame as the solver sees it, and the solver's result delivered
back at source size in the source's encoding."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from framestyle.area import PictureArea
from framestyle.errors import FramestyleError
from framestyle.finish.compose import associated, from_display, luma_image, mix, paint, to_display, with_alpha
from framestyle.imaging import resize
from framestyle.settings import Settings
from framestyle.shots.fades import faded, lifted


SIDE = 480
"""The default working size's longer side: quick, and the look holds up on a laptop screen."""
HD_SIDE = 1280
"""The default working size's longer side for a source longer than this as shown (1080p and
up, landscape or portrait): delivered at 1.5× at most, strokes keep their detail in a 1:1
crop (see the README's "HD sources")."""


def side_width(width: int, height: int, side: int, pixel_aspect: float = 1.0) -> int:
    """The working width that makes the longer side of a ``width × height`` source as shown
    (its pixels ``pixel_aspect`` wide for 1 high) ``side`` pixels: ``side`` for a landscape
    frame, less for a portrait one (a phone's 1080×1920 gets what its landscape twin gets)."""
    shown = width * pixel_aspect
    return side if shown >= height else max(1, round(side * shown / height))


def working_size(width: int, height: int, settings_width: int | None, min_side: int,
                 pixel_aspect: float = 1.0) -> tuple[int, int]:
    """Working (w, h) in square pixels: ``settings_width`` wide (never wider than the source),
    the picture's shape as shown.

    ``settings_width`` None is the default: the longer side :data:`SIDE`, or :data:`HD_SIDE`
    for a source longer than :data:`HD_SIDE` as shown (:func:`side_width`). ``pixel_aspect``
    is the width over height of a source pixel (an anamorphic video's SAR): the network then
    sees round shapes round and paints round strokes, which come back squeezed into the
    source's pixels.
    """
    if settings_width is None:
        side = HD_SIDE if max(width * pixel_aspect, height) > HD_SIDE else SIDE
        settings_width = side_width(width, height, side, pixel_aspect)
    w = min(settings_width, width)
    h = max(1, round(height * w / (width * pixel_aspect)))
    if min(w, h) < min_side:
        raise FramestyleError(
            f"width {settings_width}: the working frame would be {w}×{h}, smaller than the "
            f"{min_side}-pixel minimum of the network; use a larger --width"
        )
    return w, h


@dataclass
class Frame:
    """One source frame at both sizes.

    source : (H, W, 3) the frame as read, in its own encoding (float samples as stored)
    display : (H, W, 3) display-referred source frame at source size (sRGB-encoded if the
        source is linear light, clipped to [0, 1])
    content : (h, w, 3) what the solver sees at working size (luma only in "luma" mode): the
        picture inside ``area``, lifted out of its fade
        (:func:`~framestyle.shots.fades.lifted`)
    area : the picture inside letterbox or pillarbox bars, or None for the whole frame
    gain, toward : the fade the picture is in (:mod:`framestyle.shots.fades`): its gain, 1
        outside fades, and the level it fades toward, 0 (black) or 1 (white); the stylised
        picture is delivered faded the same way
    """

    source: np.ndarray
    display: np.ndarray
    content: np.ndarray
    area: PictureArea | None = None
    gain: float = 1.0
    toward: float = 0.0

    @property
    def held(self) -> bool:
        """Whether the picture is faded all the way (gain 0, a fade's black or white hold):
        :func:`deliver` then gives the level faded toward whatever was solved, so nothing is."""
        return self.gain == 0.0

    def held_result(self) -> np.ndarray:
        """``(h, w, 3)`` the result that stands for a held frame's: the level faded toward."""
        return np.full_like(self.content, self.toward)


def prepare_frame(frame: np.ndarray, size: tuple[int, int], settings: Settings, linear: bool,
                  area: PictureArea | None = None, gain: float = 1.0, toward: float = 0.0) -> Frame:
    """Source frame → display-referred frame and the solver's working-size content (of the
    picture inside ``area`` where there is one, out of the fade ``gain`` toward ``toward``)."""
    display = to_display(frame, linear)
    content = lifted(resize(display if area is None else area.crop(display), size), gain, toward)
    if settings.colour == "luma":
        content = luma_image(content, settings.luma_standard)
    return Frame(frame, display, content, area, gain, toward)


def deliver(result: np.ndarray, frame: Frame, settings: Settings, matte: np.ndarray | None,
            linear: bool, alpha: np.ndarray | None = None) -> np.ndarray:
    """The delivered frame at source size in the source's encoding, RGB or with ``alpha``.

    The stylised picture is mixed with the footage by strength and matte
    (:func:`~framestyle.finish.compose.mix`): display-referred sources in their own encoding,
    with straight alpha; linear-light (float) ones in linear light with the frame as read, and
    with alpha in associated colour, as OpenEXR stores it. Where the style does not apply
    (strength 0, a black matte, the bars outside the frame's picture area) the delivered
    samples are the source's own: a float frame's values outside [0, 1] (highlights,
    negatives) and colour where its alpha is 0 (glows) included, which the network's [0, 1]
    view cannot carry.

    Parameters
    ----------
    result : (h, w, 3) the solver's result at working size: the picture inside ``frame.area``
    frame : the source frame it was made from
    matte : (H, W) softened matte at source size, or None
    alpha : (H, W) the source frame's alpha in [0, 1], passed through; None without one

    Returns
    -------
    (H, W, 3) or, with alpha, (H, W, 4) float32
    """
    h, w = frame.display.shape[:2]
    area = frame.area
    inside = frame.display if area is None else area.crop(frame.display)
    picture = paint(resize(result, (inside.shape[1], inside.shape[0])), lifted(inside, frame.gain, frame.toward),
                    colour=settings.colour, standard=settings.luma_standard)
    picture = faded(picture, frame.gain, frame.toward)  # the stylised picture fades as the footage did
    if area is not None:  # the bars are the footage's own samples, as where a matte is black
        whole = frame.display.copy()
        area.crop(whole)[...] = picture
        picture, bars = whole, area.mask(h, w)
        matte = bars if matte is None else matte * bars
    if not linear:
        out = mix(frame.display, picture, settings.strength, matte)
        return out if alpha is None else with_alpha(out, alpha)
    picture = from_display(picture, linear)
    if alpha is None:
        return mix(frame.source, picture, settings.strength, matte)
    colour = mix(associated(frame.source, alpha), picture * alpha[..., None], settings.strength, matte)
    return with_alpha(colour, alpha)
