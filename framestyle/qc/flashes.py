"""Photosensitive flash analysis: general and red flashes, WCAG 2.1 SC 2.3.1 and ITU-R BT.1702.

A streaming pass over display-referred sRGB frames that counts, for every block of the
picture, the flashes in every 1-second window, measures how much of the screen flashes
more than three times in that second, and gives a pass/fail verdict per standard. It is an
aid for spotting risky passages, not a certification: broadcasters' rules and regulators
prevail, and displays are modelled only as the sRGB relative-luminance scale (no cd/m², no
HDR).

Definitions (WCAG 2.1, "general flash and red flash thresholds", and its notes):

* **Relative luminance** ``L = 0.2126 R + 0.7152 G + 0.0722 B`` of linearised sRGB
  (IEC 61966-2-1 transfer). Frames are quantised to 8 bits before linearising through a
  256-entry table; WCAG's own break point 0.03928 and IEC's 0.04045 give the same result
  for every 8-bit code, and the quantisation moves ``L`` by at most 0.005 (near white),
  far below the 0.1 threshold.
* **Measurement blocks.** The exception for fine balanced patterns ("white noise or an
  alternating checkerboard pattern with squares smaller than 0.1 degree on a side does not
  violate the thresholds") is honoured by averaging linear R, G, B over blocks of
  ``block_degrees`` (at least 0.1°, default :data:`DEFAULT_BLOCK_DEGREES`) before anything
  else. 0.1° blocks cancel a balanced checkerboard but not random noise: binary pixel noise
  averaged over ``n`` pixels still jitters by ``0.5 / sqrt(n)``, which at 0.1° (a 4×3-pixel
  block on a 1024×768 screen) is larger than the 0.1 flash threshold. The default block
  is therefore larger. With it, 1-pixel black/white noise passes from about 1024 pixels
  across (elements up to ~0.03°) and 1-pixel grey noise from about 512; coarser noise,
  though still under 0.1°, can register as flashing (widen ``block_degrees`` for it).
  The block also sets the resolution of the area measurement (the 10° field is ``10 /
  block_degrees`` blocks across): a block partly covered by a flashing object counts whole
  once its mean changes by 0.1, so flashing areas are over-estimated by up to one block
  around their edges, the cautious side.
* **Viewing geometry.** WCAG's note: a 341×256 px rectangle on a 1024×768 screen
  approximates a 10° visual field. The frame is shown full screen, fitted into that
  reference screen with its aspect ratio kept (a 16:9 frame fills the width), so the 10°
  field is ``(341, 256) / s`` frame pixels where ``s = min(1024 / W, 768 / H)``, and a
  block is ``block_degrees / 10`` of the field on each axis, rounded up to whole pixels.
  The grid of whole blocks is centred; the border left over (narrower than one block,
  at most a few per cent of a field) is not measured. Whole-pixel blocks let OpenCV's
  integer-factor area average run, about three times faster than a fractional one.
* **Transitions** are "the change ... between adjacent peaks and valleys in a plot of
  relative luminance against time" (WCAG 2.1 note). Per block, a transition is registered
  when the signal has moved by the threshold from the last extreme in the direction
  opposite to the previous transition (a peak/valley detector with hysteresis, so small
  wiggles on a slow fade neither split nor fake a transition). A *general* transition
  needs a change of at least 0.1 (10 % of the maximum relative luminance 1.0) with the
  darker state below 0.80.
* **Red transitions** use the WCAG 2.0/2.1 note (Harding and Binnie 2002): either state
  saturated red, ``R / (R + G + B) >= 0.8``, and a change of ``max(0, R - G - B) * 320``
  greater than 20, R, G, B linear as for relative luminance. WCAG 2.2's alternative (a
  CIE 1976 u'v' difference > 0.2, ISO 9241-391) was not chosen because (1) the verdict
  reported is WCAG 2.1's, whose own note this is, and the BT.1702 broadcast practice it
  comes from; (2) u'v' chromaticity is undefined at black and unstable near it, so a dark
  red fading to black would need an arbitrary luminance floor, whereas ``(R - G - B) *
  320`` is continuous and already ignores red changes too dim to matter (< 20).
* **Flashes** are pairs of opposing transitions; a block's flash count in a 1-second
  window is ``transitions // 2`` (7 transitions hold only three disjoint pairs). A window
  is ``ceil(fps)`` frames, the most frame instants any 1-second period can hold.
* **Concurrency.** "The combined area of flashes occurring concurrently" is taken as the
  blocks that flash more than three times within the *same* 1-second window (the window
  ending at each frame); they need not be contiguous (WCAG 2.1 says "combined area";
  the 2005 working draft said "concurrently (but not necessarily contiguously)"). This is
  the cautious reading: blocks flashing out of phase within one second still add up.
* **Areas and verdicts.** WCAG 2.1 SC 2.3.1 fails where the concurrently flashing blocks
  cover more than 25 % of any 10° field on the screen (a field-sized window of blocks slid
  over the grid; fields only partly on screen keep their full area as denominator).
  ITU-R BT.1702 fails where they cover more than 25 % of the screen area. Each verdict is
  given for general and red flashes separately. BT.1702's 20 cd/m² change with the darker
  image below 160 cd/m² equals WCAG's 0.1 and 0.8 on a 200 cd/m² display (from memory),
  so both standards share the transition definitions here.

Not covered: HDR or absolute-luminance display models, regular (static) patterns, the
stricter 20 % area of some national guidance, looping short clips (analyse them looped).

References
----------
W3C, Web Content Accessibility Guidelines (WCAG) 2.1, SC 2.3.1 Three Flashes or Below
Threshold; definitions "general flash and red flash thresholds" and "relative luminance".
W3C, Understanding WCAG 2.2, SC 2.3.1 (the u'v' red-flash working definition).
ITU-R Recommendation BT.1702 (2005), Guidance for the reduction of photosensitive
epileptic seizures caused by television.
IEC 61966-2-1:1999, sRGB colour space.
G. F. A. Harding and C. D. Binnie, 2002, the red-flash measure ``(R - G - B) * 320``
(cited by the WCAG 2.1 note).
"""

