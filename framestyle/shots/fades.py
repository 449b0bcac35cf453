"""Fades through black or white at a shot's ends: how far each frame's picture is faded.

An editor's fade in from black (or out to it) scales the picture by a gain that ramps from 0
to 1: the production model of Hampapur, Jain & Weymouth (1995) has it as a scaling of the
picture's values, ``S(x, t) = F(x, t) · g(t)`` (their notation from memory). The style losses (Gatys et al. 2016) do not see that gain: a
Gram matrix carries the painting's brightness into a dark frame, so a faded frame comes out
as bright as any other (a black frame as pure paint) and the fade is lost. So a shot's faded
frames are stylised as the picture they fade, ``S / g`` (:func:`lifted`), and the stylised
picture is faded again, times ``g``, when it is delivered: the colourist's order, the look
first and the fade over it. A fade to white (a "dip to white") scales the picture's distance
from white the same way, ``1 - S = (1 - F) · g``: :func:`shot_fades` finds both.

:func:`fade_gains` finds the gains from small grey thumbnails of the frames. Between two
frames of a fade every pixel scales by the same ratio ``g(t + 1) / g(t)``, while the picture's
own changes (a pan bringing in a brighter part of the set) move only some pixels: so the step
ratio is the median of the pixels' ratios (:func:`step_ratio`), not the ratio of the frames'
mean levels. A fade in is a run of steps at the shot's start that each brighten the whole
picture by more than :data:`RISE` (or frames still black), from a first frame at most
:data:`DARK` of the level the run reaches; its gains are the step ratios multiplied back from
the run's end, where the gain is 1. A fade out is the same backward from the shot's end. A
shot that starts and ends at its own level has none; a shot all black (a slug) is faded all
the way. Across a cut within a fade the pixels' ratios disagree and say nothing of the fade:
that step is taken to fade as the one beside it. A fade so slow that its last steps brighten
by less than :data:`RISE` (about 100 frames and longer, linear) is taken to end where its
steps get that small, a little early.

References
----------
Hampapur, A., Jain, R., & Weymouth, T. E. (1995). Production model based digital video
segmentation. Multimedia Tools and Applications, 1(1), 9-46.

Example
-------
>>> picture = np.linspace(0.2, 0.8, 18 * 32).reshape(18, 32)
>>> ramp = [0.0, 0.25, 0.5, 0.75] + [1.0] * 8
>>> [round(float(g), 2) for g in fade_gains(np.stack([picture * g for g in ramp]))[:5]]
[0.0, 0.25, 0.5, 0.75, 1.0]
"""

from __future__ import annotations

import cv2
import numpy as np

THUMBNAIL = (32, 18)
"""``(width, height)`` of the grey thumbnails the gains are found from."""
RISE = 0.01
"""A step of a fade brightens the picture by more than this share (a linear fade of up to
about 100 frames does at every step)."""
DARK = 0.5
"""A fade starts (or ends) at most this share of the level its run reaches."""
BLACK = 0.02
"""A level under this (of the display range [0, 1]) is black."""
FLOOR = 0.1
"""The least divisor of a faded frame (:func:`lifted`): darker frames are lifted only this
far, as their 8-bit levels would come apart into bands; they are delivered so dark that what
the solver made of them hardly shows."""
_LIT = 0.05  # pixels under this level are too dark for a ratio (noise, quantisation)
_LIT_SHARE = 0.25  # a step ratio needs this share of the pixels lit in both frames
_SPREAD = 0.4  # most interquartile range of the pixels' log ratios in one step of a fade: measured on
#                the real clips, at most 0.15 in steps of fades over them, 0.62-1.23 across cuts


def thumbnail(image: np.ndarray) -> np.ndarray:
    """``(18, 32)`` float32 grey thumbnail of an ``(H, W, 3)`` display-referred image in [0, 1]
    (area-averaged: grain and small detail do not count)."""
    return cv2.resize(image.mean(axis=2, dtype=np.float32), THUMBNAIL, interpolation=cv2.INTER_AREA)