from __future__ import annotations

import math
import numbers
from array import array
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field

import cv2
import numpy as np

from framestyle.finish.colour import LUMA_BT709, srgb_to_linear
from framestyle.timecode import frame_to_timecode

# WCAG 2.1 note: a 341×256 px rectangle on a 1024×768 screen ~ a 10° visual field.
REFERENCE_SCREEN = (1024, 768)
REFERENCE_FIELD = (341, 256)
FIELD_DEGREES = 10.0
# WCAG 2.1 exception: balanced patterns with elements under 0.1° do not flash.
MIN_BLOCK_DEGREES = 0.1
# Large enough that 1-pixel binary noise on a 1024×768 screen averages to a jitter of
# about 0.03 (a third of the flash threshold); 20 blocks per 10° field keep the area
# resolution at 0.25 % of a field per block.
DEFAULT_BLOCK_DEGREES = 0.5

# WCAG 2.1 relative luminance weights: the Y row of the sRGB (BT.709 primaries) matrix,
# applied to linear R, G, B (BT.709's luma uses the same numbers on encoded values).
LUMINANCE_WEIGHTS = LUMA_BT709
GENERAL_CHANGE = 0.1  # 10 % of the maximum relative luminance (1.0), "or more"
GENERAL_DARK_LIMIT = 0.8  # the darker state must be below this
RED_RATIO = 0.8  # saturated red: R / (R + G + B) >= 0.8
RED_SCALE = 320.0  # (R - G - B) * 320, negative values set to zero
RED_CHANGE = 20.0  # the change must be greater than this
MAX_FLASHES = 3  # "no more than three flashes within any one-second period" pass
AREA_LIMIT = 0.25  # 25 % of a 10° field (WCAG) or of the screen (BT.1702)

STANDARDS = {
    "wcag21": "WCAG 2.1 SC 2.3.1 (25 % of any 10° field)",
    "bt1702": "ITU-R BT.1702 (25 % of the screen)",
}
KINDS = ("general", "red")

# 8-bit code -> linear light, through the project's IEC 61966-2-1 transfer function.
_LINEAR_LUT = srgb_to_linear(np.arange(256) / 255.0).astype(np.float32)
_WEIGHTS = np.asarray(LUMINANCE_WEIGHTS, np.float32)