def step_ratio(before: np.ndarray, after: np.ndarray) -> float:
    """How much brighter ``after`` is than ``before`` (thumbnails, same shape): the median of
    the ratios of their pixels lit in both, NaN where those disagree (another picture: a cut);
    with too few lit, the ratio of their mean levels (``inf`` from black to anything, 1 from
    black to black)."""
    lit = (before > _LIT) & (after > _LIT)
    if lit.mean() >= _LIT_SHARE:
        logs = np.log(after[lit] / before[lit])
        low, middle, high = np.percentile(logs, [25, 50, 75])
        return float(np.exp(middle)) if high - low <= _SPREAD else float("nan")
    a, b = float(before.mean()), float(after.mean())
    return b / a if a > 0 else (np.inf if b > 0 else 1.0)


def fade_gains(thumbnails: np.ndarray) -> np.ndarray:
    """Each frame's fade gain, from the frames' thumbnails in shot order.

    Parameters
    ----------
    thumbnails : (n, h, w) grey thumbnails of the picture the solver sees (:func:`thumbnail`)

    Returns
    -------
    (n,) float gains in [0, 1]: 1 outside fades, below it in a fade in at the start or a fade
    out at the end
    """
    thumbnails = np.asarray(thumbnails, dtype=np.float32)
    if len(thumbnails) and thumbnails.mean(axis=(1, 2)).max() < BLACK:
        return np.zeros(len(thumbnails))
    return np.minimum(_fade_in(thumbnails), _fade_in(thumbnails[::-1])[::-1])


def _fade_in(thumbnails: np.ndarray) -> np.ndarray:
    """The gains of a fade in at the start of ``thumbnails`` (1 where there is none)."""
    n = len(thumbnails)
    gains = np.ones(n)
    levels = thumbnails.mean(axis=(1, 2))
    ramp, ratios = 0, []
    while ramp < n - 1:
        ratio = step_ratio(thumbnails[ramp], thumbnails[ramp + 1])
        if np.isnan(ratio) and ratios:  # a cut within the fade: its ramp goes on as in the step beside it
            ratio = ratios[-1]
        elif np.isnan(ratio) and n > 2:  # a cut at the first step: as in the next
            ratio = step_ratio(thumbnails[1], thumbnails[2])
        ratios.append(ratio)
        if not (levels[ramp] < BLACK or ratio > 1 + RISE):
            break
        ramp += 1
    if ramp == 0 or levels[0] > DARK * levels[ramp]:  # no run, or it starts bright
        return gains
    for t in range(ramp - 1, -1, -1):  # the gains multiplied back from the run's end
        gains[t] = gains[t + 1] / ratios[t]
    return np.clip(gains, 0.0, 1.0)


def shot_fades(thumbnails: np.ndarray) -> np.ndarray:
    """Each frame's fade through black or white, from the frames' thumbnails in shot order.

    Parameters
    ----------
    thumbnails : (n, h, w) grey thumbnails of the picture the solver sees (:func:`thumbnail`)

    Returns
    -------
    (n, 2) float: each frame's gain (:func:`fade_gains`; 1 outside fades) and the level it
    fades toward, 0 (black) or 1 (white); a fade to black is taken before one to white
    """
    thumbnails = np.asarray(thumbnails, dtype=np.float32)
    black, white = fade_gains(thumbnails), fade_gains(1 - thumbnails)
    toward_white = (black == 1) & (white < 1)
    return np.stack([np.where(toward_white, white, black), toward_white.astype(np.float64)], axis=1)


def lifted(image: np.ndarray, gain: float, toward: float = 0.0) -> np.ndarray:
    """``image`` (any shape, display-referred in [0, 1]) out of a fade of ``gain`` toward the
    level ``toward`` (0 black, 1 white): its distance from that level divided by the gain, or
    by :data:`FLOOR` where the gain is lower, and clipped to [0, 1]; the image itself where
    the gain is 1."""
    if gain == 1.0:
        return image
    return np.clip(toward + (image - toward) / np.float32(max(gain, FLOOR)), 0.0, 1.0).astype(image.dtype)


def faded(image: np.ndarray, gain: float, toward: float = 0.0) -> np.ndarray:
    """``image`` faded by ``gain`` toward the level ``toward``, as an editor fades the footage:
    ``toward + gain · (image - toward)`` (:func:`lifted` undoes it where nothing clipped)."""
    if gain == 1.0:
        return image
    return (toward + np.float32(gain) * (image - toward)).astype(image.dtype)