def linear_rgb(rgb: np.ndarray) -> np.ndarray:
    """Linear-light R, G, B of a display-referred sRGB image, through 8-bit quantisation.

    Parameters
    ----------
    rgb : (H, W, 3) float array, sRGB-encoded in [0, 1] (values outside, and NaN, are clipped).

    Returns
    -------
    (H, W, 3) float32 linear R, G, B in [0, 1].

    References
    ----------
    IEC 61966-2-1:1999 (sRGB transfer function); WCAG 2.1 "relative luminance".
    """
    rgb = _check_frame(rgb)
    # THRESH_TOZERO sets negatives to black (convertScaleAbs alone would mirror them) and
    # patchNaNs NaN (which the threshold passes through, and the 8-bit conversion would
    # saturate to white); the 8-bit conversion rounds and saturates above 1. All run
    # vectorised in OpenCV, and the table replaces a per-pixel power.
    _, clipped = cv2.threshold(rgb.astype(np.float32, copy=False), 0.0, 0.0, cv2.THRESH_TOZERO)
    cv2.patchNaNs(clipped, 0.0)  # float32 only in OpenCV 4
    codes = cv2.convertScaleAbs(clipped, alpha=255.0)
    return cv2.LUT(codes, _LINEAR_LUT)


def relative_luminance(rgb: np.ndarray) -> np.ndarray:
    """WCAG 2.1 relative luminance of each pixel of an sRGB image.

    ``L = 0.2126 R + 0.7152 G + 0.0722 B`` with R, G, B linearised (see :func:`linear_rgb`).

    Parameters
    ----------
    rgb : (H, W, 3) float array, sRGB-encoded in [0, 1].

    Returns
    -------
    (H, W) float32 relative luminance in [0, 1].

    Examples
    --------
    >>> float(relative_luminance(np.ones((1, 1, 3), np.float32))[0, 0])
    1.0

    References
    ----------
    W3C WCAG 2.1, definition "relative luminance".
    """
    return linear_rgb(rgb) @ _WEIGHTS


def is_saturated_red(linear: np.ndarray) -> np.ndarray:
    """Whether linear R, G, B ``(..., 3)`` is a saturated red: ``R / (R + G + B) >= 0.8``.

    Black (``R + G + B == 0``) is not saturated.

    References
    ----------
    W3C WCAG 2.1, note to "general flash and red flash thresholds" (Harding and Binnie 2002).
    """
    linear = np.asarray(linear, np.float32)
    r = linear[..., 0]
    total = linear.sum(axis=-1)
    return (total > 0) & (r >= RED_RATIO * total)


def red_value(linear: np.ndarray) -> np.ndarray:
    """The red-flash measure ``max(0, R - G - B) * 320`` of linear R, G, B ``(..., 3)``.

    A red transition is a change of this value greater than 20 where either state is a
    saturated red (:func:`is_saturated_red`).

    Examples
    --------
    >>> round(float(red_value(np.array([0.5, 0.05, 0.05]))), 3)  # (0.5 - 0.1) * 320
    128.0

    References
    ----------
    W3C WCAG 2.1, note to "general flash and red flash thresholds" (Harding and Binnie 2002).
    """
    linear = np.asarray(linear, np.float32)
    return np.maximum(linear[..., 0] - linear[..., 1] - linear[..., 2], 0.0) * RED_SCALE


@dataclass(frozen=True)
class FlashGeometry:
    """How a frame shown full screen maps onto measurement blocks and 10° fields."""

    width: int  # frame width in pixels
    height: int  # frame height in pixels
    block_degrees: float  # nominal block side in degrees of visual field
    grid: tuple[int, int]  # (columns, rows) of measurement blocks
    block_size: tuple[int, int]  # (w, h) of one block in frame pixels
    origin: tuple[int, int]  # (x, y) of the grid's top-left pixel (the grid is centred)
    field_size: tuple[float, float]  # (w, h) of a 10° field in frame pixels
    field_blocks: tuple[int, int]  # (columns, rows) of blocks that approximate a 10° field

    def measured(self, frame: np.ndarray) -> np.ndarray:
        """The part of ``frame`` ``(H, W, ...)`` that the grid covers (a view, no copy)."""
        (x, y), (cols, rows), (bw, bh) = self.origin, self.grid, self.block_size
        return frame[y:y + rows * bh, x:x + cols * bw]

    def to_dict(self) -> dict:
        return {
            "width": self.width, "height": self.height, "block_degrees": self.block_degrees,
            "grid": list(self.grid), "block_size": list(self.block_size), "origin": list(self.origin),
            "field_size": [round(v, 3) for v in self.field_size],
            "field_blocks": list(self.field_blocks),
        }


def flash_geometry(width: int, height: int, block_degrees: float = DEFAULT_BLOCK_DEGREES) -> FlashGeometry:
    """The measurement grid and 10° field of a ``width`` × ``height`` frame shown full screen.

    The frame is fitted into WCAG's 1024×768 reference screen (aspect ratio kept), on which
    a 341×256 px rectangle stands for a 10° field. Blocks are ``block_degrees / 10`` of the
    field on each axis rounded up to whole pixels; as many as fit are centred on the frame.
    The field is approximated by the nearest whole number of blocks.

    Parameters
    ----------
    width, height : int
        Frame size in pixels, ``> 0``.
    block_degrees : float
        Nominal block side in degrees, in ``[0.1, 10]``.

    Returns
    -------
    FlashGeometry

    References
    ----------
    W3C WCAG 2.1, note to "general flash and red flash thresholds" (341×256 on 1024×768;
    the 0.1° exception for fine balanced patterns).
    """
    for name, value in (("width", width), ("height", height)):
        if isinstance(value, bool) or int(value) != value or value <= 0:
            raise ValueError(f"{name} must be a positive integer, got {value!r}")
    if not MIN_BLOCK_DEGREES <= block_degrees <= FIELD_DEGREES:
        raise ValueError(
            f"block_degrees must be in [{MIN_BLOCK_DEGREES}, {FIELD_DEGREES}], got {block_degrees!r}"
        )
    width, height = int(width), int(height)
    scale = min(REFERENCE_SCREEN[0] / width, REFERENCE_SCREEN[1] / height)  # ref px per frame px
    field_w, field_h = REFERENCE_FIELD[0] / scale, REFERENCE_FIELD[1] / scale
    fraction = block_degrees / FIELD_DEGREES
    # Rounding up keeps every block at least the nominal size (the tolerance stops 3.0000001
    # from becoming 4); a block never exceeds the frame.
    block_w = min(width, max(1, math.ceil(field_w * fraction - 1e-6)))
    block_h = min(height, max(1, math.ceil(field_h * fraction - 1e-6)))
    cols, rows = width // block_w, height // block_h
    return FlashGeometry(
        width=width, height=height, block_degrees=float(block_degrees), grid=(cols, rows),
        block_size=(block_w, block_h),
        origin=((width - cols * block_w) // 2, (height - rows * block_h) // 2),
        field_size=(field_w, field_h),
        field_blocks=(max(1, round(field_w / block_w)), max(1, round(field_h / block_h))),
    )


@dataclass(frozen=True)
class FlashSeries:
    """Per-frame measures of one kind of flash, for the trailing 1-second window.

    All arrays have shape ``(frames,)``; entry ``t`` describes frames ``t - ceil(fps) + 1 .. t``.
    """

    flashes: np.ndarray  # int: most flashes any block made in the trailing second
    field_fraction: np.ndarray  # float: flashing (> 3) share of the worst 10° field
    screen_fraction: np.ndarray  # float: flashing (> 3) share of the whole screen

    def to_dict(self) -> dict:
        return {
            "flashes": self.flashes.tolist(),
            "field_fraction": [round(float(v), 4) for v in self.field_fraction],
            "screen_fraction": [round(float(v), 4) for v in self.screen_fraction],
        }


@dataclass(frozen=True)
class WorstSecond:
    """One of the 1-second windows with the largest flashing area."""

    kind: str  # "general" or "red"
    start_frame: int  # first frame of the window
    end_frame: int  # last frame of the window (inclusive)
    timecode: str  # label of start_frame
    flashes: int  # most flashes any block made in the window
    field_fraction: float  # flashing share of the worst 10° field
    screen_fraction: float  # flashing share of the screen

    def to_dict(self) -> dict:
        return {
            "kind": self.kind, "start_frame": self.start_frame, "end_frame": self.end_frame,
            "timecode": self.timecode, "flashes": self.flashes,
            "field_fraction": round(self.field_fraction, 4),
            "screen_fraction": round(self.screen_fraction, 4),
        }


@dataclass(frozen=True)
class FlashReport:
    """The result of :func:`analyse_flashes`: verdicts, per-frame series and worst seconds."""

    frames: int  # frames analysed
    fps: float  # frame rate used for the 1-second windows
    geometry: FlashGeometry  # frame size, blocks and 10° field
    general: FlashSeries  # general (luminance) flashes
    red: FlashSeries  # red flashes
    worst_seconds: tuple[WorstSecond, ...]  # worst first
    timecode: Callable[[int], str] = field(repr=False, compare=False)  # frame index -> label

    @property
    def size(self) -> tuple[int, int]:
        """(width, height) of the frames analysed."""
        return self.geometry.width, self.geometry.height

    @property
    def window(self) -> int:
        """Frames in a 1-second window."""
        return _window_frames(self.fps)

    def series(self, kind: str) -> FlashSeries:
        """The series of ``kind`` ("general" or "red")."""
        if kind not in KINDS:
            raise ValueError(f"kind must be one of {KINDS}, got {kind!r}")
        return self.general if kind == "general" else self.red

    @property
    def verdicts(self) -> dict[str, dict[str, str]]:
        """``{standard: {kind: "pass" | "fail"}}`` for the standards in :data:`STANDARDS`."""
        out = {}
        for standard, attr in (("wcag21", "field_fraction"), ("bt1702", "screen_fraction")):
            out[standard] = {
                kind: "fail" if _peak(getattr(self.series(kind), attr)) > AREA_LIMIT else "pass"
                for kind in KINDS
            }
        return out

    @property
    def passed(self) -> bool:
        """True when every standard passes for every kind of flash."""
        return all(v == "pass" for kinds in self.verdicts.values() for v in kinds.values())

    def to_dict(self) -> dict:
        """A JSON-ready dictionary (plain lists and numbers)."""
        return {
            "frames": self.frames, "fps": self.fps, "window_frames": self.window,
            "width": self.geometry.width, "height": self.geometry.height,
            "geometry": self.geometry.to_dict(),
            "limits": {"flashes_per_second": MAX_FLASHES, "area_fraction": AREA_LIMIT},
            "standards": dict(STANDARDS),
            "verdicts": self.verdicts, "passed": self.passed,
            "worst_seconds": [w.to_dict() for w in self.worst_seconds],
            "series": {kind: self.series(kind).to_dict() for kind in KINDS},
        }


class _TransitionCounter:
    """Opposing transitions of one per-block signal, counted over a trailing window.

    Peak/valley detection with hysteresis: per block, ``lo`` and ``hi`` are the lowest and
    highest values since the last transition; a rising transition is registered when the
    value exceeds ``lo`` by the threshold (unless the last one was rising), a falling one
    when it is the threshold below ``hi``. A transition counts only if either of its two
    states qualifies (darker state below 0.8; a saturated red), checked on every frame so
    that a state that qualifies later in the same swing still registers it.
    """

    def __init__(self, shape: tuple[int, int], window: int, threshold: float, strict: bool):
        self.threshold = threshold
        self.strict = strict  # "greater than" (red) rather than "or more" (general)
        self.ring = np.zeros((window, *shape), np.uint8)  # transitions per frame, last window
        self.count = np.zeros(shape, np.int16)  # transitions in the last window
        self.frame = 0
        self.lo = self.hi = self.lo_ok = self.hi_ok = self.direction = None

    def _exceeds(self, change: np.ndarray) -> np.ndarray:
        return change > self.threshold if self.strict else change >= self.threshold

    def update(self, value: np.ndarray, ok: np.ndarray) -> np.ndarray:
        """Feed one frame's block values and qualifiers; return transitions in the window."""
        if self.lo is None:
            self.lo, self.hi = value.copy(), value.copy()
            self.lo_ok, self.hi_ok = ok.copy(), ok.copy()
            self.direction = np.zeros(value.shape, np.int8)  # +1 rose last, -1 fell last
            events = np.zeros(value.shape, bool)
        else:
            lower, higher = value < self.lo, value > self.hi
            np.copyto(self.lo, value, where=lower)
            np.copyto(self.lo_ok, ok, where=lower)
            np.copyto(self.hi, value, where=higher)
            np.copyto(self.hi_ok, ok, where=higher)
            rise = (self.direction <= 0) & self._exceeds(value - self.lo) & (self.lo_ok | ok)
            fall = (self.direction >= 0) & self._exceeds(self.hi - value) & (self.hi_ok | ok) & ~rise
            events = rise | fall
            self.direction[rise] = 1
            self.direction[fall] = -1
            for state, flag in ((self.lo, self.lo_ok), (self.hi, self.hi_ok)):
                np.copyto(state, value, where=events)
                np.copyto(flag, ok, where=events)
        slot = self.frame % len(self.ring)
        self.count -= self.ring[slot]
        self.ring[slot] = events
        self.count += self.ring[slot]
        self.frame += 1
        return self.count


def _window_frames(fps: float) -> int:
    """The most frame instants a half-open 1-second period can hold at ``fps``."""
    return max(1, math.ceil(fps - 1e-9))


def _peak(values: np.ndarray) -> float:
    return float(values.max()) if len(values) else 0.0


def _check_frame(frame: np.ndarray, shape: tuple[int, ...] | None = None, index: int | None = None) -> np.ndarray:
    where = "" if index is None else f"frame {index}: "
    frame = np.asarray(frame)
    if frame.ndim != 3 or frame.shape[2] != 3 or frame.shape[0] == 0 or frame.shape[1] == 0:
        raise ValueError(f"{where}expected an (H, W, 3) RGB image, got shape {frame.shape}")
    if not np.issubdtype(frame.dtype, np.floating):
        raise ValueError(f"{where}expected a float image in [0, 1], got dtype {frame.dtype}")
    if shape is not None and frame.shape != shape:
        raise ValueError(f"{where}size {frame.shape[1]}x{frame.shape[0]} differs from the first "
                         f"frame's {shape[1]}x{shape[0]}")
    if frame.dtype not in (np.float32, np.float64):  # OpenCV takes these two only
        frame = frame.astype(np.float32)
    return frame


def _area_fractions(flashing: np.ndarray, geometry: FlashGeometry) -> tuple[float, float]:
    """(worst 10° field, screen) shares of the flashing blocks ``(rows, cols)`` bool."""
    if not flashing.any():
        return 0.0, 0.0
    cols, rows = geometry.grid
    fc, fr = geometry.field_blocks
    wc, wr = min(fc, cols), min(fr, rows)  # a field larger than the screen is clipped to it
    summed = cv2.integral(flashing.view(np.uint8))  # (rows + 1, cols + 1)
    windows = summed[wr:, wc:] - summed[:-wr, wc:] - summed[wr:, :-wc] + summed[:-wr, :-wc]
    # The denominator stays the whole field: what lies off screen does not flash.
    return float(windows.max()) / (fc * fr), float(flashing.mean())


def _worst_seconds(kind: str, series: FlashSeries, window: int, count: int,
                   timecode: Callable[[int], str]) -> list[WorstSecond]:
    """Up to ``count`` non-overlapping windows of ``series`` with the most flashing area."""
    ends = np.flatnonzero((series.field_fraction > 0) | (series.screen_fraction > 0))
    order = sorted(ends, key=lambda t: (-series.field_fraction[t], -series.screen_fraction[t],
                                        -series.flashes[t], t))
    chosen: list[int] = []
    for t in order:
        if len(chosen) == count:
            break
        if all(abs(int(t) - c) >= window for c in chosen):
            chosen.append(int(t))
    out = []
    for t in chosen:
        start = max(0, t - window + 1)
        out.append(WorstSecond(
            kind=kind, start_frame=start, end_frame=t, timecode=timecode(start),
            flashes=int(series.flashes[t]), field_fraction=float(series.field_fraction[t]),
            screen_fraction=float(series.screen_fraction[t]),
        ))
    return out


def analyse_flashes(
    frames: Iterable[np.ndarray],
    fps: float,
    *,
    block_degrees: float = DEFAULT_BLOCK_DEGREES,
    timecode: Callable[[int], str] | None = None,
    worst: int = 5,
) -> FlashReport:
    """Count general and red flashes in every 1-second window and judge their area.

    Streaming: ``frames`` is read once; memory holds per-block state and one second of
    per-block transition flags, plus a few numbers per frame for the series. See the module
    docstring for the definitions and the choices made.

    Parameters
    ----------
    frames : iterable of (H, W, 3) float arrays
        Display-referred sRGB frames in [0, 1], all the same size (a generator is fine).
    fps : float
        Frame rate, ``> 0``; a 1-second window is ``ceil(fps)`` frames.
    block_degrees : float
        Side of a measurement block in degrees of visual field, ``>= 0.1``.
    timecode : callable, optional
        Frame index -> label for the worst seconds; default SMPTE timecode at ``fps``
        (:func:`framestyle.timecode.frame_to_timecode`).
    worst : int
        How many worst seconds to keep per kind of flash.

    Returns
    -------
    FlashReport

    Raises
    ------
    ValueError
        No frames, frames of the wrong shape, dtype or changing size, or a bad ``fps``.

    Examples
    --------
    >>> black, white = np.zeros((48, 64, 3), np.float32), np.ones((48, 64, 3), np.float32)
    >>> strobe = [white if (i // 3) % 2 else black for i in range(48)]  # 4 flashes/s at 24 fps
    >>> analyse_flashes(strobe, 24).verdicts["wcag21"]["general"]
    'fail'

    References
    ----------
    W3C WCAG 2.1 SC 2.3.1 and its definitions; ITU-R BT.1702 (2005).
    """
    if isinstance(fps, bool) or not isinstance(fps, numbers.Real) or not math.isfinite(fps) or fps <= 0:
        raise ValueError(f"fps must be a finite number > 0, got {fps!r}")
    if isinstance(worst, bool) or int(worst) != worst or worst < 0:
        raise ValueError(f"worst must be an integer >= 0, got {worst!r}")
    fps = float(fps)
    window = _window_frames(fps)
    label = timecode or (lambda index: frame_to_timecode(index, fps))

    geometry = None
    shape = None
    counters: dict[str, _TransitionCounter] = {}
    # Per-frame series in compact arrays (about 40 bytes a frame for both kinds).
    measures = {kind: (array("i"), array("d"), array("d")) for kind in KINDS}
    for index, frame in enumerate(frames):
        frame = _check_frame(frame, shape, index)
        if geometry is None:
            shape = frame.shape
            geometry = flash_geometry(shape[1], shape[0], block_degrees)
            grid = geometry.grid[::-1]  # (rows, cols)
            counters = {
                "general": _TransitionCounter(grid, window, GENERAL_CHANGE, strict=False),
                "red": _TransitionCounter(grid, window, RED_CHANGE, strict=True),
            }
        # Average in linear light over each block: (rows, cols, 3).
        blocks = cv2.resize(linear_rgb(geometry.measured(frame)), geometry.grid,
                            interpolation=cv2.INTER_AREA)
        luminance = blocks @ _WEIGHTS
        signals = {
            "general": (luminance, luminance < GENERAL_DARK_LIMIT),
            "red": (red_value(blocks), is_saturated_red(blocks)),
        }
        for kind, (value, ok) in signals.items():
            flashes = counters[kind].update(value, ok) // 2
            field_share, screen_share = _area_fractions(flashes > MAX_FLASHES, geometry)
            for column, measure in zip(measures[kind], (int(flashes.max()), field_share, screen_share)):
                column.append(measure)
    if geometry is None:
        raise ValueError("no frames to analyse")

    series = {
        kind: FlashSeries(*(np.frombuffer(column, column.typecode).copy() for column in columns))
        for kind, columns in measures.items()
    }
    ranked = [w for kind in KINDS for w in _worst_seconds(kind, series[kind], window, worst, label)]
    ranked.sort(key=lambda w: (-w.field_fraction, -w.screen_fraction, w.start_frame))
    return FlashReport(
        frames=len(series["general"].flashes), fps=fps, geometry=geometry,
        general=series["general"], red=series["red"], worst_seconds=tuple(ranked), timecode=label,
    )
